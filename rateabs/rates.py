"""Initial rates of a plate: per-trace slopes (:mod:`rateabs.slopes`), then the plate.

:func:`analyse_plate` runs named stages, each a function of its own:

1. **setup** (:func:`plate_setup`): the plate format, the pathlength, each well's role,
   dilution, protein, window and skipped readings, and where each came from (an option, the
   file, the plate map, well geometry or a default), so that nothing is assumed silently;
2. **windows** (:func:`estimate_slopes`): the slope of every trace by the estimator of
   :mod:`rateabs.slopes`, with a well's own window where one is set;
3. **blanks** (:func:`blank_correction`): the mean blank slope (or trace) subtracted;
4. **conversion** (:func:`convert`): Beer–Lambert to concentration per minute, activity in
   U/mL (1 U = 1 µmol/min, NC-IUB 1979) and nkat/mL, U/mg, and v/[E] where the map gives [E];
5. **flags** (:func:`plate_flags`, :func:`replicate_outliers`): the plate-level flags;
6. **activity** (:func:`replicate_summary`, :func:`activity_summary`, :func:`z_prime`):
   replicates, the per-sample activity with its dilution-linearity check, and Z'.

Trace-level flags (the shape of one trace) come from :mod:`rateabs.slopes`; the plate-level
ones (:data:`PLATE_FLAGS`) are made here; :data:`FLAGS` holds both with their meanings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields, replace
from typing import NamedTuple

import numpy as np
import pandas as pd

from .errors import InputError, UsageError
from .options import RateSettings
from .slopes import TRACE_FLAGS, WindowEnd, Windows, find_windows, quiet_numpy
from .traces import Grid, TraceSet

#: Plate-level flags (rates.py), each "this number may be wrong, because ...".
PLATE_FLAGS = {
    "outlier": "the rate is more than 3.5 z from its replicates (against the plate's pooled "
               "replicate scatter and the wells' own SEs; where too few groups pool it, against "
               "an assumed 5 % scatter, or by Grubbs 1969 in groups of five or more): set aside "
               "from the mean where the others agree; where the last two (or two duplicates) "
               "disagree both are flagged and kept, as either may be wrong",
    "reversed": "the signal moves opposite to the plate's assay direction",
    "masked-start": "the first readings were masked (over range, past the linear limit, missing "
                    "or skipped), so the slope starts later than the reaction: with depletion "
                    "it reads low",
    "over-10pct": "more than 10 % of the substrate in the map was used within the straight "
                  "window reported (forced by --slope-from window, or no whole-curve estimate "
                  "that follows the depletion), so its slope may fall short of the initial rate "
                  "by more than twice its SE (by up to about half the fraction used)",
    "too-fast": "the initial rate is faster than the rest of the read allows: with the map's "
                "substrate, no Michaelis–Menten depletion slows a reaction from that rate to "
                "the slope after the first fifth of the read (depletion keeps at least 1 - f "
                "of the rate, f the fraction used over the read); the start is steeper than "
                "the reaction (a settling baseline, mixing) or the reaction slows for another "
                "reason (product inhibition, enzyme loss): look at the first readings",
}

#: Every per-well flag with its meaning (trace-level from slopes, plate-level from here).
FLAGS = {**TRACE_FLAGS, **PLATE_FLAGS}
#: Flags of a sample's activity summary (a row of :func:`activity_summary`).
ACTIVITY_FLAGS = {
    "dilution-trend": "the activity changes with the dilution (p < 0.05 and 5 % or more per "
                      "two-fold dilution): the mean over dilutions is not one activity; use the "
                      "dilutions where it is flat",
    "wells-disagree": "wells kept in the mean are replicate outliers of each other: they differ "
                      "beyond the plate's replicate scatter and none can be told right (two "
                      "duplicates apart, or the last two of a group); the mean is not to be "
                      "trusted: repeat the sample",
}

Z_OUTLIER = 3.5            # |z| above which a replicate is flagged
POOL_MIN_GROUPS = 4        # replicate groups needed to pool the plate's replicate scatter
DEPLETION_LIMIT = 0.10     # fraction of the substrate used within a straight window
#: ``over-10pct`` marks a kept window whose possible shortfall (:func:`depletion_shortfall`)
#: exceeds this many of its SEs: within that the number stands as reported. Calibrated on
#: benchmarks/flag_calibration.py with a map (seeds 0-19): flagging every kept window over 10 %
#: marked 131 wells, 7 of them off the truth; over 2 SE marks 37 with 6 of the 7.
SHORTFALL_SE = 2.0
#: The whole curve replaces a depleted window unless its initial slope is evidently the
#: shallower, by more than this many of its SEs (:func:`prefer_curve_where_depleted`).
SHALLOWER_SE = 1.0
#: Why a well's whole-curve slope replaced its straight window (:func:`prefer_curve_where_depleted`).
DEPLETED_CHOICE = (f"curve: more than {100 * DEPLETION_LIMIT:.0f} % of the map's substrate was "
                   "used within the straight window; the whole-curve initial slope follows the "
                   "depletion")
NKAT_PER_U = 1e9 / 60e6    # 1 U = 1 umol/min = 1e-6/60 mol/s = 16.67 nkat (NC-IUB 1979)
TREND_LIMIT = 0.05         # relative change per two-fold dilution that counts as a trend
#: A sample's activity is called flat in the dilution only where its trend's 95 % interval
#: stays within this change per two-fold dilution; a trend not significant but not ruled out
#: either is said to be so (a user audit found "flat" printed on four wells at +51 %, p = 0.09).
FLAT_LIMIT = 0.10


# --------------------------------------------------------------------------- 1. setup


@dataclass(frozen=True)
class PlateSetup:
    """What the analysis took as given and where each came from, stated in the output.

    ``wells`` (index = trace) holds role, sample, group, dilution and ``dilution_source``,
    substrate_M, inhibitor_M, standard_M, enzyme_M, protein_mg_per_mL and ``protein_source``,
    ``window`` and ``window_source``, and ``skip`` (times in s) with ``skip_source``.
    """

    plate_format: int | None
    plate_source: str
    pathlength_cm: float
    pathlength_source: str
    wells: pd.DataFrame
    skipped_wells: dict
    warnings: list = field(default_factory=list)


def plate_setup(ts: TraceSet, layout: pd.DataFrame | None, st: RateSettings) -> PlateSetup:
    """The plate format, pathlength and per-well settings with their sources (stage 1)."""
    warnings: list[str] = []
    fmt, fmt_source = _plate_format(ts, st, warnings)
    b, b_source = _pathlength(ts, st, fmt, fmt_source, warnings)
    wells, skipped = _well_table(ts, layout, st, warnings)
    return PlateSetup(fmt, fmt_source, b, b_source, wells, skipped, warnings)


def _plate_format(ts: TraceSet, st: RateSettings, warnings: list) -> tuple[int | None, str]:
    """The stated --plate checked against the well names, else the format the reader took (the
    file header's when the names fit in it, else the names'); a header the names contradict is
    refused without --plate."""
    from .wells import plate_format

    info = ts.info
    names_fmt, names_src = info.get("plate_guess") or plate_format(ts.names)
    said = info.get("plate_stated")
    if st.plate is not None:
        if names_fmt is None:
            raise UsageError(f"--plate {st.plate}: the traces are not named as plate wells "
                             f"({', '.join(ts.names[:3])}...)", "leave --plate out")
        if names_fmt > st.plate:
            raise UsageError(f"--plate {st.plate} contradicts the well names, which need a "
                             f"{names_fmt}-well plate ({names_src})",
                             f"give --plate {names_fmt}, or leave --plate out")
        fmt, source = st.plate, f"--plate {st.plate}"
        if said and said[0] != fmt and names_fmt <= said[0]:    # (else the reader said it)
            warnings.append(f"the plate is taken as {fmt}-well ({source}), but the file header "
                            f"says '{said[1]}'")
        return fmt, source
    if said and names_fmt and names_fmt > said[0]:
        raise InputError(f"the file header line '{said[1]}' states a {said[0]}-well plate, but "
                         f"the {names_src} need a {names_fmt}-well plate",
                         f"correct the header line, or give --plate {names_fmt} if the well "
                         "names are right", file=info.get("source"))
    fmt = info.get("plate_format") or names_fmt
    src = info.get("plate_format_source") or names_src
    return fmt, (f"from the {src}" if fmt else "")


def _pathlength(ts: TraceSet, st: RateSettings, fmt, fmt_source: str,
                warnings: list) -> tuple[float, str]:
    """Pathlength (cm) and its source: --pathlength, --well-volume in the plate's geometry,
    the file's header, else 1 cm. An option beats the file, and a disagreement is said."""
    from .photometry import pathlength_from_volume

    file_b = ts.info.get("pathlength_cm")
    file_line = (ts.info.get("metadata_facts") or {}).get("pathlength_cm", "")
    if st.pathlength_cm is not None:
        b, source = st.pathlength_cm, f"--pathlength {st.pathlength_cm:g} cm"
    elif st.well_volume_L is not None:
        wells = fmt or 96
        try:
            b = pathlength_from_volume(st.well_volume_L, wells)
        except UsageError as exc:
            raise UsageError(f"--well-volume: {exc.problem}", exc.fix) from None
        how = fmt_source if fmt else "assumed: the traces are not named as wells"
        source = (f"--well-volume {st.well_volume_L * 1e6:g} uL in a {wells}-well plate "
                  f"({how}), typical well geometry: not measured, and a real well's meniscus and "
                  "shape may move it by several per cent, and every rate with it (measure it, or "
                  "give --pathlength, for absolute rates)")
    elif file_b:
        return float(file_b), f"the file header ('{file_line}')"
    else:
        return 1.0, "assumed 1 cm (no --pathlength, --well-volume or pathlength in the file)"
    if file_b and abs(b / file_b - 1) > 0.005:
        warnings.append(f"the pathlength {b:.4g} cm from {source.split(' (')[0]} is used; the file "
                        f"header says '{file_line}' ({file_b:g} cm): the option wins")
    return b, source


