"""completion and ratelaw on runs of known truth: wrong order, stall, low conversion, drift,
rise-then-fall, and the small traps (target rule, units, warnings, follow mode, strict JSON).

Truth comes from tests/process_truth.py: mechanisms integrated with scipy's solve_ivp
(reference library) and Beer–Lambert (IUPAC), seeded noise; never from rateabs's own laws.
"""

import json
import math

import numpy as np
import pytest
from click.testing import CliRunner
from process_truth import (
    C0,
    EPS,
    absorbance,
    consecutive,
    first_order,
    k_for_conversion,
    noisy,
    second_order,
    stalled,
    time_to,
)
from scipy import stats

from rateabs.cli import main
from rateabs.completion import LOW_CONVERSION, assess
from rateabs.errors import AnalysisError
from rateabs.fitting import Param, fit, separable_profile
from rateabs.models import RATE_LAWS
from rateabs.options import CompletionOptions
from rateabs.ratelaws import Photometry, fit_trace, map_param, shown

T = np.arange(0, 45 * 60 + 1, 30.0)          # read every 30 s for 45 min
K_DEAD = 2e-3
K_CAT = -math.log(1 - 0.39) * K_DEAD          # the conversion levels off at 39 %
CHARGE = Photometry(epsilon=EPS, c0_M=C0)


def _k(order, x):
    return k_for_conversion(order, x, T[-1])


def _write(path, y, t=T, tail=""):
    path.write_text("time (min),A520,jacket T (C)\n" + "".join(
        f"{a / 60:.2f},{b:.5f},25.0\n" for a, b in zip(t, y, strict=True)) + tail)
    return path


def _strict(text: str):
    """json.loads that fails on NaN or Infinity tokens (the JSON standard has none)."""
    def no(token):
        raise AssertionError(f"non-standard JSON token {token}")
    return json.loads(text, parse_constant=no)


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


# --------------------------------------------------------------------------- the order


def test_second_order_at_88_percent_is_forecast_under_order_2():
    k = _k("2", 0.88)
    y = noisy(absorbance(second_order(T, k)), 21)
    c = assess(T, y, target=0.99)
    assert c.model == "2"
    truth = time_to("2", 0.99, k)
    assert c.t_target.ci_low < truth < c.t_target.ci_high
    # k in absorbance units: k_conc / (epsilon b) (Beer–Lambert)
    kk = c.law.fit.params["k"]
    assert kk.unit == "1/(AU s)" and kk.ci_low < k / EPS < kk.ci_high
    # 13 times the observed span ahead: flagged with its multiple
    assert "extrapolated" in c.flags and c.extrapolation == pytest.approx(truth / T[-1], rel=0.05)


def test_forcing_the_wrong_order_is_never_called_complete():
    """Issue 12: order 1 on a second-order run at 88 % was '99.4 % COMPLETE'."""
    y = noisy(absorbance(second_order(T, _k("2", 0.88))), 22)
    c = assess(T, y, target=0.95, order="1")
    assert not c.complete and "misfit" in c.flags
    assert "does not fit" in c.verdict


def test_orders_not_told_apart_at_20_percent_get_a_forecast_each():
    k = _k("1", 0.20)
    y = noisy(absorbance(first_order(T, k)), 23)
    c = assess(T, y, target=0.99)
    models = {f.model for f in c.forecasts}
    assert {"1", "2"} <= models and "orders_not_told_apart" in c.flags
    assert {"low_conversion", "extrapolated"} <= set(c.flags)
    assert c.conversion.value < LOW_CONVERSION
    # the headline interval spans every order's interval and holds the truth
    truth = time_to("1", 0.99, k)
    assert c.t_target.ci_low <= min(f.t_target.ci_low for f in c.forecasts)
    assert c.t_target.ci_high >= max(f.t_target.ci_high for f in c.forecasts)
    assert c.t_target.ci_low < truth < c.t_target.ci_high
    assert not c.complete
    d = c.to_dict()
    assert d["extrapolation_multiple"] > 3 and len(d["forecasts"]) >= 2


def test_butadiene_five_points_cannot_compare_orders():
    # published: OpenStax, Chemistry: Atoms First (2016), p. 916 (tests/data): with 5 readings
    # and A0, Ainf, k free, AICc of orders 1 and 2 is undefined (n - k - 1 = 0); auto must say so
    # rather than choose order 0, the only one left with a finite AICc
    t, c = np.loadtxt("tests/data/butadiene_dimerization.csv", delimiter=",", comments="#",
                      skiprows=2, unpack=True)
    with pytest.raises(AnalysisError, match="cannot be compared"):
        fit_trace(t, c)
    assert fit_trace(t, c, fix={"Ainf": 0.0}).order == "2"


