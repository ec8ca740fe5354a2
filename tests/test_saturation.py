"""Saturation and inhibition analysis: published data, simulations, derived constants, CLI."""

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import (
    log_logistic4,
    mechanism_rates,
    v_competitive,
    v_hill,
    v_mixed,
    v_noncompetitive,
    v_substrate_inhibition,
    v_uncompetitive,
)
from scipy import stats

from rateabs.cli import main
from rateabs.errors import FitError
from rateabs.fitting import Param
from rateabs.models import SATURATION, direct_linear_plot
from rateabs.saturation import SaturationData, analyse, cheng_prusoff
from rateabs.units import unit_from_header

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"
PURO = ("conc (ppm),rate (counts/min^2)\n0.02,76\n0.02,47\n0.06,97\n0.06,107\n0.11,123\n"
        "0.11,139\n0.22,159\n0.22,152\n0.56,191\n0.56,201\n1.10,207\n1.10,200\n")


def _data(s, v, i=None, cu="uM", ru="uM/min"):
    return SaturationData(np.asarray(s, float), np.asarray(v, float),
                          None if i is None else np.asarray(i, float), None, cu, ru, "uM", {})


def test_puromycin_through_the_cli(tmp_path):
    # published: Treloar (1974) / Bates & Watts (1988): Vmax 212.68 (6.947), Km 0.06412 (0.008281)
    f = tmp_path / "puromycin.csv"
    f.write_text(PURO)
    r = CliRunner().invoke(main, ["saturation", str(f), "--model", "mm", "--format", "json"])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    res = doc["results"][0]
    assert res["model"] == "mm" and res["chosen"] is True
    assert {"model", "params", "aic", "chosen"} <= set(res)
    vm, km = res["params"]["Vmax"], res["params"]["Km"]
    assert round(vm["value"], 2) == 212.68 and round(vm["se"], 3) == 6.947
    assert round(km["value"], 5) == 0.06412 and round(km["se"], 6) == 0.008281
    assert set(vm) == {"value", "se", "ci_low", "ci_high", "ci_method", "unit"}
    assert vm["unit"] == "counts/min^2" and km["unit"] == "ppm"


def test_auto_on_sample_inhibitor_series_names_competitive(tmp_path):
    r = CliRunner().invoke(main, ["saturation", str(SAMPLES / "inhibition_kbdh_rates.csv"),
                                  "--enzyme", "1 nM", "--format", "json", "--out", str(tmp_path)])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    chosen = [x for x in doc["results"] if x["chosen"]]
    assert len(chosen) == 1 and chosen[0]["model"] == "competitive"
    p = chosen[0]["params"]
    # simulated truth (sample_runs/generate.py): Km 120 uM, Ki 4 uM, 1 nM enzyme; one seeded
    # draw, so each 95 % interval holds its truth with probability 0.95
    assert p["Km"]["ci_low"] < 120 < p["Km"]["ci_high"]
    assert p["Ki"]["ci_low"] < 4 < p["Ki"]["ci_high"]
    assert p["kcat"]["unit"] == "1/s" and p["kcat"]["value"] == pytest.approx(
        p["Vmax"]["value"] * 1e-6 / 60 / 1e-9)
    assert "aicc_table" in chosen[0]["evidence"] and chosen[0]["evidence"]["f_tests"] is not None
    for png in ("saturation_fit.png", "saturation_linearised.png"):
        assert (tmp_path / png).stat().st_size > 20_000


# The four modes as dead-end mechanisms (tests/kinetics_truth.py): initial rates are kcat [ES] at
# the steady state that solve_ivp reaches, so no rate equation of the package enters the truth.
MODE_TRUTHS = {"competitive": {"Kic": 5.0}, "uncompetitive": {"Kiu": 5.0},
               "noncompetitive": {"Kic": 5.0, "Kiu": 5.0}, "mixed": {"Kic": 3.0, "Kiu": 15.0}}