def _well_table(ts: TraceSet, layout, st: RateSettings, warnings: list):
    """Per-well roles, concentrations, dilution, protein, window and skips with sources."""
    names = ts.names
    w = pd.DataFrame(index=pd.Index(names, name="trace"))
    if layout is not None:
        w = w.join(layout, how="left")
    defaults = {"role": "sample", "sample": "", "substrate_M": np.nan, "inhibitor_M": np.nan,
                "standard_M": np.nan, "enzyme_M": np.nan, "protein_mg_per_mL": np.nan,
                "dilution": np.nan, "exclude": False, "window": None, "skip": ()}
    for col, default in defaults.items():
        if col not in w.columns:
            w[col] = [default] * len(w)
        elif col in ("role", "sample"):
            w[col] = w[col].fillna(default)
    own = pd.Series(w.index, index=w.index)            # a well the map does not name: alone
    w["group"] = w["group"].where(w["group"].notna(), own) if "group" in w.columns else own
    w["exclude"] = w["exclude"].fillna(False).astype(bool)
    w["window"] = [x if (isinstance(x, tuple) or x == "auto") else None for x in w["window"]]
    w["skip"] = [x if isinstance(x, tuple) else () for x in w["skip"]]
    _protein_sources(w, st, warnings)
    _dilution_sources(w, layout, st, warnings)
    _window_sources(ts, w, st, warnings)
    _skip_sources(ts, w, st)
    skipped = {n: "the plate map (exclude)" for n in w.index[w["exclude"].to_numpy()]}
    for n in st.skip_wells:
        skipped[_data_well(f"--skip-well {n}", n, list(w.index))] = "--skip-well"
    return w, skipped


def _data_well(option: str, name: str, names: list[str]) -> str:
    """The data's name of a well an option names (``a1`` and ``A01`` are the data's ``A1``:
    :func:`rateabs.wells.same_well`); refused in one line when the data have no such well."""
    from .wells import same_well

    found = same_well(name, names)
    if found is None:
        raise UsageError(f"{option}: no such well in the data",
                         f"use one of {', '.join(names[:12])}" + (" ..." if len(names) > 12
                                                                  else ""))
    return found


def _dilution_sources(w: pd.DataFrame, layout, st: RateSettings, warnings: list) -> None:
    """Each well's dilution: the map's cell, else --dilution for a sample well, else 1
    (undiluted; controls and standards are not taken to be diluted unless the map says so)."""
    from_map = np.isfinite(w["dilution"].to_numpy(float))
    fills = (w["role"] == "sample").to_numpy() & ~from_map & (st.dilution is not None)
    if st.dilution is not None and not fills.any():
        raise UsageError(f"--dilution {st.dilution:g} is not used: the plate map gives a dilution "
                         "for every sample well", "leave --dilution out, or empty the map's "
                         "cells it should fill")
    w["dilution_source"] = np.where(from_map, "plate map", np.where(
        fills, "--dilution", "default (undiluted)"))
    w["dilution"] = np.where(from_map, w["dilution"].to_numpy(float),
                             np.where(fills, st.dilution or 1.0, 1.0))
    if st.dilution is not None and from_map.any():
        warnings.append(f"--dilution {st.dilution:g} fills the {int(fills.sum())} sample "
                        "well(s) whose dilution the plate map leaves empty; the map's own "
                        f"dilution is used for the other {int(from_map.sum())}")


def _protein_sources(w: pd.DataFrame, st: RateSettings, warnings: list) -> None:
    """Each well's protein concentration: the map's cell, else --protein (blanks take none).
    --protein that would fill no well is refused, as --dilution is; map columns that cannot
    be used for want of the volumes are said to be unused."""
    prot = w["protein_mg_per_mL"].to_numpy(float)
    from_map = np.isfinite(prot)
    fills = ~from_map & (w["role"] != "blank").to_numpy() & (st.protein_mg_per_mL is not None)
    if st.protein_mg_per_mL is not None and not fills.any():
        raise UsageError(f"--protein {st.protein_mg_per_mL:g} mg/mL is not used: the plate map "
                         "gives a protein concentration for every well but the blanks",
                         "leave --protein out, or empty the map's cells it should fill")
    if fills.any():
        prot = np.where(fills, st.protein_mg_per_mL, prot)
        if from_map.any():
            warnings.append(f"--protein {st.protein_mg_per_mL:g} mg/mL fills the "
                            f"{int(fills.sum())} well(s) whose protein the plate map leaves "
                            f"empty; the map's own value is used for the other "
                            f"{int(from_map.sum())}")
    w["protein_mg_per_mL"] = prot
    w["protein_source"] = np.where(from_map, "plate map", np.where(fills, "--protein", ""))
    if not (st.total_volume_L and st.sample_volume_L):
        diluted = np.nan_to_num(w["dilution"].to_numpy(float), nan=1.0) != 1
        unused = [c for c, given in (("protein", from_map.any()), ("dilution", diluted.any()))
                  if given]
        if unused:
            warnings.append(f"the plate map's {' and '.join(unused)} column(s) are not used: "
                            "activity (U/mL, U/mg) needs --total-volume and --sample-volume")


def _window_sources(ts: TraceSet, w: pd.DataFrame, st: RateSettings,
                    warnings: list) -> None:
    """Each well's window: --well-window, else the map's window column, else --window."""
    wins = list(w["window"])
    src = ["plate map" if x is not None else "" for x in wins]
    for name, spec in st.well_windows:
        name = _data_well(f"--well-window {name}", name, list(w.index))
        k = w.index.get_loc(name)
        if wins[k] is not None and wins[k] != spec:
            warnings.append(f"--well-window {name}={_win_text(spec)} beats the plate map's "
                            f"window {_win_text(wins[k])} for {name}")
        wins[k], src[k] = spec, "--well-window"
    plate = "--window" if st.window != "auto" else "automatic"
    w["window"] = [st.window if x is None else x for x in wins]
    w["window_source"] = [s or plate for s in src]
    _check_windows(ts, w)


def _check_windows(ts: TraceSet, w: pd.DataFrame) -> None:
    """Refuse a set window that holds fewer than three reading times of its well (a line and
    its SE need three): it lies outside the read, or was written in another unit."""
    g = ts.grid()
    bad = []
    for name, spec, src in zip(w.index, w["window"], w["window_source"], strict=True):
        if isinstance(spec, tuple):
            times = g.times[g.names.index(name)]
            times = times[np.isfinite(times)]
            if np.count_nonzero((times >= spec[0]) & (times <= spec[1])) < 3:
                bad.append((name, spec, src, times))
    if bad:
        name, spec, src, times = bad[0]
        where = {"plate map": "the plate map's window column"}.get(src, src)
        more = f" (and {len(bad) - 1} more well(s))" if len(bad) > 1 else ""
        read = f"{times.min():g}-{times.max():g} s" if times.size else "no readings"
        raise UsageError(f"{where}: the window {_win_text(spec)} of well {name}{more} holds "
                         f"fewer than three of its readings (the read spans {read})",
                         "give a window inside the read, with a unit if not seconds "
                         "(e.g. 1-5 min), or auto")


def _win_text(spec) -> str:
    return "auto" if spec == "auto" else f"{spec[0]:g}-{spec[1]:g} s"


def _skip_sources(ts: TraceSet, w: pd.DataFrame, st: RateSettings) -> None:
    """Readings to leave out, (time, source) per well, each matched to a reading of the data."""
    g = ts.grid()
    skips = {n: [(t, "plate map") for t in s or ()]
             for n, s in zip(w.index, w["skip"], strict=True)}
    for name, t in st.skip_readings:
        name = _data_well(f"--skip-reading {name}={t:g}", name, list(w.index))
        skips[name].append((t, "--skip-reading"))
    for name, items in skips.items():
        if not items:
            continue
        times = g.times[g.names.index(name)]
        for t, src in items:
            near = np.nanmin(np.abs(times - t)) if np.isfinite(times).any() else np.inf
            if not near <= 0.5:
                shown = ", ".join(f"{x:g}" for x in times[np.isfinite(times)][:6])
                where = "--skip-reading" if src != "plate map" else "the plate map's skip column"
                raise UsageError(f"{where}: well {name} has no reading at {t:g} s",
                                 f"give the time of a reading (in s), e.g. one of {shown} ...")
    w["skip"] = [tuple(skips[n]) for n in w.index]


# --------------------------------------------------------------------------- 2. windows


@dataclass
class TraceSlopes:
    """The slope of every trace (A/min, as reported by the estimator) and how it was found."""

    windows: Windows
    slope: np.ndarray
    slope_se: np.ndarray
    method: np.ndarray
    choice: np.ndarray
    trace_flags: list
    window_start_s: np.ndarray
    window_end_s: np.ndarray
    blank: dict


def skip_and_mask(ts: TraceSet, setup: PlateSetup, st: RateSettings) -> TraceSet:
    """The traces to analyse: skipped wells left out, skipped readings and readings above the
    linear limit masked."""
    ts = ts.mask_above(st.linear_limit)
    keep = [n for n in ts.names if n not in setup.skipped_wells]
    if not keep:
        raise InputError("every well was left out (--skip-well or the map's exclude column)",
                         "keep at least one well")
    ts = ts.select(keep) if len(keep) < len(ts.names) else ts
    g = ts.grid()
    where = np.zeros(g.values.shape, dtype=bool)
    skips = dict(zip(setup.wells.index, setup.wells["skip"], strict=True))
    for i, n in enumerate(g.names):
        for t, _ in skips[n]:
            where[i] |= np.abs(g.times[i] - t) <= 0.5
    return ts.mask_readings(where) if where.any() else ts


def estimate_slopes(ts: TraceSet, setup: PlateSetup, st: RateSettings,
                    blank_mode: str) -> tuple[TraceSlopes, TraceSet]:
    """Every trace's slope, one vectorised pass per distinct window (stage 2), and the blank
    level (:func:`blank_level`). The blank is taken out of the traces before their slopes are
    found again: with the blank mode ``trace`` the time-matched mean of the blanks kept, with
    ``slope`` the blanks' mean drift (level x time) from every well but the blanks. A whole-
    curve fit to a trace that still drifts reads the drift as part of the reaction's bend: a
    drift against the assay's direction made slow wells read a third low, many SEs off, when
    the blank slope was subtracted from their curves' initial slopes afterwards."""
    wells = setup.wells.loc[ts.names]
    roles, specs = wells["role"].to_numpy(), list(wells["window"])
    g = ts.grid()
    win = _windows_by_spec(g, specs, st)
    rep = _reported(win)
    blank = blank_level(*_straight_slopes(win, rep), roles == "blank")
    analysed = ts
    if blank_mode == "trace":
        analysed = _blank_trace_subtract(ts, [n for n, k in zip(ts.names, blank["kept"],
                                                                 strict=True) if k])
    elif blank_mode == "slope" and "level" in blank:
        drift = np.where((roles == "blank")[:, None], 0.0, blank["level"] / 60 * g.times)
        analysed = ts.with_values(g.values - drift)
    if analysed is not ts:
        g = analysed.grid()
        win = _windows_by_spec(g, specs, st)
        rep = _reported(win)
    t0, t1 = window_times(g, win)
    return TraceSlopes(win, rep[0] * 60, rep[1] * 60, rep[2], rep[3], rep[4], t0, t1,
                       blank), analysed