# --------------------------------------------------------------------------- the charge


def test_a_stall_at_39_percent_is_never_complete_with_the_charge():
    y = noisy(absorbance(stalled(T, K_CAT, K_DEAD)), 24)
    c = assess(T, y, target=0.99, photometry=CHARGE)
    assert not c.complete and "stall" in c.flags and c.t_target is None
    assert c.basis == "charge"
    truth = 1 - stalled(T, K_CAT, K_DEAD)[-1] / C0            # 38.9 % converted at the end
    assert c.conversion.ci_low < truth < c.conversion.ci_high
    stall = next(n for n in c.notes if n.startswith("STALL"))
    assert "of the charge" in stall and "fitted change" in stall and "1.19 AU" in stall
    # without the charge the end point is not shown to be the reaction's, and it says so; here
    # the shape itself shows the stall: a law whose rate constant decays fits far better and
    # levels off at the truth, 38.9 % of the change (solve_ivp above)
    bare = assess(T, y, target=0.99)
    assert bare.basis == "fitted end point" and bare.claim == "not complete"
    assert "stall_suspected" in bare.flags
    assert "levels off as a stalled reaction does" in bare.verdict
    assert any("a stall looks like completion" in n for n in bare.notes)
    level = bare.law.shape["levels_off_at"]
    assert level["ci_low"] < truth < level["ci_high"]


#: A catalyst that dies at 2e-3 1/s and stops the reaction at 60 % (solve_ivp; the level
#: 1 - exp(-k_cat/k_dead) = 0.60 by hand calculation).
STALL60 = (-math.log(0.4) * 2e-3, 2e-3)


def test_a_stall_without_the_charge_is_said_from_the_shape_of_the_trace():
    """Without the charge a run that stops at 60 % (an hour, read every 30 s) was fitted as
    first order + drift (-0.37 mAU/min, where the truth has no drift) and called 'END POINT
    REACHED, COMPLETION NOT SHOWN'. Its shape shows the stall: a first-order law whose rate
    constant decays fits far better, levels off at the truth, 60 %, and the verdict says the
    end point is not the reaction's."""
    t = np.arange(0, 3600 + 1, 30.0)
    y = noisy(absorbance(stalled(t, *STALL60)), 41, sd=0.003)
    c = assess(t, y, target=0.99)
    assert "stall_suspected" in c.flags and not c.complete and c.claim == "not complete"
    assert "levels off as a stalled reaction does" in c.verdict
    level = c.law.shape["levels_off_at"]
    truth = 1 - stalled(t, *STALL60)[-1] / C0
    assert level["ci_low"] < truth < level["ci_high"]
    note = next(n for n in c.notes if n.startswith("STALL SUSPECTED"))
    assert "mAU/min" in note and "--c0" in note
    # with the charge the charge decides (its own STALL note), said once
    charged = assess(t, y, target=0.99, photometry=CHARGE)
    assert "stall" in charged.flags and "stall_suspected" not in charged.flags


def test_no_stall_is_suspected_of_a_finished_run_or_a_drifting_baseline():
    """A finished first-order run without the charge still reads 'END POINT REACHED,
    COMPLETION NOT SHOWN'; first order at 95 % with a true 3 mAU/min baseline drift (the drift
    term fitted in every run) is never called a stall nor a delayed start (seeds 50-52)."""
    t = np.arange(0, 4 * 3600, 60.0)
    done = assess(t, noisy(absorbance(first_order(t, 8e-4)), 25), target=0.95)
    assert done.claim == "end point reached" and "stall_suspected" not in done.flags
    assert done.verdict.startswith("END POINT REACHED, COMPLETION NOT SHOWN")
    k = _k("1", 0.95)
    for seed in range(50, 53):
        c = assess(T, noisy(absorbance(first_order(T, k), drift=3e-3 / 60, t=T), seed),
                   target=0.99)
        assert c.law.drift is not None
        assert not {"stall_suspected", "delayed_start"} & set(c.flags)


def test_a_finished_run_is_complete_against_the_charge():
    y = noisy(absorbance(first_order(np.arange(0, 4 * 3600, 60.0), 8e-4)), 25)
    c = assess(np.arange(0, 4 * 3600, 60.0), y, target=0.95, photometry=CHARGE)
    assert c.complete and c.verdict == "COMPLETE" and not c.flags


