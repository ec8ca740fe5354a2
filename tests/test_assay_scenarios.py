"""Assay scenarios simulated from a known truth: what saturation and progress print about them.

Every truth here is a simulation (seed beside it) of a rate law typed in tests/kinetics_truth.py
or integrated there by solve_ivp; no number is taken from the package's own equations.
"""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import mechanism_rates

from rateabs.cli import main


def _write(path, header, *cols):
    path.write_text(header + "\n" + "".join(",".join(f"{c:.6g}" for c in row) + "\n"
                                            for row in zip(*cols, strict=True)))
    return str(path)


def _saturation_json(path, *args):
    r = CliRunner().invoke(main, ["saturation", path, "--no-plots", "--format", "json", *args])
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def test_four_points_are_not_ranked_by_an_undefined_aicc(tmp_path):
    """Four rates leave AICc undefined for every candidate (n - k - 1 <= 0; Hurvich & Tsai 1989,
    Biometrika 76:297): the choice must say it was not made on AICc, not 'lowest AICc (inf)'.

    Truth: Michaelis-Menten by solve_ivp, Vmax 10 uM/min, Km 50 uM; 2 % noise, seed 11."""
    s = np.array([10, 40, 160, 640.0])
    v = mechanism_rates(s, np.zeros(4), V=10.0, Km=50.0)
    v = v * (1 + np.random.default_rng(11).normal(0, 0.02, 4))
    doc = _saturation_json(_write(tmp_path / "four.csv", "substrate_uM,rate_uM_per_min", s, v))
    chosen = next(r for r in doc["results"] if r["chosen"])
    assert chosen["model"] == "mm"
    reason = chosen["evidence"]["reason"]
    assert "not defined" in reason and "inf" not in reason
    assert all(r.get("akaike_weight") is None for r in doc["results"])


def test_relative_weighting_is_not_ruled_by_a_blank_near_zero(tmp_path):
    """Relative weighting weighs by the fitted curve (Carroll & Ruppert 1988, Transformation and
    Weighting in Regression): blanks at [S] = 0 whose rates are noise around zero (+-0.02) must
    not outweigh the series (1/|v| gave one of them 50x the weight of the top rate).

    Truth: Michaelis-Menten by solve_ivp, Vmax 1 uM/min, Km 50 uM, 5 % proportional noise,
    seed 3; two blanks at [S] = 0 read 0.012 and -0.004 uM/min."""
    s = np.repeat([5, 10, 20, 40, 80, 160, 320, 640.0], 2)
    v = mechanism_rates(s, np.zeros(s.size), V=1.0, Km=50.0)
    v = v * (1 + np.random.default_rng(3).normal(0, 0.05, s.size))
    s, v = np.r_[0.0, 0.0, s], np.r_[0.012, -0.004, v]
    doc = _saturation_json(_write(tmp_path / "blanks.csv", "substrate_uM,rate_uM_per_min", s, v),
                           "--weighting", "relative")
    chosen = next(r for r in doc["results"] if r["chosen"])
    assert chosen["model"] == "mm" and chosen["n"] == 16
    km, vm = chosen["params"]["Km"], chosen["params"]["Vmax"]
    assert km["ci_low"] < 50 < km["ci_high"] and vm["ci_low"] < 1 < vm["ci_high"]
    assert km["se"] / km["value"] < 0.15
    assert any("left out" in w for w in doc["warnings"])


def test_direct_linear_plot_cross_checks_only_hyperbolas(tmp_path):
    """The direct linear plot (Eisenthal & Cornish-Bowden 1974, Biochem. J. 139:715) estimates a
    hyperbola's Km and Vmax; on a sigmoid set its medians were printed as a cross-check of the
    Hill fit (Vmax -0.47, Km -41). Truth: Hill (1910) as typed in kinetics_truth, Vmax 10
    uM/min, S50 50 uM, n 2.5; noise SD 0.2 uM/min, seed 12345."""
    from kinetics_truth import v_hill

    s = np.repeat([5, 10, 20, 30, 40, 50, 60, 80, 120, 200, 400.0], 2)
    v = v_hill(s, 10.0, 50.0, 2.5) + np.random.default_rng(12345).normal(0, 0.2, s.size)
    doc = _saturation_json(_write(tmp_path / "hill.csv", "substrate_uM,rate_uM_per_min", s, v))
    chosen = next(r for r in doc["results"] if r["chosen"])
    assert chosen["model"] == "hill"
    assert chosen["params"]["n"]["ci_low"] < 2.5 < chosen["params"]["n"]["ci_high"]
    assert "cross_check" not in chosen