def _straight_slopes(win: Windows, rep) -> tuple[np.ndarray, np.ndarray]:
    """Each trace's straight-line slope over its window and that line's own SE (A/min), the
    reported ones where a trace has none: a blank's drift is a straight line, and the
    reported SE of a straight trace may carry the whole-curve fit's doubt about a bend, which
    weighted evenly drifting blanks unevenly and widened every well's SE."""
    ws, wse = np.asarray(win.window_slope, float), np.asarray(win.window_slope_se, float)
    ok = np.isfinite(ws) & np.isfinite(wse) & (wse > 0)
    return np.where(ok, ws, rep[0]) * 60, np.where(ok, wse, rep[1]) * 60


def _blank_trace_subtract(ts: TraceSet, blanks: list[str]) -> TraceSet:
    """Subtract the time-matched mean of the blank traces from every trace."""
    g = ts.grid()
    idx = [g.names.index(b) for b in blanks]
    bv = np.where(g.usable[idx], g.values[idx], np.nan)
    with quiet_numpy():
        mean_t = np.nanmean(g.times[idx], axis=0)
        mean_b = np.nanmean(bv, axis=0)
    okb = np.isfinite(mean_b)
    if okb.sum() < 2:
        raise InputError("the blank wells have fewer than two usable readings in common",
                         "check the blanks or use --blank slope")
    return ts.with_values(g.values - np.interp(g.times, mean_t[okb], mean_b[okb]))


def _find(grid: Grid, window, st: RateSettings) -> Windows:
    return find_windows(grid, window=window, min_points=st.min_points, curve=st.curve,
                        estimator=st.slope_from, noisy_limit=st.noisy_rel_se)


def _windows_by_spec(grid: Grid, specs: list, st: RateSettings) -> Windows:
    """find_windows once per distinct window (the plate's, or a well's own), merged."""
    keys = list(dict.fromkeys(specs))
    if len(keys) == 1:
        return _find(grid, keys[0], st)
    parts, rows = [], []
    for key in keys:
        r = [i for i, s in enumerate(specs) if s == key]
        sub = Grid([grid.names[i] for i in r], grid.times[r], grid.values[r], grid.usable[r],
                   None if grid.flags is None else grid.flags[r])
        parts.append(_find(sub, key, st))
        rows.append(r)
    return merge_windows(parts, rows, len(specs))


def merge_windows(parts: list[Windows], rows: list[list[int]], n: int) -> Windows:
    """One :class:`Windows` of ``n`` traces from parts found on subsets (``rows[k]`` are the
    positions of part k's traces); every per-trace field is merged, whatever its type."""
    out = {}
    for f in fields(Windows):
        vals = [getattr(p, f.name) for p in parts]
        first = vals[0]
        if isinstance(first, np.ndarray) and first.ndim and first.shape[0] == len(rows[0]):
            merged = np.empty((n, *first.shape[1:]), dtype=np.result_type(*vals))
            for v, r in zip(vals, rows, strict=True):
                merged[r] = v
        elif isinstance(first, (list, tuple)) and len(first) == len(rows[0]):
            merged = [None] * n
            for v, r in zip(vals, rows, strict=True):
                for i, x in zip(r, v, strict=True):
                    merged[i] = x
        else:
            merged = first
        out[f.name] = merged
    return Windows(**out)


def _reported(win: Windows):
    """(slope A/s, SE, method, why, trace flags) per trace, as the estimator reports them."""
    return (np.asarray(win.slope, float), np.asarray(win.slope_se, float),
            np.asarray(win.method).astype(str), np.asarray(win.choice).astype(str),
            [list(f) for f in win.flags])


def _flag_lists(masks: dict, n: int) -> list[list[str]]:
    """Per trace, the names of the masks that hold, in the dict's order."""
    names = list(masks)
    if not names:
        return [[] for _ in range(n)]
    stacked = np.column_stack([np.asarray(masks[k], bool) for k in names])
    return [[names[j] for j in np.nonzero(row)[0]] for row in stacked]


def window_times(g: Grid, win: Windows) -> tuple[np.ndarray, np.ndarray]:
    """Times of the first and last usable readings inside each window (NaN without one), so
    that masked readings at a window's edge never move its reported start or end."""
    m = g.values.shape[1]
    idx = np.arange(m)[None, :]
    start = np.asarray(win.start)[:, None]
    end = np.asarray(win.end)[:, None]
    inside = g.usable & (idx >= start) & (idx <= end)
    has = inside.any(axis=1)
    first = np.argmax(inside, axis=1)
    last = m - 1 - np.argmax(inside[:, ::-1], axis=1)
    t0 = np.nan_to_num(np.take_along_axis(g.times, first[:, None], 1)[:, 0])
    t1 = np.nan_to_num(np.take_along_axis(g.times, last[:, None], 1)[:, 0])
    return np.where(has, t0, np.nan), np.where(has, t1, np.nan)


# --------------------------------------------------------------------------- 3. blanks


def blank_mode(roles: pd.Series, st: RateSettings, source: str | None) -> str:
    """The blank mode used: ``auto`` is ``slope`` when the map marks blanks, else ``none``."""
    has = bool((roles == "blank").any())
    if st.blank in ("slope", "trace") and not has:
        raise InputError("blank subtraction was asked for but the plate map marks no blank wells",
                         "mark blanks with role 'blank', or use --blank none", file=source)
    if st.blank == "auto":
        return "slope" if has else "none"
    return st.blank


def blank_level(slope: np.ndarray, se: np.ndarray, is_blank: np.ndarray) -> dict:
    """The blank slope (A/min) from the blank wells' own slopes (stage 3).

    A blank that differs from the others by more than Z_OUTLIER of their combined SEs is left
    out (the blanks share no pipetting scatter, so their SEs alone say how far apart they may
    lie); the others are averaged with weights 1/SE^2, so that a blank with a poorly determined
    slope moves the level little. Its SE is the larger of the weighted mean's SE and the
    blanks' weighted scatter. Returns the level, its SE, the blanks kept (a mask over all
    wells) and those left out.
    """
    kept = np.zeros(slope.size, dtype=bool)
    out = {"kept": kept, "left_out": np.zeros(slope.size, dtype=bool)}
    idx = np.nonzero(is_blank & np.isfinite(slope) & np.isfinite(se))[0]
    if idx.size == 0:
        return out
    s_floor = np.maximum(se[idx], 1e-6 * max(float(np.max(se[idx])), 1e-12))
    t = _untested(slope.size)
    if idx.size >= 3:
        _z_test(slope, np.where(is_blank, np.maximum(se, 1e-12), 0.0), idx, 0.0, t)
    flag = t.out
    use = idx[~flag[idx]]
    w = 1 / np.maximum(se[use], s_floor.min()) ** 2
    level = float(np.sum(w * slope[use]) / np.sum(w))
    scatter = (math.sqrt(float(np.sum(w * (slope[use] - level) ** 2)) / ((use.size - 1)
                                                                           * np.sum(w)))
               if use.size > 1 else 0.0)
    kept[use] = True
    out.update(level=level, se=max(1 / math.sqrt(float(np.sum(w))), scatter), left_out=flag)
    return out


def blank_correction(s: TraceSlopes, is_blank: np.ndarray, mode: str, names: list[str]):
    """Blank-corrected slopes (A/min) and SEs, and what was subtracted (stage 3)."""
    info = {"mode": mode, "wells": [n for n, b in zip(names, is_blank, strict=True) if b]}
    slope, se = s.slope.copy(), s.slope_se.copy()
    b = s.blank
    if "level" not in b:
        return slope, se, info
    info.update(slope_A_per_min=b["level"], slope_A_per_min_se=b["se"],
                left_out=[n for n, o in zip(names, b["left_out"], strict=True) if o],
                how="mean of the blanks' straight-line slopes weighted by 1/SE^2, blanks more "
                    f"than {Z_OUTLIER} z from the others left out; taken out of every other "
                    "trace as a straight drift before its slope was found")
    if mode == "slope":                 # the drift was taken out of the traces (stage 2)
        se = np.where(is_blank, se, np.hypot(se, b["se"]))
    return slope, se, info


def assay_direction(slope: np.ndarray, roles: np.ndarray, st: RateSettings) -> float:
    """+1 when product formation raises the signal, -1 when it lowers it (``auto``: the sign
    of the median sample slope)."""
    if st.direction != "auto":
        return 1.0 if st.direction == "up" else -1.0
    sample_like = np.isin(roles, ["sample", "positive"])
    ref = slope[sample_like & np.isfinite(slope)]
    ref = ref if ref.size else slope[np.isfinite(slope)]
    return 1.0 if (ref.size == 0 or np.median(ref) >= 0) else -1.0


# --------------------------------------------------------------------------- 4. conversion


def convert(slope, se, direction: float, wells: pd.DataFrame, setup: PlateSetup,
            st: RateSettings, ts: TraceSet) -> tuple[dict, dict | None]:
    """Rate (µM/min), activity (U/mL, nkat/mL), U/mg and v/[E] per well (stage 4), and the
    standard curve when one calibrated the conversion."""
    b = setup.pathlength_cm
    eps, eps_se = st.epsilon, st.epsilon_se
    calib = standard_curve(ts, wells, st, b) if st.calibrate != "none" else None
    if calib is not None:
        eps, eps_se = calib["slope_A_per_M"] / b, calib["slope_se"] / b
    cols: dict = {}
    if not eps:
        return cols, calib
    factor = 1e6 / (eps * b)                                  # A/min -> uM/min
    rate = direction * slope * factor
    with np.errstate(all="ignore"):
        rate_se = np.where(slope != 0, np.abs(rate) * np.hypot(se / slope, eps_se / eps),
                           se * factor)
    cols["rate_uM_per_min"], cols["rate_uM_per_min_se"] = rate, rate_se
    enz = wells["enzyme_M"].to_numpy(float)
    if np.isfinite(enz).any():
        with np.errstate(all="ignore"):
            per_s = np.where(enz > 0, rate * 1e-6 / 60 / enz, np.nan)
            cols["turnover_per_s"] = per_s
            cols["turnover_per_s_se"] = np.where(enz > 0, rate_se * 1e-6 / 60 / enz, np.nan)
    if st.total_volume_L and st.sample_volume_L:
        roles = wells["role"].to_numpy()
        scale = np.where(roles != "blank", st.total_volume_L / (st.sample_volume_L * 1e3)
                         * wells["dilution"].to_numpy(float), np.nan)
        act, act_se = rate * scale, rate_se * scale
        cols["activity_U_per_mL"], cols["activity_U_per_mL_se"] = act, act_se
        if st.katal:
            cols["activity_nkat_per_mL"] = act * NKAT_PER_U
            cols["activity_nkat_per_mL_se"] = act_se * NKAT_PER_U
        prot = wells["protein_mg_per_mL"].to_numpy(float)
        ok = np.isfinite(prot) & (prot > 0)
        if ok.any():
            cols["specific_activity_U_per_mg"] = np.where(ok, act / np.where(ok, prot, 1), np.nan)
            cols["specific_activity_U_per_mg_se"] = np.where(ok, act_se / np.where(ok, prot, 1),
                                                             np.nan)
    return cols, calib


