"""The ``rates`` command's view."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..fitting import fmt_pm
from ..options import RatesOptions
from ..output import document, render_table, rows_to_csv, write_text
from . import View, deliver, read_for

RATE_FIELDS = ["trace", "role", "sample", "group", "method", "slope_A_per_min",
               "slope_A_per_min_se", "rate_uM_per_min", "rate_uM_per_min_se",
               "activity_U_per_mL", "activity_U_per_mL_se", "activity_nkat_per_mL",
               "activity_nkat_per_mL_se", "specific_activity_U_per_mg",
               "specific_activity_U_per_mg_se", "window_start_s", "window_end_s", "n_points",
               "r2", "lag_s", "window_end_reason", "curve_slope_A_per_min",
               "curve_slope_A_per_min_se", "slope_raw_A_per_min", "noise_A", "substrate_uM",
               "inhibitor_uM", "enzyme_nM", "flags"]


def _plate_warning(o: RatesOptions, ts, settings) -> list[str]:
    """A 1 cm pathlength assumed for what look like plate wells is said out loud."""
    plate_like = len(ts.names) >= 8 and all(re.fullmatch(r"[A-Pa-p]\d{1,2}", n)
                                            for n in ts.names)
    if plate_like and o.pathlength is None and o.well_volume is None and settings.epsilon:
        return ["the traces look like plate wells but no --pathlength or --well-volume was "
                "given: a 1 cm pathlength is assumed"]
    return []


def _settings_json(o: RatesOptions, st, a, ts) -> dict:
    return {"epsilon_M_per_cm": st.epsilon, "epsilon_se": st.epsilon_se,
            "pathlength_cm": st.pathlength_cm, "pathlength_source": o.pathlength_source(),
            "total_volume_L": st.total_volume_L, "sample_volume_L": st.sample_volume_L,
            "protein_mg_per_mL": st.protein_mg_per_mL, "dilution": st.dilution,
            "window": st.window if st.window == "auto" else list(st.window),
            "min_points": st.min_points, "blank": a.blank_info,
            "linear_limit": st.linear_limit, "noisy_rel_se": st.noisy_rel_se,
            "slope_from": st.slope_from, "curve_fit": st.curve, "calibrate": st.calibrate,
            "katal": st.katal, "layout": o.layout_file,
            "time_unit": ts.info.get("time_unit"), "signal_kind": ts.info.get("signal_kind"),
            "replicates": a.replicates.to_dict("records"), "z_prime": a.zprime,
            "flag_meanings": _flag_meanings()}


def compute_rates(o: RatesOptions) -> View:
    """Read, analyse and present one rates run."""
    from ..layout import check_against, read_layout
    from ..rates import analyse_plate

    st = o.rate_settings()
    ts, _ = read_for(o, st.linear_limit)
    warnings = list(ts.info.get("warnings", []))
    layout = None
    if o.layout_file:
        layout = read_layout(o.layout_file)
        warnings += check_against(layout, ts.names, o.file)
    warnings += _plate_warning(o, ts, st)
    a = analyse_plate(ts, layout, st)
    warnings += a.warnings
    results = [{k: rec[k] for k in RATE_FIELDS if k in rec} for rec in a.table.to_dict("records")]
    doc = document("rates", [o.file] + ([o.layout_file] if o.layout_file else []),
                   _settings_json(o, st, a, ts), results, warnings)
    return View(doc, rates_table(a), rows_to_csv(results, [f for f in RATE_FIELDS if any(
        f in r for r in results)]), a)


def _flag_meanings():
    from ..rates import FLAGS
    from ..traces import READING_FLAGS

    return {**FLAGS, **{k: v for k, v in READING_FLAGS.items() if k != "missing"}}


def rates_table(a) -> str:
    """Per-trace table, replicate summary, Z' and blank line, for a person."""
    t = a.table
    conc = "rate_uM_per_min" in t.columns
    rows = []
    for r in t.to_dict("records"):
        row = {"trace": r["trace"], "role": r["role"], "sample": r["sample"] or "-",
               "slope": fmt_pm(r["slope_A_per_min"], r["slope_A_per_min_se"], 5),
               "window": (f"{r['window_start_s']:g}-{r['window_end_s']:g}"
                          if np.isfinite(r["window_start_s"]) else "-"),
               "n": r["n_points"], "r2": r["r2"], "flags": ",".join(r["flags"]) or "-"}
        if conc:
            row["rate"] = fmt_pm(r["rate_uM_per_min"], r["rate_uM_per_min_se"], 4)
        if "activity_U_per_mL" in r and np.isfinite(r.get("activity_U_per_mL", np.nan)):
            row["act"] = fmt_pm(r["activity_U_per_mL"], r["activity_U_per_mL_se"], 4)
        if np.isfinite(r.get("specific_activity_U_per_mg", np.nan)):
            row["spec"] = fmt_pm(r["specific_activity_U_per_mg"], r["specific_activity_U_per_mg_se"], 4)
        rows.append(row)
    cols = [("trace", "trace"), ("role", "role"), ("sample", "sample"),
            ("slope", "slope (A/min)")]
    if conc:
        cols.append(("rate", "rate (uM/min)"))
    if any("act" in r for r in rows):
        cols.append(("act", "activity (U/mL)"))
    if any("spec" in r for r in rows):
        cols.append(("spec", "specific (U/mg)"))
    cols += [("window", "window (s)"), ("n", "n"), ("r2", "r2"), ("flags", "flags")]
    text = render_table(rows, cols)
    if not a.replicates.empty:
        reps = a.replicates.copy()
        reps["sub"] = reps["substrate_uM"]
        unit = reps["unit"].iloc[0]
        text += "\n" + render_table(
            reps.to_dict("records"),
            [("group", "replicate group"), ("n", "n"), ("mean", f"mean ({unit})"),
             ("sd", f"SD ({unit})"), ("cv_pct", "CV (%)"), ("outlier", "outlier")])
    b = a.blank_info
    if b.get("wells"):
        text += (f"\nblanks: {len(b['wells'])} wells, mean slope "
                 f"{fmt_pm(b.get('slope_A_per_min'), b.get('slope_A_per_min_se'), 3, 'A/min')}"
                 f", subtracted as {b['mode']}\n")
    text += f"assay direction: signal goes {b.get('direction')}\n"
    if b.get("calibration"):
        c = b["calibration"]
        text += (f"standard curve: {c['n_standards']} standards, "
                 f"{fmt_pm(c['slope_A_per_M'] * 1e-6, c['slope_se'] * 1e-6, 4, 'A per uM')} "
                 "(epsilon x b), used to convert slopes\n")
    if a.zprime:
        z = a.zprime
        text += (f"Z' = {z['value']:.3f} ({z['verdict']}; {z['n_positive']} positive, "
                 f"{z['n_negative']} negative controls)\n")
    return text


