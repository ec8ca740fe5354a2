"""Initial rates of many traces in one vectorised pass, with the estimate chosen by evidence.

Each trace gets two estimates of its initial slope, and the reported one is chosen per trace:

* the **straight window**: a least-squares line from the first usable reading (or from three
  time constants into a lag, when the enzyme is 95 % active) to the last, or, where the trace
  is evidently curved, to the end that best trades its noise against its curvature bias
  (:mod:`rateabs.slopes.windows`);
* the **whole curve**: the initial slope of one family of progress curves, the integrated
  Michaelis–Menten equation (Schnell & Mendoza 1997) with an exponential limit and an optional
  first-order lag (:mod:`rateabs.slopes.curves`), fitted to every trace at once.

Under ``estimator="auto"`` the whole curve is reported when the window's slope differs from it
by more than two SEs of the difference (the window carries curvature bias: substrate depletion,
product inhibition, enzyme loss) and the trace moves; otherwise the window, whose SE then also
counts that difference (:mod:`rateabs.slopes.choice`). Noise comes from second differences;
single-reading spikes are set aside first (:mod:`rateabs.slopes.prepare`). ``Windows.method``
and ``Windows.choice`` say which estimate each trace reports and why; ``Windows.flags`` say
where the number may still be wrong (:data:`TRACE_FLAGS`).
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from enum import IntEnum
from functools import partial

import numpy as np

from ..errors import UsageError
from ..parallel import in_lanes, lanes
from ..traces import Grid
from . import windows as wn
from .choice import choose
from .curves import Curves, fit_curves, merge, progress, slope_at
from .flags import TRACE_FLAGS, flag_words, noisy, trace_marks
from .prepare import (
    Clock,
    Prepared,
    noise_sigma,
    outliers,
    plate_clock,
    prepare,
    quiet_numpy,
    row_chunks,
    sub_grid,
)

__all__ = ["TRACE_FLAGS", "WindowEnd", "Windows", "find_windows", "noise_sigma", "quiet_numpy",
           "rate_curve", "window_min_points"]

ESTIMATORS = ("auto", "window", "curve")


class WindowEnd(IntEnum):
    """Why a trace's window ends (``Windows.end_reason``); :attr:`text` says it in words."""

    END_OF_READ = 0
    UNUSABLE_FOLLOW = 1
    SLOWS = 2
    SPEEDS_UP = 3
    FIXED = 4
    NO_WINDOW = 5

    @property
    def text(self) -> str:
        """The reason in words, as the output shows it."""
        return _END_TEXT[self]


_END_TEXT = {
    WindowEnd.END_OF_READ: "end of read",
    WindowEnd.UNUSABLE_FOLLOW: "unusable readings follow (overflow or past linear range)",
    WindowEnd.SLOWS: "curvature: the rate slows (substrate depletion, product inhibition or "
                     "enzyme decay)",
    WindowEnd.SPEEDS_UP: "curvature: the rate speeds up",
    WindowEnd.FIXED: "fixed window",
    WindowEnd.NO_WINDOW: "no window",
}


