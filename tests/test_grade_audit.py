"""An instructor's audit of ``grade``: slips students really make, each planted in a class
simulated here from known truth without rateabs.

Truth: the first-order law A(t) = Ainf + (A0 - Ainf) exp(-k t) written in closed form with
seeded noise; each student's honest k is their own least-squares fit with
scipy.optimize.curve_fit (reference library); slips come from definitions: 60 s = 1 min
(SI brochure, 9th edn, table 8), A = -log10 T (IUPAC Compendium, "absorbance"),
1 M = 1000 mM = 10^6 uM, Beer–Lambert A = epsilon b c. The experiment (fading of an invented
dye, "Tarn Violet", at 585 nm) and every name are invented.
"""

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import curve_fit

from rateabs.cli import main

K_TRUE = 1.2e-3                  # 1/s, the invented class reference
T = np.arange(0, 1801, 20.0)     # s


def decay(t, a0, ainf, k):
    """A(t) = Ainf + (A0 - Ainf) exp(-k t)."""
    return ainf + (a0 - ainf) * np.exp(-k * t)


def own_k(t, y) -> float:
    """A student's own k: scipy.optimize.curve_fit of the first-order law."""
    p, _ = curve_fit(decay, t, y, p0=(y[0], y[-1], 3 / t[-1]), maxfev=20000)
    return float(p[2])


def readings(seed: int, k: float = K_TRUE, a0: float = 1.05) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return decay(T, a0, 0.04, k) + rng.normal(0, 0.004, T.size)


def write_run(path: Path, t, y, head: str = "time (s),A585") -> None:
    path.write_text(head + "\n" + "".join(f"{a:g},{b:.4f}\n" for a, b in zip(t, y,
                                                                              strict=True)),
                    encoding="utf-8")


