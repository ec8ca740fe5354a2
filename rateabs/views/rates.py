"""The ``rates`` command's view: what the plate analysis found, in the JSON document (every
assumption in ``settings``), the table for a person (the assumptions in ``#`` lines above it),
tidy CSV, the plate's figures and a report page that reads like a lab report.

:func:`compute_rates` is the per-file entry point (it returns a :class:`~rateabs.views.View`).
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from ..fitting import fmt_pm
from ..options import WELL_PAGE_CAP, RatesOptions
from ..output import document, render_table, rows_to_csv, write_text
from . import View, deliver, origin_settings, origin_words, read_for, time_settings, time_words

RATE_FIELDS = ["trace", "role", "sample", "group", "method", "choice", "slope_A_per_min",
               "slope_A_per_min_se", "rate_uM_per_min", "rate_uM_per_min_se",
               "activity_U_per_mL", "activity_U_per_mL_se", "activity_nkat_per_mL",
               "activity_nkat_per_mL_se", "specific_activity_U_per_mg",
               "specific_activity_U_per_mg_se", "turnover_per_s", "turnover_per_s_se",
               "window_start_s", "window_end_s", "window_source", "n_points", "r2", "lag_s",
               "window_end_reason", "curve_model", "curve_slope_A_per_min",
               "curve_slope_A_per_min_se",
               "noise_A", "substrate_uM", "inhibitor_uM", "enzyme_nM", "dilution",
               "dilution_source", "replicate_z", "masked_readings", "skipped_s", "flags"]

SD_NOTE = "* SD of the wells kept, or their typical own SE where that is larger"


def compute_rates(o: RatesOptions) -> View:
    """Read, analyse and present one rates run (the per-file entry point)."""
    from ..layout import check_against, read_layout
    from ..rates import analyse_plate

    st = o.rate_settings()
    ts, _ = read_for(o, st.linear_limit)
    warnings = list(ts.info.get("warnings", []))
    layout = None
    if o.layout_file:
        layout = read_layout(o.layout_file)
        layout, said = check_against(layout, ts.names, o.file)
        warnings += said
    a = analyse_plate(ts, layout, st)
    warnings += _assumed_pathlength(a)
    warnings += a.warnings
    results = [_result(rec) for rec in a.table.to_dict("records")]
    units = map_units(layout)
    doc = document("rates", [o.file] + ([o.layout_file] if o.layout_file else []),
                   settings_json(o, a, ts.info, units), results, warnings)
    head = "\n".join(header_lines(o, a, ts.info, units)) + "\n\n"
    csv_cols = [f for f in RATE_FIELDS if any(f in r for r in results)]
    return View(doc, head + rates_table(a), rows_to_csv([_csv_row(r) for r in results],
                                                        csv_cols), a)


def _result(rec: dict) -> dict:
    return {k: rec[k] for k in RATE_FIELDS if k in rec}


def _csv_row(r: dict) -> dict:
    """A result for CSV: the masked readings as ``reason:count`` words."""
    row = dict(r)
    row["masked_readings"] = [f"{k}:{v}" for k, v in (r.get("masked_readings") or {}).items()]
    return row


def _assumed_pathlength(a) -> list[str]:
    """A 1 cm pathlength assumed for plate wells is said out loud (with how to fix it)."""
    s = a.setup
    if s.plate_format and s.pathlength_source.startswith("assumed") and a.settings.epsilon:
        return ["the traces are plate wells but no --pathlength or --well-volume was given and "
                "the file states no pathlength: a 1 cm pathlength is assumed"]
    return []


# --------------------------------------------------------------------------- assumptions


def _epsilon_words(o: RatesOptions, a) -> str:
    st = a.settings
    cal = a.blank_info.get("calibration")
    if cal:
        return (f"standard curve of {cal['n_standards']} standards: "
                f"{fmt_pm(cal['slope_A_per_M'] * 1e-6, cal['slope_se'] * 1e-6, unit='A per uM')}"
                " (epsilon x pathlength)")
    if not st.epsilon:
        return "none: slopes stay in A/min"
    src = f"--chromophore {o.chromophore}" if o.chromophore else "--epsilon"
    se = f" ± {st.epsilon_se:g}" if st.epsilon_se else ""
    return f"{st.epsilon:g}{se} M^-1 cm^-1 ({src})"


#: The whole-curve family's members (rateabs.slopes.curves) in words.
CURVE_MODEL_WORDS = {
    "line": "a straight line", "exp": "an exponential approach (the integrated "
    "Michaelis–Menten form far below Km)", "mm": "the integrated Michaelis–Menten form",
    "lag": "a straight line after a first-order lag",
    "lag-exp": "an exponential approach after a first-order lag"}


def curve_models(a) -> dict:
    """How many of the wells whose slope is a curve's each whole-curve model gave."""
    method = np.asarray(a.table["method"]).astype(str)
    return _source_counts(np.asarray(a.windows.curve_model).astype(str)[method == "curve"])