def window_min_points(n_times: int, min_points: int | None = None) -> int:
    """Fewest readings in a window: ``min_points`` when given, else 5 or a tenth of the readings,
    whichever is more (the one home of this rule)."""
    return int(min_points) if min_points else max(5, n_times // 10)


def rate_curve(t, c, v0, k):
    """y = c + v0 (1 - exp(-k t)) / k, with the straight line as the k -> 0 limit (the
    exponential member of :func:`rateabs.slopes.curves.progress`)."""
    return progress(np.asarray(t, float), c, v0, k, 0.0, 0.0)


@dataclass(frozen=True)
class Windows:
    """Per-trace results (arrays of length n_traces); slopes in signal units per s.

    ``slope``/``slope_se``: the reported initial slope and its SE (``method`` says which
    estimate: "window", "curve" or "none"; ``choice`` says why). ``window_slope``/
    ``window_slope_se``: the straight window's slope and its regression SE, over readings
    ``start``..``end`` (times ``t_start``..``t_end``, ``n`` readings, ``r2``; ``intercept`` is
    the window line's value at time zero of the file). ``curve_slope``/``curve_slope_se``: the
    whole curve's initial slope; ``curve_model`` its member ("exp", "mm", "lag"), and
    ``curve_params`` (c, v, k, rho, L) its parameters relative to the trace's first usable
    reading (:meth:`curve_values` evaluates it). ``lag_s``: the lag time where a lag was fitted.
    ``sigma``: noise SD; ``spikes``: readings set aside as spikes; ``flags``: trace flags
    (:data:`TRACE_FLAGS`).
    """

    names: list
    start: np.ndarray
    end: np.ndarray
    slope: np.ndarray
    slope_se: np.ndarray
    intercept: np.ndarray
    n: np.ndarray
    r2: np.ndarray
    t_start: np.ndarray
    t_end: np.ndarray
    lag_s: np.ndarray
    end_reason: np.ndarray
    sigma: np.ndarray
    curve_slope: np.ndarray
    curve_slope_se: np.ndarray
    curve_params: np.ndarray
    method: np.ndarray
    window_slope: np.ndarray
    window_slope_se: np.ndarray
    choice: np.ndarray
    flags: list
    curve_model: np.ndarray
    spikes: np.ndarray
    t_first: np.ndarray
    y_first: np.ndarray

    def curve_values(self, i, t) -> np.ndarray:
        """The whole curve of trace ``i`` at times ``t`` (s on the file's clock); NaN without
        a curve. ``i`` may be an array of traces, with a row of times in ``t`` for each."""
        t = np.asarray(t, float)
        if np.ndim(i):
            p = self.curve_params[i].T[..., None]           # each parameter as a column
            with np.errstate(all="ignore"):
                y = self.y_first[i][:, None] + progress(t - self.t_first[i][:, None], *p)
            return np.where(np.isfinite(self.curve_params[i]).all(axis=1)[:, None], y, np.nan)
        p = self.curve_params[i]
        if not np.all(np.isfinite(p)):
            return np.full(t.shape, np.nan)
        return self.y_first[i] + progress(t - self.t_first[i], *p)


def find_windows(grid: Grid, *, window="auto", min_points: int | None = None,
                 noise_floor: float = 1e-4, curve: bool = True, estimator: str = "auto",
                 noisy_limit: float = 0.10) -> Windows:
    """Initial slope of every trace at once, chosen by evidence (module docstring).

    ``window`` is ``"auto"`` or a (start_s, end_s) pair applied to every trace (the window's
    slope is then reported unless ``estimator="curve"``). ``estimator`` is ``"auto"``,
    ``"window"`` or ``"curve"``. ``curve=False`` skips the whole-curve estimate (the window is
    then reported, its SE without the curvature term). ``noisy_limit`` is the relative SE above
    which a rate is flagged ``noisy``.

    The traces are worked on in chunks of rows (:data:`prepare.CHUNK_READINGS`) so that memory
    stays in proportion to the data; what spans traces is computed over all of them first (the
    columns' times and the span, again after readings far off their curves are set aside) or
    last (the ``noisy`` flag), so the chunks never change a result.
    """
    if estimator not in ESTIMATORS:
        raise UsageError(f"unknown estimator {estimator!r}", f"use one of {', '.join(ESTIMATORS)}")
    if estimator == "curve" and not curve:
        raise UsageError("the curve estimator needs the whole-curve fit", "drop --no-curve")
    N, M = grid.values.shape
    opts = _Options(window, window_min_points(M, min_points), noise_floor, curve, estimator)
    clock = plate_clock(grid, noise_floor)
    chunks = _lane_chunks(N, M)
    bad = np.zeros((N, M), dtype=bool)
    parts = []
    for rows, (part, off) in zip(chunks, in_lanes(
            [partial(_chunk, sub_grid(grid, rows), opts, clock) for rows in chunks]), strict=True):
        bad[rows] = off
        parts.append(part)
    if bad.any():
        # readings far off their curves are set aside, and the traces that had them fitted
        # again, on the columns' times without those readings
        again = plate_clock(grid, noise_floor, bad)
        same = again.span == clock.span and np.array_equal(again.times, clock.times)
        redo = [i for i, rows in enumerate(chunks) if not same or bad[rows].any()]
        for i, (part, _) in zip(redo, in_lanes([partial(_chunk, sub_grid(grid, chunks[i]), opts,
                                                        clock, again) for i in redo]), strict=True):
            parts[i] = part
    win = _concat(parts)
    loud = noisy(win.slope, win.slope_se, win.sigma, noisy_limit)
    return replace(win, flags=flag_words(np.column_stack([win.flags, loud])))


#: Fewest traces worth splitting over lanes (forked processes, :func:`rateabs.parallel.lanes`):
#: a fork costs a few milliseconds, a 384-well plate's fit a few tenths of a second.
LANE_MIN_TRACES = 256


def _lane_chunks(n_traces: int, n_times: int) -> list[slice]:
    """The chunks of rows to work on (:func:`rateabs.slopes.prepare.row_chunks`), split further
    so that each lane the command may use (:func:`rateabs.parallel.lanes`) gets one where there
    are enough traces. Chunks never change a result (:func:`find_windows`), so neither does
    this."""
    chunks = row_chunks(n_traces, n_times)
    n = lanes()
    if n < 2 or n_traces < LANE_MIN_TRACES or len(chunks) >= n:
        return chunks
    edges = np.linspace(0, n_traces, n + 1).round().astype(int)
    return [slice(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:], strict=True)]