def write_replicates(view: View, out: str | Path, stem: str = "rates") -> None:
    """The replicate summary of a rates run as CSV in ``out``."""
    a = view.analysis
    if not a.replicates.empty:
        reps = a.replicates.copy()
        reps["wells"] = reps["wells"].apply(";".join)
        write_text(out, f"{stem}_replicates.csv",
                   rows_to_csv(reps.to_dict("records"), list(reps.columns)))


def rate_plots(view: View, out: str | Path, stem: str = "rates") -> list[Path]:
    """Trace pages, plate heat map and replicate plot of a rates run, into ``out``."""
    from ..plots import plate_heatmap, rate_traces, replicate_plot

    out = Path(out)
    a = view.analysis
    files = list(rate_traces(a, out, stem))
    p = plate_heatmap(a, out / f"{stem}_plate.png")
    if p:
        files.append(p)
    if not a.replicates.empty:
        files.append(replicate_plot(a, out / f"{stem}_replicates.png"))
    return files


def run_rates(o: RatesOptions, emit) -> View:
    """The ``rates`` command: compute, print in the chosen format, write files into --out."""
    view = compute_rates(o)
    deliver(o, emit, view, "rates", lambda folder: rate_plots(view, folder),
            data=lambda folder: write_replicates(view, folder))
    return view