def curve_model_words(a) -> str:
    """:func:`curve_models` in words, for the header's initial-slope line."""
    models = curve_models(a)
    return ("; curve = initial slope of a whole-curve fit: " + ", ".join(
        f"{CURVE_MODEL_WORDS.get(m, m)} {n}" for m, n in models.items())) if models else ""


def _estimator_words(st, table) -> str:
    """The estimator, and how many wells it moved to the curve for the map's substrate."""
    from ..rates import DEPLETED_CHOICE

    n = int((table["choice"] == DEPLETED_CHOICE).sum()) if "choice" in table.columns else 0
    return f"estimator {st.slope_from}" + (
        f"; {n} by the map's substrate, used over 10 % within the window" if n else "")


def depletion_words(st, table) -> str:
    """How the substrate used within a straight window is judged: against the map's [S]0, or
    (without a substrate concentration and an absorptivity) from the trace's bend alone."""
    checkable = _substrate_checkable(table)
    if st.slope_from == "curve":
        return "followed by the whole curve (the estimator is set to curve)"
    if st.slope_from == "window":
        return ("straight windows that used over 10 % of the map's [S]0 are flagged over-10pct "
                "and kept (the estimator is set to window); rates faster than the late readings "
                "allow under depletion are flagged too-fast" if checkable else
                "not weighed: the estimator is set to window and no substrate concentration "
                "and absorptivity are given for the samples")
    if checkable:
        return ("straight windows that used over 10 % of the map's [S]0 are replaced by the "
                "whole curve's initial slope, or kept where that is evidently shallower and "
                "flagged over-10pct where they may read low by over twice their SE; rates faster "
                "than the late readings allow under depletion are flagged too-fast")
    return ("judged from the trace's bend alone, as no substrate concentration and "
            "absorptivity are given for the samples; a map's substrate column with "
            "--chromophore or --epsilon lets it be weighed against [S]0")


def _substrate_checkable(table) -> bool:
    """Whether the depletion within a straight window can be weighed against the map's
    substrate (:func:`rateabs.rates.depleted`): rates in concentration and a substrate
    concentration for some sample well."""
    if "rate_uM_per_min" not in table.columns or "substrate_uM" not in table.columns:
        return False
    s0 = table["substrate_uM"].to_numpy(float)
    with np.errstate(invalid="ignore"):
        return bool(np.any((table["role"].to_numpy() == "sample") & (s0 > 0)))


def _counts(values) -> str:
    out: dict = {}
    for v in values:
        out[v] = out.get(v, 0) + 1
    return ", ".join(f"{k} {n}" for k, n in out.items())


#: The unit each concentration column of a plate map is reported in (``substrate_uM``, ...).
MAP_REPORTED_UNITS = {"substrate": "uM", "inhibitor": "uM", "standard": "uM", "enzyme": "nM",
                      "protein": "mg/mL"}


def map_units(layout) -> list[dict]:
    """The plate map's concentration columns whose header names a unit other than the one
    they are reported in (``substrate (mM)`` read in mM, reported in uM), with the factor from
    the one to the other."""
    from ..units import parse_concentration, parse_mass_concentration

    out = []
    for stem, (header, unit) in (layout.attrs.get("units", {}) if layout is not None
                                 else {}).items():
        shown = MAP_REPORTED_UNITS[stem]
        if not unit or unit == shown:
            continue
        parse = parse_mass_concentration if stem == "protein" else parse_concentration
        out.append({"column": header, "unit_as_read": unit, "reported_in": shown,
                    "factor": parse(f"1 {unit}") / parse(f"1 {shown}")})
    return out