@dataclass(frozen=True)
class _Options:
    """The settings of one :func:`find_windows` call, as each chunk of traces uses them."""

    window: object
    min_points: int
    noise_floor: float
    curve: bool
    estimator: str


def _chunk(grid: Grid, opts: _Options, clock: Clock, again: Clock | None = None):
    """The :class:`Windows` of some traces (``flags`` still the marks of
    :func:`rateabs.slopes.flags.trace_marks`) and the readings found far off their curves;
    ``again``: the clock with those set aside, for the second pass."""
    prep, curves, bad = _fit_stage(grid, opts.noise_floor, opts.curve, clock, again)
    window, curve, mp = opts.window, opts.curve, opts.min_points
    win = _window_stage(prep, curves, window, mp)
    # a curve that speeds up is no initial rate (see curves._lags): never reported
    eligible = ~((curves.member == "exp") & (curves.params[:, 2] < 0))
    # where the curve speeds up, its slope at the last reading (choice.choose counts it)
    t_last = prep.Tc[np.arange(prep.W.shape[0]), prep.last]
    late = np.where(eligible, np.nan, slope_at(curves.params, t_last)) if curve else None
    # a fixed window is reported unless the curve is asked for (docstring)
    est = "window" if not curve or (window != "auto" and opts.estimator == "auto") \
        else opts.estimator
    method, slope, se, why = choose(est, win.line.b, win.line.se, win.weights, curves,
                                    eligible & curve, late)
    if window != "auto":
        se = np.where(method == "window", win.line.se, se)
        why = np.where(method == "window", "window: fixed window", why)
        why = np.where((method == "none") & (win.end < 0), "no rate: no readings in the window",
                       why)
    marks = trace_marks(prep, curves, win, method, (slope, se), mp, fixed=window != "auto")
    return _assemble(prep, curves, win, method, slope, se, why, marks, curve), bad


def _concat(parts: list[Windows]) -> Windows:
    """One :class:`Windows` from those of consecutive chunks of traces."""
    if len(parts) == 1:
        return parts[0]
    out = {}
    for f in fields(Windows):
        vals = [getattr(p, f.name) for p in parts]
        out[f.name] = sum(vals, []) if isinstance(vals[0], list) else np.concatenate(vals)
    return Windows(**out)


def _fit_stage(grid: Grid, noise_floor: float, rich: bool, clock: Clock,
               again: Clock | None) -> tuple[Prepared, Curves, np.ndarray]:
    """The prepared readings, the whole curves (the exponential alone without ``rich``) and
    the readings far off a trace's curve; with ``again`` (the second pass) those readings are
    set aside as spikes and the traces that had them fitted again."""
    prep = prepare(grid, noise_floor, clock=clock)
    curves = fit_curves(prep, rich=rich)
    bad = outliers(prep, curves.fitted, prep.sigma)
    if again is None:
        return prep, curves, bad
    prep = prepare(grid, noise_floor, prep.spikes | bad, clock=again)
    rows = np.nonzero(bad.any(axis=1))[0]
    if rows.size:
        curves = merge(curves, fit_curves(_rows(prep, rows), rich=rich), rows)
    return prep, curves, bad


@dataclass(frozen=True)
class _Window:
    """The window stage's result: start/end indices, reason, its line and slope weights."""

    start: np.ndarray
    end: np.ndarray
    reason: np.ndarray
    line: wn.Line
    weights: np.ndarray
    lag: np.ndarray


