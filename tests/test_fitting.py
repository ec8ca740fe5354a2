"""The shared fitting engine: published fits, agreement between solvers, intervals."""

import math

import numpy as np
import pytest
from kinetics_truth import log_logistic4, mechanism_rates, v_hill, v_mixed, v_substrate_inhibition
from scipy import optimize, stats

from rateabs.errors import FitError, UsageError
from rateabs.fitting import batch_lm, compare, fit, information_criteria, runs_test
from rateabs.models import NESTED, SATURATION

# published: Treloar (1974), Puromycin treated cells, as fitted in Bates & Watts (1988)
PURO_S = np.array([0.02, 0.02, 0.06, 0.06, 0.11, 0.11, 0.22, 0.22, 0.56, 0.56, 1.10, 1.10])
PURO_V = np.array([76, 47, 97, 107, 123, 139, 159, 152, 191, 201, 207, 200.0])


def test_puromycin_bates_watts():
    r = fit(SATURATION["mm"], PURO_S, PURO_V)
    assert r.params["Vmax"].value == pytest.approx(212.68, abs=0.005)
    assert r.params["Vmax"].se == pytest.approx(6.947, abs=0.0005)
    assert r.params["Km"].value == pytest.approx(0.06412, abs=0.000005)
    assert r.params["Km"].se == pytest.approx(0.008281, abs=0.0000005)
    assert r.sigma == pytest.approx(10.93, abs=0.005) and r.dof == 10


def _independent_profile(name, level=0.95):
    """Profile interval of one MM parameter by brute force with scipy (reference library)."""
    f = SATURATION["mm"].func
    full = optimize.least_squares(lambda p: PURO_V - f(PURO_S, *p), [200, 0.1], xtol=1e-14,
                                  ftol=1e-14)
    s0 = float(np.sum(full.fun ** 2))
    dof = PURO_S.size - 2
    target = s0 * (1 + stats.t.ppf(0.5 + level / 2, dof) ** 2 / dof)
    j = 0 if name == "Vmax" else 1

    def excess(val):
        def res(q):
            p = [val, q[0]] if j == 0 else [q[0], val]
            return PURO_V - f(PURO_S, *p)
        r = optimize.least_squares(res, [full.x[1 - j]], xtol=1e-14, ftol=1e-14)
        return float(np.sum(r.fun ** 2)) - target

    best = full.x[j]
    lo = optimize.brentq(excess, best * 0.5, best)
    hi = optimize.brentq(excess, best, best * 2)
    return lo, hi


def test_profile_intervals_equal_independent_profile():
    r = fit(SATURATION["mm"], PURO_S, PURO_V, ci="profile")
    for name in ("Vmax", "Km"):
        lo, hi = _independent_profile(name)
        p = r.params[name]
        assert p.ci_method == "profile"
        assert p.ci_low == pytest.approx(lo, rel=2e-3)
        assert p.ci_high == pytest.approx(hi, rel=2e-3)
        # profile intervals of Km are asymmetric, unlike the asymptotic ones
    km = r.params["Km"]
    assert (km.ci_high - km.value) > (km.value - km.ci_low)


def _truth(name, x, t):
    """Noise-free rates from tests/kinetics_truth.py (typed equations or solve_ivp mechanisms),
    never from rateabs.models."""
    if name == "mm":
        return mechanism_rates(x, 0 * x, V=t["Vmax"], Km=t["Km"])
    if name == "hill":
        return v_hill(x, t["Vmax"], t["S50"], t["n"])
    if name == "substrate-inhibition":
        return v_substrate_inhibition(x, t["Vmax"], t["Km"], t["Ksi"])
    if name == "ic50":
        return log_logistic4(x, t["n"], t["v_floor"], t["v_free"], t["IC50"])
    if name == "mixed":
        return v_mixed(x[0], x[1], t["Vmax"], t["Km"], t["Ki"], t["Kiu"])
    ks = {"competitive": {"Kic": t["Ki"]}, "uncompetitive": {"Kiu": t["Ki"]},
          "noncompetitive": {"Kic": t["Ki"], "Kiu": t["Ki"]}}[name]
    return mechanism_rates(x[0], x[1], V=t["Vmax"], Km=t["Km"], **ks)


ALL_SATURATION = ["mm", "hill", "substrate-inhibition", "competitive", "uncompetitive",
                  "noncompetitive", "mixed", "ic50"]