def _map_unit_words(units: list[dict]) -> str:
    """:func:`map_units` in words, for the header's plate-map line."""
    return "; ".join(f"{u['column']} read in {u['unit_as_read']} and reported in "
                     f"{u['reported_in']} (x {u['factor']:.12g})" for u in units)


def _signal_words(info: dict) -> str:
    """What the readings were taken to be, and any rescaling on reading (mAU to absorbance)."""
    note = info.get("signal_unit_note")
    return note or f"{info.get('signal_kind')} ({info.get('signal_source')})"


def _dilution_wells(t) -> dict:
    """The sample wells of every dilution source."""
    src = t.loc[t["role"] != "blank", ["trace", "dilution_source"]]
    return {str(k): list(v) for k, v in src.groupby("dilution_source", sort=False)["trace"]}


def _dilution_words(t) -> str:
    """Where each sample well's dilution came from, with the wells named (the first few and
    the count where there are many) for every source but the map where it is the commonest: a
    map whose dilution cells are empty in four wells says which four, ties or not."""
    by = _dilution_wells(t)
    common = max(by, key=lambda k: len(by[k])) if by else None
    return ", ".join(f"{k} {len(v)} wells" + ("" if k == common == "plate map" else
                                              f" ({_list(v)})") for k, v in by.items())


def _protein_counts(wells) -> list[str]:
    """Where each well's protein concentration came from (the map, --protein), wells with one."""
    return [x for x in wells.loc[wells["role"] != "blank", "protein_source"] if x]


def _list(names: list, most: int = 8) -> str:
    return ", ".join(names[:most]) + (f" and {len(names) - most} more" if len(names) > most
                                      else "")


def overrides(a) -> list[str]:
    """What the user set for single wells, one line each (window, skipped wells, readings)."""
    s = a.setup
    lines = []
    for n, src in s.wells["window_source"].items():
        if src in ("--well-window", "plate map"):
            w = s.wells.loc[n, "window"]
            lines.append(f"{n}: window {'automatic' if w == 'auto' else f'{w[0]:g}-{w[1]:g} s'}"
                         f" ({src})")
    lines += [f"{n}: left out ({src})" for n, src in s.skipped_wells.items()]
    for n, skips in s.wells["skip"].items():
        if skips:
            lines.append(f"{n}: reading(s) at {', '.join(f'{t:g}' for t, _ in skips)} s left "
                         f"out ({_counts(src for _, src in skips)})")
    return lines


def header_lines(o: RatesOptions, a, info: dict, units: list[dict] = ()) -> list[str]:
    """The assumptions of the run, one ``#`` line each, above the table (``units``: the plate
    map's unit conversions, :func:`map_units`)."""
    s, st, t = a.setup, a.settings, a.table
    fmt = f"{s.plate_format}-well plate ({s.plate_source})" if s.plate_format else (
        "not a plate: traces are not named as wells")
    blanks = a.blank_info.get("wells", [])
    lines = [f"rates of {Path(o.file).name}: {len(t)} wells analysed",
             f"time unit: {time_words(info)}",
             *([f"time origin: {origin_words(info, [a.time_origin_s])}"]
               if a.time_origin_s else []),
             f"signal: {_signal_words(info)}",
             *([f"plate map units: {_map_unit_words(units)}"] if units else []),
             f"plate: {fmt}",
             f"pathlength: {s.pathlength_cm:.4g} cm, {s.pathlength_source}",
             f"conversion: {_epsilon_words(o, a)}",
             f"blanks: {_list(blanks)} ({a.blank_info['mode']} subtracted)" if blanks else
             "blanks: none marked, nothing subtracted",
             f"assay direction: the signal goes {a.blank_info.get('direction')}",
             f"initial slope: {_counts(t['method'])} ({_estimator_words(st, t)})"
             + curve_model_words(a),
             *([f"lag: {lag_words(a)}"] if lag_words(a) else []),
             f"substrate depletion: {depletion_words(st, t)}"]
    if st.total_volume_L:
        protein = _protein_counts(s.wells)
        lines.append(f"activity: {st.total_volume_L * 1e6:g} uL reaction, "
                     f"{st.sample_volume_L * 1e6:g} uL sample; dilution: " + _dilution_words(t)
                     + (f"; protein: {_counts(protein)} wells" if protein else ""))
    lines += [f"set for single wells: {x}" for x in overrides(a)]
    look = a.needs_look
    lines.append(f"{len(look)} well(s) need a look: {_list(look)}" if look else
                 "no well needs a look")
    return [f"# {x}" for x in lines]


