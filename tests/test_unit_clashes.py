"""Where a file, a plate map and an option disagree about a unit or a value, the command stops
with one line naming both (or follows a documented rule and says so); it never relabels.

End to end with click's CliRunner; each truth is computed here, independently of rateabs.
"""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import curve_fit

from rateabs.cli import main

#: Michaelis–Menten truth of the saturation tables: Km 50 uM, Vmax 10 uM/min.
S_UM = np.array([5, 10, 20, 40, 80, 160, 320, 640.0])


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def _mm_table(path, header_s, header_v):
    rng = np.random.default_rng(11)
    v = 10 * S_UM / (50 + S_UM) * (1 + 0.01 * rng.standard_normal(S_UM.size))
    path.write_text(f"{header_s},{header_v}\n" + "".join(
        f"{s:g},{x:.6g}\n" for s, x in zip(S_UM, v, strict=True)))
    # reference: scipy.optimize.curve_fit of v = Vmax S / (Km + S) on the numbers as written
    (vmax, km), _ = curve_fit(lambda s, vm, k: vm * s / (k + s), S_UM,
                              np.array([float(x) for x in
                                        (ln.split(",")[1] for ln in
                                         path.read_text().splitlines()[1:])]), p0=(8, 30))
    return vmax, km


def _params(r):
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)["results"][0]["params"]


def test_a_unit_option_contradicting_the_header_is_refused_naming_both(tmp_path):
    t = tmp_path / "rates.csv"
    vmax, km = _mm_table(t, "substrate_uM", "rate_uM_per_min")
    base = ["saturation", t, "--model", "mm", "--format", "json", "--no-plots"]
    p = _params(run(*base))
    assert p["Km"]["value"] == pytest.approx(km, rel=1e-4) and p["Km"]["unit"] == "uM"
    assert p["Vmax"]["value"] == pytest.approx(vmax, rel=1e-4) and p["Vmax"]["unit"] == "uM/min"
    for flag, unit, column in (("--conc-unit", "mM", "substrate_uM"),
                               ("--rate-unit", "nM/min", "rate_uM_per_min")):
        r = run(*base, flag, unit)
        assert r.exit_code == 2 and r.stdout == ""
        line = r.stderr.strip()
        assert len(line.splitlines()) == 1 and "Traceback" not in r.output
        assert f"{flag} {unit} contradicts the column '{column}'" in line
        assert f"leave {flag} out" in line
        # --each: the command's error once, not one failed group per sample
        each = run("saturation", t, "--model", "mm", "--each", "substrate_uM", flag, unit)
        assert each.exit_code == 2 and len(each.stderr.strip().splitlines()) == 1
    # the same unit spelled otherwise is no contradiction
    same = _params(run(*base, "--conc-unit", "µM", "--rate-unit", "uM/min"))
    assert same["Km"]["value"] == pytest.approx(km, rel=1e-4) and same["Km"]["unit"] == "uM"


def test_a_unit_option_names_the_unit_of_a_bare_header(tmp_path):
    t = tmp_path / "bare.csv"
    vmax, km = _mm_table(t, "S", "v")
    p = _params(run("saturation", t, "--model", "mm", "--conc-unit", "mM", "--rate-unit",
                    "nM/min", "--format", "json", "--no-plots"))
    # the numbers are taken as written, in the units the options give (nothing converted)
    assert p["Km"]["value"] == pytest.approx(km, rel=1e-4) and p["Km"]["unit"] == "mM"
    assert p["Vmax"]["value"] == pytest.approx(vmax, rel=1e-4) and p["Vmax"]["unit"] == "nM/min"