@pytest.mark.parametrize("name", ALL_SATURATION)
def test_batched_solver_agrees_with_scipy_least_squares(name):
    # fit() solves with scipy.optimize.least_squares (reference library)
    rng = np.random.default_rng(7)
    model = SATURATION[name]
    x, truth = _design(name)
    y = _truth(name, x, truth)
    y = y * (1 + rng.normal(0, 0.03, y.shape))
    r = fit(model, x, y)
    start = np.array([[v * 1.3 for v in model.guess(x, y).values()]])
    b = batch_lm(model.func, x, y[None], np.ones((1, y.size)), start,
                 lower=[model.lower.get(p, -np.inf) for p in model.params],
                 upper=[model.upper.get(p, np.inf) for p in model.params])
    assert b.converged[0]
    np.testing.assert_allclose(b.params[0], list(r.values().values()), rtol=1e-6)


def _design(name):
    s = np.array([5, 10, 20, 40, 80, 160, 320, 640.0])
    if name in ("mm",):
        return s, {"Vmax": 10.0, "Km": 50.0}
    if name == "hill":
        return s, {"Vmax": 10.0, "S50": 60.0, "n": 2.0}
    if name == "substrate-inhibition":
        s = np.array([5, 10, 20, 40, 80, 160, 320, 640, 1280, 2560.0])
        return s, {"Vmax": 10.0, "Km": 50.0, "Ksi": 600.0}
    if name == "ic50":
        i = np.array([0, 0.1, 0.3, 1, 3, 10, 30, 100, 300.0])
        return i, {"v_free": 100.0, "v_floor": 5.0, "IC50": 4.0, "n": 1.2}
    ss, ii = np.meshgrid(s, [0, 2, 5, 10.0])
    x = np.vstack([ss.ravel(), ii.ravel()])
    if name == "mixed":
        return x, {"Vmax": 10.0, "Km": 50.0, "Ki": 3.0, "Kiu": 9.0}
    return x, {"Vmax": 10.0, "Km": 50.0, "Ki": 4.0}


N_SEEDS = 12


@pytest.mark.parametrize("name", ALL_SATURATION)
def test_parameters_recovered_from_seeded_simulation(name):
    model = SATURATION[name]
    x, truth = _design(name)
    y_true = _truth(name, x, truth)
    covered = dict.fromkeys(truth, 0)
    for seed in range(N_SEEDS):
        rng = np.random.default_rng(100 + seed)
        y = y_true + rng.normal(0, 0.02 * np.max(np.abs(y_true)), y_true.shape)
        r = fit(model, x, y)
        assert r.success, r.report()
        # the error over its SE follows Student's t on the fit's degrees of freedom (few here:
        # 5 to 36); a two-sided tail of 1e-4 per check keeps a false failure over the ~300
        # checks of this test below 3 %
        bound = stats.t.ppf(1 - 5e-5, r.dof)
        for k, v in truth.items():
            covered[k] += r.params[k].ci_low <= v <= r.params[k].ci_high
            assert abs(r.params[k].value - v) < bound * r.params[k].se, (k, seed)
    # coverage of the nominal 95 % intervals: with 12 simulations, accept down to the lower
    # 0.1 % binomial quantile, scipy.stats.binom.ppf(0.001, 12, 0.95) = 8
    floor = stats.binom.ppf(0.001, N_SEEDS, 0.95)
    assert floor == 8
    assert all(c >= floor for c in covered.values()), covered


def test_bootstrap_seeded_and_close_to_asymptotic():
    a = fit(SATURATION["mm"], PURO_S, PURO_V, ci="bootstrap", n_boot=500, seed=3)
    b = fit(SATURATION["mm"], PURO_S, PURO_V, ci="bootstrap", n_boot=500, seed=3)
    assert a.params["Km"].ci_low == b.params["Km"].ci_low
    assert a.params["Km"].ci_method == "bootstrap-residual" and a.n_boot_ok >= 490
    assert a.params["Km"].se == pytest.approx(0.00828, rel=0.25)
    c = fit(SATURATION["mm"], PURO_S, PURO_V, ci="bootstrap", n_boot=500, resample="case")
    assert c.params["Vmax"].ci_method == "bootstrap-case"
    assert c.params["Vmax"].ci_low < 212.68 < c.params["Vmax"].ci_high