def standard_curve(ts: TraceSet, wells: pd.DataFrame, st: RateSettings,
                   pathlength_cm: float) -> dict | None:
    """Calibration from ``standard`` wells of known concentration: A = a + m c (shared engine).

    Each standard's absorbance is the mean of its usable readings; the slope m (A per mol/L) is
    epsilon x pathlength, used in place of a tabulated epsilon (when none was given, or always
    with ``calibrate="standards"``). Returns None when it does not apply.
    """
    from .fitting import fit
    from .models import LINE

    std = list(wells.index[(wells["role"] == "standard").to_numpy()
                           & np.isfinite(wells["standard_M"].to_numpy(float))])
    if st.calibrate == "standards" and len(std) < 3:
        raise InputError(f"a standard curve needs three or more standard wells with a known "
                         f"concentration (found {len(std)})",
                         "mark them role 'standard' with a 'standard' concentration column")
    if len(std) < 3 or (st.calibrate == "auto" and st.epsilon):
        return None
    g = ts.grid()
    rows = [g.names.index(n) for n in std]
    with quiet_numpy():
        mean_a = np.nanmean(np.where(g.usable[rows], g.values[rows], np.nan), axis=1)
    c = wells.loc[std, "standard_M"].to_numpy(float)
    if np.unique(c).size < 2:
        raise InputError("the standard wells all have the same concentration",
                         "use standards at several concentrations")
    r = fit(LINE, c, mean_a)
    m = r.params["slope"]
    if m.value <= 0 or m.ci_low <= 0:
        raise InputError("the standard curve does not rise with concentration",
                         "check the standard wells and their concentrations")
    return {"slope_A_per_M": m.value, "slope_se": m.se, "intercept_A": r.value("intercept"),
            "n_standards": len(std), "sigma_A": r.sigma,
            "epsilon_equivalent_M_per_cm": m.value / pathlength_cm,
            "method": "straight line of mean standard absorbance vs concentration",
            "bend": standard_bend(c, mean_a)}


#: A standard curve bends where a parabola's curvature is significant (p < 0.01) and the slope
#: changes by more than this share of the straight line's over the standards' range.
STANDARD_BEND = 0.05


def standard_bend(c: np.ndarray, a: np.ndarray) -> str | None:
    """Words for a standard curve that is not straight, else None: the slopes of a parabola
    through the standards at their lowest and highest concentration, against the straight
    line's. One straight line through standards that flatten at the top (a detector past its
    linear range) put an audit's rates 24 % high, with no word."""
    from .distributions import t_two_sided_p

    ok = np.isfinite(c) & np.isfinite(a)
    c, a = c[ok], a[ok]
    if np.unique(c).size < 4:
        return None
    coef, cov = np.polyfit(c, a, 2, cov=True)
    lin = np.polyfit(c, a, 1)[0]
    se2 = math.sqrt(cov[0, 0]) if cov[0, 0] > 0 else 0.0
    p = float(t_two_sided_p(coef[0] / se2, c.size - 3)) if se2 > 0 else (0.0 if coef[0] else 1.0)
    lo, hi = (2 * coef[0] * x + coef[1] for x in (c.min(), c.max()))
    change = (hi - lo) / lin if lin else 0.0
    if p >= 0.01 or abs(change) <= STANDARD_BEND:
        return None
    return (f"the standard curve bends: its slope is {lo / lin:.0%} of the straight line's at "
            f"the lowest standard and {hi / lin:.0%} at the highest (parabola, p = {p:.2g}); "
            "the conversion from one straight line is off wherever the samples lie: keep the "
            "standards within the straight part")


# --------------------------------------------------------------------------- 5. flags


def plate_flags(t: pd.DataFrame, s: TraceSlopes, g: Grid, direction: float,
                blank_info: dict) -> dict[str, np.ndarray]:
    """The plate-level flags of every well but ``outlier`` (stage 5), as boolean arrays."""
    roles = t["role"].to_numpy()
    slope, se = t["slope_A_per_min"].to_numpy(float), t["slope_A_per_min_se"].to_numpy(float)
    sample_like = np.isin(roles, ["sample", "positive"])
    with np.errstate(all="ignore"), quiet_numpy():
        masks = {
            "reversed": sample_like & np.isfinite(slope) & (slope * direction < 0)
                        & (np.abs(slope) > 3 * se),
            "masked-start": _masked_start(g),
        }
        short = depletion_shortfall(used_in_window(t, s)) * np.abs(slope)
        masks["over-10pct"] = depleted(t, s) & (short > SHORTFALL_SE * se)
    masks["too-fast"] = faster_than_substrate(t, g)
    return masks


#: ``too-fast`` leaves out this fraction of the read (a settling start) for the late slope ...
LATE_FROM = 0.2
#: ... and marks a rate above the most that slope allows (late slope / (1 - f)) by more than
#: this many SEs of the difference and by 5 %. Calibrated on benchmarks/flag_calibration.py
#: with a map: it marks 32 / 72 / 70 / 81 wells of seeds 0-19 / 20-59 / 60-99 / 100-139, 84 /
#: 86 / 91 / 84 % of them off the truth (most of them settling baselines in the reaction's
#: direction, read 14-68 % high, six of them unflagged before on seeds 60-99); 2.0 marked
#: 46-97 wells at 67-74 % and brought the good wells flagged to 9.9 % on seeds 60-99.
TOO_FAST_Z = 2.5


def faster_than_substrate(t: pd.DataFrame, g: Grid) -> np.ndarray:
    """Sample wells whose reported rate exceeds what the late readings allow under substrate
    depletion. Where Michaelis–Menten kinetics slow a reaction by using substrate alone, the
    rate at any time up to the end keeps at least the fraction 1 - f of the initial rate
    (v/v0 = (S/S0)(Km + S0)/(Km + S) >= S/S0; f, the fraction of the map's [S]0 used by the
    end, from :func:`product_formed`, an overestimate that widens the bound), so the straight
    line through the readings after the first LATE_FROM of the read, whose slope is a mean of
    the rates over them, is at least (1 - f) v0. A rate above that bound by TOO_FAST_Z SEs (its
    own and the late slope's from the well's noise) and 5 % started faster than the reaction
    that follows. Not for wells with a lag (their start is slow) or a doubted substrate."""
    n = len(t)
    if "rate_uM_per_min" not in t.columns or "substrate_uM" not in t.columns:
        return np.zeros(n, dtype=bool)
    made, _ = product_formed(t, g)
    s0 = t["substrate_uM"].to_numpy(float)
    slope = np.abs(t["slope_A_per_min"].to_numpy(float))
    se = t["slope_A_per_min_se"].to_numpy(float)
    late, late_se = _late_slopes(g, t["noise_A"].to_numpy(float))
    with np.errstate(all="ignore"), quiet_numpy():
        keep = 1.0 - made / s0
        bound = np.abs(late) / keep
        diff = slope - bound
        sd = np.hypot(se, late_se / keep)
        doubted = t["substrate_doubted"].to_numpy(bool) if "substrate_doubted" in t.columns \
            else np.zeros(n, dtype=bool)
        return ((t["role"].to_numpy() == "sample") & (s0 > 0) & ~doubted & (keep > 0.05)
                & ~(np.nan_to_num(t["lag_s"].to_numpy(float)) > 0) & np.isfinite(diff)
                & (diff > TOO_FAST_Z * sd) & (diff > 0.05 * slope))


def _late_slopes(g: Grid, sigma) -> tuple[np.ndarray, np.ndarray]:
    """Per trace, the least-squares slope (A/min) of the usable readings after the first
    LATE_FROM of the read, and its SE from the noise SD ``sigma`` (NaN with fewer than 3)."""
    times = np.broadcast_to(g.times, g.values.shape)
    t_use = np.where(g.usable, times, np.nan)
    with np.errstate(all="ignore"), quiet_numpy():
        t0, t1 = np.nanmin(t_use, axis=1), np.nanmax(t_use, axis=1)
        w = (g.usable & (times >= (t0 + LATE_FROM * (t1 - t0))[:, None])).astype(float)
        k = w.sum(axis=1)
        tm = (w * np.nan_to_num(times)).sum(axis=1) / k
        dt = np.where(w > 0, times - tm[:, None], 0.0)
        sxx = (dt ** 2).sum(axis=1)
        ym = (w * np.nan_to_num(g.values)).sum(axis=1) / k
        b = (dt * np.where(w > 0, g.values - ym[:, None], 0.0)).sum(axis=1) / sxx
        ok = (k >= 3) & (sxx > 0)
        return np.where(ok, b * 60, np.nan), np.where(ok, sigma / np.sqrt(sxx) * 60, np.nan)


def _masked_start(g: Grid) -> np.ndarray:
    """Traces whose first readings (before the first usable one) were masked."""
    first = np.argmax(g.usable, axis=1)
    idx = np.arange(g.values.shape[1])[None, :]
    before = (idx < first[:, None]) & np.isfinite(g.times) & ~g.usable
    return before.any(axis=1) & g.usable.any(axis=1)


class ReplicateTest(NamedTuple):
    """The replicate-outlier test of every well (:func:`replicate_outliers`)."""

    z: np.ndarray           # the well's statistic against its replicates (``stat`` says which)
    out: np.ndarray         # flagged ``outlier``
    set_aside: np.ndarray   # left out of its group's mean (an outlier the others agree against)
    stat: np.ndarray        # "|z|" or "Grubbs G" per well ("" where not tested)
    method: str


def replicate_outliers(values, ses, keys, doubted=None) -> ReplicateTest:
    """Per well, its statistic against its replicates and whether it is an outlier (stage 5).

    Replicates are wells with the same key. Where :data:`POOL_MIN_GROUPS` or more groups have
    replicates, each well is compared with the mean of the others in its group using the
    plate's pooled relative scatter cv (:func:`_pooled_cv`) together with the wells' own SEs:
    z = (x - m) / sqrt(s_x^2 + s_m^2), s^2 = SE^2 + (cv m)^2; the worst well with |z| above
    :data:`Z_OUTLIER` is set aside and the test repeated while three or more remain; where the
    last two disagree both are flagged and kept, as neither can be told right (a heavy well
    set aside first is still left out of the mean: with both of the last two flagged too, the
    mean had kept it). Wells ``doubted`` (flagged for their own shape) are tested but leave the
    plate's scatter to the others.

    With fewer groups the scatter cannot be estimated: groups of five or more take Grubbs's
    test (Grubbs 1969, two-sided 5 %; a well it names is flagged only if it also stands
    :data:`Z_OUTLIER` from the others by their own SEs), smaller ones the z test against an
    assumed scatter of :data:`ASSUMED_CV` (Grubbs's test cannot name the odd one of three
    unless the other two coincide, and takes no duplicates: a duplicate 40 % heavy went
    unflagged and its sample's mean was 20 % high).
    """
    x, se = np.asarray(values, float), np.nan_to_num(np.asarray(ses, float))
    keys = np.asarray(keys, dtype=object)
    members: dict = {}
    for i in np.nonzero(np.isfinite(x))[0]:
        if keys[i] == keys[i]:                   # a key equal to nothing (NaN) has no replicates
            members.setdefault(keys[i], []).append(i)
    groups = [np.array(m) for m in members.values() if len(m) >= 2]
    sound = np.ones(x.size, bool) if doubted is None else ~np.asarray(doubted, bool)
    cv = _pooled_cv(x, se, [g[sound[g]] for g in groups if sound[g].sum() >= 2])
    t = _untested(x.size)
    for gr in groups:
        if cv is None and gr.size >= GRUBBS_FROM:
            _grubbs_test(x, se, gr, t)
        else:
            _z_test(x, se, gr, ASSUMED_CV if cv is None else cv, t)
    method = ("pooled replicate scatter (z)" if cv is not None else
              f"too few groups to pool the replicate scatter: z against an assumed "
              f"{100 * ASSUMED_CV:.0f} % scatter, Grubbs (1969) in groups of {GRUBBS_FROM} or more")
    return t._replace(method=method)