def settings_json(o: RatesOptions, a, info: dict, units: list[dict] = ()) -> dict:
    """The ``settings`` of the JSON document: every assumption with its source (``units``: the
    plate map's unit conversions, :func:`map_units`)."""
    s, st, t = a.setup, a.settings, a.table
    return {
        **time_settings(info), **origin_settings(info, [a.time_origin_s]),
        "plate_format": s.plate_format, "plate_format_source": s.plate_source,
        "pathlength_cm": s.pathlength_cm, "pathlength_source": s.pathlength_source,
        "epsilon_M_per_cm": st.epsilon, "epsilon_se": st.epsilon_se,
        "conversion": _epsilon_words(o, a),
        "total_volume_L": st.total_volume_L, "sample_volume_L": st.sample_volume_L,
        "protein_mg_per_mL": st.protein_mg_per_mL,
        "protein_wells_by_source": _source_counts(_protein_counts(s.wells)),
        "dilution": {"option": st.dilution, "wells_by_source": _source_counts(
            t.loc[t["role"] != "blank", "dilution_source"]), "wells": _dilution_wells(t)},
        "estimator": {"asked": st.slope_from, "used": _source_counts(t["method"]),
                      "curve_models": curve_models(a), "curve_models_in_words": {
                          m: CURVE_MODEL_WORDS.get(m, m) for m in curve_models(a)}},
        "substrate_depletion": depletion_words(st, t),
        "lag": {"wells": [n for n, x in zip(t["trace"], t["lag_s"], strict=True) if x > 0],
                "in_words": lag_words(a) or None},
        "window": st.window if st.window == "auto" else list(st.window),
        "min_points": st.min_points, "blank": a.blank_info,
        "linear_limit": st.linear_limit, "noisy_rel_se": st.noisy_rel_se,
        "curve_fit": st.curve, "calibrate": st.calibrate, "katal": st.katal,
        "layout": o.layout_file, "signal_kind": info.get("signal_kind"),
        "signal_source": info.get("signal_source"), "signal_in_words": _signal_words(info),
        "signal_unit_as_read": info.get("signal_unit_as_read"),
        "signal_factor_applied": info.get("signal_factor", 1.0), "map_units": list(units),
        "overrides": overrides(a), "outlier_test": a.outlier_method,
        "needs_look": a.needs_look, "replicates": a.replicates.to_dict("records"),
        "activity": a.activity.to_dict("records"), "z_prime": a.zprime,
        "flag_meanings": flag_meanings(), "activity_flag_meanings": _activity_flags(),
    }


def _source_counts(values) -> dict:
    out: dict = {}
    for v in values:
        out[str(v)] = out.get(str(v), 0) + 1
    return out


def flag_meanings() -> dict:
    """Every per-well flag and what it means."""
    from ..rates import FLAGS

    return dict(FLAGS)


def _activity_flags() -> dict:
    from ..rates import ACTIVITY_FLAGS

    return dict(ACTIVITY_FLAGS)


# --------------------------------------------------------------------------- tables


def _lag_text(lag) -> str:
    """A fitted lag time in words, to two significant digits (the fit gives it no SE), or ""."""
    if lag is None or not np.isfinite(lag) or lag <= 0:
        return ""
    return f"lag ~{float(f'{lag:.2g}'):g} s"


def _window_cell(r: dict, curve_span) -> str:
    """The span of readings the well's rate came from: its straight window (``set`` where it
    was given for the well, ``after lag`` where a fitted lag moved its start), or, for a rate
    from the whole curve, the readings the curve was fitted to (with the lag it fitted)."""
    lag = _lag_text(r.get("lag_s"))
    if r["method"] == "curve" and np.isfinite(curve_span[0]):
        return (f"{curve_span[0]:g}-{curve_span[1]:g} whole trace"
                + (f", {lag}" if lag else ""))
    if not np.isfinite(r["window_start_s"]):
        return "-"
    text = f"{r['window_start_s']:g}-{r['window_end_s']:g}"
    if r["window_source"] in ("--well-window", "plate map"):
        return text + " set"
    return text + (f" after {lag}" if lag and r["window_source"] == "automatic" else "")