def test_several_samples_in_one_table_are_not_pooled_silently(tmp_path):
    """A rates table (as `rateabs rates` writes it) naming two samples: fitting them as one
    series gives one Km for two enzymes, so the command must say so and name --each.

    Truth: Michaelis-Menten by solve_ivp; enzyme 'pure' Vmax 10 uM/min, Km 50 uM; 'lysate'
    Vmax 2 uM/min, Km 400 uM; 2 % noise, seed 8."""
    s = np.array([10, 25, 50, 100, 200, 400, 800, 1600.0])
    rng = np.random.default_rng(8)
    v1 = mechanism_rates(s, np.zeros(8), V=10.0, Km=50.0) * (1 + rng.normal(0, 0.02, 8))
    v2 = mechanism_rates(s, np.zeros(8), V=2.0, Km=400.0) * (1 + rng.normal(0, 0.02, 8))
    f = tmp_path / "rates.csv"
    f.write_text("trace,role,sample,substrate_uM,rate_uM_per_min\n" + "".join(
        f"W{k},sample,{name},{a:g},{b:.5g}\n" for k, (name, a, b) in enumerate(
            [("pure", a, b) for a, b in zip(s, v1, strict=True)]
            + [("lysate", a, b) for a, b in zip(s, v2, strict=True)])))
    doc = _saturation_json(str(f))
    assert any("2 samples" in w and "--each sample" in w for w in doc["warnings"])
    each = _saturation_json(str(f), "--each", "sample")
    assert not any("samples" in w for w in each["warnings"])
    km = {r["group"]: r["params"]["Km"] for r in each["results"]}
    assert km["pure"]["ci_low"] < 50 < km["pure"]["ci_high"]
    assert km["lysate"]["ci_low"] < 400 < km["lysate"]["ci_high"]


def _progress_file(path, s0s, enzymes, km, kcat_per_s, kd=0.0, seed=0, noise=0.002):
    """Product-absorbing progress curves (p-nitrophenolate, 18000 M^-1 cm^-1 at 405 nm, common
    practice) by solve_ivp on dS/dt = -kcat [E] exp(-kd t) S / (Km + S); enzyme in nM, S in uM;
    absorbance noise SD ``noise``."""
    from scipy.integrate import solve_ivp

    rng = np.random.default_rng(seed)
    t = np.arange(0, 1801, 20.0)
    lines = ["curve,S0 (uM),enzyme (nM),time (s),A405"]
    for k, (s0, e) in enumerate([(s0, e) for s0 in s0s for e in enzymes]):
        v = kcat_per_s * e * 1e-3                                  # uM/s
        sol = solve_ivp(lambda tt, y, v=v: [-v * np.exp(-kd * tt) * y[0] / (km + y[0])],
                        (0, t[-1]), [s0], t_eval=t, rtol=1e-10, atol=1e-12)
        a = 0.05 + 18000 * (s0 - sol.y[0]) * 1e-6 + rng.normal(0, noise, t.size)
        lines += [f"c{k},{s0:g},{e:g},{tt:g},{aa:.5f}" for tt, aa in zip(t, a, strict=True)]
    path.write_text("\n".join(lines) + "\n")
    return str(path)


def _progress_json(path, *args):
    r = CliRunner().invoke(main, ["progress", path, "--s0-column", "S0 (uM)", "--chromophore",
                                  "pnp", "--no-plots", "--format", "json", *args])
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def test_vmax_per_enzyme_carries_the_enzyme_columns_unit(tmp_path):
    """With --selwyn 'enzyme (nM)' Vmax is a rate per nM of enzyme, which is what the label must
    say: 'per enzyme unit' reads as per U (1 U = 1 umol/min; IUB 1961/1964).

    Truth: Km 60 uM, kcat 50 /s, so Vmax 3 uM/min per nM; enzyme 0.5 and 1 nM, seed 21."""
    f = _progress_file(tmp_path / "pnp.csv", (20, 50, 100, 200), (0.5, 1.0), 60.0, 50.0, seed=21)
    doc = _progress_json(f, "--selwyn", "enzyme (nM)")
    vm = doc["results"][0]["params"]["Vmax"]
    assert vm["unit"] == "uM/min per nM"
    assert vm["ci_low"] < 3.0 < vm["ci_high"]
    assert doc["results"][1]["enzyme_stable"] is True