def write_class(folder: Path, rows: list[tuple[str, str, str]], extra: str = "") -> Path:
    """roster.csv from (student, file, reported) and a k rubric (1/s, reference K_TRUE, 5 %)."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "roster.csv").write_text("student,file,reported\n" + "".join(
        f"{s},{f},{r}\n" for s, f, r in rows), encoding="utf-8")
    (folder / "rubric.toml").write_text(
        '[assignment]\ntitle = "Fading of Tarn Violet"\nquantity = "k"\nunit = "1/s"\n'
        f"reference = {K_TRUE}\ntolerance_pct = 5\n{extra}", encoding="utf-8")
    return folder


def grade(folder: Path, *more: str) -> dict:
    r = CliRunner().invoke(main, ["grade", str(folder), "--rubric", str(folder / "rubric.toml"),
                                  "--format", "json", "--jobs", "1", *more])
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def by_student(doc: dict) -> dict:
    return {r["student"]: r for r in doc["results"]}


def test_a_run_no_roster_row_names_is_a_warning_not_a_silent_skip(tmp_path):
    # two honest runs in the roster, a third handed in by a student the roster left out
    (tmp_path / "c").mkdir()
    y = readings(1)
    write_run(tmp_path / "c" / "r1.csv", T, y)
    write_run(tmp_path / "c" / "r2.csv", T, readings(2))
    write_run(tmp_path / "c" / "r3_forgotten.csv", T, readings(3))
    (tmp_path / "c" / "notes.md").write_text("not a run")
    folder = write_class(tmp_path / "c", [("王小明", "r1.csv", f"{own_k(T, y):.4g}"),
                                          ("Σοφία Παπαδοπούλου", "r2.csv", "0.0012")])
    out = tmp_path / "c" / "results"                      # outputs inside the class folder
    for _ in range(2):                                    # a rerun does not count its outputs
        doc = grade(folder, "--out", str(out))
        hits = [w for w in doc["warnings"] if "named by no roster row" in w]
        assert len(hits) == 1 and "r3_forgotten.csv" in hits[0]
        assert "r1.csv" not in hits[0] and "notes.md" not in hits[0]
    page = (out / "class_summary.html").read_text(encoding="utf-8")
    assert "r3_forgotten.csv" in page


def test_how_a_reported_number_was_read_is_stated(tmp_path):
    # one student writes a bare number (taken in the rubric's 1/s), another types it in 1/min
    # (converted by 60 s = 1 min): both readings are assumptions the page and JSON state
    (tmp_path / "c").mkdir()
    y1, y2 = readings(4), readings(5)
    write_run(tmp_path / "c" / "r1.csv", T, y1)
    write_run(tmp_path / "c" / "r2.csv", T, y2)
    k1, k2 = own_k(T, y1), own_k(T, y2)
    folder = write_class(tmp_path / "c", [("Ada Ferreira", "r1.csv", f"{k1:.4g}"),
                                          ("Kai Nakamura", "r2.csv", f"{k2 * 60:.4g} 1/min")])
    doc = grade(folder, "--out", str(tmp_path / "out"))
    rows = by_student(doc)
    bare, typed = rows["Ada Ferreira"], rows["Kai Nakamura"]
    assert f"your reported number '{k1:.4g}' names no unit: read in 1/s" in \
        " ".join(bare["assumptions"])
    said = " ".join(typed["assumptions"])
    assert f"your reported '{k2 * 60:.4g} 1/min' was converted to" in said
    assert abs(typed["reported"] / k2 - 1) < 1e-3 and typed["verdict"] == "agrees"
    page = (tmp_path / "out" / typed["page"]).read_text(encoding="utf-8")
    assert f"<td>you reported</td><td>&#x27;{k2 * 60:.4g} 1/min&#x27; (= " in page


def test_a_run_far_from_the_reference_names_the_recording_slip_that_explains_it(tmp_path):
    # minutes recorded under 'time (s)': every time 60 times too small, k 60 times too large
    # (60 s = 1 min); transmittance T = 10^-A typed under an absorbance header (IUPAC
    # "absorbance"); honest controls far from the reference: a warm bath (1.35 k) with a small
    # absorbance change, a product forming (rising A) at 0.3 k; a sound run
    c = tmp_path / "c"
    c.mkdir()
    y_min, y_t, y_ok = readings(11), readings(12), readings(13)
    warm = decay(T, 0.5, 0.3, 1.35 * K_TRUE) + np.random.default_rng(14).normal(0, 0.002, T.size)
    rising = decay(T, 0.05, 0.9, 0.3 * K_TRUE) + np.random.default_rng(15).normal(0, 0.004,
                                                                                   T.size)
    write_run(c / "minutes.csv", T / 60, y_min)
    write_run(c / "t.csv", T, 10 ** -y_t, head="time (s),Absorbance")
    write_run(c / "ok.csv", T, y_ok)
    write_run(c / "warm.csv", T, warm)
    write_run(c / "rising.csv", T, rising)
    k_min = own_k(T / 60, y_min)                  # what the student's own fit of the file gives
    k_t = own_k(T, 10 ** -y_t)
    folder = write_class(c, [
        ("Bram Vos", "minutes.csv", f"{k_min:.4g}"), ("Gus Halvorsen", "t.csv", f"{k_t:.4g}"),
        ("Дмитрий Орлов", "ok.csv", f"{own_k(T, y_ok):.4g}"),
        ("فاطمة الزهراء", "warm.csv", f"{own_k(T, warm):.4g}"),
        ("अनन्या शर्मा", "rising.csv", f"{own_k(T, rising):.4g}")])
    rows = by_student(grade(folder))
    minutes = " ".join(rows["Bram Vos"]["diagnosis"])
    assert abs(k_min / K_TRUE / 60 - 1) < 0.1                      # the planted factor is 60
    assert "were minutes while it says seconds" in minutes
    read_in_min = float(minutes.split("read in minutes they give ")[1].split()[0])
    assert read_in_min == pytest.approx(own_k(T, y_min), rel=2e-3)
    transmittance = " ".join(rows["Gus Halvorsen"]["diagnosis"])
    assert "may be transmittance typed as absorbance" in transmittance
    as_a = float(transmittance.split("read as A = -log10 T they give ")[1].split()[0])
    assert as_a == pytest.approx(own_k(T, y_t), rel=2e-3)
    for honest in ("Дмитрий Орлов", "فاطمة الزهراء", "अनन्या शर्मा"):
        said = " ".join(rows[honest]["diagnosis"])
        assert "transmittance" not in said and "minutes" not in said, (honest, said)
        assert rows[honest]["verdict"] == "agrees"
    assert "check the temperature" in " ".join(rows["فاطمة الزهراء"]["diagnosis"])


def test_one_slip_is_named_over_two_that_give_nearly_the_same_factor(tmp_path):
    # epsilon 9800 M^-1 cm^-1 (an invented yellow product at 450 nm, 1 cm): "not converted to
    # concentration" is a factor epsilon b 1e-6 = 0.0098 per uM, within 2 % of "mM and a
    # pathlength in mm" (1/1000 x 10 = 0.01); "mM" (1/1000) is within 2 % of "pathlength in mm
    # and not converted" (0.1 x 0.0098). Each student made one slip (Beer–Lambert A = eps b c,
    # 1 mM = 1000 uM, 10 mm = 1 cm); the product forms at a constant rate, so the own v0 is the
    # straight-line slope (numpy.polyfit)
    c = tmp_path / "v"
    c.mkdir()
    eps, t = 9800.0, np.arange(0, 181, 6.0)
    rng = np.random.default_rng(99)
    rows = []
    for i, (name, slip) in enumerate([("Saoirse Ní Bhriain", 1e-3), ("Tomás Ibarra", 0.1),
                                      ("Ulla Berg", eps * 1e-6), ("김지우", 1.0)]):
        a = 0.06 + eps * 1e-6 * 4.0 * t / 60 + rng.normal(0, 0.0015, t.size)   # 4 uM/min
        write_run(c / f"v{i}.csv", t, a, head="time (s),A450")
        own = np.polyfit(t, a, 1)[0] * 60 / (eps * 1e-6)                      # uM/min
        rows.append((name, f"v{i}.csv", f"{own * slip:.4g}"))
    (c / "roster.csv").write_text("student,file,reported\n" + "".join(
        f"{s},{f},{r}\n" for s, f, r in rows), encoding="utf-8")
    (c / "rubric.toml").write_text(
        '[assignment]\nquantity = "v0"\nunit = "uM/min"\nreference = 4.0\ntolerance_pct = 10\n'
        'epsilon = "9800 M^-1 cm^-1"\npathlength = "1 cm"\n', encoding="utf-8")
    got = {s: r["slip"] for s, r in by_student(grade(c)).items()}
    assert got == {"Saoirse Ní Bhriain": "conc-unit", "Tomás Ibarra": "pathlength",
                   "Ulla Berg": "not-converted", "김지우": None}


def test_readings_past_the_linear_range_are_counted_as_such(tmp_path):
    # a run started at A = 2.9: the readings above A = 2 (the grader's linear limit, stated)
    # are counted from the planted array itself and named as past the linear range, not as
    # "over range or missing"
    c = tmp_path / "c"
    c.mkdir()
    y = readings(21, a0=2.9)
    write_run(c / "dark.csv", T, y)
    folder = write_class(c, [("Carys Mwangi", "dark.csv", f"{own_k(T, y):.4g}")])
    r = by_student(grade(folder))["Carys Mwangi"]
    over = int((np.round(y, 4) > 2.0).sum())
    assert over > 5
    assert any(d.startswith(f"{over} reading(s) above A = 2, past the linear range")
               for d in r["diagnosis"]), r["diagnosis"]
    assert not any("unusable" in d for d in r["diagnosis"])
    assert any("above A = 2, the linear limit the grader applies" in a for a in r["assumptions"])
