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
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
from scipy import stats

from .errors import InputError, UsageError
from .fitting import batch_lm
from .photometry import DEFAULT_LINEAR_LIMIT
from .traces import Grid, TraceSet

#: Per-trace flags: short words of our own, documented in docs/formats.md.
FLAGS = {
    "lag": "the window starts after a lag phase",
    "curved": "curvature ends the straight stretch before the end of the read",
    "no-linear": "no straight stretch was found; the whole-curve estimate is reported",
    "few-points": "too few usable readings for a rate",
    "past-linear": "readings above the linear absorbance limit were masked",
    "overflow": "the instrument marked readings as over range; they were masked",
    "noisy": "the slope's relative standard error is above the threshold",
    "over-10pct": "more than 10 % of the substrate was used within the window",
    "blank-drift": "a blank well changes significantly over the read",
    "disagree": "window slope and whole-curve initial slope disagree",
    "reversed": "the signal moves opposite to the plate's assay direction",
    "outlier": "the well is an outlier among its replicates (Grubbs test)",
}

END_REASONS = {0: "end of read", 1: "unusable readings follow (overflow or past linear range)",
               2: "curvature: the rate slows (substrate depletion, product inhibition or enzyme "
                  "decay)", 3: "curvature: the rate speeds up", 4: "fixed window", 5: "no window"}


def _curve(t, c, v0, k):
    """y = c + v0 (1 - exp(-k t)) / k, with the straight line as the k -> 0 limit."""
    kt = k * t
    small = np.abs(kt) < 1e-8
    with np.errstate(all="ignore"):
        frac = np.where(small, t * (1 - kt / 2), -np.expm1(-kt) / np.where(k == 0, 1.0, k))
    return c + v0 * frac