MODE_S = np.array([10, 25, 50, 100, 200, 400, 800.0])
MODE_I = np.array([0, 3, 8, 20.0])
# Hit rate of the AICc choice on this design with 3 % noise, measured by
# benchmarks/mode_choice.py over 200 other seeds per mode (1000-1199): competitive 0.955,
# uncompetitive 0.995, noncompetitive 0.925, mixed 1.000; mean 0.969.
MODE_HIT_RATE = 0.969


def test_auto_picks_true_inhibition_mode_over_seeds():
    """Small seeded version of benchmarks/mode_choice.py."""
    S, I = (a.ravel() for a in np.meshgrid(MODE_S, MODE_I))
    hits = total = 0
    for mode, ks in MODE_TRUTHS.items():
        v_true = mechanism_rates(S, I, V=10.0, Km=80.0, **ks)
        for seed in range(6):
            v = v_true * (1 + np.random.default_rng(seed).normal(0, 0.03, v_true.size))
            hits += analyse(_data(S, v, I)).chosen == mode
            total += 1
    # accept down to the 0.1 % binomial quantile of 24 trials at the measured rate
    assert hits >= stats.binom.ppf(0.001, total, MODE_HIT_RATE)


def test_inhibition_fits_recover_the_mechanism_constants():
    # each mode fitted to its own mechanism's rates, 2 % noise: every constant within the
    # Student-t bound of its SE at a two-sided tail of 1e-4 (the fit's 24-25 degrees of freedom)
    S, I = (a.ravel() for a in np.meshgrid(MODE_S, MODE_I))
    names = {"competitive": {"Ki": "Kic"}, "uncompetitive": {"Ki": "Kiu"},
             "noncompetitive": {"Ki": "Kic"}, "mixed": {"Ki": "Kic", "Kiu": "Kiu"}}
    for mode, ks in MODE_TRUTHS.items():
        v = mechanism_rates(S, I, V=10.0, Km=80.0, **ks)
        v = v * (1 + np.random.default_rng(11).normal(0, 0.02, v.size))
        fit = analyse(_data(S, v, I), model=mode).best
        truth = {"Vmax": 10.0, "Km": 80.0, **{p: ks[k] for p, k in names[mode].items()}}
        for name, value in truth.items():
            p = fit.params[name]
            assert abs(p.value - value) < stats.t.ppf(1 - 5e-5, fit.dof) * p.se, (mode, name, p)


@pytest.mark.parametrize("name,typed", [
    ("competitive", lambda s, i: v_competitive(s, i, 10.0, 80.0, 5.0)),
    ("uncompetitive", lambda s, i: v_uncompetitive(s, i, 10.0, 80.0, 5.0)),
    ("noncompetitive", lambda s, i: v_noncompetitive(s, i, 10.0, 80.0, 5.0)),
    ("mixed", lambda s, i: v_mixed(s, i, 10.0, 80.0, 3.0, 15.0)),
])
def test_inhibition_equations_as_in_cornish_bowden(name, typed):
    # published: Cornish-Bowden, Fundamentals of Enzyme Kinetics, 4th edn (2012), typed in
    # tests/kinetics_truth.py; and the same numbers from the mechanism by solve_ivp
    S, I = (a.ravel() for a in np.meshgrid(MODE_S, MODE_I))
    params = (10.0, 80.0, 3.0, 15.0) if name == "mixed" else (10.0, 80.0, 5.0)
    got = SATURATION[name].func(np.vstack([S, I]), *params)
    np.testing.assert_allclose(got, typed(S, I), rtol=1e-12)
    np.testing.assert_allclose(got, mechanism_rates(S, I, V=10.0, Km=80.0, **MODE_TRUTHS[name]),
                               rtol=1e-8)


