"""Progress curves: the Lambert-W closed form against an ODE solver, fits, Selwyn's test."""

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats
from scipy.integrate import solve_ivp

from rateabs.cli import main
from rateabs.progress import Curves, analyse, substrate_left

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"


@pytest.mark.parametrize("ratio", [0.01, 0.1, 1.0, 10.0, 100.0])
@pytest.mark.parametrize("kp", [None, 20.0, 50.0, 500.0])
def test_closed_form_matches_solve_ivp(ratio, kp):
    # reference library: scipy.integrate.solve_ivp on dS/dt = -V S / (Km (1 + P/Kp) + S)
    km, vm = 50.0, 2.0
    s0 = ratio * km
    t_end = 3 * (s0 + km * np.log(1 + s0 / km)) / vm
    t = np.linspace(0, t_end, 40)

    def rhs(_, s):
        kmapp = km if kp is None else km * (1 + (s0 - s[0]) / kp)
        return [-vm * s[0] / (kmapp + s[0])]

    sol = solve_ivp(rhs, (0, t_end), [s0], t_eval=t, rtol=1e-12, atol=1e-16 * s0,
                    method="LSODA")
    cf = substrate_left(t, s0, km, vm, kp)
    assert np.max(np.abs(cf - sol.y[0])) / s0 < 1e-8
    big = sol.y[0] > 1e-3 * s0
    assert np.max(np.abs(cf[big] / sol.y[0][big] - 1)) < 1e-8


def _simulate(seed, kd=0.0, enzymes=(1.0,), s0s=(20, 50, 100, 200), km=60.0, v=3.0 / 60):
    rng = np.random.default_rng(seed)
    t = np.arange(0, 1801, 30.0)
    names, ts, ps, s0, en = [], [], [], [], []
    for s in s0s:
        for e in enzymes:
            sol = solve_ivp(lambda tt, y, e=e: [-v * e * np.exp(-kd * tt) * y[0] / (km + y[0])],
                            (0, t[-1]), [s], t_eval=t, rtol=1e-10)
            names.append(f"S{s}E{e}")
            ts.append(t)
            ps.append(5 + (s - sol.y[0]) + rng.normal(0, 0.2, t.size))
            s0.append(s)
            en.append(e)
    return Curves(names, ts, ps, np.array(s0, float), np.array(en) if len(enzymes) > 1 else None)


def test_km_vmax_recovered_and_intervals_cover():
    n = 8
    cover = {"Km": 0, "Vmax": 0}
    for seed in range(n):
        a = analyse(_simulate(seed))
        km, vm = a.params["Km"], a.params["Vmax"]
        cover["Km"] += km.ci_low <= 60 <= km.ci_high
        cover["Vmax"] += vm.ci_low <= 3.0 <= vm.ci_high
        bound = stats.t.ppf(1 - 5e-5, a.fit.dof)          # two-sided tail 1e-4
        assert abs(km.value - 60) < bound * km.se and vm.unit == "uM/min"
    # nominal 95 % intervals over 8 simulations: accept down to the lower 0.1 % binomial
    # quantile, scipy.stats.binom.ppf(0.001, 8, 0.95) = 5
    assert stats.binom.ppf(0.001, n, 0.95) == 5
    assert min(cover.values()) >= 5, cover


def test_product_inhibition_recovered():
    # product P competes with S: dS/dt = -V S / (Km (1 + P/Kp) + S), P = S0 - S (solve_ivp)
    rng = np.random.default_rng(1)
    t = np.arange(0, 3601, 30.0)
    km, v, kp = 60.0, 3.0 / 60, 40.0
    ts, ps, s0 = [], [], []
    for s in (30, 60, 120, 240):
        sol = solve_ivp(lambda _, y, s=s: [-v * y[0] / (km * (1 + (s - y[0]) / kp) + y[0])],
                        (0, t[-1]), [s], t_eval=t, rtol=1e-10)
        ts.append(t)
        ps.append(s - sol.y[0] + rng.normal(0, 0.2, t.size))
        s0.append(s)
    a = analyse(Curves([str(s) for s in s0], ts, ps, np.array(s0, float)), product_inhibition=True)
    kp = a.params["Kp"]
    assert kp.ci_low < 40 < kp.ci_high


def test_selwyn_stable_and_decaying():
    # Selwyn (1965), Biochim. Biophys. Acta 105:193: with a stable enzyme, product vs
    # enzyme x time overlays for every enzyme amount; first-order inactivation (kd, solve_ivp
    # in _simulate) breaks the overlay
    stable = analyse(_simulate(3, enzymes=(0.5, 1.0, 2.0), s0s=(100,)), selwyn=True)
    assert stable.selwyn["enzyme_stable"] is True
    decaying = analyse(_simulate(3, kd=1e-3, enzymes=(0.5, 1.0, 2.0), s0s=(100,)), selwyn=True)
    assert decaying.selwyn["enzyme_stable"] is False
    assert "lose" in decaying.selwyn["reason"] or "loses" in decaying.selwyn["reason"]