def curve_spans(a) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The readings each well's whole-curve fit used: the times (s) of its first and last
    usable readings and how many it used (spikes set aside), as the fit takes them."""
    g = a.traces.grid()
    times = np.broadcast_to(g.times, g.values.shape)
    ok = g.usable & np.isfinite(times)
    has = ok.any(axis=1)
    with np.errstate(invalid="ignore"):
        first = np.where(has, np.min(np.where(ok, times, np.inf), axis=1), np.nan)
        last = np.where(has, np.max(np.where(ok, times, -np.inf), axis=1), np.nan)
    return first, last, ok.sum(axis=1) - np.asarray(a.windows.spikes, int)


def lag_words(a) -> str:
    """The wells whose whole-curve fit found a lag, with its size, and what their rate and
    window then are; "" where none has one."""
    lag = np.asarray(a.table["lag_s"], float)
    with np.errstate(invalid="ignore"):
        has = np.isfinite(lag) & (lag > 0)
    if not has.any():
        return ""
    names = list(np.asarray(a.table["trace"])[has])
    lo, hi = (float(f"{x:.2g}") for x in (lag[has].min(), lag[has].max()))
    size = f"about {lo:g} s" if lo == hi else f"about {lo:g}-{hi:g} s"
    return (f"{len(names)} well(s) start slowly ({_list(names)}; lag {size}): each rate is "
            "the fully active enzyme's after the lag, from the whole curve with the lag fitted, "
            "or from a straight window that starts three lag times in (the enzyme 95 % active)")


def well_rows(a) -> tuple[list[dict], list[tuple[str, str]]]:
    """The per-well table for a person: value ± SE rounded to the SE, units in the headers;
    the window and n are the span and number of readings the rate came from (the whole curve
    for a rate from its fit)."""
    t = a.table
    first, last, used = curve_spans(a)
    opt = [("rate", "rate_uM_per_min", "rate (uM/min)"),
           ("act", "activity_U_per_mL", "activity (U/mL)"),
           ("kat", "activity_nkat_per_mL", "activity (nkat/mL)"),
           ("spec", "specific_activity_U_per_mg", "specific (U/mg)"),
           ("turn", "turnover_per_s", "v/[E] (1/s)")]
    rows = []
    for k, r in enumerate(t.to_dict("records")):
        curve = r["method"] == "curve" and np.isfinite(first[k])
        row = {"trace": r["trace"], "role": r["role"], "sample": r["sample"] or "-",
               "slope": fmt_pm(r["slope_A_per_min"], r["slope_A_per_min_se"]),
               "window": _window_cell(r, (first[k], last[k])),
               "n": int(used[k]) if curve else r["n_points"], "how": r["method"],
               "flags": ",".join(r["flags"]) or "-"}
        for key, col, _ in opt:
            if col in r:
                row[key] = fmt_pm(r[col], r[col + "_se"])
        rows.append(row)
    cols = [("trace", "well"), ("role", "role"), ("sample", "sample"),
            ("slope", "slope (A/min)")]
    cols += [(key, head) for key, col, head in opt if col in t.columns
             and np.isfinite(t[col].to_numpy(float)).any()]
    cols += [("window", "window (s)"), ("n", "n"), ("how", "how"), ("flags", "flags")]
    return rows, cols


def replicate_rows(a) -> tuple[list[dict], list[tuple[str, str]]]:
    """The replicate table: mean ± SD of the wells kept, CV, the wells left out and why."""
    reps = a.replicates
    if reps.empty:
        return [], []
    unit = reps["unit"].iloc[0]
    rows = [{"group": r["group"], "dil": _dil(r["dilution"]), "n": f"{r['n_used']}/{r['n']}",
             "mean": fmt_pm(r["mean"], _spread(r["sd"], r["well_se"])),
             "cv": _fix(r["cv_pct"], 1),
             "out": "; ".join(r["left_out"]) or "-"} for r in reps.to_dict("records")]
    return rows, [("group", "replicate group"), ("dil", "dilution"), ("n", "n used"),
                  ("mean", f"mean ± SD* ({unit})"), ("cv", "CV (%)"), ("out", "left out")]


def activity_rows(a) -> tuple[list[dict], list[tuple[str, str]]]:
    """The per-sample activity summary: mean ± SD over replicates and dilutions."""
    act = a.activity
    if act.empty:
        return [], []
    opt = [("act", "activity_U_per_mL", "activity (U/mL)"),
           ("kat", "activity_nkat_per_mL", "activity (nkat/mL)"),
           ("spec", "specific_activity_U_per_mg", "specific (U/mg)"),
           ("turn", "turnover_per_s", "v/[E] (1/s)")]
    rows = []
    for r in act.to_dict("records"):
        row = {"sample": r["sample"], "s": _fix(r["substrate_uM"], None),
               "i": _fix(r["inhibitor_uM"], None), "dil": ", ".join(_dil(d) for d in
                                                                    r["dilutions"]) or "-",
               "n": f"{r['n_used']}/{r['n_wells']}", "check": r["dilution_check"],
               "flags": ",".join(r["flags"]) or "-", "out": "; ".join(r["left_out"]) or "-"}
        for key, col, _ in opt:
            if col in r:
                row[key] = fmt_pm(r[col], _spread(r.get(f"{col}_sd"), r.get(f"{col}_well_se")))
        rows.append(row)
    cols = [("sample", "sample"), ("s", "[S] (uM)"), ("i", "[I] (uM)"), ("dil", "dilutions"),
            ("n", "n used")]
    cols += [(key, f"{head} mean ± SD*") for key, col, head in opt if col in act.columns
             and act[col].notna().any()]
    cols += [("check", "dilution linearity")]
    cols += [("flags", "flags")] if any(r["flags"] for r in act.to_dict("records")) else []
    cols += [("out", "left out")]
    return rows, cols


def _spread(sd, well_se):
    """The ± shown beside a mean: the SD of the wells, or their own typical SE where that is
    larger (two wells that happen to agree cannot show a spread finer than each was measured)."""
    vals = [x for x in (sd, well_se) if x is not None and np.isfinite(x)]
    return max(vals) if vals else None


def _dil(d) -> str:
    return "undiluted" if d == 1 else f"1:{d:g}"


def _fix(x, places) -> str:
    if x is None or not np.isfinite(x):
        return "-"
    return f"{x:g}" if places is None else f"{x:.{places}f}"


#: What was done with the blanks, per blank mode, in words.
_BLANK_WORDS = {"slope": "their mean drift taken out of every other well before its slope "
                         "was found",
                "trace": "their mean trace subtracted, reading by reading, before the slopes",
                "none": "nothing subtracted (--blank none)"}


def rates_table(a) -> str:
    """Per-well table, replicates, activity, blanks, Z' and the meaning of each flag shown."""
    text = render_table(*well_rows(a))
    for title, (rows, cols) in (("replicates (outliers and wells that need a look left out of "
                                 "the mean)", replicate_rows(a)),
                                ("activity per sample, over replicates and dilutions",
                                 activity_rows(a))):
        if rows:
            text += f"\n{title}\n" + render_table(rows, cols) + SD_NOTE + "\n"
    b = a.blank_info
    if b.get("wells"):
        text += (f"\nblanks: {len(b['wells'])} wells, mean slope "
                 f"{fmt_pm(b.get('slope_A_per_min'), b.get('slope_A_per_min_se'), unit='A/min')}"
                 f"; {_BLANK_WORDS.get(b['mode'], b['mode'])}\n")
    if a.zprime:
        text += f"{zprime_words(a.zprime)}\n"
    shown = flags_shown(a)
    if shown:
        text += "\nflags (each: this number may be wrong, because ...)\n" + "".join(
            f"  {k}: {v}\n" for k, v in shown.items())
    return text