def test_evidence_never_reads_p_equals_less_than(tmp_path):
    """A p value below double precision reads 'p < 1e-16', not 'p = < 1e-16' (the evidence of
    a substrate-inhibition set). Truth: Haldane (1930) as typed in kinetics_truth, Vmax 10
    uM/min, Km 50 uM, Ksi 400 uM; noise SD 0.15 uM/min, seed 4."""
    from kinetics_truth import v_substrate_inhibition

    s = np.repeat([5, 10, 20, 40, 80, 160, 320, 640, 1280, 2560.0], 2)
    v = v_substrate_inhibition(s, 10.0, 50.0, 400.0) + np.random.default_rng(4).normal(0, 0.15,
                                                                                     s.size)
    r = CliRunner().invoke(main, ["saturation", _write(tmp_path / "si.csv",
                                  "substrate_uM,rate_uM_per_min", s, v), "--no-plots"])
    assert r.exit_code == 0, r.output
    assert "substrate-inhibition" in r.output and "p < 1e-16" in r.output
    assert "= <" not in r.output


def test_progress_far_below_km_reports_vmax_over_km_not_a_runaway_km(tmp_path):
    """S0 of 20-60 uM against Km 600 uM: the curves are first order in S within the noise, so
    only Vmax/Km is determined. The fit in Km and Vmax ran off along the ridge (Km 7.4e5 uM,
    Vmax 3467 uM/min printed as numbers) and Vmax/Km was never shown.

    Truth: solve_ivp (_progress_file), Km 600 uM, kcat 50 /s at 1 nM, so Vmax 3 uM/min and
    Vmax/Km 0.005 /min; noise SD 0.01 AU, seed 4."""
    f = _progress_file(tmp_path / "low.csv", (20, 40, 60), (1.0,), 600.0, 50.0, seed=4,
                       noise=0.01)
    doc = _progress_json(f)
    p = doc["results"][0]["params"]
    for name in ("Km", "Vmax"):
        assert p[name]["value"] is None and p[name]["ci_method"] == "not identifiable"
    assert p["Km"]["ci_low"] < 600 and p["Km"]["ci_high"] is None      # a lower bound only
    vk = p["Vmax/Km"]
    assert vk["unit"] == "1/min" and vk["ci_low"] < 0.005 < vk["ci_high"]
    assert vk["se"] < 0.15 * vk["value"]
    assert any("only Vmax/Km is determined" in w for w in doc["warnings"])
    r = CliRunner().invoke(main, ["progress", f, "--s0-column", "S0 (uM)", "--chromophore", "pnp",
                                  "--no-plots"])
    assert "e+05" not in r.output and "Vmax/Km" in r.output and "not identifiable" in r.output


def test_progress_kcat_over_km_with_enzyme_amounts(tmp_path):
    """With enzyme amounts in nM (--selwyn 'enzyme (nM)') the specificity constant is also
    kcat/Km in M^-1 s^-1. Truth: solve_ivp (_progress_file), Km 60 uM, kcat 50 /s: kcat/Km
    8.333e5 M^-1 s^-1, Vmax/Km 0.05 /min per nM; enzyme 0.5 and 1 nM, seed 21."""
    f = _progress_file(tmp_path / "pnp.csv", (20, 50, 100, 200), (0.5, 1.0), 60.0, 50.0, seed=21)
    p = _progress_json(f, "--selwyn", "enzyme (nM)")["results"][0]["params"]
    assert p["kcat/Km"]["unit"] == "M^-1 s^-1"
    assert p["kcat/Km"]["ci_low"] < 50 / 60e-6 < p["kcat/Km"]["ci_high"]
    assert p["kcat"]["ci_low"] < 50 < p["kcat"]["ci_high"] and p["kcat"]["unit"] == "1/s"
    assert p["Vmax/Km"]["unit"] == "1/min per nM"
    assert p["Vmax/Km"]["value"] == pytest.approx(p["Vmax"]["value"] / p["Km"]["value"],
                                                  rel=1e-6)