def test_hill_substrate_inhibition_and_logistic_as_published():
    s = np.array([0.5, 5, 30, 60, 120, 600, 5000.0])
    # Hill (1910): y = K x^n / (1 + K x^n) with K = S50^-n
    np.testing.assert_allclose(SATURATION["hill"].func(s, 10.0, 60.0, 2.3),
                               v_hill(s, 10.0, 60.0, 2.3), rtol=1e-12)
    assert SATURATION["hill"].func(60.0, 10.0, 60.0, 2.3) == pytest.approx(5.0)  # S50: half
    # Haldane (1930): v = V a / (Km + a + a^2/Ksi)
    np.testing.assert_allclose(SATURATION["substrate-inhibition"].func(s, 10.0, 50.0, 600.0),
                               v_substrate_inhibition(s, 10.0, 50.0, 600.0), rtol=1e-12)
    # four-parameter log-logistic in the exp/log form of Ritz et al. (2015): d = v_free,
    # c = v_floor, e = IC50, b = n; at I = 0 the rate is v_free, at I = IC50 halfway
    i = np.array([0, 0.1, 1, 4, 10, 100, 1e4])
    np.testing.assert_allclose(SATURATION["ic50"].func(i, 100.0, 5.0, 4.0, 1.2),
                               log_logistic4(i, 1.2, 5.0, 100.0, 4.0), rtol=1e-12)
    assert SATURATION["ic50"].func(4.0, 100.0, 5.0, 4.0, 1.2) == pytest.approx(52.5)


def _mm_rates(s, V, Km):
    """Michaelis-Menten rates from the E + S <-> ES -> E + P mechanism (solve_ivp)."""
    return mechanism_rates(s, np.zeros_like(s), V=V, Km=Km)


def test_mm_auto_prefers_mm_on_mm_data():
    s = np.repeat([5, 10, 20, 40, 80, 160, 320.0], 2)
    v = _mm_rates(s, 10, 40) * (1 + np.random.default_rng(1).normal(0, 0.03, s.size))
    a = analyse(_data(s, v))
    assert a.chosen == "mm"
    # direct linear plot (Eisenthal & Cornish-Bowden 1974) as the cross-check: within 3 SE of
    # the least-squares Km (it is a different, robust estimator of the same Km)
    assert abs(a.cross_check["Km"] - 40) < 3 * a.best.params["Km"].se


def test_cheng_prusoff_hand_worked():
    # published relation: Cheng & Prusoff (1973); hand-worked: IC50 = 10 uM, [S] = Km -> Ki = 5
    p = Param("IC50", 10.0, 1.0, 8.0, 12.0, "asymptotic", "uM")
    assert cheng_prusoff(p, "competitive", 50.0, 50.0).value == pytest.approx(5.0)
    assert cheng_prusoff(p, "competitive", 150.0, 50.0).value == pytest.approx(2.5)
    assert cheng_prusoff(p, "uncompetitive", 150.0, 50.0).value == pytest.approx(7.5)
    assert cheng_prusoff(p, "noncompetitive", 150.0, 50.0).value == pytest.approx(10.0)
    assert cheng_prusoff(p, "competitive", 50.0, 50.0).ci_high == pytest.approx(6.0)


def test_ic50_with_cheng_prusoff_via_cli(tmp_path):
    rng = np.random.default_rng(5)
    i = np.repeat([0, 0.3, 1, 3, 10, 30, 100, 300.0], 2)
    v = log_logistic4(i, 1.0, 4.0, 100.0, 8.0) + rng.normal(0, 1.5, i.size)
    f = tmp_path / "dose.csv"
    f.write_text("inhibitor_uM,rate_uM_per_min\n" + "".join(f"{a},{b}\n" for a, b in zip(i, v, strict=True)))
    r = CliRunner().invoke(main, ["saturation", str(f), "--model", "ic50", "--inhibitor",
                                  "inhibitor_uM", "--mode", "competitive", "--substrate", "100",
                                  "--km", "100", "--format", "json"])
    assert r.exit_code == 0, r.output
    p = json.loads(r.stdout)["results"][0]["params"]
    assert p["IC50"]["ci_low"] < 8 < p["IC50"]["ci_high"]
    assert p["Ki"]["value"] == pytest.approx(p["IC50"]["value"] / 2)