def test_an_end_beyond_the_charge_is_a_mismatch_with_both_numbers():
    # the user's c0 is half the real charge: the fitted change is twice the charge
    y = noisy(absorbance(first_order(T, _k("1", 0.95))), 26)
    c = assess(T, y, target=0.99, photometry=Photometry(epsilon=EPS, c0_M=C0 / 2))
    assert "charge_mismatch" in c.flags and not c.complete
    assert any("of the charge" in n and "check epsilon" in n for n in c.notes)


def test_end_absorbance_gives_the_charge():
    y = noisy(absorbance(first_order(T, _k("1", 0.88))), 27)
    c = assess(T, y, target=0.99, end_absorbance=0.06)
    assert c.basis == "charge" and "0.06" in c.charge.source
    truth = 0.88
    assert c.conversion.ci_low < truth < c.conversion.ci_high


# --------------------------------------------------------------------------- shape and drift


def test_rise_then_fall_is_refused_not_given_a_zero_order(tmp_path):
    """Issue 17: a rise-then-fall trace got a 'chosen' zero order with a negative k and a
    completion in 798,254 min ending at -2212 A."""
    f = _write(tmp_path / "rf.csv", noisy(absorbance(consecutive(T, 2e-3, 6e-4)), 28))
    for cmd in ("ratelaw", "completion"):
        r = run(cmd, f, "--no-plots")
        assert r.exit_code == 4, r.output
        assert "rises then falls" in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_a_strong_drift_is_fitted_by_evidence_and_the_forecast_covers_the_truth():
    t = np.arange(0, 90 * 60 + 1, 30.0)                    # into the plateau
    k = 1.2e-3
    y = noisy(absorbance(first_order(t, k), drift=3e-3 / 60, t=t), 29)
    c = assess(t, y, target=0.99)
    assert "drift" in c.model and "drift_fitted" in c.flags
    assert c.t_target.ci_low < time_to("1", 0.99, k) < c.t_target.ci_high
    d = c.law.fit.params["drift"]
    assert d.ci_low < 3e-3 / 60 < d.ci_high
    # no drift term where there is none (white noise): the F-test does not support it
    plain = assess(t, noisy(absorbance(first_order(t, k)), 30), target=0.99)
    assert plain.model == "1"


def test_a_drift_the_f_test_misses_still_leaves_the_truth_inside_the_interval():
    """1 mAU/min of baseline drift (45 mAU over the run, noise 4 mAU): the F-test catches it in
    fewer than half the runs, and a forecast chosen by that test alone covered the truth in only
    8 of 20 such runs (those where it caught the drift). The drift model carries AICc weight in
    every run, so its forecast enters the headline interval. Twelve seeded runs (the test misses
    the drift in 6); accept down to the 0.1 % binomial quantile of 12 runs at 95 %
    (scipy.stats.binom)."""
    k = _k("1", 0.88)
    truth_t, drift = time_to("1", 0.99, k), 1e-3 / 60
    clean = absorbance(first_order(T, k), drift=drift, t=T)
    hits = missed_by_test = k_hits = 0
    for seed in range(3000, 3012):
        c = assess(T, noisy(clean, seed), target=0.99)
        assert [f.model for f in c.forecasts][:2] in (["1", "1+drift"], ["1+drift", "1"])
        missed_by_test += c.model == "1"
        hits += c.t_target.ci_low <= truth_t <= c.t_target.ci_high
        k_hits += c.k.ci_low <= k <= c.k.ci_high
        plain = next(f for f in c.forecasts if f.model == "1").t_target
        assert c.t_target.ci_low <= plain.ci_low and plain.ci_high <= c.t_target.ci_high
    bound = stats.binom.ppf(0.001, 12, 0.95)
    assert missed_by_test >= 3                       # the case the drift term alone left wrong
    assert hits >= bound and k_hits >= bound


# --------------------------------------------------------------------------- coverage

#: benchmarks/completion_coverage.py, 200 runs of the white-noise condition (seeds 0-199): the
#: 95 % interval of t(99 %), spanning the forecasts with and without a drift term, covered the
#: truth in 200 of 200 runs; the test holds it to no less than the nominal 95 %.
MEASURED_COVERAGE = 0.95


