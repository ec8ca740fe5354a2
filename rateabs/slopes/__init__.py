"""Initial rates: the longest early straight stretch of every trace, in one vectorised pass.

For each trace the automatic window is the longest stretch, starting as early as the data allow,
that a straight line describes within the trace's own noise:

* the noise sigma of each trace comes from its second differences (robust to a smooth trend);
* for each candidate start (the first reading, or later ones to skip a lag phase), the window
  grows until the residual sum of squares of the line exceeds the chi-square bound
  (``alpha`` = 0.001) for that many points: there curvature begins;
* among the candidate starts, the earliest whose slope is within 2 SE of the steepest is taken
  (after a lag the steady-state slope is the steepest; with depletion the first one is).

Window sums come from cumulative sums over the traces x times array, so a plate costs a few array
passes per candidate start, never a Python loop over wells. A whole-curve estimate
(y = c + v0 (1 - exp(-k t)) / k, slope v0 at the window start, fitted by the batched solver)
backs up traces with no straight stretch and is compared with the window slope everywhere.
"""

from __future__ import annotations

import math
import warnings
from contextlib import contextmanager
from dataclasses import dataclass
from enum import IntEnum

import numpy as np
from scipy import stats

from ..errors import UsageError
from ..fitting import batch_lm
from ..traces import Grid


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
    """y = c + v0 (1 - exp(-k t)) / k, with the straight line as the k -> 0 limit."""
    kt = k * t
    small = np.abs(kt) < 1e-8
    with np.errstate(all="ignore"):
        frac = np.where(small, t * (1 - kt / 2), -np.expm1(-kt) / np.where(k == 0, 1.0, k))
    return c + v0 * frac


def _curve_jac(t, c, v0, k):
    """Partial derivatives of :func:`rate_curve` with respect to (c, v0, k); shape (B, n, 3)."""
    kt = k * t
    small = np.abs(kt) < 1e-6
    kk = np.where(k == 0, 1.0, k)
    with np.errstate(all="ignore"):
        e = np.exp(-kt)
        frac = np.where(small, t * (1 - kt / 2), -np.expm1(-kt) / kk)
        dfrac = np.where(small, -t * t / 2 + k * t**3 / 3, (t * e - frac) / kk)
    frac, dfrac = np.broadcast_arrays(frac, dfrac)
    return np.stack([np.ones_like(frac), frac, v0 * dfrac], axis=-1)


@dataclass(frozen=True)
class Windows:
    """Per-trace window results (arrays of length n_traces); slopes in signal units per s."""

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


def _sums(T, Y, W):
    z = np.zeros((T.shape[0], 1))
    T2 = T * T
    return {k: np.concatenate([z, np.cumsum(v, axis=1)], axis=1)
            for k, v in (("w", W), ("t", W * T), ("y", W * Y), ("tt", W * T2),
                         ("ty", W * T * Y), ("yy", W * Y * Y), ("t3", W * T2 * T),
                         ("t4", W * T2 * T2), ("tty", W * T2 * Y))}


def _window_sums(C, s, e):
    """Sums over readings s..e (inclusive) from cumulative sums, shape (N, E) or (N, 1).

    ``s`` is one start for all traces with an array of ends ``e`` (or, as a speed-up, ``e`` may
    be a dict of the cumulative sums already taken at the ends), or one start and one end per
    trace.
    """
    if isinstance(e, dict):
        return {k: e[k] - C[k][:, [s]] for k in e}
    if np.ndim(s) == 0:
        return {k: v[:, e + 1] - v[:, [s]] for k, v in C.items()}
    rows = np.arange(len(s))
    return {k: (v[rows, np.asarray(e) + 1] - v[rows, s])[:, None] for k, v in C.items()}


def _quadratic(C, s, e, sigma, scale):
    """Quadratic fit of windows s..e from cumulative sums, the noise sigma known.

    ``s`` is one start for all traces (with ``e`` an array of ends) or one start per trace
    (with ``e`` one end per trace). Returns (t statistic of the quadratic term, its coefficient
    c, the slope b at the window's mean time and that mean time, all in unscaled time units).
    Moments are about the window's mean time; time is divided by ``scale`` for conditioning.
    """
    g = _window_sums(C, s, e)
    n = g["w"]
    sc = scale[:, None]
    with np.errstate(all="ignore"):
        t1, t2, t3, t4 = (g["t"] / n / sc, g["tt"] / n / sc**2, g["t3"] / n / sc**3,
                          g["t4"] / n / sc**4)
        ym, ty, tty = g["y"] / n, g["ty"] / n / sc, g["tty"] / n / sc**2
        m2 = t2 - t1 * t1
        m3 = t3 - 3 * t1 * t2 + 2 * t1**3
        m4 = t4 - 4 * t1 * t3 + 6 * t1 * t1 * t2 - 3 * t1**4
        c1 = ty - t1 * ym
        c2 = tty - 2 * t1 * ty + t1 * t1 * ym - m2 * ym
        det = m2 * (m4 - m2 * m2) - m3 * m3
        c = (m2 * c2 - m3 * c1) / det
        b = ((m4 - m2 * m2) * c1 - m3 * c2) / det
        var_c = sigma[:, None] ** 2 / n * m2 / det
        tq = c / np.sqrt(var_c)
    return np.where(np.isfinite(tq), tq, 0.0), c / sc**2, b / sc, t1 * sc