def _window_stage(prep: Prepared, curves: Curves, window, mp: int) -> _Window:
    """Where each straight window starts and ends (module docstring), and its line."""
    N = prep.W.shape[0]
    C = wn.cumulative(prep.Tc, prep.Yc, prep.W)
    lag = np.where(np.char.startswith(curves.member, "lag"), curves.params[:, 4], 0.0)
    if window != "auto":
        lo_t, hi_t = window
        if not hi_t > lo_t:
            raise UsageError(f"window end {hi_t} s is not after its start {lo_t} s",
                             "give --window START-END in seconds, e.g. 30-300")
        start, end = wn.fixed(prep, lo_t, hi_t)
        reason = np.where(end >= 0, WindowEnd.FIXED, WindowEnd.NO_WINDOW)
    else:
        start = _start_after_lag(prep, lag, mp)
        end = _end(prep, curves, start, mp)
        reason = _end_reason(prep, curves, start, end)
    ln = wn.line(C, start, np.maximum(end, start))
    has = (end >= start) & (ln.n >= (3 if window != "auto" else max(mp, 3)))
    end = np.where(has, end, -1)
    ln = wn.Line(*(np.where(has, x, np.nan) for x in (ln.n, ln.a, ln.b, ln.se, ln.sse, ln.r2)))
    reason = np.where(has, reason, WindowEnd.NO_WINDOW)
    weights = wn.weights(prep, start, end) if N else np.zeros_like(prep.W)
    return _Window(start, end, reason, ln, weights, lag)


def _start_after_lag(prep: Prepared, lag, mp: int) -> np.ndarray:
    """The first usable reading three lag time constants in (95 % active), leaving ``mp``
    readings for the window where the trace has them; the first usable reading without a lag."""
    M = prep.W.shape[1]
    late = prep.usable & (prep.Tc >= 3 * lag[:, None])
    start = np.where(late.any(axis=1), np.argmax(late, axis=1), prep.last)
    room = wn.nth_usable(prep, prep.first, np.maximum(prep.n_use - mp + 1, 1))
    start = np.where(lag > 0, np.minimum(start, room), prep.first)
    return np.clip(start, 0, M - 1)


def _end(prep: Prepared, curves: Curves, start, mp: int) -> np.ndarray:
    """The window's last reading: the trace's last, unless it evidently slows."""
    with np.errstate(all="ignore"):
        curved = curves.evidently_curved & (curves.params[:, 2] > 0)
    end = prep.last.copy()
    if curved.any():
        rows = np.nonzero(curved)[0]
        ts = prep.Tc[rows, start[rows]]
        slope0 = slope_at(curves.params[rows], ts)
        sub = _rows(prep, rows)
        end[rows] = wn.best_end(sub, start[rows], mp, curves.fitted[rows], slope0,
                                curves.sigma[rows])
    return end


def _rows(prep: Prepared, rows) -> Prepared:
    """The prepared readings of some traces."""
    pick = {k: getattr(prep, k)[rows] for k in ("Tc", "Yc", "W", "usable", "first", "last",
                                                "t0", "y0", "sigma", "spikes")}
    return Prepared(prep.grid, span=prep.span, times=prep.times, **pick)


def _end_reason(prep: Prepared, curves: Curves, start, end) -> np.ndarray:
    """Why each window ends where it does."""
    M = prep.W.shape[1]
    after = np.arange(M)[None, :] > end[:, None]
    masked_after = (~prep.grid.usable & after & np.isfinite(prep.grid.times)).any(axis=1)
    k = curves.params[:, 2]
    return np.where(end >= prep.last, np.where(masked_after, WindowEnd.UNUSABLE_FOLLOW,
                                               WindowEnd.END_OF_READ),
                    np.where(k < 0, WindowEnd.SPEEDS_UP, WindowEnd.SLOWS))


def _assemble(prep: Prepared, curves: Curves, win: _Window, method, slope, se, why, flags,
              curve: bool) -> Windows:
    """The :class:`Windows` of the traces."""
    T = prep.grid.times
    M = T.shape[1]
    rows = np.arange(T.shape[0])
    has = win.end >= 0
    t_start = np.where(has, T[rows, np.clip(win.start, 0, M - 1)], np.nan)
    t_end = np.where(has, T[rows, np.clip(win.end, 0, M - 1)], np.nan)
    b = win.line.b
    intercept = win.line.a + prep.y0 - b * prep.t0
    keep = curve & np.isfinite(curves.v)
    cs = np.where(keep, curves.v, np.nan)
    cse = np.where(keep, curves.se, np.nan)
    cp = np.where(keep[:, None], curves.params, np.nan)
    return Windows(list(prep.grid.names), np.where(has, win.start, 0), win.end, slope, se,
                   intercept, win.line.n, win.line.r2, t_start, t_end, win.lag, win.reason,
                   prep.sigma, cs, cse, cp, method, b, win.line.se, why, flags,
                   np.where(keep, curves.member, ""), prep.spikes.sum(axis=1), prep.t0, prep.y0)
