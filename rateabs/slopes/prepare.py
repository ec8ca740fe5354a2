"""The first stage of the initial-rate estimator: each trace's noise, its spikes set aside, its
readings taken relative to its first usable reading."""

from __future__ import annotations

import math
import warnings
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from ..traces import Grid

#: A reading is a spike when it stands this many noise SDs off the line through its two
#: neighbours, and 1.5 times as far off as either neighbour stands off its own: about one such
#: reading in 10^8 under normal noise (a step or a bend moves neighbours alike and is no spike).
SPIKE_Z = 5.5


#: After the whole-curve fit, a reading this many noise SDs off the curve is set aside as a
#: spike (a bubble, dust, a jolt), where a trace has at most OUTLIER_MAX such readings (or 5 %).
OUTLIER_Z = 6.0
OUTLIER_MAX = 2

#: The most readings (traces x times) the estimator works on at once: traces are taken in
#: chunks of rows (and grids of curve shapes in chunks of grid points) so that its memory stays
#: in proportion to the data. What spans traces (the columns' times, the longest duration, the
#: plate's typical noise and rate) is computed over all of them, so chunks never change a result.
CHUNK_READINGS = 250_000


@contextmanager
def quiet_numpy():
    """Silence numpy's RuntimeWarnings (all-NaN slices of padded traces are expected here)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        yield


def nanmedian(a, axis: int, keepdims: bool = False) -> np.ndarray:
    """The median of each line's numbers along ``axis``, NaN left out (NaN where a line has
    none): the numbers ``np.nanmedian`` gives (the middle one, or the mean of the two middle
    ones), from one sort of the whole array, where numpy's own takes its masked-array path for
    short lines and a Python loop over long ones."""
    a = np.asarray(a, float)
    n = np.sum(~np.isnan(a), axis=axis, keepdims=True)
    if a.shape[axis] == 0:
        m = np.full(n.shape, np.nan)
    else:
        s = np.sort(a, axis=axis)                                   # NaN sort last
        hi = np.minimum(n // 2, a.shape[axis] - 1)
        lo = np.maximum(np.where(n % 2 == 1, hi, hi - 1), 0)
        low = np.take_along_axis(s, lo, axis=axis)
        high = np.take_along_axis(s, hi, axis=axis)
        with np.errstate(invalid="ignore", over="ignore"):
            m = np.where(n == 0, np.nan, np.where(n % 2 == 1, low, (low + high) / 2))
    return m if keepdims else np.squeeze(m, axis=axis)


def noise_sigma(grid: Grid, floor: float = 1e-4, usable: np.ndarray | None = None) -> np.ndarray:
    """Per-trace noise SD from second differences: the RMS of the second differences within 3.5
    robust SDs of their median, over sqrt(6) (white noise), at least ``floor``.

    ``usable`` (default the grid's) says which readings count.
    """
    Y = grid.values
    U = grid.usable if usable is None else usable
    if Y.shape[1] < 3:
        return np.full(Y.shape[0], float(floor))
    d2 = Y[:, 2:] - 2 * Y[:, 1:-1] + Y[:, :-2]
    ok = U[:, 2:] & U[:, 1:-1] & U[:, :-2]
    d2 = np.where(ok, d2, np.nan)
    with np.errstate(all="ignore"), quiet_numpy():
        med = nanmedian(d2, axis=1, keepdims=True)
        dev = np.abs(d2 - med)
        mad = 1.4826 * nanmedian(dev, axis=1, keepdims=True)
        # efficient and robust: RMS of the second differences within 3.5 robust SDs
        keep = dev <= 3.5 * mad
        rms = np.sqrt(np.nansum(np.where(keep, dev**2, 0), axis=1)
                      / np.maximum(np.sum(keep & np.isfinite(dev), axis=1), 1))
    sig = rms / math.sqrt(6) / 0.9865          # 0.9865: RMS of a normal truncated at 3.5 SD
    return np.where(np.isfinite(sig), np.maximum(sig, floor), floor)


def outliers(prep: Prepared, fitted: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """Readings that stand more than OUTLIER_Z noise SDs off the trace's whole curve, where
    there are at most OUTLIER_MAX of them (more is a misfit, not a few bad readings)."""
    z = np.abs(prep.Yc - fitted) / sigma[:, None]
    big = (prep.W > 0) & np.isfinite(z) & (z > OUTLIER_Z)
    few = big.sum(axis=1) <= max(OUTLIER_MAX, int(0.05 * prep.W.shape[1]))
    return big & few[:, None]


def find_spikes(grid: Grid, sigma: np.ndarray) -> np.ndarray:
    """Readings that are single-reading spikes (see :data:`SPIKE_Z`); first and last readings
    are never called spikes (a fast reaction bends there too)."""
    T, Y, U = grid.times, grid.values, grid.usable
    out = np.zeros(Y.shape, dtype=bool)
    if Y.shape[1] < 5:
        return out
    with np.errstate(all="ignore"):
        frac = (T[:, 1:-1] - T[:, :-2]) / (T[:, 2:] - T[:, :-2])
        r = Y[:, 1:-1] - (Y[:, :-2] + frac * (Y[:, 2:] - Y[:, :-2]))
    ok = U[:, 2:] & U[:, 1:-1] & U[:, :-2] & np.isfinite(r)
    r = np.abs(np.where(ok, r, 0.0))
    big = r > SPIKE_Z * math.sqrt(1.5) * sigma[:, None]
    side = np.maximum(np.pad(r, ((0, 0), (1, 0)))[:, :-1], np.pad(r, ((0, 0), (0, 1)))[:, 1:])
    out[:, 1:-1] = big & (r > 1.5 * side)
    return out


@dataclass(frozen=True)
class Prepared:
    """The readings as the later stages use them (arrays traces x times).

    ``Tc``/``Yc``: times and readings relative to each trace's first usable reading (0 where
    unusable); ``W``: 1.0 for a reading used, else 0 (spikes set aside); ``first``: index of the
    first usable reading, ``t0``/``y0`` its time and reading; ``sigma``: noise SD; ``spikes``:
    readings set aside as spikes; ``span``: the longest trace's duration; ``times``: the times
    of the columns, from the first reading, as most traces have them (``span`` and ``times``
    are the plate's, :class:`Clock`, also where these are some of its traces).
    """

    grid: Grid
    Tc: np.ndarray
    Yc: np.ndarray
    W: np.ndarray
    usable: np.ndarray
    first: np.ndarray
    last: np.ndarray
    t0: np.ndarray
    y0: np.ndarray
    sigma: np.ndarray
    spikes: np.ndarray
    span: float
    times: np.ndarray

    @property
    def n_use(self) -> np.ndarray:
        """Usable readings per trace."""
        return self.usable.sum(axis=1)


@dataclass(frozen=True)
class Clock:
    """What the traces share: ``times``, the columns' times from the first reading as most
    traces have them, and ``span``, the longest trace's duration (computed over every trace,
    so that traces taken in chunks see the same)."""

    times: np.ndarray
    span: float


def row_chunks(n_traces: int, n_times: int) -> list[slice]:
    """The traces in chunks of rows of at most :data:`CHUNK_READINGS` readings (one trace at
    least; one empty chunk without traces)."""
    step = max(1, CHUNK_READINGS // max(n_times, 1))
    return [slice(i, i + step) for i in range(0, n_traces, step)] or [slice(0, 0)]


def sub_grid(grid: Grid, rows: slice) -> Grid:
    """The traces ``rows`` of a grid, as views (no copy)."""
    return Grid(list(grid.names[rows]), grid.times[rows], grid.values[rows], grid.usable[rows],
                None if grid.flags is None else grid.flags[rows])


def _used(grid: Grid, noise_floor: float, set_aside):
    """Noise SD, spikes and the readings used (see :func:`prepare`)."""
    sigma = noise_sigma(grid, noise_floor)
    spikes = find_spikes(grid, sigma)
    if set_aside is not None:
        spikes = spikes | (set_aside & grid.usable)
    U = grid.usable & ~spikes
    if spikes.any():
        sigma = noise_sigma(grid, noise_floor, U)
    return sigma, spikes, U


def _first(T, Y, U):
    """Index of each trace's first and last used reading, and the time and reading there."""
    N, M = U.shape
    rows = np.arange(N)
    first = np.argmax(U, axis=1)
    last = M - 1 - np.argmax(U[:, ::-1], axis=1)
    t0 = np.where(U.any(axis=1), np.nan_to_num(T[rows, first]), 0.0)
    y0 = np.where(U.any(axis=1), np.nan_to_num(Y[rows, first]), 0.0)
    return first, last, t0, y0