def test_small_seeded_coverage_study():
    """The white-noise condition of the benchmark on other seeds (1000-1039): accept down to the
    0.1 % binomial quantile of 40 runs at the measured rate (scipy.stats.binom)."""
    k = _k("1", 0.88)
    truth = time_to("1", 0.99, k)
    clean = absorbance(first_order(T, k))
    hits = answered = flagged = 0
    for seed in range(1000, 1040):
        c = assess(T, noisy(clean, seed), target=0.99)
        answered += c.t_target is not None
        flagged += bool(c.flags)
        hits += c.t_target.ci_low <= truth <= c.t_target.ci_high
    bound = stats.binom.ppf(0.001, 40, MEASURED_COVERAGE)
    assert bound == 33
    assert answered == 40 and hits >= bound
    assert flagged <= stats.binom.ppf(0.999, 40, 0.05)     # the gate rarely trips on good fits


def test_a_stall_is_never_complete_over_seeds():
    complete = sum(assess(T, noisy(absorbance(stalled(T, K_CAT, K_DEAD)), s), target=0.99,
                          photometry=CHARGE).complete for s in range(2000, 2010))
    assert complete == 0


# --------------------------------------------------------------------------- the engine


def test_separable_profile_equals_lmfit_profile():
    # reference library: lmfit's conf_interval (profile with the F criterion) on the same fit
    y = noisy(absorbance(first_order(T, 8e-4)), 31)
    r = fit(RATE_LAWS["1"], T, y, ci="profile")
    k = r.params["k"]
    lo, hi = separable_profile(lambda th: np.column_stack([np.exp(-th * T), 1 - np.exp(-th * T)]),
                               y, k.value, r.dof)
    assert lo == pytest.approx(k.ci_low, rel=1e-4) and hi == pytest.approx(k.ci_high, rel=1e-4)


def test_separable_profile_with_a_held_end_point_equals_a_scipy_profile():
    """With Ainf held (--fix Ainf, or the end point an expected end absorbance gives) the
    forecast's profile interval of k took the held term at the fitted k only, so the profile
    was off the true one (0.00039932 against 0.00039925 1/s at the lower end). Reference: the
    profile computed here with scipy alone (brentq on the F criterion, A0 by least squares at
    each k; Bates & Watts 1988)."""
    from scipy.optimize import brentq

    from rateabs.completion import rate_parameter

    t = np.arange(0, 2700 + 1, 30.0)
    y = 0.06 + np.exp(-4e-4 * t) + np.random.default_rng(1).normal(0, 0.003, t.size)

    def rss(k):                         # A = 0.06 + (A0 - 0.06) exp(-k t), A0 by least squares
        f = np.exp(-k * t)
        c = np.dot(f, y - 0.06) / np.dot(f, f)
        r = y - 0.06 - c * f
        return float(r @ r)

    r = fit(RATE_LAWS["1"], t, y, fix={"Ainf": 0.06})
    k_hat, dof = r.value("k"), r.dof
    crit = stats.f.ppf(0.95, 1, dof)
    excess = lambda k: (rss(k) / rss(k_hat) - 1) * dof - crit          # noqa: E731
    lo, hi = brentq(excess, k_hat / 2, k_hat), brentq(excess, k_hat, 2 * k_hat)
    p = rate_parameter(r, "1", 0.95)
    assert p.ci_low == pytest.approx(lo, rel=1e-7) and p.ci_high == pytest.approx(hi, rel=1e-7)


def test_no_reversed_or_bare_impossible_numbers():
    # a zero-order fall: |k| interval and half-life interval in order, never [2260, 2244]
    k = Param("k", -2e-4, 1e-5, -2.2e-4, -1.8e-4, "asymptotic", "AU/s")
    from rateabs.ratelaws import magnitude
    m = magnitude(k, "k", "AU/s")
    h = map_param(m, lambda x: 0.5 / x, "half_life", "s", decreasing=True)
    assert m.ci_low < m.value < m.ci_high and h.ci_low < h.value < h.ci_high
    # a parameter without a finite SE is shown as not identifiable, never as a bare number
    bad = shown(Param("k", 6.958e-06, float("nan"), float("nan"), float("nan"), "asymptotic",
                      "1/s"))
    assert bad["value"] is None and bad["ci_method"] == "not identifiable"


# --------------------------------------------------------------------------- the command