def _untested(n: int) -> ReplicateTest:
    """A :class:`ReplicateTest` of ``n`` wells before any is tested."""
    return ReplicateTest(np.full(n, np.nan), np.zeros(n, bool), np.zeros(n, bool),
                         np.full(n, "", dtype=object), "")


#: Replicate groups of this many wells or more take Grubbs's test where the plate's scatter
#: cannot be pooled; smaller ones the z test against :data:`ASSUMED_CV`.
GRUBBS_FROM = 5
#: The replicate scatter assumed where too few groups pool it: a few per cent is the
#: pipetting scatter of a well-run plate (common practice); 5 % leaves a triplicate's well
#: unflagged up to about 21 % off its replicates and a duplicate pair up to about 25 % apart.
ASSUMED_CV = 0.05


def _grubbs_test(x, se, gr, t: ReplicateTest) -> None:
    """Grubbs's test within one group (see :func:`replicate_outliers`); fills ``t``."""
    k = grubbs_outlier(x[gr])
    sd = np.std(x[gr], ddof=1)
    t.z[gr] = np.abs(x[gr] - x[gr].mean()) / sd if sd > 0 else 0.0
    t.stat[gr] = "Grubbs G"
    if k is not None and _beyond_own_ses(x, se, gr, gr[k]):
        t.out[gr[k]] = t.set_aside[gr[k]] = True


def _pooled_cv(x, se, groups) -> float | None:
    """The plate's relative replicate scatter beyond the wells' own SEs, or None with fewer
    than POOL_MIN_GROUPS usable groups.

    Each well's relative deviation from its group's mean, e = (x - m) / |m| sqrt(n / (n - 1)),
    has variance r^2 + cv^2 with r = SE / |m| its own share. cv is the (clipped)
    maximum-likelihood value over the wells (:func:`_ml_cv2`) that the z test at the current
    cv keeps (:func:`_z_test`: outliers set aside, their group's mean taken again without
    them), until no well moves. Each well counts by its own precision, so a plate whose slow
    wells have large SEs does not hide the scatter of its precise ones (a median of relative
    deviations less a median r^2 did: cv came out 0 and the precise wells' ordinary pipetting
    scatter read as outliers). The first cv is the median of the groups' own
    (:func:`_median_group_cv2`): one heavy well moves all three deviations of its triplicate,
    and on a plate of four triplicates those three of eleven outweighed the clipped fit (cv
    9.6 % instead of 0.2 %, and a well pipetted 40 % heavy stood 3.4 z out, unflagged); the
    group's mean is taken again without a well set aside, as the two left beside a heavy one
    otherwise carry its deviation into the fit (cv 10.8 %, a 40 % heavy well at 2.8 z).
    """
    usable = []
    for gr in groups:
        m = x[gr].mean()
        if abs(m) > 0 and abs(m) > 5 * np.nanmedian(se[gr]):
            usable.append(gr)                     # near zero: relative scatter means nothing
    if len(usable) < POOL_MIN_GROUPS:
        return None
    kept = usable
    c2 = _median_group_cv2(*_deviations(x, se, kept))
    for _ in range(10):               # set the outliers aside at this cv and refit on the rest
        now, t = [], _untested(x.size)                # the groups share no well: one record
        for gr in usable:
            _z_test(x, se, gr, math.sqrt(c2), t)
            if (~t.out[gr]).sum() >= 2:
                now.append(gr[~t.out[gr]])
        if sum(g.size for g in now) < 2 * POOL_MIN_GROUPS:
            break
        same = len(now) == len(kept) and all(np.array_equal(a, b) for a, b in zip(now, kept,
                                                                                   strict=True))
        kept = now
        e, r2 = _deviations(x, se, kept)
        c2 = _ml_cv2(np.concatenate(e) ** 2, np.nan_to_num(np.concatenate(r2)))
        if same:
            break
    return math.sqrt(c2)


def _deviations(x, se, groups) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Per group, its wells' relative deviations e from the group's mean (scaled to the
    variance of one well) and their own relative variances r^2 (:func:`_pooled_cv`)."""
    e, r2 = [], []
    for gr in groups:
        m, n = x[gr].mean(), gr.size
        e.append((x[gr] - m) / abs(m) * math.sqrt(n / (n - 1)))
        r2.append((se[gr] / abs(m)) ** 2)
    return e, r2


def _median_group_cv2(e: list[np.ndarray], r2: list[np.ndarray]) -> float:
    """A start for cv^2 that one bad group cannot move: the median over groups of each group's
    scatter beyond its wells' own SEs (at least 0), each group weighted by what it can tell of
    cv^2, 1 / (r^2 + c0)^2 with c0 the clipped fit over every well (:func:`_ml_cv2`), so that
    groups of imprecise wells, whose own SEs hide any scatter, do not set it to 0 (an
    unweighted median did, and the precise wells' ordinary scatter then read as outliers). A
    group of n has mean(e^2) = v chi2(n - 1) / (n - 1), so each is divided by the median of
    that (0.455 for pairs, 0.693 for triplicates) to make the median unbiased (a bare median
    put the scatter of twelve pairs at half its size)."""
    from .distributions import chi2_quantile

    r2 = [np.nan_to_num(b) for b in r2]
    c0 = _ml_cv2(np.concatenate(e) ** 2, np.concatenate(r2))
    per_group, weight = [], []
    for a, b in zip(e, r2, strict=True):
        dof = a.size - 1
        med = float(chi2_quantile(0.5, dof)) / dof
        per_group.append(np.mean(a ** 2) / med - np.mean(b))
        weight.append(1.0 / max(float(np.mean(b)) + c0, 1e-300) ** 2)
    order = np.argsort(per_group)
    cum = np.cumsum(np.asarray(weight)[order])
    return max(0.0, float(np.asarray(per_group)[order][np.searchsorted(cum, cum[-1] / 2)]))


#: Huber's clip of a well's squared z in :func:`_ml_cv2` (z = 2.5), and the mean of a clipped
#: chi-square(1), E[min(X, 6.25)] = F3(6.25) + 6.25 (1 - F1(6.25)), that keeps it unbiased.
HUBER_Z2, HUBER_MEAN = 6.25, 0.977560


def _ml_cv2(e2, r2) -> float:
    """The cv^2 of deviations e with variances v = r^2 + cv^2: the root of
    sum (min(e^2 / v, 6.25) - 0.9776) / v = 0, the maximum-likelihood equation with each
    well's squared z clipped (Huber 1964) so that an outlier moves it little; each well counts
    by its own precision. 0 when the wells' own SEs already explain the scatter."""
    def score(c2: float) -> float:
        v = np.maximum(r2 + c2, 1e-300)
        return float(np.sum((np.minimum(e2 / v, HUBER_Z2) - HUBER_MEAN) / v))

    if score(0.0) <= 0:
        return 0.0
    lo, hi = 0.0, float(e2.max()) + 1e-12
    for _ in range(60):                           # the score changes sign once: bisect
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if score(mid) > 0 else (lo, mid)
    return 0.5 * (lo + hi)


def _z_test(x, se, gr, cv, t: ReplicateTest) -> None:
    """Iterative z test of one group (see :func:`replicate_outliers`); fills ``t``. Each well
    is judged against the others still kept, their mean weighted by each one's precision (a
    well with a spike and a wide SE once pulled that mean and hid a heavy well beside it)."""
    keep = list(gr)
    t.stat[gr] = "|z|"
    while len(keep) >= 2:
        zs = []
        for i in keep:
            others = [j for j in keep if j != i]
            zs.append(_z_against(x, se, i, others, cv))
        t.z[keep] = zs
        worst = int(np.argmax(zs))
        if zs[worst] <= Z_OUTLIER:
            return
        if len(keep) == 2:
            t.out[keep] = True                    # the last two disagree: both, neither set aside
            return
        t.out[keep[worst]] = t.set_aside[keep[worst]] = True
        keep.pop(worst)


def _z_against(x, se, i, others, cv) -> float:
    """|z| of well ``i`` against the mean of ``others``, each weighted by its precision, with
    variances SE^2 + (cv m)^2 (m the others' plain mean); 0 where nothing varies."""
    scale = (cv * x[others].mean()) ** 2
    s2 = se[others] ** 2 + scale
    if np.all(s2 > 0):                            # the others' mean, each by its precision
        m, s_m2 = float(np.sum(x[others] / s2) / np.sum(1 / s2)), 1 / np.sum(1 / s2)
    else:
        m, s_m2 = float(x[others].mean()), float(np.sum(s2)) / len(others) ** 2
    s_i2 = se[i] ** 2 + scale
    return abs(x[i] - m) / math.sqrt(s_i2 + s_m2) if s_i2 + s_m2 > 0 else 0.0


def _beyond_own_ses(x, se, gr, i) -> bool:
    """Whether well ``i`` stands more than :data:`Z_OUTLIER` from the rest of its group ``gr``
    by the wells' own SEs (:func:`_z_against` with no scatter, or any distance where they have
    none). Grubbs's test sees only the spread within the group: of three wells, two that
    nearly coincide make the third an outlier however close it is (one 0.16 SE from the others
    was flagged)."""
    others = [j for j in gr if j != i]
    if se[i] <= 0 and np.all(se[others] <= 0):
        return True
    return _z_against(x, se, i, others, 0.0) > Z_OUTLIER


def grubbs_outlier(x: np.ndarray, alpha: float = 0.05) -> int | None:
    """Index of the single Grubbs outlier (two-sided, level ``alpha``) or None; n >= 3.

    Grubbs (1969), Technometrics 11:1: G = max |x - mean| / s against the critical value from
    Student's t at alpha/(2n), which reproduces Grubbs's table.
    """
    from .distributions import t_quantile

    x = np.asarray(x, dtype=float)
    n = x.size
    if n < 3:
        return None
    sd = np.std(x, ddof=1)
    if sd == 0:
        return None
    dev = np.abs(x - x.mean())
    k = int(np.argmax(dev))
    t = float(t_quantile(1 - alpha / (2 * n), n - 2))
    crit = (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))
    return k if dev[k] / sd > crit else None


