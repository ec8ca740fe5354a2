"""Runs whose times start far from zero (a clock at 09:00:00, 'time (s)' from 12000, a
spreadsheet time of day) give the same k, durations and forecasts as the run from zero, with
the time origin stated (rateabs.models.time_origin). Truths: first-order decays and integrated
Michaelis-Menten curves simulated from known parameters (numpy; scipy.integrate.solve_ivp);
reference library: scipy.optimize.curve_fit on t - t0."""

import datetime as dt
import json
import math

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.integrate import solve_ivp
from scipy.optimize import curve_fit

from rateabs.cli import main
from rateabs.models import time_origin

K, A0, AINF = 1.5e-3, 0.95, 0.05            # the simulated truth: A = 0.05 + 0.9 exp(-k t)
T = np.arange(0, 1201, 30.0)               # 20 min, read every 30 s
OFFSETS = {"zero": 0.0, "12000 s": 12000.0, "clock 09:00:00": 32400.0}


def decay(seed=3, k=K, t=T, a0=A0, ainf=AINF, noise=0.002):
    """A seeded first-order decay written to 4 decimals (numpy), as a file would hold it."""
    y = ainf + (a0 - ainf) * np.exp(-k * t) + np.random.default_rng(seed).normal(0, noise,
                                                                                    t.size)
    return np.round(y, 4)


def clock(seconds: float) -> str:
    h, rem = divmod(int(round(seconds)), 3600)
    return f"{h}:{rem // 60:02d}:{rem % 60:02d}"


def write_run(path, offset: float, y, kind: str, t=T, name="W1", preamble=""):
    """One run with its times as 'time (s)' numbers or as h:mm:ss clock times."""
    if kind == "clock":
        rows = [f"{clock(offset + s)},{v:.4f}" for s, v in zip(t, y, strict=True)]
        head = f"time,{name}"
    else:
        rows = [f"{offset + s:g},{v:.4f}" for s, v in zip(t, y, strict=True)]
        head = f"time (s),{name}"
    path.write_text(preamble + head + "\n" + "\n".join(rows) + "\n")
    return path


def runs(tmp_path, y, **kw):
    return {label: write_run(tmp_path / f"run{i}.csv", off,
                             y, "clock" if label.startswith("clock") else "s", **kw)
            for i, (label, off) in enumerate(OFFSETS.items())}


def cli_json(*args):
    r = CliRunner().invoke(main, [str(a) for a in args] + ["--format", "json", "--no-plots"])
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def reference_k(y, t=T):
    """scipy.optimize.curve_fit of the first-order law on t - t0 (reference library)."""
    tt = t - t[0]
    p, cov = curve_fit(lambda x, a0, ainf, k: ainf + (a0 - ainf) * np.exp(-k * x), tt, y,
                       p0=[y[0], y[-1], 1e-3])
    return p[2], math.sqrt(cov[2, 2])


def test_time_origin_keeps_a_dead_time_and_moves_a_far_zero():
    # a first reading within one span of the file's zero keeps that zero (a dead time);
    # further out the first usable reading becomes the origin (the function's own rule)
    t, t0 = time_origin(np.array([30.0, 60.0, 1200.0]))
    assert t0 == 0 and t[0] == 30
    t, t0 = time_origin(np.array([12000.0, 12030.0, 13200.0]))
    assert t0 == 12000 and list(t) == [0, 30, 1200]