def _column_times(T, U, t0, span: float) -> np.ndarray:
    """The median over traces of each column's time from the trace's first used reading
    (columns taken in chunks); evenly spread over ``span`` where no trace has one."""
    N, M = U.shape
    times = np.empty(M)
    step = max(1, CHUNK_READINGS // max(N, 1))
    with quiet_numpy():
        for c in range(0, M, step):
            cols = slice(c, c + step)
            times[cols] = nanmedian(np.where(U[:, cols], T[:, cols] - t0[:, None], np.nan),
                                    axis=0)
    return np.where(np.isfinite(times), times, np.linspace(0.0, span, M))


def plate_clock(grid: Grid, noise_floor: float = 1e-4, set_aside=None) -> Clock:
    """The :class:`Clock` of all traces, as :func:`prepare` finds it for the whole grid, with
    the traces taken in chunks of rows."""
    N, M = grid.values.shape
    U = np.zeros((N, M), dtype=bool)
    t0 = np.zeros(N)
    longest = []
    for rows in row_chunks(N, M):
        sub = sub_grid(grid, rows)
        U[rows] = _used(sub, noise_floor, None if set_aside is None else set_aside[rows])[2]
        t0[rows] = _first(sub.times, sub.values, U[rows])[2]
        longest.append(np.max(np.where(U[rows], sub.times - t0[rows, None], 0.0), initial=0.0))
    span = float(max(np.max(longest, initial=0.0), 1e-9))
    return Clock(_column_times(grid.times, U, t0, span), span)


def prepare(grid: Grid, noise_floor: float = 1e-4, set_aside=None,
            clock: Clock | None = None) -> Prepared:
    """Noise, spikes and relative readings of every trace (see :class:`Prepared`);
    ``set_aside`` (traces x times, optional) marks more readings to treat as spikes; ``clock``
    (default: this grid's own) gives the times and span the traces share."""
    T, Y = grid.times, grid.values
    sigma, spikes, U = _used(grid, noise_floor, set_aside)
    first, last, t0, y0 = _first(T, Y, U)
    Tc = np.where(U, T - t0[:, None], 0.0)
    Yc = np.where(U, Y - y0[:, None], 0.0)
    if clock is None:
        span = float(max(np.max(Tc, initial=0.0), 1e-9))
        clock = Clock(_column_times(T, U, t0, span), span)
    return Prepared(grid, Tc, Yc, U.astype(float), U, first, last, t0, y0, sigma, spikes,
                    clock.span, clock.times)