# --------------------------------------------------------------------------- 6. activity


#: Flags that do not doubt a well's own rate in a mean: ``outlier`` is judged against the
#: group itself.
NOT_DOUBTING = ("outlier",)


def _set_aside(grp: pd.DataFrame, values: np.ndarray) -> tuple[np.ndarray, list[str]]:
    """Which wells of a group go into its mean, and why each other one does not: wells without
    a value, replicate outliers set aside by the test (``replicate_set_aside``; outliers that
    disagree with each other and none else are kept, and said to be), and wells that need a
    look for another reason (a flag says their own rate may be wrong), unless that would leave
    none, when they are kept and said to be."""
    flags = list(grp["flags"])
    flagged = np.array(["outlier" in f for f in flags])
    outl = grp["replicate_set_aside"].to_numpy(bool).copy()
    if outl.all():
        outl[:] = False
    doubt = [[w for w in f if w not in NOT_DOUBTING] for f in flags]
    ok = np.isfinite(values)
    use = ok & ~outl & ~np.array([bool(d) for d in doubt])
    kept_doubted = not use.any()
    if kept_doubted:
        use = ok & ~outl
    why = []
    for w, v, f, d, o, z, st, fl, u in zip(grp["trace"], values, flags, doubt, outl,
                                           grp["replicate_z"], grp["replicate_stat"], flagged,
                                           use, strict=True):
        if not np.isfinite(v):
            why.append(f"{w}: no rate ({', '.join(f) or 'no estimate'})")
        elif o:
            why.append(f"{w}: replicate outlier ({st} = {z:.2f})")
        elif d and not kept_doubted:
            why.append(f"{w}: needs a look ({', '.join(d)})")
        elif d:
            why.append(f"{w}: needs a look ({', '.join(d)}), kept: every well of the group does")
        elif fl and u:
            why.append(f"{w}: replicate outlier ({st} = {z:.2f}), kept: it and the wells it "
                       "disagrees with cannot be told apart")
    return use, why


def wells_disagree(grp: pd.DataFrame, use: np.ndarray) -> bool:
    """Whether wells kept in a mean are replicate outliers (of each other)."""
    return bool(np.any(use & np.array(["outlier" in f for f in grp["flags"]])))


def replicate_summary(table: pd.DataFrame, value_col: str) -> pd.DataFrame:
    """Mean, SD, CV and n per replicate group and dilution; outliers and wells that need a
    look left out of the mean with the reason (:func:`_set_aside`)."""
    d = table[~table["role"].isin(["blank", "standard"])
              & np.isfinite(table[value_col].astype(float))]
    if d.empty or d["replicate_key"].nunique() == len(d):
        return pd.DataFrame()                       # no replicates on this plate
    rows = []
    for _, grp in d.groupby("replicate_key", sort=False):
        use, why = _set_aside(grp, grp[value_col].to_numpy(float))
        kept = grp[use]
        v = kept[value_col].to_numpy(float)
        sd = float(np.std(v, ddof=1)) if v.size > 1 else np.nan
        rows.append({"group": grp["group"].iloc[0], "role": grp["role"].iloc[0],
                     "sample": grp["sample"].iloc[0], "dilution": grp["dilution"].iloc[0],
                     "substrate_uM": grp["substrate_uM"].iloc[0],
                     "inhibitor_uM": grp["inhibitor_uM"].iloc[0], "n": len(grp),
                     "n_used": int(v.size), "mean": float(v.mean()), "sd": sd,
                     "well_se": float(np.nanmedian(kept[value_col + "_se"].to_numpy(float))),
                     "sem": sd / math.sqrt(v.size) if v.size > 1 else np.nan,
                     "cv_pct": 100 * sd / abs(v.mean()) if v.mean() else np.nan,
                     "unit": value_col.split("_", 1)[1].replace("_per_", "/"),
                     "wells": list(grp["trace"]), "left_out": why})
    reps = pd.DataFrame(rows)
    return reps if (reps["n"] > 1).any() else pd.DataFrame()


def activity_summary(table: pd.DataFrame) -> pd.DataFrame:
    """Per sample and condition (substrate, inhibitor): mean activity ± SD over replicates and
    dilutions, outliers, wells that need a look and wells without a rate left out with the
    reason (:func:`_set_aside`), and the
    dilution-linearity check (activity regressed on log2 dilution; stage 6)."""
    if "activity_U_per_mL" not in table.columns:
        return pd.DataFrame()
    d = table[table["role"] == "sample"]
    rows = []
    keys = d["sample"].where(d["sample"] != "", d["group"])
    for (name, s_uM, i_uM), grp in d.groupby([keys, d["substrate_uM"].fillna(-1),
                                              d["inhibitor_uM"].fillna(-1)], sort=False):
        act = grp["activity_U_per_mL"].to_numpy(float)
        use, why = _set_aside(grp, act)
        row = {"sample": name, "substrate_uM": None if s_uM < 0 else s_uM,
               "inhibitor_uM": None if i_uM < 0 else i_uM, "n_wells": len(grp),
               "n_used": int(use.sum()), "wells": list(grp["trace"]),
               "dilutions": sorted({float(x) for x in grp["dilution"][use]}),
               "left_out": why}
        for col in ("activity_U_per_mL", "activity_nkat_per_mL", "specific_activity_U_per_mg",
                    "turnover_per_s"):
            if col in grp.columns:
                v, e = grp[col].to_numpy(float)[use], grp[f"{col}_se"].to_numpy(float)[use]
                row[col] = float(np.mean(v[np.isfinite(v)])) if np.isfinite(v).any() else None
                row[f"{col}_sd"] = (float(np.std(v[np.isfinite(v)], ddof=1))
                                    if np.isfinite(v).sum() > 1 else None)
                row[f"{col}_well_se"] = (float(np.median(e[np.isfinite(e)]))
                                         if np.isfinite(e).any() else None)
        row.update(dilution_trend(grp["dilution"].to_numpy(float)[use], act[use]))
        if wells_disagree(grp, use):
            row["flags"] = row["flags"] + ["wells-disagree"]
        rows.append(row)
    return pd.DataFrame(rows)


def dilution_trend(dilution: np.ndarray, activity: np.ndarray) -> dict:
    """Does the activity trend with the dilution? Least-squares line of activity on log2
    dilution: its slope as a percentage of the mean activity per two-fold dilution, and the
    two-sided p of Student's t on n - 2 degrees of freedom (as scipy.stats.linregress)."""

    ok = np.isfinite(dilution) & np.isfinite(activity)
    x, y = np.log2(dilution[ok]), activity[ok]
    if np.unique(x).size < 2 or y.size < 3:
        why = "one dilution" if np.unique(x).size < 2 else "fewer than three wells"
        return {"dilution_trend_pct": None, "dilution_trend_p": None, "flags": [],
                "dilution_check": f"not tested ({why})"}
    slope, p, half = _slope_and_p(x, y)
    scale = 100 / abs(y.mean()) if y.mean() else np.nan
    pct, lo, hi = slope * scale, (slope - half) * scale, (slope + half) * scale
    bad = p < 0.05 and abs(pct) >= 100 * TREND_LIMIT
    bound = max(abs(lo), abs(hi))

    def pm(x: float) -> str:                      # no "-0.0"
        return f"{x:+.1f}" if round(x, 1) else "+0.0"

    head = f"{pm(pct)} % [{pm(lo)}, {pm(hi)}] per two-fold dilution, p = {p:.2g}"
    if bad:
        words = ": activity trends with dilution"
    elif p < 0.05:
        words = (f": a small trend, real (p < 0.05) but under {100 * TREND_LIMIT:.0f} % per "
                 "two-fold dilution; the most concentrated dilution may read low (depletion) "
                 "or high")
    elif bound <= 100 * FLAT_LIMIT:
        words = f": flat (no trend beyond ±{bound:.0f} %)"
    else:
        words = (f": no clear trend, but one of up to ±{bound:.0f} % is not ruled out (too few "
                 "wells or too much scatter to call it flat)")
    return {"dilution_trend_pct": float(pct), "dilution_trend_p": p,
            "dilution_trend_ci_pct": [float(lo), float(hi)],
            "flags": ["dilution-trend"] if bad else [], "dilution_check": head + words}