def test_ratelaw_same_k_and_half_life_whatever_the_clock(tmp_path):
    y = decay()
    k_ref, k_ref_se = reference_k(y)
    docs = {label: cli_json("ratelaw", p) for label, p in runs(tmp_path, y).items()}
    base = docs["zero"]["results"][0]
    for label, doc in docs.items():
        r = doc["results"][0]
        assert r["order"] == "1" and "misfit" not in r["flags"], (label, r["flags"])
        assert "not_identifiable" not in r["flags"], label
        k = r["params"]["k"]
        # reference library: curve_fit on t - t0; simulated truth within 3 SE
        assert k["value"] == pytest.approx(k_ref, rel=1e-4), label
        assert k["se"] == pytest.approx(k_ref_se, rel=1e-2), label
        assert abs(k["value"] - K) < 3 * k["se"], label
        assert k["value"] == pytest.approx(base["params"]["k"]["value"], rel=1e-6), label
        assert r["half_life_s"]["value"] == pytest.approx(base["half_life_s"]["value"],
                                                          rel=1e-6)
        # A0 is the absorbance at the origin: the first reading's, whatever the clock
        assert r["params"]["A0"]["value"] == pytest.approx(base["params"]["A0"]["value"],
                                                           abs=1e-6)
        assert r["time_origin_s"] == OFFSETS[label]
        assert doc["settings"]["time_origin_s"] == OFFSETS[label]
    assert "09:00:00 on the file's clock" in docs["clock 09:00:00"]["settings"][
        "time_origin_in_words"]
    assert "12000 s in the file" in docs["12000 s"]["settings"]["time_origin_in_words"]
    assert "file's own zero" in docs["zero"]["settings"]["time_origin_in_words"]


def test_ratelaw_order_1_given_is_identifiable_from_12000_s(tmp_path):
    y = decay(seed=4)
    p = write_run(tmp_path / "off.csv", 12000.0, y, "s")
    r = cli_json("ratelaw", p, "--order", "1")["results"][0]
    assert r["params"]["k"]["ci_method"] != "not identifiable"
    assert r["params"]["k"]["value"] == pytest.approx(reference_k(y)[0], rel=1e-4)


def test_ratelaw_table_states_the_origin(tmp_path):
    p = write_run(tmp_path / "c.csv", 32400.0, decay(), "clock")
    r = CliRunner().invoke(main, ["ratelaw", str(p), "--no-plots"])
    assert r.exit_code == 0, r.output
    assert ("time origin: times counted from the first usable reading, 09:00:00 on the file's "
            "clock, not from the clock's zero long before it") in r.output


def test_completion_same_forecast_counted_from_the_first_reading(tmp_path):
    y = decay(seed=5)
    k_ref, _ = reference_k(y)
    docs = {label: cli_json("completion", p, "--order", "1", "--drift", "off")
            for label, p in runs(tmp_path, y).items()}
    base = docs["zero"]["results"][0]
    for label, doc in docs.items():
        r = doc["results"][0]
        assert r["t_now_s"] == pytest.approx(1200.0), label      # 20 min, not 560 min
        # t99 = ln(100)/k (first order), k from curve_fit on t - t0 (reference library)
        assert r["t_target_s"]["value"] == pytest.approx(math.log(100) / k_ref, rel=1e-4)
        assert r["t_target_s"]["value"] == pytest.approx(base["t_target_s"]["value"],
                                                         rel=1e-6), label
        assert r["conversion"]["value"] == pytest.approx(base["conversion"]["value"],
                                                         abs=1e-6), label
        assert "misfit" not in r["flags"] and r["time_origin_s"] == OFFSETS[label]
    r = CliRunner().invoke(main, ["completion", str(runs(tmp_path, y)["clock 09:00:00"]),
                                  "--order", "1", "--drift", "off", "--no-plots"])
    assert "conversion at the last reading (20.0 min from the time origin)" in r.output
    t99 = docs["clock 09:00:00"]["results"][0]["t_target_s"]["value"]
    h, rem = divmod(round(32400 + t99), 3600)                 # the moment on the file's clock
    assert f"at {h:02d}:{rem // 60:02d}:{rem % 60:02d} in the file's times" in r.output