def _line(C, s, e):
    """Least-squares line over readings s..e (inclusive) from cumulative sums; arrays (N, E).

    ``s`` is one start for all traces with an array of ends, or one start and end per trace.
    """
    g = _window_sums(C, s, e)
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
    return n, a, b, se, sse, r2


def noise_sigma(grid: Grid, floor: float = 1e-4) -> np.ndarray:
    """Per-trace noise SD from second differences: 1.4826 MAD(d2) / sqrt(6), at least ``floor``."""
    Y, U = grid.values, grid.usable
    d2 = Y[:, 2:] - 2 * Y[:, 1:-1] + Y[:, :-2]
    ok = U[:, 2:] & U[:, 1:-1] & U[:, :-2]
    d2 = np.where(ok, d2, np.nan)
    with np.errstate(all="ignore"), quiet_numpy():
        med = np.nanmedian(d2, axis=1, keepdims=True)
        dev = np.abs(d2 - med)
        mad = 1.4826 * np.nanmedian(dev, axis=1, keepdims=True)
        # efficient and robust: RMS of the second differences within 3.5 robust SDs
        keep = dev <= 3.5 * mad
        rms = np.sqrt(np.nansum(np.where(keep, dev**2, 0), axis=1)
                      / np.maximum(np.sum(keep & np.isfinite(dev), axis=1), 1))
    sig = rms / math.sqrt(6) / 0.9865          # 0.9865: RMS of a normal truncated at 3.5 SD
    return np.where(np.isfinite(sig), np.maximum(sig, floor), floor)