def zprime_words(z: dict) -> str:
    """Z' in words with the controls it came from."""
    return (f"Z' = {z['value']:.2f} ({z['verdict']}; {z['n_positive']} positive controls at "
            f"{fmt_pm(z['mean_positive'], z['sd_positive'])}, {z['n_negative']} negative at "
            f"{fmt_pm(z['mean_negative'], z['sd_negative'])} {z['unit']}, mean ± SD; "
            "Zhang, Chung & Oldenburg 1999)")


def flags_shown(a) -> dict:
    """The meaning of each flag that occurs on this plate (wells, then activity rows)."""
    from ..rates import ACTIVITY_FLAGS, FLAGS

    words = {w for f in a.table["flags"] for w in f}
    if not a.activity.empty:
        words |= {w for f in a.activity["flags"] for w in f}
    return {k: v for k, v in {**FLAGS, **ACTIVITY_FLAGS}.items() if k in words}


# --------------------------------------------------------------------------- files


def write_replicates(view: View, out: str | Path, stem: str = "rates") -> None:
    """The replicate and activity summaries of a rates run as CSV in ``out``."""
    a = view.analysis
    for name, frame in (("replicates", a.replicates), ("activity", a.activity)):
        if frame.empty:
            continue
        recs = frame.to_dict("records")
        write_text(out, f"{stem}_{name}.csv", rows_to_csv(recs, list(frame.columns)))