def test_saturation_far_below_km_reports_vmax_over_km(tmp_path):
    """Rates at [S] 5-60 uM against Km 600 uM rise in proportion to [S]: Km and Vmax are not
    identifiable, Vmax/Km (and kcat/Km) are. Every candidate's covariance was singular and the
    command ended with 'no candidate model could be fitted'.

    Truth: Michaelis-Menten by solve_ivp (mechanism_rates), Vmax 10 uM/min at 1 nM, Km 600 uM:
    Vmax/Km 0.016667 /min, kcat/Km = (10/60 uM/s / 1 nM) / 600 uM = 2.778e5 M^-1 s^-1; noise SD
    0.05 uM/min, seed 4."""
    s = np.repeat([5, 10, 20, 30, 40, 60.0], 2)
    v = mechanism_rates(s, np.zeros(s.size), V=10.0, Km=600.0)
    v = v + np.random.default_rng(4).normal(0, 0.05, s.size)
    doc = _saturation_json(_write(tmp_path / "low.csv", "substrate_uM,rate_uM_per_min", s, v),
                           "--enzyme", "1 nM")
    chosen = next(r for r in doc["results"] if r["chosen"])
    p = chosen["params"]
    assert chosen["model"] == "mm"
    for name in ("Km", "Vmax", "kcat"):
        assert p[name]["value"] is None and p[name]["ci_method"] == "not identifiable"
    assert p["Km"]["ci_low"] < 600
    assert p["Vmax/Km"]["unit"] == "1/min"
    assert p["Vmax/Km"]["ci_low"] < 10 / 600 < p["Vmax/Km"]["ci_high"]
    assert p["kcat/Km"]["ci_low"] < (10 / 60 / 1e-3) / 600e-6 < p["kcat/Km"]["ci_high"]
    assert any("only Vmax/Km is determined" in w for w in doc["warnings"])


def test_unstable_enzyme_reports_the_constants_corrected_for_inactivation(tmp_path):
    """When Selwyn's test (Selwyn 1965, Biochim. Biophys. Acta 105:193) finds the enzyme losing
    activity, the fit with first-order inactivation gives Km and Vmax at time zero; they must be
    reported (with kd and the enzyme's half-life) and marked as the ones to use, the stable-
    enzyme fit as biased. Only the biased Vmax (about 1.3 against 3) was shown.

    Truth: solve_ivp (_progress_file) with activity e^(-kd t): Km 60 uM, kcat 50 /s (Vmax 3
    uM/min per nM), kd 1.2e-3 /s, so the half-life ln 2 / kd = 9.627 min; enzyme 0.5, 1, 2 nM,
    seed 5."""
    f = _progress_file(tmp_path / "decay.csv", (20, 50, 100, 200), (0.5, 1.0, 2.0), 60.0, 50.0,
                       kd=1.2e-3, seed=5)
    doc = _progress_json(f, "--selwyn", "enzyme (nM)")
    stable_fit, selwyn, corrected = doc["results"]
    assert selwyn["enzyme_stable"] is False
    assert stable_fit["chosen"] is False and "biased" in stable_fit["enzyme"]
    assert corrected["chosen"] is True and corrected["model"] == "integrated-mm+inactivation"
    p = corrected["params"]
    truth = {"Km": 60.0, "Vmax": 3.0, "kcat": 50.0, "kd": 1.2e-3,
             "enzyme half-life": np.log(2) / 1.2e-3 / 60, "kcat/Km": 50 / 60e-6}
    for name, value in truth.items():
        assert p[name]["ci_low"] < value < p[name]["ci_high"], (name, p[name])
    assert p["enzyme half-life"]["unit"] == "min" and p["kd"]["unit"] == "1/s"
    assert not stable_fit["params"]["Vmax"]["ci_low"] < 3.0 < stable_fit["params"]["Vmax"]["ci_high"]
    r = CliRunner().invoke(main, ["progress", f, "--s0-column", "S0 (uM)", "--chromophore", "pnp",
                                  "--selwyn", "enzyme (nM)", "--no-plots"])
    assert "corrected for enzyme inactivation" in r.output and "BIASED" in r.output


def _product_inhibited_file(path, s0s, km, v_uM_per_s, kp, seed):
    """Curves of an enzyme inhibited by its product (competitive, Kp), by solve_ivp on
    dS/dt = -V S / (Km (1 + P/Kp) + S), P = S0 - S; p-nitrophenolate absorbs (18000 M^-1 cm^-1
    at 405 nm, common practice); noise SD 0.002 AU."""
    from scipy.integrate import solve_ivp

    rng = np.random.default_rng(seed)
    t = np.arange(0, 3601, 30.0)
    lines = ["curve,S0 (uM),time (s),A405"]
    for k, s0 in enumerate(s0s):
        sol = solve_ivp(lambda _, y, s0=s0: [-v_uM_per_s * y[0] / (km * (1 + (s0 - y[0]) / kp)
                                                                  + y[0])],
                        (0, t[-1]), [s0], t_eval=t, rtol=1e-10, atol=1e-12)
        a = 0.05 + 18000 * (s0 - sol.y[0]) * 1e-6 + rng.normal(0, 0.002, t.size)
        lines += [f"c{k},{s0:g},{tt:g},{aa:.5f}" for tt, aa in zip(t, a, strict=True)]
    path.write_text("\n".join(lines) + "\n")
    return str(path)