def test_fixed_parameter_and_bounds():
    r = fit(SATURATION["mm"], PURO_S, PURO_V, fix={"Km": 0.07})
    assert r.params["Km"].fixed and r.params["Km"].value == 0.07 and r.n_free == 1
    assert r.params["Km"].to_dict()["ci_method"] == "fixed"
    with pytest.raises(UsageError):
        fit(SATURATION["mm"], PURO_S, PURO_V, fix={"Kx": 1})


def test_too_few_points_is_not_estimable():
    with pytest.raises(FitError, match="not estimable"):
        fit(SATURATION["hill"], PURO_S[:3], PURO_V[:3])


def test_weights():
    r = fit(SATURATION["mm"], PURO_S, PURO_V, weighting="relative")
    assert r.weighting == "relative" and r.success
    sd = np.full(PURO_S.size, 10.93)
    r2 = fit(SATURATION["mm"], PURO_S, PURO_V, weighting="sd", sd=sd)
    # with the SDs equal to the residual SE the unscaled covariance gives the same SEs
    assert r2.params["Km"].se == pytest.approx(0.008281, rel=1e-3)


def test_runs_test_hand_worked():
    # Wald & Wolfowitz (1940), Ann. Math. Stat. 11:147, normal approximation. Ten alternating
    # signs: n1 = n2 = 5, R = 10 runs; mean 2 n1 n2 / n + 1 = 6; variance
    # 2 n1 n2 (2 n1 n2 - n) / (n^2 (n - 1)) = 2 x 25 x 40 / (100 x 9) = 2.2222; z = 4 / 1.4907
    # = 2.6833; two-sided p = 2 x 0.0036452 = 0.0072904
    assert runs_test([1, -1] * 5) == pytest.approx(0.0072904, abs=5e-7)
    # the exact distribution (Wald & Wolfowitz 1940) gives P(R >= 10) = 2 / C(10, 5) = 0.0079:
    # the approximation is close, and in the right direction
    assert runs_test([1, -1] * 5) == pytest.approx(2 / math.comb(10, 5), rel=0.1)
    # two long runs: R = 2, z = -4 / 1.4907, the same p
    assert runs_test([1] * 5 + [-1] * 5) == pytest.approx(0.0072904, abs=5e-7)
    assert math.isnan(runs_test([1, 1, 1, 1, 1, 1]))


def test_aicc_definition():
    # AICc of Hurvich & Tsai (1989), Biometrika 76:297: AIC + 2k(k+1)/(n-k-1); for least
    # squares AIC = n ln(RSS/n) + 2k (Akaike 1974), BIC = n ln(RSS/n) + k ln n (Schwarz 1978).
    # RSS 100, n 12, k 3: n ln(RSS/n) = 12 ln(8.3333) = 12 x 2.120264 = 25.443162
    #   AIC  = 25.443162 + 6                = 31.443162
    #   AICc = 31.443162 + 2 x 3 x 4 / 8     = 34.443162
    #   BIC  = 25.443162 + 3 ln 12 = + 7.454720 = 32.897882
    aic, aicc, bic = information_criteria(100.0, 12, 3)
    assert aic == pytest.approx(31.443162, abs=1e-6)
    assert aicc == pytest.approx(34.443162, abs=1e-6)
    assert bic == pytest.approx(32.897882, abs=1e-6)
    assert information_criteria(1.0, 4, 3)[1] == math.inf      # n - k - 1 = 0: undefined


def test_compare_chooses_exactly_one_and_shows_f_tests():
    fits = {m: fit(SATURATION[m], PURO_S, PURO_V) for m in ("mm", "hill")}
    comp = compare(fits, NESTED)
    assert comp.chosen in fits
    assert len(comp.ftests) == 1 and comp.ftests[0]["simpler"] == "mm"
    assert sum(r["model"] == comp.chosen for r in comp.rows) == 1
    assert "AICc" in comp.report()