def _slope_and_p(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Least-squares slope of y on x, the two-sided p of Student's t for a zero slope on
    n - 2 degrees of freedom, and the half-width of the slope's 95 % interval."""
    from .distributions import t_two_sided, t_two_sided_p
    from .fitting import line_slope

    slope, se = line_slope(x, y)
    if se == 0:                                   # on a line: certain, unless it is flat
        return slope, 0.0 if slope else 1.0, 0.0
    dof = x.size - 2
    return slope, float(t_two_sided_p(slope / se, dof)), float(t_two_sided(0.95, dof) * se)


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
    if abs(pos.mean()) < abs(neg.mean()):       # a full-signal control below the no-signal one
        verdict = ("controls reversed: the positive controls change less than the negative "
                   "ones; are the roles swapped in the map?")
    return {"value": z, "n_positive": int(pos.size), "n_negative": int(neg.size),
            "mean_positive": float(pos.mean()), "mean_negative": float(neg.mean()),
            "sd_positive": float(np.std(pos, ddof=1)), "sd_negative": float(np.std(neg, ddof=1)),
            "unit": value_col.split("_", 1)[1].replace("_per_", "/"), "verdict": verdict,
            "source": "Zhang, Chung & Oldenburg (1999)"}


def z_factor(pos, neg) -> float:
    """Z' = 1 - 3 (sd_pos + sd_neg) / |mean_pos - mean_neg| (sample SDs)."""
    pos, neg = np.asarray(pos, float), np.asarray(neg, float)
    return float(1 - 3 * (np.std(pos, ddof=1) + np.std(neg, ddof=1))
                 / abs(pos.mean() - neg.mean()))


# --------------------------------------------------------------------------- the plate


@dataclass
class RatesAnalysis:
    """Per-well rates, replicate and activity summaries, Z', what was assumed, and warnings."""

    table: pd.DataFrame
    replicates: pd.DataFrame
    zprime: dict | None
    windows: Windows
    traces: TraceSet
    settings: RateSettings
    warnings: list = field(default_factory=list)
    blank_info: dict = field(default_factory=dict)
    setup: PlateSetup | None = None
    activity: pd.DataFrame = field(default_factory=pd.DataFrame)
    outlier_method: str = ""
    #: The moment times are counted from, in the file's own seconds (:func:`plate_origin`).
    time_origin_s: float = 0.0

    @property
    def needs_look(self) -> list[str]:
        """The wells that carry a flag: each flag means the number may be wrong."""
        return [w for w, f in zip(self.table["trace"], self.table["flags"], strict=True) if f]


def analyse_plate(ts: TraceSet, layout: pd.DataFrame | None = None,
                  settings: RateSettings | None = None) -> RatesAnalysis:
    """Initial rate, concentration rate and activity of every trace, with QC, in the stages of
    the module docstring.

    ``ts`` holds absorbance traces; ``layout`` (from :func:`rateabs.layout.read_layout`) gives
    roles, concentrations, dilutions, replicate groups and per-well windows or skips.
    """
    st = settings or RateSettings()
    ts, t0 = plate_origin(ts)
    setup = plate_setup(ts, layout, st)
    source = layout.attrs.get("source") if layout is not None else None
    used = skip_and_mask(ts, setup, st)
    mode = blank_mode(setup.wells.loc[used.names, "role"], st, source)
    s, analysed = estimate_slopes(used, setup, st, mode)
    g = analysed.grid()
    wells = setup.wells.loc[g.names]
    table, blank_info, direction = _rates_table(s, g, wells, mode, setup, st, analysed)
    doubted = substrate_exceeded(table, g)
    table["substrate_doubted"] = doubted
    deeper = prefer_curve_where_depleted(s, table, st, set_windows(wells))
    if deeper is not None:
        s = deeper
        table, blank_info, direction = _rates_table(s, g, wells, mode, setup, st, analysed)
        table["substrate_doubted"] = doubted
    value_col = "rate_uM_per_min" if "rate_uM_per_min" in table.columns else "slope_A_per_min"
    masks = plate_flags(table, s, g, direction, blank_info)
    doubted = np.array([bool(f) for f in s.trace_flags]) | np.any(
        [m for k, m in masks.items() if k not in NOT_DOUBTING], axis=0)
    rep = replicate_outliers(
        np.where(table["role"].isin(["blank", "standard"]), np.nan, table[value_col]),
        table[value_col + "_se"], table["replicate_key"], doubted)
    masks["outlier"] = rep.out | s.blank["left_out"]
    table["replicate_z"] = rep.z
    table["replicate_stat"] = rep.stat
    table["replicate_set_aside"] = rep.set_aside
    plate = _flag_lists({k: masks[k] for k in PLATE_FLAGS if k in masks}, len(table))
    table["flags"] = [a + b for a, b in zip(s.trace_flags, plate, strict=True)]
    a = RatesAnalysis(table, replicate_summary(table, value_col), z_prime(table, value_col),
                      s.windows, analysed, st, list(setup.warnings), blank_info, setup,
                      activity_summary(table), rep.method, t0)
    bend = (blank_info.get("calibration") or {}).get("bend")
    a.warnings += (_notes(a, value_col) + blank_drift(table, blank_info) + blank_doubts(table)
                   + ([bend] if bend else [])
                   + _substrate_note(table, g)
                   + _unused_standards(table, st, "calibration" in blank_info))
    return a


#: The blanks' drift is said where it is significant (over 3 SE) and over this fraction of
#: the median sample rate: every rate then rests on the blank correction. It is the plate's,
#: not a blank's: a blank that drifts unlike the others is left out as a replicate outlier.
BLANK_DRIFT_SHARE = 0.05


def blank_drift(table: pd.DataFrame, blank_info: dict) -> list[str]:
    """One line on the blanks' drift where it matters (:data:`BLANK_DRIFT_SHARE`); its share
    of the median sample rate goes into ``blank_info``."""
    level, se = blank_info.get("slope_A_per_min"), blank_info.get("slope_A_per_min_se")
    if level is None:
        return []
    sample_like = table["role"].isin(["sample", "positive"]).to_numpy()
    rates = np.abs(table["slope_A_per_min"].to_numpy(float)[sample_like])
    with quiet_numpy():
        med = float(np.nanmedian(rates)) if rates.size else np.nan
    share = abs(level) / med if med > 0 else np.nan
    blank_info["drift_share_of_median_rate"] = None if np.isnan(share) else round(share, 4)
    if not (abs(level) > 3 * se and not share <= BLANK_DRIFT_SHARE):
        return []
    from .fitting import fmt_pm

    size = fmt_pm(level, se, unit="A/min") + (f", {share:.0%} of the median sample rate"
                                               if np.isfinite(share) else "")
    if blank_info["mode"] == "none":
        return [f"the blanks drift by {size}, and nothing was subtracted (--blank none): every "
                "rate carries that drift"]
    return [f"the blanks drift by {size}; it was taken out of every well, so every rate rests "
            "on the blanks holding all that the samples hold but the enzyme"]


def blank_doubts(table: pd.DataFrame) -> list[str]:
    """Warnings where the blanks may not stand for what the samples hold but the enzyme: two
    blanks that disagree (too few to tell which is right: with three or more an odd one is
    left out as an outlier), and blanks whose substrate in the map differs from every sample's
    (a substrate that changes the signal on its own is then not taken out). An audit's two
    blanks 60 SE apart moved every rate by a third, and blanks without substrate left a
    non-enzymatic loss of 0.002 A/min in every rate (+6.8 %), both with no word."""
    from .fitting import fmt_pm

    out = []
    b = table[(table["role"] == "blank") & np.isfinite(table["slope_A_per_min"].astype(float))]
    if len(b) == 2:
        x, se = b["slope_A_per_min"].to_numpy(float), b["slope_A_per_min_se"].to_numpy(float)
        apart = abs(x[0] - x[1]) / math.hypot(*se) if np.all(se > 0) else np.inf
        if apart > Z_OUTLIER:
            w = list(b["trace"])
            out.append(f"the two blanks disagree ({w[0]} {fmt_pm(x[0], se[0])}, {w[1]} "
                       f"{fmt_pm(x[1], se[1])} A/min, {apart:.0f} SE apart) and two cannot show "
                       "which is right: every rate may be off by half their difference; look at "
                       "them, or add blanks")
    if "substrate_uM" in table.columns:
        s_b = table.loc[table["role"] == "blank", "substrate_uM"].astype(float)
        s_s = table.loc[table["role"] == "sample", "substrate_uM"].astype(float)
        s_b, s_s = set(s_b[np.isfinite(s_b)].round(9)), set(s_s[np.isfinite(s_s)].round(9))
        if s_b and s_s and not s_b & s_s:
            out.append(f"the blanks hold {', '.join(f'{v:g}' for v in sorted(s_b))} uM "
                       f"substrate and the samples {', '.join(f'{v:g}' for v in sorted(s_s)[:4])}"
                       f"{' ...' if len(s_s) > 4 else ''} uM: a signal change of the substrate "
                       "itself is not taken out by these blanks")
    return out


def plate_origin(ts: TraceSet) -> tuple[TraceSet, float]:
    """The traces with times counted from the origin every command uses
    (:func:`rateabs.models.time_origin`: the file's zero, or the plate's first usable reading
    where that zero lies more than the read's span before it, as a clock's midnight does), and
    that origin in the file's seconds. Windows, skipped readings and the map's windows are then
    given, and reported, in the same times: 0-120 s is the first two minutes of the read
    whether the file counts from zero or from midnight."""
    from .models import time_origin

    g = ts.grid()
    times = np.broadcast_to(g.times, g.values.shape)
    used = times[g.usable & np.isfinite(times)]
    _, t0 = time_origin(used)
    if not t0:
        return ts, 0.0
    if g.times.ndim == 2 and g.times.strides[0] == 0:       # one row of times, shared
        shifted = np.broadcast_to(g.times[0] - t0, g.times.shape)
    else:
        shifted = np.array(g.times, dtype=float) - t0
        shifted.flags.writeable = False
    return replace(ts, readings=replace(g, times=shifted)), t0


def _unused_standards(table: pd.DataFrame, st: RateSettings, calibrated: bool) -> list[str]:
    """A note where the map has standard wells enough for a curve but the conversion took the
    absorptivity given instead (``--calibrate auto`` with --epsilon or --chromophore)."""
    std = table["role"].to_numpy() == "standard"
    if calibrated or st.calibrate == "none" or std.sum() < 3 or not st.epsilon:
        return []
    return [f"the {int(std.sum())} standard wells are not used for the conversion: the "
            f"absorptivity given ({st.epsilon:g} M^-1 cm^-1) is; --calibrate standards converts "
            "with their curve instead"]


def _substrate_note(table: pd.DataFrame, g: Grid) -> list[str]:
    """One line naming the wells that made more product than the map's substrate."""
    doubted = table["substrate_doubted"].to_numpy(bool)
    if not doubted.any():
        return []
    made, _ = product_formed(table, g)
    names = list(table["trace"][doubted])
    k = int(np.argmax(np.where(doubted, made / table["substrate_uM"].to_numpy(float), 0)))
    return [f"{len(names)} sample well(s) ({', '.join(names[:6])}{' ...' if len(names) > 6 else ''}"
            f") formed more product over the read than the map's substrate holds (e.g. "
            f"{table['trace'].iloc[k]}: {made[k]:.3g} uM from {table['substrate_uM'].iloc[k]:.3g}"
            " uM): is the substrate column in another unit (bare numbers are read as uM), or the "
            "absorptivity wrong? Their windows were not judged against that substrate"]


def _rates_table(s: TraceSlopes, g: Grid, wells: pd.DataFrame, mode: str, setup: PlateSetup,
                 st: RateSettings, analysed: TraceSet) -> tuple[pd.DataFrame, dict, float]:
    """Stages 3 and 4 on the slopes ``s``: blank correction, direction, conversion, the table."""
    roles = wells["role"].to_numpy()
    slope, se, blank_info = blank_correction(s, roles == "blank", mode, g.names)
    direction = assay_direction(slope, roles, st)
    blank_info["direction"] = "up" if direction > 0 else "down"
    conv, calib = convert(slope, se, direction, wells, setup, st, analysed)
    if calib is not None:
        blank_info["calibration"] = calib
    return well_table(g, s, wells, slope, se, conv), blank_info, direction


#: A map's substrate is doubted where the product formed over the read exceeds it by this
#: fraction (and by three noise SDs of that product): a reaction cannot make more product than
#: it had substrate (for one product per substrate, as an initial-rate assay assumes).
SUBSTRATE_EXCESS = 0.10


def product_formed(table: pd.DataFrame, g: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Per well, the product formed over the read in µM (the change between the medians of
    the first and the last three usable readings, through the well's own conversion from A to
    µM) and the SD of that figure from the noise; NaN where the rates are not in µM."""
    n = len(table)
    if "rate_uM_per_min" not in table.columns:
        return np.full(n, np.nan), np.full(n, np.nan)
    with np.errstate(all="ignore"), quiet_numpy():
        per_A = np.abs(table["rate_uM_per_min"].to_numpy(float)
                       / table["slope_A_per_min"].to_numpy(float))
        y = np.where(g.usable, g.values, np.nan)
        order = np.cumsum(g.usable, axis=1)
        last = order[:, -1:]
        first3 = np.where(g.usable & (order <= 3), y, np.nan)
        last3 = np.where(g.usable & (order > last - 3), y, np.nan)
        change = np.abs(np.nanmedian(last3, axis=1) - np.nanmedian(first3, axis=1))
        noise = table["noise_A"].to_numpy(float) * np.sqrt(2 * np.pi / 2 / 3)
    return change * per_A, noise * per_A


def substrate_exceeded(table: pd.DataFrame, g: Grid) -> np.ndarray:
    """Sample wells that formed more product over the read than the map's [S]0 holds
    (SUBSTRATE_EXCESS beyond it, and three noise SDs): the substrate concentration (or its
    unit: bare numbers are read as µM) or the absorptivity cannot be right."""
    if "substrate_uM" not in table.columns:
        return np.zeros(len(table), dtype=bool)
    made, sd = product_formed(table, g)
    s0 = table["substrate_uM"].to_numpy(float)
    with np.errstate(invalid="ignore"):
        return ((table["role"].to_numpy() == "sample") & (s0 > 0) & np.isfinite(made)
                & (made > (1 + SUBSTRATE_EXCESS) * s0) & (made - s0 > 3 * sd))


def used_in_window(table: pd.DataFrame, s: TraceSlopes) -> np.ndarray:
    """Per well, the fraction of the map's [S]0 used within the straight window (rate x window
    length against [S]0); NaN where the map gives no substrate or the rates are not in µM."""
    if "rate_uM_per_min" not in table.columns or "substrate_uM" not in table.columns:
        return np.full(len(table), np.nan)
    s0 = table["substrate_uM"].to_numpy(float)
    with np.errstate(all="ignore"):
        used = np.abs(table["rate_uM_per_min"].to_numpy(float)) * (
            s.window_end_s - s.window_start_s) / 60.0 / s0
    return np.where(s0 > 0, used, np.nan)


def depleted(table: pd.DataFrame, s: TraceSlopes) -> np.ndarray:
    """Sample wells reported from a straight window within which more than DEPLETION_LIMIT of
    the map's substrate was used: the window's mean slope then falls short of the initial rate
    (common practice: keep the initial-rate window under 10 % conversion)."""
    used = used_in_window(table, s)
    trusted = ~table["substrate_doubted"].to_numpy(bool) if "substrate_doubted" in \
        table.columns else True
    with np.errstate(invalid="ignore"):
        return ((table["role"].to_numpy() == "sample") & (s.method == "window")
                & (used > DEPLETION_LIMIT) & trusted)


def depletion_shortfall(used) -> np.ndarray:
    """The most a straight window's mean slope can fall short of the initial rate, as a fraction
    of it, when a fraction ``used`` of the substrate went within the window: first-order
    depletion (substrate far below Km), the steepest slowing of Michaelis–Menten kinetics
    without inhibition, gives 1 - f / (-ln(1 - f)), about f/2 (zero order gives none)."""
    f = np.clip(np.asarray(used, float), 0.0, 1 - 1e-12)
    with np.errstate(all="ignore"):
        return np.where(f > 0, 1 + f / np.log1p(-f), 0.0)


#: Where a well's window was set by the user: that window is the well's number, never replaced
#: by the whole curve (an audit's map window 60-600, set to skip a settling start, was reported
#: as the curve fitted to 0-600 under the header line naming the window: +4.6 %, 2.3 SE).
SET_WINDOW_SOURCES = ("--well-window", "plate map", "--window")


def set_windows(wells: pd.DataFrame) -> np.ndarray:
    """The wells whose window the user set (not ``auto``), by :data:`SET_WINDOW_SOURCES`."""
    return np.array([src in SET_WINDOW_SOURCES and not (isinstance(w, str) and w == "auto")
                     for w, src in zip(wells["window"], wells["window_source"], strict=True)])


def prefer_curve_where_depleted(s: TraceSlopes, table: pd.DataFrame, st: RateSettings,
                                set_windows=None) -> TraceSlopes | None:
    """With the estimator on ``auto``, the whole-curve initial slope (which follows the
    depletion) in place of a straight window that used more than DEPLETION_LIMIT of the
    substrate the map gives; None when no well changes. The straight window cannot see a
    slowing that is smaller than its noise, the map's substrate can.

    Not where the curve's initial slope is evidently the shallower (by SHALLOWER_SE of its
    SEs): depletion slows a reaction, so a curve that follows it starts steeper than the
    window's mean slope, and one that starts shallower describes something else (a lag it did
    not fit: on the simulated plates of benchmarks/flag_calibration.py such curves read lag
    wells 12-56 % low, unflagged); the window is kept there, and flagged ``over-10pct`` where
    its possible shortfall exceeds its SE (:func:`plate_flags`). Nor where the user set the
    window (``set_windows``, :func:`set_windows`): it is kept, and flagged the same way."""
    if st.slope_from != "auto":
        return None
    w = s.windows
    with np.errstate(invalid="ignore"):
        steeper = (np.abs(w.curve_slope) + SHALLOWER_SE * w.curve_slope_se) * 60 >= np.abs(
            s.slope)
    set_here = np.zeros(len(table), bool) if set_windows is None else np.asarray(set_windows)
    switch = (depleted(table, s) & np.isfinite(w.curve_slope) & np.isfinite(w.curve_slope_se)
              & steeper & ~set_here)
    if not switch.any():
        return None
    return replace(s, slope=np.where(switch, w.curve_slope * 60, s.slope),
                   slope_se=np.where(switch, w.curve_slope_se * 60, s.slope_se),
                   method=np.where(switch, "curve", s.method),
                   choice=np.where(switch, DEPLETED_CHOICE, s.choice))


def well_table(g: Grid, s: TraceSlopes, wells: pd.DataFrame, slope, se,
               conv: dict) -> pd.DataFrame:
    """One row per well: what was measured, how, and what was set for it."""
    w = s.windows
    cols = {"trace": g.names, "role": wells["role"].to_numpy(),
            "sample": wells["sample"].fillna("").to_numpy(), "group": wells["group"].to_numpy(),
            "method": s.method, "choice": s.choice, "slope_A_per_min": slope,
            "slope_A_per_min_se": se, "window_start_s": s.window_start_s,
            "window_end_s": s.window_end_s, "window_source": wells["window_source"].to_numpy(),
            "n_points": np.nan_to_num(w.n).astype(int), "r2": w.r2, "lag_s": w.lag_s,
            "window_end_reason": _end_texts(w.end_reason),
            "curve_model": np.asarray(w.curve_model).astype(str),
            "curve_slope_A_per_min": w.curve_slope * 60,
            "curve_slope_A_per_min_se": w.curve_slope_se * 60, "noise_A": w.sigma,
            "substrate_uM": wells["substrate_M"].to_numpy(float) * 1e6,
            "inhibitor_uM": wells["inhibitor_M"].to_numpy(float) * 1e6,
            "enzyme_nM": wells["enzyme_M"].to_numpy(float) * 1e9,
            "dilution": wells["dilution"].to_numpy(float),
            "dilution_source": wells["dilution_source"].to_numpy(),
            "masked_readings": masked_counts(g),
            "skipped_s": [[t for t, _ in sk] for sk in wells["skip"].reindex(g.names)],
            **conv}
    t = pd.DataFrame(cols)
    t["replicate_key"] = [f"{gr}|dilution {d:g}" for gr, d in zip(t["group"], t["dilution"],
                                                                    strict=True)]
    return t


def _end_texts(codes) -> list[str]:
    """The words of each window's end reason (one lookup per distinct code)."""
    words = {int(c): WindowEnd(int(c)).text for c in np.unique(codes)}
    return [words[int(c)] for c in codes]