def test_kcat_units_and_propagation():
    s = np.array([5, 10, 20, 40, 80, 160, 320, 640.0])
    v = _mm_rates(s, 9.0, 50.0) * (1 + np.random.default_rng(2).normal(0, 0.02, 8))
    a = analyse(_data(s, v), model="mm", enzyme_M=1e-9)
    d = a.derived["mm"]
    vm = a.best.params["Vmax"]
    # 1 uM/min per 1 nM enzyme = 1e-6/60/1e-9 = 16.67 per s
    assert d["kcat"].value == pytest.approx(vm.value * 1e3 / 60)
    assert d["kcat"].se / d["kcat"].value == pytest.approx(vm.se / vm.value)
    assert d["kcat/Km"].unit == "M^-1 s^-1"
    assert d["kcat/Km"].value == pytest.approx(d["kcat"].value / (a.best.params["Km"].value * 1e-6))


def test_design_warnings():
    s = np.array([1, 2, 4, 8, 16.0])
    v = _mm_rates(s, 10, 40.0) * (1 + np.random.default_rng(3).normal(0, 0.01, 5))
    a = analyse(_data(s, v), model="mm")
    assert any("highest substrate" in w for w in a.warnings)
    s2 = np.array([100, 200, 400, 800, 1600.0])
    v2 = _mm_rates(s2, 10, 40.0) * (1 + np.random.default_rng(4).normal(0, 0.01, 5))
    a2 = analyse(_data(s2, v2), model="mm")
    assert any("lowest substrate" in w for w in a2.warnings)


def test_direct_linear_plot_exact_data():
    # Eisenthal & Cornish-Bowden (1974), Biochem. J. 139:715: on exact data every pair of lines
    # meets at (Km, Vmax), so both medians are exact
    s = np.array([1, 2, 5, 10.0])
    vm, km = direct_linear_plot(s, 10 * s / (3 + s))
    assert vm == pytest.approx(10) and km == pytest.approx(3)


def test_units_from_headers():
    assert unit_from_header("[S] (mM)") == "mM"
    assert unit_from_header("rate_uM_per_min") == "uM/min"
    assert unit_from_header("substrate_uM") == "uM"
    assert unit_from_header("v") == ""


@pytest.mark.parametrize("content,args,words,code", [
    ("conc_uM,rate\n1,2\n2,3\n", ["--model", "hill"], "not estimable", 4),
    ("conc_uM,rate\n1,0\n2,0\n4,0\n8,0\n", [], "every rate is zero", 4),
    ("conc_uM,rate\n1,2\n-2,3\n4,4\n", [], "negative concentration", 3),
    ("conc_uM,inhibitor_uM,rate\n1,5,2\n2,5,3\n4,5,4\n8,5,5\n", ["--model", "competitive"],
     "at least two inhibitor levels", 4),
    ("conc_uM,rate\n1,2\n2,abc\n", [], "'abc' is not a number", 3),
    ("a,b\n1,2\n2,3\n", [], "no rate column", 3),
    ("conc_uM,rate\n1,2\n2,3\n4,4\n", ["--fix", "Km"], "NAME=VALUE", 2),
])
def test_bad_input_one_line(tmp_path, content, args, words, code):
    f = tmp_path / "t.csv"
    f.write_text(content)
    r = CliRunner().invoke(main, ["saturation", str(f), *args])
    assert r.exit_code == code, r.output
    assert words in r.output and len(r.output.strip().splitlines()) == 1
    assert "Traceback" not in r.output


def test_single_inhibitor_level_auto_falls_back_to_substrate_models():
    s = np.array([5, 10, 20, 40, 80.0])
    a = analyse(_data(s, _mm_rates(s, 5, 20) + 0.01 * np.arange(5), np.zeros(5)))
    assert a.chosen in ("mm", "hill", "substrate-inhibition")


def test_failed_candidate_reported_and_auto_goes_on():
    s = np.array([5, 10, 20, 40, 80, 160.0])
    v = _mm_rates(s, 5, 20) * (1 + np.random.default_rng(0).normal(0, 0.02, 6))
    a = analyse(_data(s, v))
    assert a.chosen == "mm"
    assert a.comparison is not None


def test_fit_error_when_nothing_fits():
    with pytest.raises(FitError):
        analyse(_data([1, 2], [1, 2]), model="mm")


