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


@settings(max_examples=200, deadline=None)
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