def _curve_jac(t, c, v0, k):
    """Partial derivatives of :func:`_curve` with respect to (c, v0, k); shape (B, n, 3)."""
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
    with np.errstate(all="ignore"), _quiet():
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
def _quiet():
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
    mp = int(min_points) if min_points else max(5, M // 10)
    out = {k: np.full(N, np.nan) for k in ("slope", "se", "a", "n", "r2")}
    start = np.zeros(N, dtype=int)
    end = np.full(N, -1, dtype=int)
    reason = np.full(N, 5, dtype=int)

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
        reason[:] = 4
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
        reason = np.where(~has, 5, np.where(end >= last_usable, 0,
                          np.where(~usable_after & masked_after, 1, np.where(slowing, 2, 3))))
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
    with _quiet():
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
    with _quiet():
        r = batch_lm(_curve, tau[rows], np.where(w[rows] > 0, Yc[rows], 0.0), w[rows],
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


# --------------------------------------------------------------------------- the plate


@dataclass(frozen=True)
class RateSettings:
    """What the user set for a rates analysis (all in base units)."""

    epsilon: float | None = None          # L mol^-1 cm^-1
    epsilon_se: float = 0.0
    pathlength_cm: float = 1.0
    total_volume_L: float | None = None
    sample_volume_L: float | None = None
    protein_mg_per_mL: float | None = None
    dilution: float = 1.0
    window: object = "auto"
    min_points: int | None = None
    blank: str = "auto"                   # auto, slope, trace, none
    direction: str = "auto"               # auto, up, down
    linear_limit: float = DEFAULT_LINEAR_LIMIT
    noisy_rel_se: float = 0.10
    katal: bool = False
    slope_from: str = "window"            # window, curve
    curve: bool = True                    # also fit the whole-curve estimate
    calibrate: str = "auto"               # auto (standards when no epsilon), standards, none


@dataclass
class RatesAnalysis:
    """Per-trace rates, replicate summaries, Z' and warnings of one plate."""

    table: pd.DataFrame
    replicates: pd.DataFrame
    zprime: dict | None
    windows: Windows
    traces: TraceSet
    settings: RateSettings
    warnings: list = field(default_factory=list)
    blank_info: dict = field(default_factory=dict)


def _blank_trace_subtract(ts: TraceSet, blanks: list[str]) -> TraceSet:
    """Subtract the time-matched mean of the blank traces from every trace."""
    g = ts.grid()
    idx = [g.names.index(b) for b in blanks]
    Bv = np.where(g.usable[idx], g.values[idx], np.nan)
    Bt = g.times[idx]
    with _quiet():
        mean_t = np.nanmean(Bt, axis=0)
        mean_b = np.nanmean(Bv, axis=0)
    okb = np.isfinite(mean_b)
    if okb.sum() < 2:
        raise InputError("the blank wells have fewer than two usable readings in common",
                         "check the blanks or use --blank slope")
    return ts.with_values(g.values - np.interp(g.times, mean_t[okb], mean_b[okb]))


def analyse_plate(ts: TraceSet, layout: pd.DataFrame | None = None,
                  settings: RateSettings | None = None) -> RatesAnalysis:
    """Initial rate, concentration rate and activity of every trace, with QC.

    ``ts`` holds absorbance traces; ``layout`` (from :func:`rateabs.layout.read_layout`) gives
    roles, concentrations, dilutions and replicate groups.
    """
    st = settings or RateSettings()
    warnings: list[str] = []
    ts = ts.mask_above(st.linear_limit)
    names = ts.names
    meta = pd.DataFrame(index=pd.Index(names, name="trace"))
    if layout is not None:
        meta = meta.join(layout, how="left")
        excl = meta["exclude"] if "exclude" in meta.columns else pd.Series(False, meta.index)
        excluded = list(meta.index[excl.fillna(False).astype(bool).to_numpy()])
        if excluded:
            ts = ts.select([n for n in names if n not in excluded])
            meta = meta.drop(index=excluded)
            names = ts.names
            warnings.append(f"{len(excluded)} well(s) excluded by the plate map")
    if "role" not in meta.columns:
        meta["role"] = "sample"
    meta["role"] = meta["role"].fillna("sample")
    for col, default in (("sample", ""), ("group", None), ("dilution", st.dilution),
                         ("substrate_M", np.nan), ("inhibitor_M", np.nan),
                         ("protein_mg_per_mL", np.nan), ("enzyme_M", np.nan)):
        if col not in meta.columns:
            meta[col] = default
    meta["group"] = meta["group"].where(meta["group"].notna(), pd.Series(meta.index,
                                                                         index=meta.index))
    meta["dilution"] = meta["dilution"].fillna(st.dilution)
    present = set(names)
    blanks = [n for n in meta.index[(meta["role"] == "blank").to_numpy()] if n in present]
    mode = st.blank
    if mode in ("slope", "trace") and not blanks:
        raise InputError("blank subtraction was asked for but the plate map marks no blank wells",
                         "mark blanks with role 'blank', or use --blank none",
                         file=(layout.attrs.get("source") if layout is not None else None))
    if mode == "auto":
        mode = "slope" if blanks else "none"
    blank_info = {"mode": mode, "wells": blanks}

    analysed = _blank_trace_subtract(ts, blanks) if mode == "trace" else ts
    g = analysed.grid()
    if st.slope_from == "curve" and not st.curve:
        raise UsageError("--slope-from curve needs the whole-curve fit", "drop --no-curve")
    win = find_windows(g, window=st.window, min_points=st.min_points, curve=st.curve)
    raw_g = ts.grid() if mode == "trace" else g
    raw_win = find_windows(raw_g, window=st.window, min_points=st.min_points, curve=False) if (
        mode == "trace") else win

    window_found = np.isfinite(win.slope)
    if st.slope_from == "curve":
        win = replace(win, method=np.where(np.isfinite(win.curve_slope), "curve", "none"))
    elif st.slope_from != "window":
        raise UsageError(f"unknown slope source {st.slope_from!r}", "use window or curve")
    slope = np.where(win.method == "curve", win.curve_slope, win.slope) * 60.0   # per min
    slope_se = np.where(win.method == "curve", win.curve_slope_se, win.slope_se) * 60.0
    raw_slope = raw_win.slope * 60.0
    is_blank = np.array([n in blanks for n in g.names])
    blank_slope = blank_se = np.nan
    if blanks:
        bs = raw_slope[is_blank]
        bs_ok = bs[np.isfinite(bs)]
        if bs_ok.size:
            blank_slope = float(np.mean(bs_ok))
            sem = float(np.std(bs_ok, ddof=1) / math.sqrt(bs_ok.size)) if bs_ok.size > 1 else 0.0
            prop = float(np.sqrt(np.nansum((raw_win.slope_se[is_blank] * 60) ** 2)) / bs_ok.size)
            blank_se = max(sem, prop)
        blank_info.update(slope_A_per_min=blank_slope, slope_A_per_min_se=blank_se)
    if mode == "slope" and np.isfinite(blank_slope):
        corr = ~is_blank
        slope = np.where(corr, slope - blank_slope, slope)
        slope_se = np.where(corr, np.hypot(slope_se, blank_se), slope_se)

    roles = meta.loc[g.names, "role"].to_numpy()
    sample_like = np.isin(roles, ["sample", "positive"])
    if st.direction == "auto":
        ref = slope[sample_like & np.isfinite(slope)]
        ref = ref if ref.size else slope[np.isfinite(slope)]
        direction = 1.0 if (ref.size == 0 or np.median(ref) >= 0) else -1.0
    else:
        direction = 1.0 if st.direction == "up" else -1.0
    blank_info["direction"] = "up" if direction > 0 else "down"

    # per-trace columns and flags, as whole arrays (no per-trace arithmetic in Python)
    m = meta.loc[g.names]
    n_use = g.usable.sum(axis=1)
    method = np.asarray(win.method).astype(str)
    cs, cse = win.curve_slope * 60, win.curve_slope_se * 60
    raw_b, raw_se = win.slope * 60, win.slope_se * 60
    not_ctrl = ~np.isin(roles, ["blank", "negative", "standard"])
    with np.errstate(all="ignore"):
        rel = slope_se / np.abs(slope)
        diff = np.abs(cs - raw_b)
        med = np.nanmedian(np.abs(slope[sample_like])) if sample_like.any() else np.nan
        blank_sig = np.abs(raw_slope) > 3 * raw_win.slope_se * 60
    masks = {
        "few-points": (method == "none") & (n_use < max(5, g.values.shape[1] // 10)),
        "no-linear": ((method == "none") & (n_use >= max(5, g.values.shape[1] // 10)))
                     | ((method == "curve") & ~window_found),
        "lag": win.lag_s > 0,
        "curved": np.isin(win.end_reason, [2, 3]),
        "noisy": np.isfinite(rel) & (rel > st.noisy_rel_se) & not_ctrl,
        "disagree": (method == "window") & not_ctrl & np.isfinite(cs) & np.isfinite(cse)
                    & (diff > 3 * np.hypot(cse, raw_se)) & (diff > 0.15 * np.abs(raw_b)),
        "blank-drift": (roles == "blank") & np.nan_to_num(blank_sig)
                       & (~np.isfinite(med) | (np.abs(raw_slope) > 0.05 * med)),
        "reversed": sample_like & np.isfinite(slope) & (slope * direction < 0)
                    & (np.abs(slope) > 3 * slope_se),
    }
    cols = {"trace": g.names, "role": roles, "sample": m["sample"].fillna("").to_numpy(),
            "group": m["group"].to_numpy(), "method": method,
            "slope_A_per_min": slope, "slope_A_per_min_se": slope_se,
            "slope_raw_A_per_min": np.where(method == "window", raw_b, cs),
            "window_start_s": win.t_start, "window_end_s": win.t_end,
            "n_points": np.nan_to_num(win.n).astype(int), "r2": win.r2, "lag_s": win.lag_s,
            "window_end_reason": [END_REASONS[int(r)] for r in win.end_reason],
            "curve_slope_A_per_min": cs, "curve_slope_A_per_min_se": cse, "noise_A": win.sigma,
            "substrate_uM": m["substrate_M"].to_numpy(float) * 1e6,
            "inhibitor_uM": m["inhibitor_M"].to_numpy(float) * 1e6,
            "enzyme_nM": m["enzyme_M"].to_numpy(float) * 1e9}
    eps, eps_se = st.epsilon, st.epsilon_se
    calib = standard_curve(ts, meta, st) if st.calibrate != "none" else None
    if calib is not None:
        eps, eps_se = calib["slope_A_per_M"] / st.pathlength_cm, calib["slope_se"] / st.pathlength_cm
        blank_info["calibration"] = calib
    if eps:
        factor = 1e6 / (eps * st.pathlength_cm)                 # A/min -> uM/min
        rate = direction * slope * factor
        rel_eps = eps_se / eps
        with np.errstate(all="ignore"):
            rate_se = np.where(slope != 0, np.abs(rate) * np.hypot(slope_se / slope, rel_eps),
                               slope_se * factor)
        cols["rate_uM_per_min"], cols["rate_uM_per_min_se"] = rate, rate_se
        s0 = cols["substrate_uM"]
        dur = (win.t_end - win.t_start) / 60.0
        with np.errstate(invalid="ignore"):
            masks["over-10pct"] = (roles == "sample") & (s0 > 0) & (np.abs(rate) * dur > 0.1 * s0)
        if st.total_volume_L and st.sample_volume_L:
            dil = m["dilution"].fillna(st.dilution).to_numpy(float)
            scale = np.where(roles != "blank", st.total_volume_L / (st.sample_volume_L * 1e3) * dil,
                             np.nan)
            cols["activity_U_per_mL"], cols["activity_U_per_mL_se"] = rate * scale, rate_se * scale
            if st.katal:
                cols["activity_nkat_per_mL"] = rate * scale * 1e3 / 60
                cols["activity_nkat_per_mL_se"] = rate_se * scale * 1e3 / 60
            prot = m["protein_mg_per_mL"].to_numpy(float)
            if st.protein_mg_per_mL:
                prot = np.where(np.isfinite(prot), prot, st.protein_mg_per_mL)
            if np.any(np.isfinite(prot) & (prot > 0)):
                ok_p = np.isfinite(prot) & (prot > 0)
                cols["specific_activity_U_per_mg"] = np.where(ok_p, rate * scale / prot, np.nan)
                cols["specific_activity_U_per_mg_se"] = np.where(ok_p, rate_se * scale / prot,
                                                                  np.nan)
    # reading flags (overflow, past-linear), then the trace flags in a fixed order
    per = {n: [f for f in fl if f != "missing"] for n, fl in analysed.reading_flags().items()}
    order = ["few-points", "no-linear", "lag", "curved", "noisy", "disagree", "blank-drift",
             "reversed", "over-10pct"]
    stacked = np.column_stack([masks[k] for k in order if k in masks])
    names_ = [k for k in order if k in masks]
    cols["flags"] = [per.get(n, []) + [names_[j] for j in np.nonzero(row)[0]]
                     for n, row in zip(g.names, stacked, strict=True)]
    table = pd.DataFrame(cols)
    value_col = "rate_uM_per_min" if eps else "slope_A_per_min"
    reps, outliers = replicate_summary(table, value_col)
    for w in outliers:
        table.loc[table["trace"] == w, "flags"] = table.loc[table["trace"] == w, "flags"].apply(
            lambda f: f + ["outlier"])
    zp = z_prime(table, value_col)
    if not eps:
        warnings.append("no molar absorptivity given (--epsilon or --chromophore) and no "
                        "standard curve: rates are in A/min only")
    n_flag = int(sum(bool(f) for f in table["flags"]))
    if n_flag:
        warnings.append(f"{n_flag} of {len(table)} traces carry flags; read them before using "
                        "their rates")
    if zp and zp.get("value") is not None and zp["value"] < 0.5:
        warnings.append(f"Z' = {zp['value']:.2f} is below 0.5: the controls do not separate well")
    return RatesAnalysis(table, reps, zp, win, analysed, st, warnings, blank_info)


def standard_curve(ts: TraceSet, meta: pd.DataFrame, st: RateSettings) -> dict | None:
    """Calibration from ``standard`` wells of known concentration: A = a + m c (shared engine).

    Each standard's absorbance is the mean of its usable readings; the slope m (A per mol/L) is
    epsilon x pathlength, used in place of a tabulated epsilon (when none was given, or always
    with ``calibrate="standards"``). Returns None when it does not apply.
    """
    from .fitting import fit
    from .models import LINE

    has = "standard_M" in meta.columns
    std = [n for n in meta.index if has and meta.loc[n, "role"] == "standard"
           and np.isfinite(meta.loc[n, "standard_M"])] if has else []
    if st.calibrate == "standards" and len(std) < 3:
        raise InputError(f"a standard curve needs three or more standard wells with a known "
                         f"concentration (found {len(std)})",
                         "mark them role 'standard' with a 'standard' concentration column")
    if len(std) < 3 or (st.calibrate == "auto" and st.epsilon):
        return None
    d = ts.data[ts.data["trace"].isin(std) & ts.data["usable"]]
    mean_a = d.groupby("trace")["value"].mean()
    c = meta.loc[mean_a.index, "standard_M"].to_numpy(float)
    if np.unique(c).size < 2:
        raise InputError("the standard wells all have the same concentration",
                         "use standards at several concentrations")
    r = fit(LINE, c, mean_a.to_numpy(float))
    m = r.params["slope"]
    if m.value <= 0 or m.ci_low <= 0:
        raise InputError("the standard curve does not rise with concentration",
                         "check the standard wells and their concentrations")
    return {"slope_A_per_M": m.value, "slope_se": m.se, "intercept_A": r.value("intercept"),
            "n_standards": len(std), "sigma_A": r.sigma,
            "epsilon_equivalent_M_per_cm": m.value / st.pathlength_cm,
            "method": "straight line of mean standard absorbance vs concentration"}


def grubbs_outlier(x: np.ndarray, alpha: float = 0.05) -> int | None:
    """Index of the single Grubbs outlier (two-sided, level ``alpha``) or None; n >= 3."""
    x = np.asarray(x, dtype=float)
    n = x.size
    if n < 3:
        return None
    sd = np.std(x, ddof=1)
    if sd == 0:
        return None
    dev = np.abs(x - x.mean())
    k = int(np.argmax(dev))
    g = dev[k] / sd
    t = stats.t.ppf(1 - alpha / (2 * n), n - 2)
    crit = (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))
    return k if g > crit else None


def replicate_summary(table: pd.DataFrame, value_col: str) -> tuple[pd.DataFrame, list[str]]:
    """Mean, SD, CV and n per replicate group, and the wells that are Grubbs outliers."""
    d = table[(table["role"] != "blank") & np.isfinite(table[value_col].astype(float))]
    if d.empty or d["group"].nunique() == len(d):
        return pd.DataFrame(), []                   # no replicates on this plate
    g = d.groupby("group", sort=False)
    agg = g.agg(role=("role", "first"), sample=("sample", "first"),
                substrate_uM=("substrate_uM", "first"), inhibitor_uM=("inhibitor_uM", "first"),
                n=(value_col, "size"), mean=(value_col, "mean"), sd=(value_col, "std"),
                wells=("trace", list)).reset_index()
    if (agg["n"] == 1).all():
        return pd.DataFrame(), []                   # no replicates on this plate
    agg["sem"] = agg["sd"] / np.sqrt(agg["n"])
    agg["cv_pct"] = 100 * agg["sd"] / agg["mean"].abs()
    agg["unit"] = value_col.split("_", 1)[1].replace("_per_", "/")
    outliers = []
    out_col = []
    values = d.set_index("trace")[value_col].astype(float)
    for wells, n in zip(agg["wells"], agg["n"], strict=True):
        k = grubbs_outlier(values.loc[wells].to_numpy()) if n >= 3 else None
        out_col.append(wells[k] if k is not None else "")
        if k is not None:
            outliers.append(wells[k])
    agg["outlier"] = out_col
    return agg, outliers


def z_prime(table: pd.DataFrame, value_col: str) -> dict | None:
    """Z'-factor of the positive and negative controls (Zhang, Chung & Oldenburg 1999).

    Z' = 1 - 3 (sd+ + sd-) / |mean+ - mean-|; above 0.5 is an excellent assay.
    """
    pos = table.loc[table["role"] == "positive", value_col].astype(float).dropna().to_numpy()
    neg = table.loc[table["role"] == "negative", value_col].astype(float).dropna().to_numpy()
    if pos.size < 2 or neg.size < 2:
        return None
    z = z_factor(pos, neg)
    verdict = "excellent" if z >= 0.5 else ("marginal" if z > 0 else "controls overlap")
    return {"value": z, "n_positive": int(pos.size), "n_negative": int(neg.size),
            "mean_positive": float(pos.mean()), "mean_negative": float(neg.mean()),
            "verdict": verdict, "unit": "", "source": "Zhang, Chung & Oldenburg (1999)"}


def z_factor(pos, neg) -> float:
    """Z' = 1 - 3 (sd_pos + sd_neg) / |mean_pos - mean_neg| (sample SDs)."""
    pos, neg = np.asarray(pos, float), np.asarray(neg, float)
    return float(1 - 3 * (np.std(pos, ddof=1) + np.std(neg, ddof=1))
                 / abs(pos.mean() - neg.mean()))