def test_target_rule_99_99percent_and_fraction_agree():
    a, b, c = (CompletionOptions("f.csv", target=v).target for v in ("99", "99%", "0.99"))
    assert a == b == c == 99.0
    assert CompletionOptions("f.csv", target="0.5%").target == 0.5
    for bad in ("1", "100", "100%", "0", "1.0"):
        with pytest.raises(Exception, match="--target"):
            CompletionOptions("f.csv", target=bad)


def test_table_units_set_aside_columns_and_warnings(tmp_path):
    f = _write(tmp_path / "r2.csv", noisy(absorbance(second_order(T, _k("2", 0.88))), 32),
               tail="45.50,0.2")                              # a half-written last line
    for cmd in ("completion", "ratelaw"):
        r = run(cmd, f, "--no-plots")
        assert r.exit_code == 0, r.output
        out = r.stdout
        assert "1/(AU s)" in out and "1/s" not in out.replace("1/(AU s)", "").split(
            "warning")[0].replace("L/(mol s)", "")
        assert "'jacket T (C)' (temperature)" in out
        assert "warning: left out 1 row" in out          # the torn line, in the table itself
        assert "time: min (from the header of column 'time (min)')" in out
    comp = run("completion", f, "--no-plots").stdout
    assert "extrapolated" in comp and "times the observed span" in comp


def test_strict_json_and_target_as_fraction(tmp_path):
    f = _write(tmp_path / "low.csv", noisy(absorbance(first_order(T, _k("1", 0.2))), 33))
    r = run("completion", f, "--format", "json", "--no-plots", "--target", "0.95")
    assert r.exit_code == 0, r.output
    d = _strict(r.stdout)
    res = d["results"][0]
    assert res["target"] == 0.95 and d["settings"]["target"] == 0.95
    assert "orders_not_told_apart" in res["flags"] and len(res["forecasts"]) >= 2


def test_follow_writes_json_lines_and_progress_on_stderr(tmp_path):
    f = _write(tmp_path / "live.csv", noisy(absorbance(first_order(T, 8e-4)), 34),
               tail="45.50,0.1")
    r = run("completion", f, "--follow", "0.01", "--max-updates", "2", "--format", "json",
            "--no-plots")
    assert r.exit_code == 0, r.output
    lines = r.stdout.strip().splitlines()
    docs = [_strict(line) for line in lines]                # every stdout line is JSON
    assert [d.get("update") for d in docs[:2]] == [1, 2] and docs[-1]["final"] is True
    assert any("left out 1 row" in w for w in docs[0]["warnings"])
    assert "following" in r.stderr and "final summary" in r.stderr


def test_pseudo_first_order_k2_in_csv_and_plot(tmp_path):
    # k2 is fitted to the runs' k and their SEs, which no interval method changes: asymptotic
    # intervals spare the profile's refits (0.7 s; the default is run in test_options.py)
    r = run("ratelaw", "sample_runs/pseudo_first_order_runs.csv", "--excess",
            "sample_runs/pseudo_first_order_excess.csv", "--order", "1", "--format", "csv",
            "--ci", "asymptotic", "--out", tmp_path)
    assert r.exit_code == 0, r.output
    rows = r.stdout.splitlines()
    head = rows[0].split(",")
    series = next(x for x in rows if x.startswith("pseudo-first-order series")).split(",")
    k2 = float(series[head.index("k2")])
    assert k2 == pytest.approx(0.42, rel=0.02)         # sample_runs/generate.py: 0.42 L/(mol s)
    assert "excess_M" in head
    assert (tmp_path / "ratelaw_pseudo_first_order.png").exists()


def test_k_in_concentration_units_carries_the_interval_of_k():
    # second order at 70 % (truth by solve_ivp): k_conc = k |Δε| b (Atkins: 1/[A] = 1/[A]0 + k t
    # in concentration), so its interval is k's, drift models included, scaled alike
    k2 = k_for_conversion("2", 0.7, T[-1])
    y = noisy(absorbance(second_order(T, k2)), 2)
    c = assess(T, y, target=0.99, photometry=CHARGE)
    d = c.to_dict()
    f = d["k_conc"]["value"] / d["k"]["value"]
    assert f == pytest.approx(EPS, rel=1e-9)                        # |Δε| b with b = 1 cm
    assert d["k_conc"]["ci_low"] == pytest.approx(d["k"]["ci_low"] * f, rel=1e-9)
    assert d["k_conc"]["ci_high"] == pytest.approx(d["k"]["ci_high"] * f, rel=1e-9)
    assert d["k_conc"]["ci_low"] <= k2 <= d["k_conc"]["ci_high"]
