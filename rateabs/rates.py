"""Initial rates of a plate: per-trace slopes (:mod:`rateabs.slopes`), blanks, conversion to
concentration and activity, replicates, Z' and the plate-level flags.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats

from .errors import InputError
from .options import RateSettings
from .slopes import TRACE_FLAGS, WindowEnd, Windows, find_windows, quiet_numpy
from .traces import TraceSet

#: Flags of a well: the trace flags of the initial-rate estimator (:data:`slopes.TRACE_FLAGS`)
#: and the plate-level ones; short words of our own, documented in docs/formats.md.
FLAGS = {
    **TRACE_FLAGS,
    "past-linear": "readings above the linear absorbance limit were masked",
    "overflow": "the instrument marked readings as over range; they were masked",
    "over-10pct": "more than 10 % of the substrate was used within the straight window whose "
                  "slope is reported",
    "blank-drift": "a blank well changes significantly over the read",
    "reversed": "the signal moves opposite to the plate's assay direction",
    "outlier": "the well is an outlier among its replicates (Grubbs test)",
}


# --------------------------------------------------------------------------- the plate


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
    with quiet_numpy():
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
    notes: list[str] = []
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
            notes.append(f"{len(excluded)} well(s) excluded by the plate map")
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
    win = find_windows(g, window=st.window, min_points=st.min_points, curve=st.curve,
                       estimator=st.slope_from, noisy_limit=st.noisy_rel_se)
    raw_g = ts.grid() if mode == "trace" else g
    raw_win = find_windows(raw_g, window=st.window, min_points=st.min_points, curve=False) if (
        mode == "trace") else win

    slope = win.slope * 60.0                                       # per min
    slope_se = win.slope_se * 60.0
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

    # per-trace columns and the plate-level flags, as whole arrays
    m = meta.loc[g.names]
    method = np.asarray(win.method).astype(str)
    cs, cse = win.curve_slope * 60, win.curve_slope_se * 60
    with np.errstate(all="ignore"), quiet_numpy():     # no usable sample slope: med is NaN
        med = np.nanmedian(np.abs(slope[sample_like])) if sample_like.any() else np.nan
        blank_sig = np.abs(raw_slope) > 3 * raw_win.slope_se * 60
    masks = {
        "blank-drift": (roles == "blank") & np.nan_to_num(blank_sig)
                       & (~np.isfinite(med) | (np.abs(raw_slope) > 0.05 * med)),
        "reversed": sample_like & np.isfinite(slope) & (slope * direction < 0)
                    & (np.abs(slope) > 3 * slope_se),
    }
    cols = {"trace": g.names, "role": roles, "sample": m["sample"].fillna("").to_numpy(),
            "group": m["group"].to_numpy(), "method": method, "choice": win.choice,
            "slope_A_per_min": slope, "slope_A_per_min_se": slope_se,
            "slope_raw_A_per_min": win.slope * 60,
            "window_start_s": win.t_start, "window_end_s": win.t_end,
            "n_points": np.nan_to_num(win.n).astype(int), "r2": win.r2, "lag_s": win.lag_s,
            "window_end_reason": [WindowEnd(int(r)).text for r in win.end_reason],
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
            masks["over-10pct"] = ((roles == "sample") & (s0 > 0) & (method == "window")
                                   & (np.abs(rate) * dur > 0.1 * s0))
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
    # reading flags (overflow, past-linear), the trace flags, then the plate-level ones
    per = {n: [f for f in fl if f != "missing"] for n, fl in analysed.reading_flags().items()}
    order = ["blank-drift", "reversed", "over-10pct"]
    stacked = np.column_stack([masks[k] for k in order if k in masks])
    names_ = [k for k in order if k in masks]
    cols["flags"] = [per.get(n, []) + tf + [names_[j] for j in np.nonzero(row)[0]]
                     for n, tf, row in zip(g.names, win.flags, stacked, strict=True)]
    table = pd.DataFrame(cols)
    value_col = "rate_uM_per_min" if eps else "slope_A_per_min"
    reps, outliers = replicate_summary(table, value_col)
    for w in outliers:
        table.loc[table["trace"] == w, "flags"] = table.loc[table["trace"] == w, "flags"].apply(
            lambda f: f + ["outlier"])
    zp = z_prime(table, value_col)
    if not eps:
        notes.append("no molar absorptivity given (--epsilon or --chromophore) and no "
                        "standard curve: rates are in A/min only")
    n_flag = int(sum(bool(f) for f in table["flags"]))
    if n_flag:
        notes.append(f"{n_flag} of {len(table)} traces carry flags; read them before using "
                        "their rates")
    if zp and zp.get("value") is not None and zp["value"] < 0.5:
        notes.append(f"Z' = {zp['value']:.2f} is below 0.5: the controls do not separate well")
    return RatesAnalysis(table, reps, zp, win, analysed, st, notes, blank_info)


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
    """Index of the single Grubbs outlier (two-sided, level ``alpha``) or None; n >= 3.

    Grubbs (1969), Technometrics 11:1: G = max |x - mean| / s against the critical value from
    Student's t at alpha/(2n), which reproduces Grubbs's table.
    """
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
