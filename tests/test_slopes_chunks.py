"""The initial-rate estimator works on the traces in chunks of rows (and on its curve grids in
chunks of grid points) to keep memory in proportion to the data: a plate analysed in small
chunks must give exactly the numbers, choices and flags it gives analysed whole. Traces from
rateabs.simulate (the mechanism integrated by scipy.integrate.solve_ivp), seeded, made messy by
hand: masked first readings (a trace on its own clock), a short trace, masked stretches, jumps
of two readings (readings set aside after the whole-curve fit, a second pass) and a spike."""

from __future__ import annotations

import dataclasses
import importlib

import numpy as np
import pytest

from rateabs.simulate import EnzymeWells, enzyme_traces
from rateabs.slopes import find_windows
from rateabs.traces import Grid

prepare = importlib.import_module("rateabs.slopes.prepare")


def messy_plate() -> Grid:
    """24 seeded enzyme wells (depletion, substrate, lags, noise levels varied), made messy."""
    rng = np.random.default_rng(11)
    n = 24
    wells = EnzymeWells(v0=rng.uniform(-3e-4, 3e-4, n), depletion=rng.choice([0.01, 0.3, 0.8], n),
                        s0_over_km=rng.choice([0.2, 1.0, 5.0], n),
                        lag_s=rng.choice([0.0, 0.0, 40.0, 150.0], n),
                        noise=rng.choice([0.001, 0.003, 0.03], n), spikes=rng.choice([0, 1], n))
    g = enzyme_traces(np.linspace(0, 600, 61), wells, seed=5)[0].grid()
    T, Y, U = np.array(g.times, dtype=float), np.array(g.values), np.array(g.usable)
    U[3, :4] = False                                  # first readings masked: its own clock
    T[5, -12:], Y[5, -12:], U[5, -12:] = np.nan, np.nan, False      # a shorter trace
    U[11, 30:36] = False
    Y[9, 25:27] += 0.05                               # two readings off: set aside after the fit
    Y[14, 40:42] -= 0.04
    Y[17, 20] += 0.2
    return Grid(list(g.names), T, Y, U)


def assert_same(a, b) -> None:
    """Every field of two Windows equal, NaN where NaN (bit for bit)."""
    for f in dataclasses.fields(a):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if f.name in ("names", "flags"):
            assert list(x) == list(y), f.name
        else:
            x, y = np.asarray(x), np.asarray(y)
            assert x.shape == y.shape, f.name
            assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), f.name


@pytest.mark.parametrize("kw", [{}, {"window": (60.0, 300.0)}, {"curve": False}])
def test_chunks_change_no_number(monkeypatch, kw):
    g = messy_plate()
    whole = find_windows(g, **kw)
    monkeypatch.setattr(prepare, "CHUNK_READINGS", 500)      # 8 traces, 8 grid points at once
    assert len(prepare.row_chunks(*g.values.shape)) == 3
    chunked = find_windows(g, **kw)
    assert_same(whole, chunked)
    if not kw:                          # the plate exercises what it is meant to
        assert {"curve", "window"} <= set(whole.method)
        assert whole.spikes[14] >= 2         # the second pass


def test_lanes_change_no_number(monkeypatch):
    """Split over two lanes (this process and a forked child, as a one-file ``rates`` run does
    on a big plate), including the second pass over readings set aside, the messy plate gives
    the numbers it gives in one lane, bit for bit."""
    from rateabs import parallel, slopes

    g = messy_plate()
    whole = find_windows(g)
    monkeypatch.setattr(slopes, "LANE_MIN_TRACES", 8)
    calls = []
    real = parallel.forked
    monkeypatch.setattr(parallel, "forked", lambda c: calls.append(len(c)) or real(c))
    with parallel.lanes_allowed(2):
        if parallel.lanes() < 2:
            pytest.skip("one core")
        laned = find_windows(g)
    assert calls and all(n == 2 for n in calls)       # the lanes did run, in two processes
    assert_same(whole, laned)