def detail_wells(a, choice: str) -> list[str]:
    """The wells that get a page of their own: those that need a look (at most
    :data:`~rateabs.options.WELL_PAGE_CAP`), every well, or none."""
    if choice == "all":
        return list(a.table["trace"])
    if choice == "none":
        return []
    return a.needs_look[:WELL_PAGE_CAP]


#: The figures of a rates run, in the order they are listed and shown.
FIGURES = ("overview", "map", "replicates", "pages")

#: What each figure costs in a warm drawing process (s), as measured on the benchmark plates:
#: the overview 0.08 s plus 0.1 s per thousand wells (0.09 s on 96 wells, 0.23 s on 1536), the
#: map 0.07 s, the replicates 0.08 s, each page of single wells 0.05 s.
FIGURE_COST = {"overview": (0.08, 1e-4), "map": (0.07, 0.0), "replicates": (0.08, 0.0),
               "pages": (0.05, 0.0)}


def figure_parts(n_wells: int, n_pages: int, lanes: int = 2) -> tuple[tuple[str, ...], ...]:
    """The figures shared out between ``lanes`` drawing processes so that the slowest finishes
    soonest: each figure, costliest first (:data:`FIGURE_COST`), to the lane with least so far.
    On 96 wells: overview and pages, map and replicates; on 1536: the overview alone."""
    cost = {name: (a + b * n_wells) * (n_pages if name == "pages" else 1)
            for name, (a, b) in FIGURE_COST.items()}
    load, parts = [0.0] * lanes, [[] for _ in range(lanes)]
    for name in sorted(FIGURES, key=lambda f: -cost[f]):
        k = load.index(min(load))
        load[k] += cost[name]
        parts[k].append(name)
    return tuple(tuple(p) for p in parts if p)