def test_temp_unit_against_the_header_is_refused_unless_the_values_bear_it_out(tmp_path):
    # Arrhenius truth: k = A exp(-Ea / (R T)), Ea 60 kJ/mol, A 1e7 1/s, R from scipy.constants
    from scipy.constants import R

    t_c = np.array([15.0, 25, 35, 45])
    k = 1e7 * np.exp(-60e3 / (R * (t_c + 273.15)))

    def table(name, header, temps):
        f = tmp_path / name
        f.write_text(f"{header},k (1/s)\n" + "".join(
            f"{x:g},{y:.8g}\n" for x, y in zip(temps, k, strict=True)))
        return f

    celsius = table("c.csv", "T (C)", t_c)
    r = run("temperature", celsius, "--temp-unit", "K", "--no-plots")
    assert r.exit_code == 2 and len(r.stderr.strip().splitlines()) == 1
    assert "--temp-unit K contradicts the column 'T (C)'" in r.stderr
    assert "degrees Celsius" in r.stderr
    # kelvin values under a Celsius header: --temp-unit K is the fix, and the output says so
    kelvin = table("k.csv", "T (C)", t_c + 273.15)
    r = run("temperature", kelvin, "--temp-unit", "K", "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["results"][0]["params"]["Ea"]["value"] == pytest.approx(60.0, rel=1e-5)   # kJ/mol
    assert any("--temp-unit K overrides the header 'T (C)'" in w for w in d["warnings"])


def _progress_curves(tmp_path):
    """Four product curves (Km 40 uM, Vmax 5 uM/min, S0 20-200 uM) integrated with
    scipy.integrate.solve_ivp, read as absorbance with epsilon 18000 M^-1 cm^-1 and 1 cm; a
    wide export, a long one with its S0 column, and a plate map giving S0 in mM."""
    from scipy.integrate import solve_ivp

    t = np.arange(0, 30.01, 1.0)                 # min
    s0s = {"A1": 20.0, "A2": 50.0, "A3": 100.0, "A4": 200.0}
    rng = np.random.default_rng(3)
    absorb = {}
    for w, s0 in s0s.items():
        sol = solve_ivp(lambda _, y: [-5.0 * y[0] / (40.0 + y[0])], (0, 30), [s0], t_eval=t,
                        rtol=1e-10, atol=1e-12)
        absorb[w] = 0.04 + 18000e-6 * (s0 - sol.y[0]) + rng.normal(0, 5e-4, t.size)
    wide = tmp_path / "wide.csv"
    wide.write_text("Time (min)," + ",".join(s0s) + "\n" + "".join(
        f"{x:g}," + ",".join(f"{absorb[w][i]:.5f}" for w in s0s) + "\n"
        for i, x in enumerate(t)))
    long = tmp_path / "long.csv"
    long.write_text("well,S0 (uM),time (min),absorbance\n" + "".join(
        f"{w},{s0:g},{x:g},{absorb[w][i]:.5f}\n" for w, s0 in s0s.items()
        for i, x in enumerate(t)))
    layout = tmp_path / "map.csv"
    layout.write_text("well,role,substrate (mM)\n" + "".join(
        f"{w},sample,{s0 / 1000:g}\n" for w, s0 in s0s.items()))
    return wide, long, layout


def test_one_source_of_s0_in_progress(tmp_path):
    wide, long, layout = _progress_curves(tmp_path)
    eps = ["--epsilon", "18000", "--no-plots"]
    r = run("progress", wide, "--layout", layout, "--s0", "50 uM", *eps)
    assert r.exit_code == 2 and r.stdout == "" and len(r.stderr.strip().splitlines()) == 1
    assert "--s0 50 uM and the plate map" in r.stderr and "20 to 200 uM" in r.stderr
    assert "leave --s0 out" in r.stderr
    r = run("progress", long, "--layout", layout, "--s0-column", "S0 (uM)", *eps)
    assert r.exit_code == 2 and "--s0-column 'S0 (uM)' and the plate map" in r.stderr
    r = run("progress", long, "--s0", "50 uM", *eps)
    assert r.exit_code == 2 and "the column 'S0 (uM)'" in r.stderr
    assert "give --s0-column 'S0 (uM)'" in r.stderr
    # each source alone recovers the simulated truth (Km 40 uM, Vmax 5 uM/min)
    for args in ([wide, "--layout", layout], [long, "--s0-column", "S0 (uM)"]):
        d = json.loads(run("progress", *args, *eps, "--format", "json").stdout)
        p = d["results"][0]["params"]
        assert p["Km"]["value"] == pytest.approx(40, rel=0.02) and p["Km"]["unit"] == "uM"
        assert p["Vmax"]["value"] == pytest.approx(5, rel=0.01)
        assert [c["S0_uM"] for c in d["results"][0]["curves"]] == [20, 50, 100, 200]


def test_a_bare_epsilon_in_mM_units_is_warned_of_and_the_common_spellings_are_read(tmp_path):
    rng = np.random.default_rng(5)
    t = np.arange(0, 301, 15.0)                                  # s
    a = 0.1 + 0.0622 * t / 60 + rng.normal(0, 2e-4, t.size)      # 0.0622 A/min, NADH rising
    f = tmp_path / "cuvette.csv"
    f.write_text("Time (s),cuv1\n" + "".join(f"{x:g},{y:.5f}\n" for x, y in zip(t, a,
                                                                                strict=True)))
    # Beer–Lambert by hand: rate = slope / (epsilon b), slope from numpy.polyfit, b = 1 cm
    truth_uM_per_min = np.polyfit(t / 60, a, 1)[0] / 6220 * 1e6
    base = ["rates", f, "--pathlength", "1 cm", "--window", "0-300", "--format", "json",
            "--no-plots"]
    rates = {}
    for eps in ("6.22", "6.22 mM^-1 cm^-1", "6.22 mM-1 cm-1", "6220 M-1 cm-1",
                "6220 L mol-1 cm-1", "6220 L/(mol cm)"):
        r = run(*base, "--epsilon", eps)
        assert r.exit_code == 0, r.output
        d = json.loads(r.stdout)
        rates[eps] = d["results"][0]["rate_uM_per_min"]
        doubts = [w for w in d["warnings"] if "looks like mM^-1 cm^-1" in w]
        if eps == "6.22":
            assert doubts == ["--epsilon 6.22 M^-1 cm^-1 is below 100 M^-1 cm^-1, far under the "
                              "chromophores followed for rates (thousands): 6.22 looks like "
                              "mM^-1 cm^-1, which makes every concentration here 1000 times "
                              "high; write '6.22 mM^-1 cm^-1' or 6220"]
        else:
            assert doubts == []
            assert rates[eps] == pytest.approx(truth_uM_per_min, rel=1e-3)
    assert rates["6.22"] == pytest.approx(1000 * truth_uM_per_min, rel=1e-3)