@contextmanager
def quiet_numpy():
    """Silence numpy's RuntimeWarnings (all-NaN slices of padded traces are expected here)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        yield


def find_windows(grid: Grid, *, window="auto", min_points: int | None = None,
                 alpha: float = 0.001, max_lag_fraction: float = 0.4,
                 noise_floor: float = 1e-4, curve: bool = True,
                 curvature_z: float = 3.5) -> Windows:
    """Find every trace's window and slope at once (see the module docstring).

    ``window`` is ``"auto"`` or a (start_s, end_s) pair applied to every trace.
    """
    T, Y, U = grid.times, grid.values, grid.usable
    N, M = Y.shape
    W = U.astype(float)
    first = np.argmax(U, axis=1)
    t0 = np.take_along_axis(np.nan_to_num(T), first[:, None], axis=1)
    y0 = np.take_along_axis(np.nan_to_num(Y), first[:, None], axis=1)
    Tc = np.where(U, T - t0, 0.0)
    Yc = np.where(U, Y - y0, 0.0)
    C = _sums(Tc, Yc, W)
    n_use = U.sum(axis=1)
    sigma = noise_sigma(grid, noise_floor)
    span = np.maximum(np.max(Tc, axis=1), 1e-12)
    mp = window_min_points(M, min_points)
    out = {k: np.full(N, np.nan) for k in ("slope", "se", "a", "n", "r2")}
    start = np.zeros(N, dtype=int)
    end = np.full(N, -1, dtype=int)
    reason = np.full(N, WindowEnd.NO_WINDOW, dtype=int)

    if window != "auto":
        lo_t, hi_t = window
        if not hi_t > lo_t:
            raise UsageError(f"window end {hi_t} s is not after its start {lo_t} s",
                             "give --window START-END in seconds, e.g. 30-300")
        inside = U & (T >= lo_t) & (T <= hi_t)
        C2 = _sums(Tc, Yc, inside.astype(float))
        n, a, b, se, sse, r2 = _line(C2, 0, np.array([M - 1]))
        for k, v in (("slope", b), ("se", se), ("a", a), ("n", n), ("r2", r2)):
            out[k] = v[:, 0]
        has = inside.any(axis=1)
        start = np.where(has, np.argmax(inside, axis=1), 0)
        end = np.where(has, M - 1 - np.argmax(inside[:, ::-1], axis=1), -1)
        reason[:] = WindowEnd.FIXED
    else:
        lim = int(max_lag_fraction * M)
        step = max(1, math.ceil((lim + 1) / 16))
        starts = list(range(0, lim + 1, step))
        cand = {k: np.full((len(starts), N), np.nan) for k in ("b", "se", "a", "n", "r2")}
        cand_end = np.full((len(starts), N), -1, dtype=int)
        e_idx = np.arange(0, M, max(1, M // 80))       # ends tested: at most ~80 per start
        if e_idx[-1] != M - 1:
            e_idx = np.append(e_idx, M - 1)
        chi = stats.chi2.ppf(1 - alpha, np.maximum(np.arange(M + 1) - 2, 1))
        c_end = {k: v[:, e_idx + 1] for k, v in C.items()}       # taken once for every start
        for si, s in enumerate(starts):
            n, a, b, se, sse, r2 = _line(C, s, c_end)
            valid = (e_idx[None, :] >= s) & (n >= mp)
            tq = _quadratic(C, s, c_end, sigma, span)[0]
            fail = valid & ((sse / sigma[:, None] ** 2 > chi[np.minimum(n, M).astype(int)])
                            | (np.abs(tq) > curvature_z))
            # a window ends just before the first failing one; windows beyond it are not used
            # a failure counts when the next window fails too (one noisy reading is no bend)
            fail = fail & np.concatenate([fail[:, 1:], fail[:, -1:]], axis=1)
            n_e = e_idx.size
            ff = np.where(fail.any(axis=1), np.argmax(fail, axis=1), n_e)   # positions in e_idx
            lp = np.clip(ff - 1, 0, n_e - 1)
            rows = np.arange(N)
            ok = (ff >= 1) & valid[rows, lp] & (s < n_use)
            for k, v in (("b", b), ("se", se), ("a", a), ("n", n), ("r2", r2)):
                cand[k][si] = np.where(ok, v[rows, lp], np.nan)
            cand_end[si] = np.where(ok, e_idx[lp], -1)
        absb = np.abs(cand["b"])
        has = np.isfinite(absb).any(axis=0)
        best = np.where(has, np.nanargmax(np.where(np.isfinite(absb), absb, -1), axis=0), 0)
        rows = np.arange(N)
        thresh = absb[best, rows] - 2 * cand["se"][best, rows]
        good = np.isfinite(absb) & (absb >= thresh[None, :])
        pick = np.where(has, np.argmax(good, axis=0), 0)
        for k, key in (("slope", "b"), ("se", "se"), ("a", "a"), ("n", "n"), ("r2", "r2")):
            out[k] = np.where(has, cand[key][pick, rows], np.nan)
        start = np.where(has, np.asarray(starts)[pick], 0)
        end = np.where(has, cand_end[pick, rows], -1)
        # limit the curvature bias: where the window still bends (|t| > 2), shorten it so that
        # its mean slope stays within 10 % of the slope at its start
        ok_w = end >= start + 1
        tq, cq, bq, tm = _quadratic(C, start, np.maximum(end, start + 1), sigma, span)
        tq, cq, bq, tm = tq[:, 0], cq[:, 0], bq[:, 0], tm[:, 0]
        ts_c = np.take_along_axis(Tc, start[:, None], 1)[:, 0]
        b_start = bq + 2 * cq * (ts_c - tm)
        with np.errstate(all="ignore"):
            l_max = 0.1 * np.abs(b_start) / np.abs(cq)
        t_end_c = np.take_along_axis(Tc, np.clip(end, 0, M - 1)[:, None], 1)[:, 0]
        last_u = M - 1 - np.argmax(U[:, ::-1], axis=1)
        slows = np.sign(cq) == -np.sign(b_start)
        bend = has & ok_w & (end < last_u) & slows & (np.abs(tq) > 3) & (t_end_c - ts_c > l_max)
        if bend.any():
            limit = ts_c + l_max
            within = U & (Tc <= limit[:, None]) & (np.arange(M)[None, :] >= start[:, None])
            new_end = M - 1 - np.argmax(within[:, ::-1], axis=1)
            nth = np.cumsum(U & (np.arange(M)[None, :] >= start[:, None]), axis=1)
            min_end = np.argmax(nth >= mp, axis=1)
            new_end = np.maximum(new_end, min_end)
            end = np.where(bend, np.minimum(new_end, end), end)
            n1, a1, b1, se1, _, r21 = _line(C, start, end)
            for k, v in (("n", n1), ("a", a1), ("slope", b1), ("se", se1), ("r2", r21)):
                out[k] = np.where(bend, v[:, 0], out[k])
        # why the window ends
        last_usable = last_u
        after = np.arange(M)[None, :] > end[:, None]
        usable_after = (U & after).any(axis=1)
        masked_after = (~U & after & np.isfinite(T)).any(axis=1)
        # the bend's direction: the quadratic term from the window start to the last reading
        ext = np.maximum(last_usable, start + 2)
        _, c_ext, b_ext, tm_ext = (a[:, 0] for a in _quadratic(C, start, ext, sigma, span))
        # starting values for the whole-curve fit: slope and curvature at the window start
        ts_c = np.take_along_axis(Tc, start[:, None], 1)[:, 0]
        v_start = b_ext + 2 * c_ext * (ts_c - tm_ext)
        with np.errstate(all="ignore"):
            k_start = -2 * c_ext / v_start
        slowing = np.sign(c_ext) == -np.sign(out["slope"])
        reason = np.where(~has, WindowEnd.NO_WINDOW, np.where(
            end >= last_usable, WindowEnd.END_OF_READ,
            np.where(~usable_after & masked_after, WindowEnd.UNUSABLE_FOLLOW,
                     np.where(slowing, WindowEnd.SLOWS, WindowEnd.SPEEDS_UP))))
    t_start = np.take_along_axis(T, np.clip(start, 0, M - 1)[:, None], 1)[:, 0]
    t_end = np.take_along_axis(T, np.clip(end, 0, M - 1)[:, None], 1)[:, 0]
    t_first = t0[:, 0]
    lag = np.where(start > first, t_start - t_first, 0.0)
    t_start = np.where(end >= 0, t_start, np.nan)
    t_end = np.where(end >= 0, t_end, np.nan)

    cs = np.full(N, np.nan)
    cse = np.full(N, np.nan)
    cp = np.full((N, 3), np.nan)
    if curve:
        guess = (v_start, k_start) if window == "auto" else (out["slope"], None)
        cs, cse, cp = _whole_curve(Tc, Yc, U, start, *guess)
    method = np.where(np.isfinite(out["slope"]), "window", np.where(np.isfinite(cs), "curve",
                                                                     "none"))
    return Windows(list(grid.names), start, end, out["slope"], out["se"], out["a"] + y0[:, 0]
                   - out["slope"] * t0[:, 0], out["n"], out["r2"], t_start, t_end, lag, reason,
                   sigma, cs, cse, cp, method)


def _whole_curve(Tc, Yc, U, start, slope, k_guess=None):
    """Vectorised fit of c + v0 (1 - exp(-k tau)) / k from each trace's window start onwards.

    ``slope`` and ``k_guess`` (from the quadratic over the same readings) start the solver near
    the answer, which saves most of its iterations.
    """
    N, M = Yc.shape
    ts = np.take_along_axis(Tc, np.clip(start, 0, M - 1)[:, None], 1)
    tau = np.where(U, Tc - ts, 0.0)
    w = (U & (np.arange(M)[None, :] >= start[:, None]) & (tau >= 0)).astype(float)
    enough = w.sum(axis=1) >= 5
    span = np.maximum(np.max(np.where(w > 0, tau, 0), axis=1), 1e-9)
    ys = np.take_along_axis(Yc, np.clip(start, 0, M - 1)[:, None], 1)[:, 0]
    with quiet_numpy():
        rise = np.nanmax(np.where(w > 0, Yc, np.nan), axis=1) - np.nanmin(
            np.where(w > 0, Yc, np.nan), axis=1)
    v_guess = np.where(np.isfinite(slope), slope, np.nan_to_num(rise) / span)
    lo = [-np.inf, -np.inf, -2.0 / float(np.max(span))]
    hi = [np.inf, np.inf, 20.0 / float(np.min(span))]
    k0 = np.full(N, np.nan) if k_guess is None else np.asarray(k_guess, float)
    k0 = np.where(np.isfinite(k0), np.clip(k0, 0.9 * lo[2], 0.9 * hi[2]), 0.5 / span)
    p0 = np.column_stack([ys, v_guess, k0])
    rows = np.nonzero(enough)[0]
    cs = np.full(N, np.nan)
    cse = np.full(N, np.nan)
    cp = np.full((N, 3), np.nan)
    if rows.size == 0:
        return cs, cse, cp
    with quiet_numpy():
        r = batch_lm(rate_curve, tau[rows], np.where(w[rows] > 0, Yc[rows], 0.0), w[rows],
                     p0[rows], lower=lo, upper=hi, max_iter=100, want_cov=True, xtol=1e-7,
                     ftol=1e-9,
                     jac=_curve_jac)
    se_v0 = np.sqrt(np.maximum(r.cov[:, 1, 1], 0))
    # an initial slope the curve does not determine (flat or very noisy trace) is not reported
    okr = r.converged & np.all(np.isfinite(r.params), axis=1) & (se_v0 < 0.5 * np.abs(r.params[:, 1]))
    cs[rows] = np.where(okr, r.params[:, 1], np.nan)
    cse[rows] = np.where(okr, se_v0, np.nan)
    cp[rows] = np.where(okr[:, None], r.params, np.nan)
    return cs, cse, cp