def test_completion_reads_a_spreadsheet_time_of_day(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    y = decay(seed=6)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Time", "W1"])
    day = dt.datetime(2026, 3, 4, 9, 0, 0)
    for s, v in zip(T, y, strict=True):
        ws.append([day + dt.timedelta(seconds=float(s)), float(v)])
    p = tmp_path / "run.xlsx"
    wb.save(p)
    r = cli_json("completion", p, "--order", "1", "--drift", "off")["results"][0]
    assert r["t_now_s"] == pytest.approx(1200.0) and r["time_origin_s"] == 32400
    assert r["k"]["value"] == pytest.approx(reference_k(y)[0], rel=1e-4)


ROSTER = "student,file,reported\nHonest Hana,clock.csv,0.0008\nPlain Pia,plain.csv,0.0008\n"
RUBRIC = ('[assignment]\ntitle = "Fading of an invented dye"\nquantity = "k"\n'
          'model = "first-order"\nunit = "1/s"\nreference = 8.0e-4\ntolerance_pct = 5\n')


def test_grade_names_no_slip_for_an_honest_student_whose_clock_starts_at_14(tmp_path):
    t = np.arange(0, 2521, 30.0)
    y = decay(seed=7, k=8e-4, t=t, a0=1.2, ainf=0.05)
    write_run(tmp_path / "clock.csv", 14 * 3600.0, y, "clock", t=t, name="A520")
    write_run(tmp_path / "plain.csv", 0.0, y, "s", t=t, name="A520")
    (tmp_path / "roster.csv").write_text(ROSTER)
    (tmp_path / "rubric.toml").write_text(RUBRIC)
    out = tmp_path / "out"
    r = CliRunner().invoke(main, ["grade", str(tmp_path), "--rubric",
                                  str(tmp_path / "rubric.toml"), "--jobs", "1", "--out",
                                  str(out)])
    assert r.exit_code == 0, r.output
    res = {x["student"]: x for x in json.loads((out / "grade.json").read_text())["results"]}
    hana, pia = res["Honest Hana"], res["Plain Pia"]
    k_ref, k_se = reference_k(y, t)                    # curve_fit on t - t0
    assert hana["value"] == pytest.approx(k_ref, rel=1e-4)
    assert abs(hana["value"] - 8e-4) < 3 * k_se       # simulated truth
    assert hana["value"] == pytest.approx(pia["value"], rel=1e-6)
    assert hana["slip"] is None and "no slip" in hana["diagnosis"][0]
    assert hana["score"] == pia["score"] == 100
    assert any("14:00:00" in a for a in hana["assumptions"])


def mm_curves(offset: float, tmp_path):
    """Integrated Michaelis-Menten curves (Km 40 uM, Vmax 3 uM/min) by solve_ivp, product
    read at 405 nm with epsilon 18000 M^-1 cm^-1, seeded noise, in a long layout."""
    km, vmax = 40.0, 3.0 / 60
    t = np.arange(0, 1801, 30.0)
    rng = np.random.default_rng(11)
    lines = ["curve,S0 (uM),time (s),A405"]
    for i, s0 in enumerate((20.0, 50.0, 100.0, 200.0)):
        s = solve_ivp(lambda _, x: [-vmax * x[0] / (km + x[0])], (0, t[-1]), [s0], t_eval=t,
                      rtol=1e-10, atol=1e-12).y[0]
        a = 0.02 + 0.018 * (s0 - s) + rng.normal(0, 0.0005, t.size)
        lines += [f"c{i},{s0:g},{offset + x:g},{v:.5f}" for x, v in zip(t, a, strict=True)]
    p = tmp_path / f"prog{int(offset)}.csv"
    p.write_text("\n".join(lines) + "\n")
    return p


def test_progress_same_km_and_vmax_from_32400_s(tmp_path):
    docs = [cli_json("progress", mm_curves(off, tmp_path), "--s0-column", "S0 (uM)",
                     "--epsilon", "18000") for off in (0.0, 32400.0)]
    p0, p1 = (d["results"][0]["params"] for d in docs)
    for name, truth in (("Km", 40.0), ("Vmax", 3.0)):
        assert p1[name]["value"] == pytest.approx(p0[name]["value"], rel=1e-6)
        assert abs(p1[name]["value"] - truth) < 3 * p1[name]["se"]    # solve_ivp truth
    assert docs[1]["settings"]["time_origin_s"] == 32400
    assert all(c["time_origin_s"] == 32400 for c in docs[1]["results"][0]["curves"])