def test_puromycin_vmax_over_km_against_scipy(tmp_path):
    # reference library: scipy.optimize.curve_fit of v = k S / (1 + a S) (k = Vmax/Km,
    # a = 1/Km) to the published puromycin data (Treloar 1974, Bates & Watts 1988); its k
    # agrees with the published Vmax/Km, 212.68/0.06412 = 3317
    from scipy.optimize import curve_fit

    f = tmp_path / "puromycin.csv"
    f.write_text(PURO)
    r = CliRunner().invoke(main, ["saturation", str(f), "--model", "mm", "--format", "json"])
    vk = json.loads(r.stdout)["results"][0]["params"]["Vmax/Km"]
    rows = [line.split(",") for line in PURO.splitlines()[1:]]
    s, v = (np.array([float(x[j]) for x in rows]) for j in (0, 1))
    (k, _), cov = curve_fit(lambda s, k, a: k * s / (1 + a * s), s, v, p0=[3000, 15],
                            xtol=1e-14, ftol=1e-14, gtol=1e-14)
    assert vk["value"] == pytest.approx(k, rel=1e-6)
    assert vk["value"] == pytest.approx(212.68 / 0.06412, rel=1e-3)
    assert vk["se"] == pytest.approx(np.sqrt(cov[0, 0]), rel=1e-4)
    assert vk["unit"] == "counts/min^2 per ppm"


def test_lineweaver_burk_axis_ends_with_the_data_and_the_line(tmp_path, monkeypatch):
    # the 1/v axis ran to about twice the highest point (the line was drawn past the panel's
    # right edge, to 1/[S] = 2/[S]min, and the axis followed it); it must end near the highest
    # point or the line's end at the edge, by hand calculation 1/v = (Km x + 1)/Vmax at
    # x = 1.1/[S]min. Truth: Michaelis-Menten by solve_ivp (mechanism_rates), Vmax 10, Km 50,
    # 1 % noise, seed 9
    import rateabs.plots.saturation as ps

    s = np.array([5, 10, 20, 50, 100, 200, 400.0])
    v = mechanism_rates(s, np.zeros(7), V=10.0, Km=50.0)
    v = v * (1 + np.random.default_rng(9).normal(0, 0.01, 7))
    a = analyse(_data(s, v), model="mm")
    seen = {}
    monkeypatch.setattr(ps, "save", lambda fig, path, tight=True: seen.setdefault("fig", fig))
    ps.linearised(a, tmp_path / "lin.png")
    lb, eh, hw = seen["fig"].axes[:3]
    vm, km = a.best.value("Vmax"), a.best.value("Km")
    x_end = 1.1 / s.min()
    highest = max(np.max(1 / v), (km * x_end + 1) / vm)
    assert lb.get_xlim() == pytest.approx((0, x_end))
    assert highest <= lb.get_ylim()[1] <= 1.1 * highest
    # Eadie-Hofstee: the line meets the v axis at Vmax, inside the panel
    assert eh.get_ylim()[1] >= vm


def test_columns_without_a_unit_are_said(tmp_path):
    # headers 'S' and 'v' state no unit and no option gives one: the fit runs on the numbers as
    # they stand, but Km and Vmax print without a unit, which must be said (only the refused
    # kcat was). Michaelis-Menten rates (Vmax 10, Km 50) by hand calculation, common practice
    f = tmp_path / "bare.csv"
    f.write_text("S,v\n" + "".join(f"{a:g},{10 * a / (50 + a):.4f}\n"
                                   for a in (5, 10, 20, 50, 100, 200, 400)))
    r = CliRunner().invoke(main, ["saturation", str(f), "--model", "mm", "--enzyme", "1 nM",
                                  "--format", "json"])
    warnings = json.loads(r.stdout)["warnings"]
    assert any("'S' states no unit" in w and "--conc-unit" in w for w in warnings)
    assert any("'v' states no unit" in w and "--rate-unit" in w for w in warnings)
    assert sum("kcat" in w for w in warnings) == 1          # said once, not twice
    named = tmp_path / "named.csv"
    named.write_text(f.read_text().replace("S,v", "S (uM),v (uM/min)"))
    r = CliRunner().invoke(main, ["saturation", str(named), "--model", "mm", "--format", "json"])
    assert not any("states no unit" in w for w in json.loads(r.stdout)["warnings"])