def rate_plots(view: View, out: str | Path, stem: str = "rates",
               well_pages: str = "flagged", title: str = "", pool=None) -> list[Path]:
    """The plate at a glance, the rate map, the replicates and single-well pages, into ``out``
    (drawn in :func:`figure_parts` on the ``pool``'s processes where there is one: see
    :mod:`rateabs.views.drawing`)."""
    from ..plots.rate_data import rate_drawing
    from ..plots.rates import WELL_PAGE_SIZE
    from .drawing import draw_parts

    out, a = Path(out), view.analysis
    wells = detail_wells(a, well_pages)
    data = rate_drawing(a, wells)       # plain arrays: the drawing process needs no pandas
    drawn: dict = {}
    parts = figure_parts(len(data.names), -(-len(wells) // WELL_PAGE_SIZE))
    for part in draw_parts(pool, [(rate_figures, (data, out, stem, names, wells, title))
                                  for names in parts]):
        drawn.update(part)
    return [path for name in FIGURES for path in drawn[name]]


def rate_figures(a, out: Path, stem: str, names, wells: list[str], title: str) -> dict:
    """The named figures of :data:`FIGURES` (one part of :func:`rate_plots`) from the figures'
    data ``a`` (:class:`~rateabs.plots.rate_data.RateDrawing`): name -> paths (none for a map
    or replicate plot the plate does not have)."""
    from ..plots.rates import plate_heatmap, plate_overview, replicate_plot, well_pages

    draw = {"overview": lambda: [plate_overview(a, out / f"{stem}_plate_overview.png", title)],
            "map": lambda: [plate_heatmap(a, out / f"{stem}_plate.png")],
            "replicates": lambda: [replicate_plot(a, out / f"{stem}_replicates.png")],
            "pages": lambda: well_pages(a, out, wells, stem)}
    return {name: [p for p in draw[name]() if p] for name in names}


# --------------------------------------------------------------------------- report


def report_page(view: View, pictures: list[Path], o: RatesOptions) -> str:
    """The rates report: the plate at a glance, what was assumed, Z', the activity and
    replicate tables, the wells that need a look, and what each flag means."""
    from .. import report as rp

    a, doc = view.analysis, view.doc
    pics = {Path(p).name: p for p in pictures}
    stem = "rates"
    look = a.needs_look
    summary = [("wells analysed", len(a.table)), ("need a look", f"{len(look)}: {_list(look, 30)}"
                                                  if look else "none")]
    if a.zprime:
        summary.append(("Z'", zprime_words(a.zprime)))
    sections = [("At a glance", rp.kv(summary) + rp.img(pics.get(f"{stem}_plate_overview.png"),
                                                         "every well in plate geometry")
                 + rp.img(pics.get(f"{stem}_plate.png"), "rate per well")),
                ("Inputs", rp.inputs_table(o)), ("Settings", rp.settings_table(o)),
                ("What was assumed", rp.kv([(line[2:].split(":")[0], line[2:].split(":", 1)[1])
                                            for line in header_lines(
                                                o, a, a.traces.info,
                                                doc["settings"]["map_units"])[1:]
                                            if ":" in line]))]
    for title, (rows, cols) in (("Activity per sample", activity_rows(a)),
                                ("Replicates", replicate_rows(a))):
        if rows:
            sections.append((title, rp.table(rows, cols)))
    if pics.get(f"{stem}_replicates.png"):
        sections.append(("", rp.img(pics[f"{stem}_replicates.png"], "replicates")))
    sections.append(("Wells", _well_section(a, doc, rp)))
    pages = [p for name, p in sorted(pics.items()) if name.startswith(f"{stem}_wells_")]
    if pages:
        sections.append(("Wells that need a look" if o.well_pages == "flagged" else "Every well",
                         "".join(rp.img(p, Path(p).stem.replace("_", " ")) for p in pages)))
    shown = flags_shown(a)
    if shown:
        sections.append(("What each flag means", rp.kv(list(shown.items()))))
    if doc["warnings"]:
        sections.append(("Warnings", rp.notes(doc["warnings"])))
    return rp.page(f"Initial rates: {Path(o.file).name}", f"rates of {', '.join(doc['inputs'])}",
                   sections, rp.cautions_for("rates"))


def _well_section(a, doc, rp) -> str:
    """The key per-well table (wells that need a look first when the plate is large) and the
    full table as a CSV download."""
    import base64

    rows, cols = well_rows(a)
    note = ""
    if len(rows) > 96:
        keep = set(a.needs_look)
        rows = [r for r in rows if r["trace"] in keep][:200]
        note = rp.notes([f"{len(a.table)} wells: only the {len(rows)} that need a look are "
                         "listed; the full table is in the CSV below"], "ok")
    csv_cols = [f for f in RATE_FIELDS if any(f in r for r in doc["results"])]
    data = base64.b64encode(rows_to_csv([_csv_row(r) for r in doc["results"]],
                                        csv_cols).encode()).decode("ascii")
    link = (f'<p><a download="rates.csv" href="data:text/csv;base64,{data}">the full table '
            f"({len(a.table)} wells, every column) as CSV</a></p>")
    return note + (rp.table(rows, cols) if rows else "") + link


def run_rates(o: RatesOptions, emit) -> View:
    """The ``rates`` command: compute, print in the chosen format, write files into --out."""
    from ..parallel import lanes_allowed
    from .drawing import drawing_pool, drawing_processes

    out = o.output
    with drawing_pool(drawing_processes(o.where.jobs, out.plots and bool(out.out or out.report)),
                      fork_first=True) as pool, lanes_allowed(o.where.jobs or os.cpu_count() or 1):
        view = compute_rates(o)
        title = Path(o.file).name
        deliver(o, emit, view, "rates",
                lambda folder: rate_plots(view, folder, well_pages=o.well_pages, title=title,
                                          pool=pool),
                data=lambda folder: write_replicates(view, folder),
                page=lambda doc, pics: report_page(view, pics, o))
    return view