def test_low_conversion_warning():
    a = analyse(_simulate(4, s0s=(2000, 4000)))
    assert any("conversion" in w or "far above Km" in w for w in a.warnings)


def test_cli_sample_set(tmp_path):
    r = CliRunner().invoke(main, ["progress", str(SAMPLES / "progress_kbap_405nm.csv"),
                                  "--s0-column", "S0 (uM)", "--chromophore", "pnp", "--selwyn",
                                  "enzyme (nM)", "--format", "json", "--out", str(tmp_path)])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    p = doc["results"][0]["params"]
    # simulated truth (sample_runs/generate.py): Km 60 uM, Vmax 3 uM/min per nM
    assert p["Km"]["ci_low"] < 60 < p["Km"]["ci_high"] and p["Km"]["unit"] == "uM"
    assert p["Vmax"]["ci_low"] < 3 < p["Vmax"]["ci_high"]
    # kcat = 3 uM/min per nM = 50 /s; kcat/Km = 50 / 60e-6 M = 8.333e5 M^-1 s^-1
    assert p["kcat/Km"]["ci_low"] < 50 / 60e-6 < p["kcat/Km"]["ci_high"]
    assert doc["results"][1]["enzyme_stable"] is True
    assert (tmp_path / "progress_fit.png").exists() and (tmp_path / "progress_selwyn.png").exists()


@pytest.mark.parametrize("content,args,words,code", [
    ("curve,time (s),A405\nc1,0,0.1\nc1,10,0.2\nc1,20,0.3\nc1,30,0.4\nc1,40,0.5\n",
     ["--chromophore", "pnp"], "no initial substrate", 2),
    ("curve,time (s),A405\nc1,0,0.1\nc1,10,0.2\nc1,20,0.25\nc1,30,0.3\nc1,40,0.33\n",
     ["--chromophore", "pnp", "--s0", "50"], "single short curve", 4),
    ("curve,time (s),A405\n" + "".join(f"c1,{10 * i},0.2\n" for i in range(20)),
     ["--chromophore", "pnp", "--s0", "50"], "flat", 4),
    ("curve,time (s),A405\nc1,0,0.1\nc1,10,0.2\nc1,20,0.3\n", ["--s0", "50"], "molar absorptivity",
     2),
])
def test_bad_input(tmp_path, content, args, words, code):
    f = tmp_path / "p.csv"
    f.write_text(content)
    r = CliRunner().invoke(main, ["progress", str(f), *args, "--no-plots"])
    assert r.exit_code == code, r.output
    assert words in r.output and len(r.output.strip().splitlines()) == 1


def test_units_follow_s0_and_enzyme_warning(tmp_path):
    src = (SAMPLES / "progress_kbap_405nm.csv").read_text().splitlines()
    rows = [src[0], src[1].replace("S0 (uM)", "S0 (mM)")]
    for line in src[2:]:
        c = line.split(",")
        c[1] = f"{float(c[1]) / 1000:g}"
        rows.append(",".join(c))
    f = tmp_path / "mM.csv"
    f.write_text("\n".join(rows) + "\n")
    r = CliRunner().invoke(main, ["progress", str(f), "--s0-column", "S0 (mM)", "--chromophore",
                                  "pnp", "--selwyn", "enzyme (nM)", "--format", "json"])
    km = json.loads(r.stdout)["results"][0]["params"]["Km"]
    assert km["unit"] == "mM" and km["value"] == pytest.approx(0.060, rel=0.05)
    r = CliRunner().invoke(main, ["progress", str(SAMPLES / "progress_kbap_405nm.csv"),
                                  "--s0-column", "S0 (uM)", "--chromophore", "pnp", "--format",
                                  "json"])
    assert any("--selwyn" in w for w in json.loads(r.stdout)["warnings"])


def test_columns_without_a_unit_are_said(tmp_path):
    # an S0 column without a unit is read as uM, an enzyme column without a molar unit gives no
    # kcat: both must be said (they were silent). Same sample set (solve_ivp, Km 60 uM), the
    # units taken off the headers
    f = tmp_path / "bare.csv"
    f.write_text((SAMPLES / "progress_kbap_405nm.csv").read_text()
                 .replace("S0 (uM)", "S0").replace("enzyme (nM)", "enzyme"))
    r = CliRunner().invoke(main, ["progress", str(f), "--s0-column", "S0", "--chromophore", "pnp",
                                  "--selwyn", "enzyme", "--format", "json"])
    doc = json.loads(r.stdout)
    assert any("'S0' states no unit" in w and "uM" in w for w in doc["warnings"])
    assert any("'enzyme' states no unit" in w and "kcat" in w for w in doc["warnings"])
    assert "kcat" not in doc["results"][0]["params"]
    assert doc["results"][0]["params"]["Km"]["ci_low"] < 60 < doc["results"][0]["params"]["Km"][
        "ci_high"]
