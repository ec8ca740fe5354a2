"""Straight windows from cumulative sums: least-squares lines over any stretch of readings of
every trace at once, and the choice of a window's end.

A window starts at the trace's first usable reading, or after a lag (three time constants in,
when the enzyme is 95 % active). It runs to the last reading unless the trace is evidently
curved; then it ends where the mean squared error of its slope as an initial slope is least:
the slope's noise variance sigma^2 / Stt falls as the window grows while its curvature bias,
read off the fitted whole curve (the least-squares slope of the curve over the window minus the
curve's slope at the window start), grows. That is the bias-variance choice of a local linear
fit's span (e.g. Fan & Gijbels 1996, Local Polynomial Modelling, ch. 3; from memory) with the
bias taken from the fitted curve.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .prepare import Prepared

_KEYS = ("w", "t", "y", "tt", "ty", "yy")


def cumulative(Tc, Yc, W) -> dict:
    """Cumulative weighted sums along each trace, with a leading 0 column: sums over readings
    s..e are ``C[k][:, e + 1] - C[k][:, s]``."""
    z = np.zeros((Tc.shape[0], 1))
    terms = (W, W * Tc, W * Yc, W * Tc * Tc, W * Tc * Yc, W * Yc * Yc)
    return {k: np.concatenate([z, np.cumsum(v, axis=1)], axis=1)
            for k, v in zip(_KEYS, terms, strict=True)}


@dataclass(frozen=True)
class Line:
    """Least-squares lines over one window per trace (arrays of length N): readings, intercept
    at the trace's first usable reading (relative to its value there), slope, the slope's
    regression SE, residual sum of squares and r^2 (NaN where undefined)."""

    n: np.ndarray
    a: np.ndarray
    b: np.ndarray
    se: np.ndarray
    sse: np.ndarray
    r2: np.ndarray


def line(C: dict, s, e) -> Line:
    """Lines over readings s..e (inclusive; one start and end per trace) from sums ``C``."""
    rows = np.arange(len(s))
    g = {k: C[k][rows, np.asarray(e) + 1] - C[k][rows, np.asarray(s)] for k in _KEYS}
    n = g["w"]
    with np.errstate(all="ignore"):
        stt = g["tt"] - g["t"] ** 2 / n
        sty = g["ty"] - g["t"] * g["y"] / n
        syy = g["yy"] - g["y"] ** 2 / n
        b = sty / stt
        a = (g["y"] - b * g["t"]) / n
        sse = np.maximum(syy - b * sty, 0.0)
        se = np.sqrt(sse / (n - 2) / stt)
        r2 = np.where(syy > 0, 1 - sse / syy, 1.0)
    ok = (n >= 2) & (stt > 0)
    nan = np.full(len(rows), np.nan)
    return Line(np.where(e >= s, n, 0), np.where(ok, a, nan), np.where(ok, b, nan),
                np.where(n >= 3, se, nan), np.where(ok, sse, nan), np.where(n >= 3, r2, nan))


def weights(prep: Prepared, s, e) -> np.ndarray:
    """The weights that make each window's slope from its readings: b = sum(weights * Y)."""
    M = prep.Tc.shape[1]
    idx = np.arange(M)[None, :]
    inside = prep.W * ((idx >= s[:, None]) & (idx <= e[:, None]))
    n = inside.sum(axis=1, keepdims=True)
    with np.errstate(all="ignore"):
        tm = (inside * prep.Tc).sum(axis=1, keepdims=True) / n
        d = inside * (prep.Tc - tm)
        out = d / (d * d).sum(axis=1, keepdims=True)
    return np.where(np.isfinite(out), out, 0.0)


def nth_usable(prep: Prepared, s, count) -> np.ndarray:
    """Index of the ``count``-th usable reading from index ``s`` on (the last usable reading
    when there are fewer)."""
    M = prep.W.shape[1]
    after = prep.usable & (np.arange(M)[None, :] >= s[:, None])
    cum = np.cumsum(after, axis=1)
    reach = cum >= np.reshape(count, (-1, 1)) if np.ndim(count) else cum >= count
    return np.where(reach.any(axis=1), np.argmax(reach, axis=1), prep.last)


def best_end(prep: Prepared, s, min_points: int, fitted, slope_at_start, sigma) -> np.ndarray:
    """The end of each window that makes its slope the best estimate of the curve's slope at
    the window start (least noise variance plus squared curvature bias; module docstring).

    ``fitted`` (N, M) is the whole curve at the readings, relative to each first reading.
    """
    Tc, W = prep.Tc, prep.W
    N, M = W.shape
    rows = np.arange(N)
    z = np.zeros((N, 1))
    C = {k: np.concatenate([z, np.cumsum(v, axis=1)], axis=1)
         for k, v in (("w", W), ("t", W * Tc), ("tt", W * Tc * Tc), ("f", W * fitted),
                      ("tf", W * Tc * fitted))}
    g = {k: v[:, 1:] - v[rows, s][:, None] for k, v in C.items()}      # windows s..e, every e
    with np.errstate(all="ignore"):
        stt = g["tt"] - g["t"] ** 2 / g["w"]
        b_model = (g["tf"] - g["t"] * g["f"] / g["w"]) / stt
        mse = sigma[:, None] ** 2 / stt + (b_model - slope_at_start[:, None]) ** 2
    first_ok = nth_usable(prep, s, min_points)
    allowed = (np.arange(M)[None, :] >= first_ok[:, None]) & (W > 0) & np.isfinite(mse)
    mse = np.where(allowed, mse, np.inf)
    return np.where(allowed.any(axis=1), np.argmin(mse, axis=1), prep.last)


def fixed(prep: Prepared, lo_t: float, hi_t: float) -> tuple[np.ndarray, np.ndarray]:
    """Start and end of a fixed window (lo_t..hi_t s on the file's clock); end -1 where no
    usable reading falls inside."""
    T = prep.grid.times
    inside = prep.usable & (T >= lo_t) & (T <= hi_t)
    has = inside.any(axis=1)
    M = T.shape[1]
    start = np.where(has, np.argmax(inside, axis=1), 0)
    return start, np.where(has, M - 1 - np.argmax(inside[:, ::-1], axis=1), -1)