def test_profile_intervals_equal_lmfit_conf_interval_on_a_three_parameter_rate_law():
    # reference library: lmfit's conf_interval (F-test criterion, the other parameters
    # refitted) on a seeded first-order decay with a baseline, A(t) = Ainf + (A0 - Ainf) e^-kt
    import lmfit

    from rateabs.models import RATE_LAWS

    t = np.linspace(0.0, 1800.0, 61)
    rng = np.random.default_rng(7)
    y = 0.08 + 0.9 * np.exp(-1.1e-3 * t) + rng.normal(0, 0.004, t.size)
    r = fit(RATE_LAWS["1"], t, y, ci="profile")
    pars = lmfit.Parameters()
    for nm in RATE_LAWS["1"].params:
        pars.add(nm, value=r.params[nm].value)
    mini = lmfit.Minimizer(lambda p: y - RATE_LAWS["1"].func(t, *[p[n].value for n in
                                                                  RATE_LAWS["1"].params]), pars)
    res = mini.minimize(method="leastsq")
    ci = lmfit.conf_interval(mini, res, sigmas=[0.95])
    for nm in RATE_LAWS["1"].params:
        rows = ci[nm]
        assert r.params[nm].ci_method == "profile"
        # the two root searches stop at their own tolerances: held to 0.1 % of the width
        width = rows[-1][1] - rows[0][1]
        assert r.params[nm].ci_low == pytest.approx(rows[0][1], abs=1e-3 * width), nm
        assert r.params[nm].ci_high == pytest.approx(rows[-1][1], abs=1e-3 * width), nm


def test_batch_lm_value_jac_takes_the_path_of_jac():
    """A model that gives its value and Jacobian from one call (value_jac) is fitted exactly as
    with a separate analytic Jacobian, and agrees with scipy.optimize.curve_fit (reference
    library) on seeded exponential decays."""
    from scipy.optimize import curve_fit

    rng = np.random.default_rng(3)
    t = np.linspace(0, 10, 40)
    a0, k0 = rng.uniform(1, 3, 6), rng.uniform(0.1, 0.8, 6)
    Y = a0[:, None] * np.exp(-k0[:, None] * t) + rng.normal(0, 0.01, (6, t.size))

    def f(t, a, k):
        return a * np.exp(-k * t)

    def jac(t, a, k):
        e = np.exp(-k * t)
        return np.stack([e, -a * t * e], axis=-1)

    def value_jac(t, a, k):
        return f(t, a, k), jac(t, a, k)

    p0 = np.tile([1.0, 1.0], (6, 1))
    one = batch_lm(f, t, Y, np.ones_like(Y), p0, jac=jac, want_cov=True)
    both = batch_lm(f, t, Y, np.ones_like(Y), p0, value_jac=value_jac, want_cov=True)
    assert np.array_equal(one.params, both.params) and one.n_iter == both.n_iter
    assert np.allclose(one.cov, both.cov, rtol=1e-12)
    for i in range(6):
        ref, _ = curve_fit(f, t, Y[i], p0=[1.0, 1.0])
        assert np.allclose(both.params[i], ref, rtol=1e-6)


def test_profile_open_on_one_side_keeps_the_closed_side():
    """A weak competitive inhibitor (Ki 5 uM, [I] up to 1 uM): the data bound Ki below but not
    above. The profile interval must be [lower, inf) with the lower end where an independent
    scipy profile (reference library: least_squares refits and brentq on the F criterion of
    Bates & Watts 1988) puts it; it fell back to the asymptotic [-3.7, 16.3].

    Truth: competitive inhibition by solve_ivp (mechanism_rates), Vmax 10, Km 50, Ki 5 uM; 5 %
    noise, seed 2."""
    s = np.tile([10, 20, 50, 100, 200, 500.0], 3)
    i = np.repeat([0, 0.5, 1.0], 6)
    v = mechanism_rates(s, i, V=10.0, Km=50.0, Kic=5.0)
    v = v * (1 + np.random.default_rng(2).normal(0, 0.05, s.size))
    x = np.vstack([s, i])
    r = fit(SATURATION["competitive"], x, v, ci="profile")
    ki = r.params["Ki"]
    assert ki.ci_method == "profile" and ki.ci_high == math.inf
    assert 0 < ki.ci_low < 5.0
    assert any("Ki" in n and "open above" in n for n in r.notes)

    f = SATURATION["competitive"].func
    best = optimize.least_squares(lambda p: v - f(x, *p), [10, 50, 5], xtol=1e-14, ftol=1e-14)
    rss = float(np.sum(best.fun ** 2))
    target = rss * (1 + stats.f.ppf(0.95, 1, s.size - 3) / (s.size - 3))

    def excess(k):
        q = optimize.least_squares(lambda p: v - f(x, p[0], p[1], k), best.x[:2], xtol=1e-14,
                                   ftol=1e-14)
        return float(np.sum(q.fun ** 2)) - target

    lo = optimize.brentq(excess, 0.1, best.x[2])
    assert ki.ci_low == pytest.approx(lo, rel=1e-3)
    assert excess(1e4) < 0                  # no upper end: Ki far above [I] fits as well
