"""Faster routes that must give the numbers of the straightforward ones: checked against numpy
(reference library) on arrays drawn by hypothesis."""

from __future__ import annotations

import warnings

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from rateabs.slopes.prepare import nanmedian

_VALUES = st.one_of(st.floats(-1e6, 1e6), st.just(np.nan), st.just(np.inf), st.just(-np.inf),
                    st.integers(-3, 3).map(float))


@settings(max_examples=100, deadline=None)
@given(arrays(float, st.tuples(st.integers(1, 12), st.integers(1, 12)), elements=_VALUES),
       st.sampled_from([0, 1]), st.booleans())
def test_nanmedian_is_numpys(a, axis, keepdims):
    # the noise and clock medians of the initial-rate estimator: numpy.nanmedian's numbers
    # (NaN left out, NaN where a line has no number), bit for bit
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ref = np.nanmedian(a, axis=axis, keepdims=keepdims)
    got = nanmedian(a, axis=axis, keepdims=keepdims)
    assert got.shape == ref.shape
    assert np.array_equal(got, ref, equal_nan=True)


def test_nanmedian_of_long_lines_is_numpys():
    # numpy takes another path for lines of 600 and more (a 1536-well plate's columns)
    rng = np.random.default_rng(2)
    a = rng.normal(size=(1536, 7))
    a[rng.random(a.shape) < 0.2] = np.nan
    a[:, 3] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ref = np.nanmedian(a, axis=0)
    assert np.array_equal(nanmedian(a, axis=0), ref, equal_nan=True)


def test_chi2_table_is_scipys():
    # every tabulated quantile is the one scipy.special.chdtri gives (reference library), bit
    # for bit, and the band around it is wide enough that outside it the tail area is on the
    # side the quantile says
    from scipy import special

    from rateabs.distributions import chi2_quantile
    from rateabs.slopes import chi2

    dof = np.arange(1, chi2.TABLE_DOF + 1)
    for row, tail in enumerate(chi2.TAILS):
        q = special.chdtri(dof, tail)
        assert np.array_equal(chi2._table()[row], q)
        assert np.all(special.chdtrc(dof, q * (1 + chi2.BAND)) < tail)
        assert np.all(special.chdtrc(dof, q * (1 - chi2.BAND)) >= tail)
    assert np.array_equal(chi2.quantile(0.99, dof), chi2_quantile(0.99, dof))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(st.one_of(st.floats(-10, 2000), st.just(np.nan), st.just(np.inf)),
                          st.one_of(st.integers(1, 700).map(float), st.just(np.nan),
                                    st.floats(0.5, 600))), min_size=1, max_size=20),
       st.sampled_from([1e-4, 1 - 0.99, 0.05]))
def test_chi2_tail_below_is_the_tail_area_test(pairs, tail):
    # the estimator's misfit decision read from the table equals p < tail with scipy's p
    from rateabs.distributions import chi2_tail
    from rateabs.slopes import chi2

    x, dof = (np.array(v, float) for v in zip(*pairs, strict=True))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ref = chi2_tail(x, dof) < tail
    assert np.array_equal(chi2.tail_below(x, dof, tail), ref)


def test_chi2_tail_below_near_the_quantile():
    # values straddling each tabulated quantile by a few units in the last place
    from rateabs.distributions import chi2_tail
    from rateabs.slopes import chi2

    dof = np.arange(1, chi2.TABLE_DOF + 1, dtype=float)
    for row, tail in enumerate(chi2.TAILS):
        q = chi2._table()[row]
        for x in (np.nextafter(q, 0), q, np.nextafter(q, np.inf), q * (1 + 2e-9),
                  q * (1 - 2e-9)):
            assert np.array_equal(chi2.tail_below(x, dof, tail), chi2_tail(x, dof) < tail)


def test_a_plates_rates_need_no_scipy(tmp_path):
    # a plate's initial rates run without importing scipy.special (a third of a second at the
    # start of every run): the chi-square decisions come from the table; seeded curves
    import subprocess
    import sys

    rng = np.random.default_rng(5)
    t = np.arange(40) * 15.0
    k = rng.uniform(0, 3, 24)[:, None] / t[-1]
    y = 0.1 + 2e-4 * np.where(k > 0, -np.expm1(-k * t) / np.where(k > 0, k, 1), t)
    y += rng.normal(0, 0.002, y.shape)
    y[3] += 0.05 * (t > 300)                               # a misfit, for the misfit decision
    names = [f"A{i + 1}" for i in range(24)]
    lines = ["Time (s)," + ",".join(names)]
    lines += [f"{tt:g}," + ",".join(f"{v:.4f}" for v in y[:, j]) for j, tt in enumerate(t)]
    (tmp_path / "p.csv").write_text("\n".join(lines) + "\n")
    code = ("import sys\nfrom rateabs.options import RatesOptions\n"
            "from rateabs.views.rates import compute_rates\n"
            f"compute_rates(RatesOptions.build(file={str(tmp_path / 'p.csv')!r}))\n"
            "print('scipy.special' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr[-2000:]
    assert out.stdout.strip() == "False"


_JSON = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-10**20, 10**20),
              st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=8),
              st.sampled_from([float("inf"), float("-inf"), float("nan"), -0.0])),
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.tuples(inner, inner),
                            st.dictionaries(st.text(max_size=5), inner, max_size=4)),
    max_leaves=25)


@settings(max_examples=100, deadline=None)
@given(st.one_of(_JSON, st.dictionaries(st.one_of(st.integers(), st.none()), _JSON, max_size=3)))
def test_json_text_is_json_dumps(doc):
    # the output's JSON writer: the text of json.dumps(indent=2, ensure_ascii=False) (standard
    # library), non-ASCII, NaN, nesting and keys that are not strings included
    import json

    from rateabs.output import to_json

    assert to_json(doc) == json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


def test_json_text_of_numpy_numbers_and_enums_is_json_dumps():
    import enum
    import json

    from rateabs.output import to_json

    class Kind(enum.IntEnum):
        A = 3

    doc = {"x": np.float64(0.1), "k": Kind.A, "v": [np.float64("nan"), 2.5e-300, -0.0]}
    assert to_json(doc) == json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


def test_curve_values_of_many_traces_equal_one_trace_at_a_time():
    # every trace's whole curve at its own time in one evaluation: the numbers of
    # Windows.curve_values one trace at a time (seeded enzyme wells with lags, depletion,
    # masked readings and a short trace; rateabs.simulate integrates the mechanism with
    # scipy.integrate.solve_ivp)
    from test_slopes_chunks import messy_plate

    from rateabs.slopes import find_windows

    w = find_windows(messy_plate())
    assert {"lag", "lag-exp"} & set(w.curve_model) and "exp" in set(w.curve_model)
    rng = np.random.default_rng(1)
    rows = np.arange(len(w.names))
    t = w.t_first + rng.uniform(0, 600, rows.size)
    one = np.array([w.curve_values(i, [t[i]])[0] for i in rows])
    assert np.array_equal(w.curve_values(rows, t[:, None])[:, 0], one, equal_nan=True)
    assert np.array_equal(w.curve_values(rows[::-3], t[::-3, None])[:, 0], one[::-3],
                          equal_nan=True)
