"""The t, F, chi-square and normal quantiles and tails of rateabs.distributions, checked against
scipy.stats (a general-purpose reference library) over a grid and against printed tables."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from rateabs import distributions as d
from rateabs.rates import dilution_trend

Q = st.floats(0.001, 0.999)
DOF = st.floats(0.5, 500)


@settings(max_examples=200, deadline=None)
@given(Q, DOF, DOF)
def test_quantiles_and_tails_equal_scipy_stats(q, a, b):
    assert d.t_quantile(q, a) == pytest.approx(stats.t.ppf(q, a), rel=1e-9, abs=1e-12)
    assert d.t_two_sided(q, a) == pytest.approx(stats.t.ppf(0.5 + q / 2, a), rel=1e-9)
    assert d.f_quantile(q, a, b) == pytest.approx(stats.f.ppf(q, a, b), rel=1e-7)
    assert d.chi2_quantile(q, a) == pytest.approx(stats.chi2.ppf(q, a), rel=1e-7, abs=1e-12)
    assert d.normal_quantile(q) == pytest.approx(stats.norm.ppf(q), rel=1e-12, abs=1e-12)
    x = stats.chi2.ppf(q, a)
    assert d.chi2_tail(x, a) == pytest.approx(stats.chi2.sf(x, a), rel=1e-7)
    f = stats.f.ppf(q, a, b)
    assert d.f_tail(f, a, b) == pytest.approx(stats.f.sf(f, a, b), rel=1e-7)
    t = stats.t.ppf(q, a)
    assert d.t_two_sided_p(t, a) == pytest.approx(2 * stats.t.sf(abs(t), a), rel=1e-7)
    assert d.normal_two_sided_p(t) == pytest.approx(2 * stats.norm.sf(abs(t)), rel=1e-9)


def test_printed_table_values():
    # NIST/SEMATECH e-Handbook of Statistical Methods, tables 1.3.6.7.2 (t), 1.3.6.7.3 (F) and
    # 1.3.6.7.4 (chi-square), upper 5 % / 2.5 % points as printed (three decimals).
    assert float(d.t_two_sided(0.95, 10)) == pytest.approx(2.228, abs=5e-4)
    assert float(d.f_quantile(0.95, 1, 10)) == pytest.approx(4.965, abs=5e-4)
    assert float(d.chi2_quantile(0.95, 10)) == pytest.approx(18.307, abs=5e-4)
    assert float(d.normal_quantile(0.975)) == pytest.approx(1.960, abs=5e-4)


def test_tails_of_impossible_statistics_are_one():
    assert d.f_tail(-1.0, 2, 5) == 1.0
    assert d.chi2_tail(-0.5, 3) == 1.0
    assert np.isnan(d.chi2_tail(np.nan, 3))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(0.5, 2.0), min_size=4, max_size=12), st.integers(0, 2**31 - 1))
def test_dilution_trend_p_equals_linregress(activity, seed):
    # scipy.stats.linregress: slope and two-sided p of the slope on n - 2 degrees of freedom.
    y = np.asarray(activity) + np.random.default_rng(seed).normal(0, 0.01, len(activity))
    dil = 2.0 ** np.arange(len(y))
    got = dilution_trend(dil, y)
    ref = stats.linregress(np.log2(dil), y)
    assert got["dilution_trend_pct"] == pytest.approx(100 * ref.slope / abs(y.mean()), rel=1e-9)
    assert got["dilution_trend_p"] == pytest.approx(ref.pvalue, rel=1e-7, abs=1e-12)