def masked_counts(g: Grid) -> list[dict]:
    """Per trace, its masked readings by reason (over range, past the linear limit, skipped;
    missing cells left out)."""
    from .traces import FLAG_NAMES

    if g.flags is None:
        return [{} for _ in g.names]
    real = np.isfinite(g.times)
    counts = {name: ((g.flags == code) & real).sum(axis=1)
              for code, name in enumerate(FLAG_NAMES) if name and name != "missing"}
    return [{k: int(v[i]) for k, v in counts.items() if v[i]} for i in range(len(g.names))]


def _notes(a: RatesAnalysis, value_col: str) -> list[str]:
    """The run's summary lines: how many wells need a look, and what limits the numbers."""
    notes = []
    if value_col == "slope_A_per_min":
        notes.append("no molar absorptivity given (--epsilon or --chromophore) and no standard "
                     "curve: rates are in A/min only")
    look = a.needs_look
    if look:
        counts: dict[str, int] = {}
        for f in a.table["flags"]:
            for word in f:
                counts[word] = counts.get(word, 0) + 1
        what = ", ".join(f"{k} {v}" for k, v in sorted(counts.items(), key=lambda kv: -kv[1]))
        notes.append(f"{len(look)} of {len(a.table)} wells need a look ({what}); each flag's "
                     "meaning is listed with the results")
    zp = a.zprime
    n_pos, n_neg = ((a.table["role"] == r).sum() for r in ("positive", "negative"))
    if zp is None and (n_pos or n_neg):
        notes.append(f"no Z': it needs two or more positive and two or more negative controls "
                     f"(the map has {n_pos} positive, {n_neg} negative)")
    elif zp and min(zp["n_positive"], zp["n_negative"]) < 4:
        notes.append(f"Z' = {zp['value']:.2f} rests on {zp['n_positive']} positive and "
                     f"{zp['n_negative']} negative controls: with so few SDs it is a rough "
                     "figure (common practice: eight or more of each)")
    if zp and zp["verdict"].startswith("controls reversed"):
        notes.append(f"Z' = {zp['value']:.2f} but the {zp['verdict']}")
    elif zp and zp.get("value") is not None and zp["value"] < 0.5:
        notes.append(f"Z' = {zp['value']:.2f} is below 0.5: the controls do not separate well")
    if not a.activity.empty:
        flagged = {f: [r["sample"] for _, r in a.activity.iterrows() if f in r["flags"]]
                   for f in ACTIVITY_FLAGS}
        if flagged["dilution-trend"]:
            notes.append(f"the activity of {', '.join(map(str, flagged['dilution-trend'][:5]))} "
                         "trends with the dilution: its mean over dilutions is not one activity")
        if flagged["wells-disagree"]:
            notes.append(f"the wells of {', '.join(map(str, flagged['wells-disagree'][:5]))} "
                         "disagree and none can be told right (replicate outliers of each other, "
                         "kept): the mean activity is not to be trusted; repeat the sample")
    return notes