def test_residuals_in_runs_name_the_likely_causes_and_their_options(tmp_path):
    """Curves the plain integrated equation cannot follow leave residuals in runs; the warning
    must name the likely causes and the options that test them (--product-inhibition,
    --selwyn), and the option must then describe the curves.

    Truth: competitive product inhibition by solve_ivp (_product_inhibited_file), Km 60 uM,
    Vmax 3 uM/min, Kp 40 uM, S0 30-240 uM, seed 6."""
    f = _product_inhibited_file(tmp_path / "pi.csv", (30, 60, 120, 240), 60.0, 0.05, 40.0, 6)
    doc = _progress_json(f)
    runs = [w for w in doc["warnings"] if "residuals are not random" in w]
    assert len(runs) == 1
    assert "--product-inhibition" in runs[0] and "--selwyn" in runs[0]
    with_kp = _progress_json(f, "--product-inhibition")
    assert not any("residuals are not random" in w for w in with_kp["warnings"])
    p = with_kp["results"][0]["params"]
    assert p["Kp"]["ci_low"] < 40 < p["Kp"]["ci_high"]
    assert p["Km"]["ci_low"] < 60 < p["Km"]["ci_high"]


def test_noisy_but_saturating_rates_keep_their_km(tmp_path):
    """Km is 'not identifiable' only when the rates cannot reject Km infinite (a line through
    the origin) by the F-test, the profile criterion at 1/Km = 0 (Bates & Watts 1988). The
    linearised interval of 1/Km reached 0 on rates that plainly saturate ([S] to 16 Km) but
    scatter widely (two enzyme preparations pooled), and Km was withheld.

    Truth: Michaelis-Menten by solve_ivp (mechanism_rates), Km 50 uM, Vmax 10 and 30 uM/min
    pooled; 2 % noise, seed 7."""
    s = np.array([5, 10, 20, 50, 100, 200, 400, 800.0])
    rng = np.random.default_rng(7)
    v = np.concatenate([mechanism_rates(s, np.zeros(8), V=vm, Km=50.0) for vm in (10.0, 30.0)])
    v = v * (1 + rng.normal(0, 0.02, v.size))
    doc = _saturation_json(_write(tmp_path / "pooled.csv", "substrate_uM,rate_uM_per_min",
                                  np.tile(s, 2), v), "--model", "mm")
    km = doc["results"][0]["params"]["Km"]
    assert km["value"] is not None and km["ci_method"] == "asymptotic"
    assert not any("only Vmax/Km" in w for w in doc["warnings"])


def test_asymptotic_interval_below_zero_is_said_and_profile_keeps_to_zero(tmp_path):
    """A weak competitive inhibitor: the asymptotic interval of Ki ran below 0 ([-3.7, 16.3])
    without a word. The command must say so and point to --ci profile, whose interval keeps
    above 0 and is open above (the data give no upper bound; it fell back to the asymptotic
    interval before).

    Truth: competitive inhibition by solve_ivp (mechanism_rates), Vmax 10 uM/min, Km 50 uM,
    Ki 5 uM, [I] 0, 0.5, 1 uM; 5 % noise, seed 2."""
    s = np.tile([10, 20, 50, 100, 200, 500.0], 3)
    i = np.repeat([0, 0.5, 1.0], 6)
    v = mechanism_rates(s, i, V=10.0, Km=50.0, Kic=5.0)
    v = v * (1 + np.random.default_rng(2).normal(0, 0.05, s.size))
    f = _write(tmp_path / "weak.csv", "substrate_uM,inhibitor_uM,rate_uM_per_min", s, i, v)
    doc = _saturation_json(f, "--model", "competitive")
    ki = doc["results"][0]["params"]["Ki"]
    assert ki["ci_low"] < 0 < 5 < ki["ci_high"]
    said = [w for w in doc["warnings"] if "interval of Ki" in w]
    assert len(said) == 1 and "below 0" in said[0] and "--ci profile" in said[0]
    prof = _saturation_json(f, "--model", "competitive", "--ci", "profile")
    ki = prof["results"][0]["params"]["Ki"]
    assert ki["ci_method"] == "profile" and 0 < ki["ci_low"] < 5 and ki["ci_high"] is None
    assert not any("interval of Ki" in w and "below 0" in w for w in prof["warnings"])
