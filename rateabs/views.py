"""Views: turn command options into analysis settings (units parsed once, at the boundary) and
analysis results into the JSON document, the table for a person, CSV and plots.

The CLI and the demo both call these; the analyses below them never print or read options.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import UsageError
from .output import document, render_table, rows_to_csv, write_text

RATE_FIELDS = ["trace", "role", "sample", "group", "method", "slope_A_per_min",
               "slope_A_per_min_se", "rate_uM_per_min", "rate_uM_per_min_se",
               "activity_U_per_mL", "activity_U_per_mL_se", "activity_nkat_per_mL",
               "activity_nkat_per_mL_se", "specific_activity_U_per_mg",
               "specific_activity_U_per_mg_se", "window_start_s", "window_end_s", "n_points",
               "r2", "lag_s", "window_end_reason", "curve_slope_A_per_min",
               "curve_slope_A_per_min_se", "slope_raw_A_per_min", "noise_A", "substrate_uM",
               "inhibitor_uM", "enzyme_nM", "flags"]


@dataclass
class View:
    """What a command shows: the JSON document, a table for a person and tidy CSV."""

    doc: dict
    table: str
    csv: str
    analysis: object = None


def write_outputs(doc: dict, csv_text: str, out, name: str) -> None:
    """``NAME.json`` and ``NAME.csv`` into the --out folder (nothing without one)."""
    from .output import to_json

    if out:
        write_text(out, f"{name}.json", to_json(doc))
        write_text(out, f"{name}.csv", csv_text)


def write_only(fmt, doc, table_text, csv_text, out, name) -> None:
    """An ``emit`` that prints nothing and only writes the --out files (the demo's)."""
    write_outputs(doc, csv_text, out, name)


def deliver(o: dict, emit, view: View, name: str, plot=None) -> list[Path]:
    """Print the view, write --out files and plots, and the --report page; returns the plots.

    ``plot(folder)`` draws the command's figures into a folder and returns their paths; with
    --report but no --out they are drawn into a temporary folder and embedded in the page.
    """
    import tempfile

    from .io import write_atomic

    emit(o["fmt"], view.doc, view.table, view.csv, o.get("out"), name)
    pics: list[Path] = []
    with tempfile.TemporaryDirectory() as tmp:
        target = Path(o["out"]) if o.get("out") else Path(tmp)
        if plot is not None and o.get("plots", True) and (o.get("out") or o.get("report")):
            target.mkdir(parents=True, exist_ok=True)
            pics = list(plot(target) or [])
        if o.get("report"):
            from .report import document_page

            write_atomic(o["report"], document_page(view.doc, pics))
    return pics if o.get("out") else []


def compute_inspect(o: dict) -> View:
    """The ``inspect`` command's document and table."""
    from .inspecting import inspect_file

    summary = inspect_file(o["file"], time_unit=o.get("time_unit"), signal=o.get("signal"),
                           i0=o.get("i0"), sheet=o.get("sheet"),
                           linear_limit=o.get("linear_limit"))
    doc = document("inspect", [o["file"]], summary.settings, summary.results, summary.warnings)
    cols = [("trace", "trace"), ("n_points", "n"), ("t_start_s", "t start (s)"),
            ("t_end_s", "t end (s)"), ("A_first", "A first (AU)"), ("A_last", "A last (AU)"),
            ("flags", "flags")]
    st = summary.settings
    head = [f"file       {o['file']}",
            f"format     {st['format']} (delimiter {st['delimiter']!r}, decimal "
            f"{st['decimal']!r}, encoding {st['encoding']})",
            f"layout     {st['layout']}, header on line {st['header_row']}",
            f"time       {st['time_unit']} ({st['time_unit_source']})",
            f"signal     {st['signal_kind']} ({st['signal_source']}), shown as absorbance",
            f"limit      readings above A = {st['linear_limit']:g} flagged past-linear"]
    head += [f"meta       {k}: {v}" for k, v in st["metadata"].items()]
    head += [f"column     {k}: kept as metadata ({v})" for k, v in st["extra_columns"].items()]
    table = "\n".join(head) + "\n\n" + render_table(summary.results, cols)
    return View(doc, table, rows_to_csv(summary.results, [c for c, _ in cols]), summary)


def run_inspect(o: dict, emit) -> View:
    """The ``inspect`` command."""
    view = compute_inspect(o)

    def plot(folder):
        from .plots import traces_overview

        return [traces_overview(view.analysis.traces, folder / "inspect_traces.png",
                                Path(o["file"]).name, "absorbance (AU)")]

    deliver(o, emit, view, "inspect", plot)
    return view


def _select_rows(df, select):
    for item in select or ():
        col, sep, val = item.partition("=")
        if not sep or col.strip() not in df.columns:
            raise UsageError(f"--select {item!r} does not name a column of the table",
                             f"use COL=VALUE with one of {', '.join(map(str, df.columns))}")
        keep = df[col.strip()].astype(str).str.strip() == val.strip()
        attrs = dict(df.attrs)
        lines = attrs.get("lines")
        df = df[keep.to_numpy()]
        if lines is not None:
            attrs["lines"] = [ln for ln, k in zip(lines, keep.to_numpy(), strict=True) if k]
        df.attrs = attrs
        if df.empty:
            raise UsageError(f"--select {item!r} keeps no rows", "check the value")
    return df


def compute_saturation(o: dict) -> View:
    """The ``saturation`` command's results."""
    from .io import read_table
    from .output import flatten_params
    from .saturation import analyse, results_json, table_data
    from .units import parse_concentration

    df = read_table(o["file"])
    if "role" in df.columns:
        df = _select_rows(df.assign(_role=df["role"].astype(str).str.strip().str.lower()),
                          ["_role=sample"]).drop(columns="_role")
    df = _select_rows(df, o.get("select"))
    df.attrs["source"] = o["file"]
    bent = []
    if "flags" in df.columns:           # a table written by `rateabs rates`
        method = df["method"] if "method" in df.columns else ["window"] * len(df)
        bent = [f for f, m in zip(df["flags"].astype(str), method, strict=True)
                if m == "window" and any(w in f for w in ("over-10pct", "curved"))]
    model = o.get("model", "auto")
    data = table_data(df, conc=o.get("conc"), rate=o.get("rate"), inhibitor=o.get("inhibitor"),
                      sd=o.get("sd"), conc_unit=o.get("conc_unit"), rate_unit=o.get("rate_unit"),
                      inhib_unit=o.get("inhibitor_unit"), need_inhibitor=model == "ic50")
    enzyme_m = parse_concentration(o["enzyme"], default="nM") if o.get("enzyme") else None
    level = o.get("level", 0.95)
    a = analyse(data, model=model, ci=o.get("ci", "asymptotic"), level=level,
                weighting=o.get("weighting", "none"), fix=o.get("fix"), enzyme_M=enzyme_m,
                n_boot=o.get("resamples", 2000), resample=o.get("resample", "residual"),
                seed=o.get("seed", 0), mode=o.get("mode"), substrate=o.get("substrate"),
                km=o.get("km"))
    results = results_json(a)
    if bent:
        a.warnings.append(f"{len(bent)} of {len(df)} rates come from wells flagged over-10pct or "
                          "curved: window slopes there underestimate the initial rate; consider "
                          "`rateabs rates --slope-from curve`")
    settings = {"model": model, "ci": o.get("ci", "asymptotic"), "level": level,
                "weighting": o.get("weighting", "none"), "fixed": o.get("fix") or {},
                "columns": data.columns, "conc_unit": data.conc_unit,
                "rate_unit": data.rate_unit, "inhibitor_unit": data.inhib_unit,
                "enzyme_M": enzyme_m, "n_points": int(data.v.size),
                "selected": list(o.get("select") or [])}
    if o.get("ci") == "bootstrap":
        settings.update(resamples=o.get("resamples", 2000), resample=o.get("resample"),
                        seed=o.get("seed", 0))
    doc = document("saturation", [o["file"]], settings, results, a.warnings)
    chosen = next(r for r in results if r.get("chosen"))
    prow = [{"param": k, **v} for k, v in chosen["params"].items()]
    table = render_table(prow, [("param", "parameter"), ("value", "value"), ("se", "SE"),
                                ("ci_low", f"{100 * level:g}% low"),
                                ("ci_high", f"{100 * level:g}% high"), ("unit", "unit"),
                                ("ci_method", "interval")],
                         title=f"chosen model: {a.chosen}   ({chosen['equation']})")
    table += (f"n = {data.v.size} points, residual SE = {a.best.sigma:.4g} {data.rate_unit}, "
              f"runs test p = {a.best.runs_p:.3g}\n")
    if a.comparison is not None:
        table += "\nevidence\n" + a.comparison.report() + "\n"
    if a.cross_check:
        cc = a.cross_check
        table += (f"\ncross-check, {cc['method']}: Vmax = {cc['Vmax']:.4g} {data.rate_unit}, "
                  f"Km = {cc['Km']:.4g} {data.conc_unit}\n")
    flat = [flatten_params({"model": r["model"], "chosen": r["chosen"], "aicc": r.get("aicc"),
                            "status": r.get("status"), "params": r["params"]}) for r in results]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, table, rows_to_csv(flat, cols), a)


def run_saturation(o: dict, emit) -> View:
    """The ``saturation`` command."""
    view = compute_saturation(o)
    a = view.analysis

    def plot(folder):
        from .plots import linearised, saturation_fit

        files = [saturation_fit(a, folder / "saturation_fit.png", title=Path(o["file"]).stem)]
        if a.chosen != "ic50":
            files.append(linearised(a, folder / "saturation_linearised.png"))
        return files

    deliver(o, emit, view, "saturation", plot)
    return view


def rate_settings(o: dict):
    """RateSettings from command options (quantities parsed with their units)."""
    from .photometry import pathlength_from_volume, resolve_epsilon
    from .rates import RateSettings
    from .units import parse_epsilon, parse_mass_concentration, parse_pathlength, parse_volume

    eps = resolve_epsilon(o.get("epsilon"), o.get("chromophore"))
    eps_se = parse_epsilon(o["epsilon_se"]) if o.get("epsilon_se") else 0.0
    if o.get("pathlength") and o.get("well_volume"):
        raise UsageError("both --pathlength and --well-volume given", "give only one of them")
    if o.get("well_volume"):
        b = pathlength_from_volume(o["well_volume"], o.get("plate", 96))
    elif o.get("pathlength"):
        b = parse_pathlength(o["pathlength"])
    else:
        b = 1.0
    tv = parse_volume(o["total_volume"]) if o.get("total_volume") else None
    sv = parse_volume(o["sample_volume"]) if o.get("sample_volume") else None
    if (tv is None) != (sv is None):
        raise UsageError("activity needs both --total-volume and --sample-volume",
                         "give both, e.g. --total-volume '200 uL' --sample-volume '20 uL'")
    if tv is not None and sv > tv:
        raise UsageError("the sample volume is larger than the total volume",
                         "check --sample-volume and --total-volume")
    prot = parse_mass_concentration(o["protein"]) if o.get("protein") else None
    if o.get("dilution", 1.0) <= 0:
        raise UsageError("--dilution must be positive", "e.g. --dilution 10 for 1:10")
    return RateSettings(epsilon=eps, epsilon_se=eps_se, pathlength_cm=b, total_volume_L=tv,
                        sample_volume_L=sv, protein_mg_per_mL=prot,
                        dilution=o.get("dilution", 1.0), window=o.get("window", "auto"),
                        min_points=o.get("min_points"), blank=o.get("blank", "auto"),
                        direction=o.get("direction", "auto"),
                        linear_limit=o.get("linear_limit", 2.0),
                        noisy_rel_se=o.get("noisy_limit", 0.10), katal=o.get("katal", False),
                        slope_from=o.get("slope_from", "window"),
                        calibrate=o.get("calibrate", "auto"))


def compute_rates(o: dict) -> View:
    """Read, analyse and present one rates run (options as the ``rates`` command takes)."""
    import re

    from .io import read_traces
    from .layout import check_against, read_layout
    from .rates import analyse_plate

    st = rate_settings(o)
    ts = read_traces(o["file"], time_unit=o.get("time_unit"), signal=o.get("signal"),
                     i0=o.get("i0"), sheet=o.get("sheet"))
    warnings = list(ts.info.get("warnings", []))
    layout = None
    if o.get("layout_file"):
        layout = read_layout(o["layout_file"])
        warnings += check_against(layout, ts.names, o["file"])
    plate_like = all(re.fullmatch(r"[A-Pa-p]\d{1,2}", n) for n in ts.names)
    if plate_like and not (o.get("pathlength") or o.get("well_volume")) and st.epsilon:
        warnings.append("the traces look like plate wells but no --pathlength or --well-volume "
                        "was given: a 1 cm pathlength is assumed")
    a = analyse_plate(ts, layout, st)
    warnings += a.warnings
    results = []
    for rec in a.table.to_dict("records"):
        results.append({k: rec[k] for k in RATE_FIELDS if k in rec})
    settings = {"epsilon_M_per_cm": st.epsilon, "epsilon_se": st.epsilon_se,
                "pathlength_cm": st.pathlength_cm, "total_volume_L": st.total_volume_L,
                "sample_volume_L": st.sample_volume_L, "protein_mg_per_mL": st.protein_mg_per_mL,
                "dilution": st.dilution, "window": st.window if st.window == "auto" else
                list(st.window), "blank": a.blank_info, "linear_limit": st.linear_limit,
                "noisy_rel_se": st.noisy_rel_se, "slope_from": st.slope_from, "layout": o.get("layout_file"),
                "time_unit": ts.info.get("time_unit"), "signal_kind": ts.info.get("signal_kind"),
                "replicates": a.replicates.to_dict("records"), "z_prime": a.zprime,
                "flag_meanings": _flag_meanings()}
    doc = document("rates", [o["file"]] + ([o["layout_file"]] if o.get("layout_file") else []),
                   settings, results, warnings)
    return View(doc, rates_table(a), rows_to_csv(results, [f for f in RATE_FIELDS if any(
        f in r for r in results)]), a)


def _flag_meanings():
    from .rates import FLAGS
    from .traces import READING_FLAGS

    return {**FLAGS, **{k: v for k, v in READING_FLAGS.items() if k != "missing"}}


def rates_table(a) -> str:
    """Per-trace table, replicate summary, Z' and blank line, for a person."""
    t = a.table
    conc = "rate_uM_per_min" in t.columns
    rows = []
    for r in t.to_dict("records"):
        row = {"trace": r["trace"], "role": r["role"], "sample": r["sample"] or "-",
               "slope": _pm(r["slope_A_per_min"], r["slope_A_per_min_se"], 5),
               "window": (f"{r['window_start_s']:g}-{r['window_end_s']:g}"
                          if np.isfinite(r["window_start_s"]) else "-"),
               "n": r["n_points"], "r2": r["r2"], "flags": ",".join(r["flags"]) or "-"}
        if conc:
            row["rate"] = _pm(r["rate_uM_per_min"], r["rate_uM_per_min_se"], 4)
        if "activity_U_per_mL" in r and np.isfinite(r.get("activity_U_per_mL", np.nan)):
            row["act"] = _pm(r["activity_U_per_mL"], r["activity_U_per_mL_se"], 4)
        if np.isfinite(r.get("specific_activity_U_per_mg", np.nan)):
            row["spec"] = _pm(r["specific_activity_U_per_mg"], r["specific_activity_U_per_mg_se"], 4)
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
                 f"{b.get('slope_A_per_min', float('nan')):.3g} ± "
                 f"{b.get('slope_A_per_min_se', float('nan')):.2g} A/min, subtracted as "
                 f"{b['mode']}\n")
    text += f"assay direction: signal goes {b.get('direction')}\n"
    if b.get("calibration"):
        c = b["calibration"]
        text += (f"standard curve: {c['n_standards']} standards, {c['slope_A_per_M'] * 1e-6:.4g} ± "
                 f"{c['slope_se'] * 1e-6:.2g} A per uM (epsilon x b), used to convert slopes\n")
    if a.zprime:
        z = a.zprime
        text += (f"Z' = {z['value']:.3f} ({z['verdict']}; {z['n_positive']} positive, "
                 f"{z['n_negative']} negative controls)\n")
    return text


def _pm(v, se, digits):
    if v is None or not np.isfinite(v):
        return "-"
    if se is None or not np.isfinite(se):
        return f"{v:.{digits}g}"
    return f"{v:.{digits}g} ± {se:.2g}"


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
    from .plots import plate_heatmap, rate_traces, replicate_plot

    out = Path(out)
    a = view.analysis
    files = list(rate_traces(a, out, stem))
    p = plate_heatmap(a, out / f"{stem}_plate.png")
    if p:
        files.append(p)
    if not a.replicates.empty:
        files.append(replicate_plot(a, out / f"{stem}_replicates.png"))
    return files


def run_rates(o: dict, emit) -> View:
    """The ``rates`` command: compute, print in the chosen format, write files into --out."""
    view = compute_rates(o)
    if o.get("out"):
        write_replicates(view, o["out"])
    deliver(o, emit, view, "rates", lambda folder: rate_plots(view, folder))
    return view


# --------------------------------------------------------------------------- rate laws


def _traces_for(o: dict):
    from .io import read_traces

    ts = read_traces(o["file"], time_unit=o.get("time_unit"), signal=o.get("signal"),
                     i0=o.get("i0"), sheet=o.get("sheet"), partial=o.get("partial", False))
    ts = ts.mask_above(o.get("linear_limit") or 2.0)
    names = ts.names
    if o.get("trace"):
        missing = [n for n in o["trace"] if n not in names]
        if missing:
            raise UsageError(f"no trace named {missing[0]!r} in {o['file']}",
                             f"use one of {', '.join(names[:12])}")
        names = list(o["trace"])
    return ts, names


def _photometry(o: dict):
    from .photometry import resolve_epsilon
    from .ratelaws import Photometry
    from .units import parse_concentration, parse_epsilon, parse_pathlength

    eps = resolve_epsilon(o.get("epsilon"), o.get("chromophore"))
    epp = parse_epsilon(o["epsilon_product"]) if o.get("epsilon_product") else None
    b = parse_pathlength(o["pathlength"]) if o.get("pathlength") else 1.0
    c0 = parse_concentration(o["c0"], default="uM") if o.get("c0") else None
    return Photometry(eps, epp, b, c0)


def compute_ratelaw(o: dict) -> View:
    """The ``ratelaw`` command's results."""
    from .errors import AnalysisError
    from .ratelaws import fit_trace, guggenheim, pseudo_first_order
    from .units import parse_concentration

    ts, names = _traces_for(o)
    ph = _photometry(o)
    a0 = parse_concentration(o["a0"], default="uM") if o.get("a0") else None
    b0 = parse_concentration(o["b0"], default="uM") if o.get("b0") else None
    if o.get("order") == "mixed" and (a0 is None or b0 is None):
        raise UsageError("--order mixed needs --a0 and --b0", "e.g. --a0 '50 uM' --b0 '120 uM'")
    g = ts.grid()
    results, warnings, laws = [], list(ts.info.get("warnings", [])), {}
    for name in names:
        i = g.names.index(name)
        ok = g.usable[i]
        try:
            law = fit_trace(g.times[i][ok], g.values[i][ok], name, order=o.get("order", "auto"),
                            photometry=ph, fix=o.get("fix"), ci=o.get("ci", "profile"),
                            level=o.get("level", 0.95), expect=o.get("expect", "any"),
                            a0=a0, b0=b0)
        except AnalysisError as exc:
            if len(names) == 1:
                raise exc.located(o["file"]) from None
            results.append({"trace": name, "order": None, "params": {}, "half_life_s": None,
                            "status": f"not fitted: {exc.one_line()}"})
            warnings.append(f"{name}: {exc.one_line()}")
            continue
        laws[name] = law
        d = law.to_dict()
        d["status"] = "ok"
        if "temperature_K" in ts.meta.columns and name in ts.meta.index:
            d["temperature_K"] = ts.meta.loc[name, "temperature_K"]
        if o.get("guggenheim") is not None:
            gg = guggenheim(g.times[i][ok], g.values[i][ok],
                            None if o["guggenheim"] == 0 else o["guggenheim"],
                            level=o.get("level", 0.95))
            d["guggenheim"] = {"k": gg["k"].to_dict(), "half_life_s": gg["half_life"].to_dict(),
                               "delta_s": gg["delta_s"], "n_pairs": gg["n_pairs"]}
        results.append(d)
        warnings += [f"{name}: {n}" for n in law.notes]
    series = None
    if o.get("excess"):
        series = _pseudo_series(o, laws, pseudo_first_order)
    settings = {"order": o.get("order", "auto"), "ci": o.get("ci", "profile"),
                "level": o.get("level", 0.95), "epsilon": ph.epsilon,
                "epsilon_product": ph.epsilon_product, "pathlength_cm": ph.pathlength_cm,
                "c0_M": ph.c0_M, "fixed": o.get("fix") or {}, "time_unit": ts.info["time_unit"],
                "pseudo_first_order": series}
    doc = document("ratelaw", [o["file"]], settings, results, warnings)
    rows = []
    for r in results:
        p = r.get("params", {})
        k = p.get("k") or {}
        hl = r.get("half_life_s") or {}
        kc = r.get("k_conc") or {}
        rows.append({"trace": r["trace"], "order": r.get("order") or "-",
                     "k": _pm(k.get("value"), k.get("se"), 4), "k_unit": k.get("unit", ""),
                     "ci": _ci(k), "kc": (_pm(kc.get("value"), kc.get("se"), 4) + " "
                                          + kc.get("unit", "")) if kc else "-",
                     "half": _pm(hl.get("value"), hl.get("se"), 4), "hci": _ci(hl),
                     "status": r.get("status", "ok")})
    table = render_table(rows, [("trace", "trace"), ("order", "order"), ("k", "k"),
                                ("k_unit", "unit"), ("ci", "k interval"),
                                ("kc", "k (concentration units)"), ("half", "half-life (s)"),
                                ("hci", "half-life interval (s)")])
    if len(laws) == 1:
        law = next(iter(laws.values()))
        if law.comparison is not None:
            table += "\norder chosen by evidence\n" + law.comparison.report() + "\n"
    if series:
        table += (f"\npseudo-first-order series: k2 = {series['k2']['value']:.4g} ± "
                  f"{series['k2']['se']:.2g} L/(mol s) [{series['k2']['ci_low']:.4g}, "
                  f"{series['k2']['ci_high']:.4g}], intercept k0 = {series['k0']['value']:.3g} ± "
                  f"{series['k0']['se']:.2g} 1/s\n")
    flat = []
    for r in results:
        f = {"trace": r["trace"], "order": r.get("order"), "status": r.get("status")}
        for name, p in (r.get("params") or {}).items():
            f[name], f[f"{name}_se"], f[f"{name}_ci_low"], f[f"{name}_ci_high"] = (
                p["value"], p["se"], p["ci_low"], p["ci_high"])
            f[f"{name}_unit"] = p["unit"]
        hl = r.get("half_life_s") or {}
        f["half_life_s"], f["half_life_s_ci_low"], f["half_life_s_ci_high"] = (
            hl.get("value"), hl.get("ci_low"), hl.get("ci_high"))
        if r.get("temperature_K") is not None:
            f["temperature_K"] = r["temperature_K"]
        flat.append(f)
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, table, rows_to_csv(flat, cols), {"traces": ts, "laws": laws,
                                                       "series": series})


def _ci(p):
    if not p or p.get("ci_low") is None or p.get("ci_high") is None:
        return "-"
    return f"[{p['ci_low']:.4g}, {p['ci_high']:.4g}]"


def _pseudo_series(o, laws, pseudo_first_order):
    from .io import read_table
    from .layout import conc_column, parse_conc_cells

    df = read_table(o["excess"])
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    cols = {c.lower(): c for c in df.columns}
    tcol = cols.get("trace") or cols.get("well") or df.columns[0]
    ccol = conc_column(df, "conc") or conc_column(df, "excess") or df.columns[-1]
    conc = parse_conc_cells(df, ccol, o["excess"], lines)
    kobs, x = [], []
    for name, c in zip(df[tcol], conc, strict=True):
        law = laws.get(str(name).strip())
        if law is None or law.order != "1":
            continue
        kobs.append(law.fit.params["k"])
        x.append(c)
    if len(kobs) < 2:
        raise UsageError("the pseudo-first-order series needs first-order kobs for at least two "
                         "runs named in --excess", "use --order 1 and name the traces")
    s = pseudo_first_order(kobs, x, level=o.get("level", 0.95))
    return {"k2": s["k2"].to_dict(), "k0": s["k0"].to_dict(), "n_runs": len(kobs),
            "weighting": s["weighting"], "conc_M": list(map(float, x)),
            "kobs_per_s": [p.value for p in kobs]}


def run_ratelaw(o: dict, emit) -> View:
    """The ``ratelaw`` command."""
    from .plots import ratelaw_plots

    view = compute_ratelaw(o)
    deliver(o, emit, view, "ratelaw", lambda folder: ratelaw_plots(view.analysis, folder))
    return view


# --------------------------------------------------------------------------- completion


def compute_completion(o: dict) -> View:
    """The ``completion`` command's results (one per trace)."""
    from .completion import CAUTION, assess
    from .errors import AnalysisError

    ts, names = _traces_for(o)
    g = ts.grid()
    results, warnings, done = [], list(ts.info.get("warnings", [])), {}
    for name in names:
        i = g.names.index(name)
        ok = g.usable[i]
        try:
            c = assess(g.times[i][ok], g.values[i][ok], name, target=o["target"] / 100,
                       order=o.get("order", "1"), level=o.get("level", 0.95),
                       photometry=_photometry(o), fix=o.get("fix"))
        except AnalysisError as exc:
            if len(names) == 1:
                raise exc.located(o["file"]) from None
            results.append({"trace": name, "status": f"not assessed: {exc.one_line()}"})
            continue
        done[name] = c
        d = c.to_dict()
        d["status"] = "ok"
        results.append(d)
    warnings.append(CAUTION)
    settings = {"target": o["target"] / 100, "order": o.get("order", "1"),
                "level": o.get("level", 0.95),
                "interval": "profile-likelihood interval of k mapped through t(k)",
                "rule": "complete when the lower bound of the conversion at the last reading "
                        "reaches the target"}
    doc = document("completion", [o["file"]], settings, results, warnings)
    lines = []
    for name, c in done.items():
        t = c.t_target
        lines.append(
            f"{name}: order {c.law.order}, k = {c.law.fit.params['k'].value:.4g} ± "
            f"{c.law.fit.params['k'].se:.2g} 1/s\n"
            f"  conversion at the last reading ({c.t_now / 60:.1f} min): "
            f"{100 * c.conversion.value:.2f} % [{100 * c.conversion.ci_low:.2f}, "
            f"{100 * c.conversion.ci_high:.2f}] %\n"
            f"  time to {100 * c.target:g} %: {t.value / 60:.1f} min "
            f"[{t.ci_low / 60:.1f}, {t.ci_high / 60:.1f}] min "
            f"({max(t.value - c.t_now, 0) / 60:.1f} min from the last reading)\n"
            f"  predicted end absorbance: {c.end_absorbance.value:.4f} ± "
            f"{c.end_absorbance.se:.2g} A\n"
            f"  {'COMPLETE' if c.complete else 'NOT YET COMPLETE'}: {c.rule}")
    for r in results:
        if r.get("status", "ok") != "ok":
            lines.append(f"{r['trace']}: {r['status']}")
    table = "\n".join(lines) + f"\n\n{CAUTION}\n"
    flat = []
    for r in results:
        if r.get("status") != "ok":
            flat.append({"trace": r["trace"], "status": r["status"]})
            continue
        flat.append({"trace": r["trace"], "order": r["order"], "target": r["target"],
                     "conversion": r["conversion"]["value"],
                     "conversion_ci_low": r["conversion"]["ci_low"],
                     "conversion_ci_high": r["conversion"]["ci_high"],
                     "t_target_s": r["t_target_s"]["value"],
                     "t_target_s_ci_low": r["t_target_s"]["ci_low"],
                     "t_target_s_ci_high": r["t_target_s"]["ci_high"],
                     "complete": r["complete"], "status": "ok"})
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, table, rows_to_csv(flat, cols), {"traces": ts, "done": done})


def run_completion(o: dict, emit) -> View:
    """The ``completion`` command (one assessment)."""
    from .plots import completion_plot

    view = compute_completion(o)
    an = view.analysis
    deliver(o, emit, view, "completion", lambda folder: [
        completion_plot(c, an["traces"], folder / f"completion_{_safe(name)}.png")
        for name, c in an["done"].items()])
    return view


def _safe(name: str) -> str:
    import re

    return re.sub(r"[^A-Za-z0-9._-]+", "_", name)[:60] or "trace"


# --------------------------------------------------------------------------- temperature


def compute_temperature(o: dict) -> View:
    """The ``temperature`` command's results."""
    from .io import read_table
    from .temperature import analyse, read_temperature_table
    from .units import parse_temperature

    df = read_table(o["file"])
    T, k, se, cols, kunit = read_temperature_table(df, temp_col=o.get("temp_column"),
                                                   k_col=o.get("k_column"),
                                                   se_col=o.get("se_column"),
                                                   temp_unit=o.get("temp_unit"))
    a = analyse(T, k, se, level=o.get("level", 0.95), k_unit=kunit)
    preds = []
    for at in o.get("at") or ():
        tk = parse_temperature(at)
        p = a.predict(tk, o.get("level", 0.95))
        preds.append({"T_K": tk, "k": p.to_dict()})
    results = [{"model": "arrhenius", "params": {"Ea": a.params["Ea"].to_dict(),
                                                  "A": a.params["A"].to_dict()},
                "equation": "ln k = ln A - Ea/(R T)", "sigma_lnk": a.arrhenius.sigma},
               {"model": "eyring", "params": {"dH": a.params["dH"].to_dict(),
                                               "dS": a.params["dS"].to_dict()},
                "equation": "ln(k/T) = ln(kB/h) + dS/R - dH/(R T)", "sigma_lnk": a.eyring.sigma}]
    if preds:
        results.append({"model": "prediction", "predictions": preds})
    settings = {"columns": cols, "n": int(T.size), "T_range_K": [float(T.min()), float(T.max())],
                "weighting": a.arrhenius.weighting, "level": o.get("level", 0.95),
                "constants": "scipy.constants (CODATA)"}
    doc = document("temperature", [o["file"]], settings, results, a.warnings)
    rows = [{"p": n, "v": p.value, "se": p.se, "lo": p.ci_low, "hi": p.ci_high, "u": p.unit}
            for n, p in a.params.items()]
    table = render_table(rows, [("p", "parameter"), ("v", "value"), ("se", "SE"),
                                ("lo", f"{100 * o.get('level', 0.95):g}% low"),
                                ("hi", f"{100 * o.get('level', 0.95):g}% high"), ("u", "unit")],
                         title=f"Arrhenius and Eyring from {T.size} temperatures "
                               f"({T.min() - 273.15:.1f} to {T.max() - 273.15:.1f} C)")
    for pr in preds:
        kk = pr["k"]
        table += (f"k at {pr['T_K'] - 273.15:.2f} C ({pr['T_K']:.2f} K): {kk['value']:.4g} "
                  f"[{kk['ci_low']:.4g}, {kk['ci_high']:.4g}] {kk['unit']}\n")
    flat = [{"parameter": r["p"], "value": r["v"], "se": r["se"], "ci_low": r["lo"],
             "ci_high": r["hi"], "unit": r["u"]} for r in rows]
    return View(doc, table, rows_to_csv(flat, list(flat[0])), a)


def run_temperature(o: dict, emit) -> View:
    """The ``temperature`` command."""
    from .plots import arrhenius_plot

    view = compute_temperature(o)
    deliver(o, emit, view, "temperature", lambda folder: [
        arrhenius_plot(view.analysis, folder / "temperature_arrhenius.png")])
    return view


def follow_completion(o: dict, every: float, max_updates, echo, emit, sleep=None) -> View | None:
    """Re-read a file an instrument is still writing; print an updated forecast each time.

    Stops when every trace is complete, after ``max_updates`` reads, or on Ctrl-C, then prints
    the final summary. A half-written last line is left out; a read that cannot yet support a
    fit says why and waits for more data.
    """
    import time as _time

    from .completion import CAUTION
    from .errors import AnalysisError, InputError

    sleep = sleep or _time.sleep
    view, n = None, 0
    echo(f"following {o['file']} every {every:g} s (Ctrl-C stops); {CAUTION}")
    try:
        while True:
            n += 1
            stamp = _time.strftime("%H:%M:%S")
            try:
                view = compute_completion(dict(o, partial=True))
                done = view.analysis["done"]
                for name, c in done.items():
                    echo(f"[{stamp}] {name}: {100 * c.conversion.value:.1f} % at "
                         f"{c.t_now / 60:.1f} min; {100 * c.target:g} % at "
                         f"{c.t_target.value / 60:.1f} min [{c.t_target.ci_low / 60:.1f}, "
                         f"{c.t_target.ci_high / 60:.1f}]"
                         + ("; COMPLETE" if c.complete else ""))
                if done and all(c.complete for c in done.values()):
                    break
            except (InputError, AnalysisError) as exc:
                echo(f"[{stamp}] waiting for data: {exc.one_line()}")
            if max_updates and n >= max_updates:
                break
            sleep(every)
    except KeyboardInterrupt:
        echo("stopped (Ctrl-C)")
    if view is None:
        echo("no forecast could be made from the data read")
        return None
    echo("final summary:")
    emit(o["fmt"], view.doc, view.table, view.csv, o.get("out"), "completion")
    return view


# --------------------------------------------------------------------------- progress curves


def compute_progress(o: dict) -> View:
    """The ``progress`` command's results."""
    import numpy as np

    from .layout import read_layout
    from .photometry import resolve_epsilon
    from .progress import Curves, analyse
    from .units import (
        concentration_factor,
        parse_concentration,
        parse_pathlength,
        unit_from_header,
    )

    ts, names = _traces_for(o)
    eps = resolve_epsilon(o.get("epsilon"), o.get("chromophore"))
    if eps is None:
        raise UsageError("progress curves need the molar absorptivity of the absorbing species",
                         "give --epsilon or --chromophore")
    b = parse_pathlength(o["pathlength"]) if o.get("pathlength") else 1.0
    sign = 1.0 if o.get("species", "product") == "product" else -1.0
    meta = ts.meta
    if o.get("layout_file"):
        meta = meta.join(read_layout(o["layout_file"]), how="left", rsuffix="_map")
    s0 = np.full(len(names), np.nan)
    s0_unit = "uM"                # Km and Vmax are reported in the unit S0 was given in
    if o.get("s0") is not None:
        s0[:] = parse_concentration(o["s0"], default="uM") * 1e6
        m_u = re.search(r"([munpµ]?M)\s*$", str(o["s0"]).strip())
        s0_unit = m_u.group(1).replace("µ", "u") if m_u else "uM"
    elif o.get("s0_column"):
        col = o["s0_column"]
        if col not in meta.columns:
            raise UsageError(f"no per-curve column {col!r} in {o['file']}",
                             f"use one of {', '.join(map(str, meta.columns)) or '(none)'}")
        s0_unit = unit_from_header(col) or "uM"
        f = concentration_factor(s0_unit) * 1e6
        s0 = np.array([float(meta.loc[n, col]) * f for n in names])
    elif "substrate_M" in meta.columns:
        s0 = np.array([float(meta.loc[n, "substrate_M"]) * 1e6 for n in names])
    enzyme = None
    if o.get("selwyn"):
        col = o["selwyn"]
        if col not in meta.columns:
            raise UsageError(f"no per-curve column {col!r} for --selwyn in {o['file']}",
                             f"use one of {', '.join(map(str, meta.columns)) or '(none)'}")
        enzyme = np.array([float(meta.loc[n, col]) for n in names])
        if np.any(~np.isfinite(enzyme)) or np.any(enzyme <= 0):
            raise UsageError(f"every curve needs a positive enzyme amount in {col!r}",
                             "fill the column")
    g = ts.grid()
    t_list, p_list = [], []
    for n in names:
        i = g.names.index(n)
        ok = g.usable[i]
        t_list.append(g.times[i][ok])
        p_list.append(sign * g.values[i][ok] / (eps * b) * 1e6)
    curves = Curves(names, t_list, p_list, s0, enzyme)
    a = analyse(curves, product_inhibition=o.get("product_inhibition", False),
                ci=o.get("ci", "asymptotic"), level=o.get("level", 0.95),
                selwyn=enzyme is not None)
    if enzyme is None:
        for col in meta.columns:
            vals = meta.loc[names, col] if col in meta.columns else None
            if "enzyme" in str(col).lower() and vals is not None and vals.nunique() > 1:
                a.warnings.append(f"the curves differ in {col!r} but one Vmax was fitted to all; "
                                  f"give --selwyn {col!r} so that the rate scales with the "
                                  "enzyme amount")
    if s0_unit != "uM":
        from dataclasses import replace as _replace

        f = 1e-6 / concentration_factor(s0_unit)           # uM -> the unit of S0
        a.params = {k: _replace(p, value=p.value * f, se=p.se * f, ci_low=p.ci_low * f,
                                ci_high=p.ci_high * f, unit=p.unit.replace("uM", s0_unit))
                    for k, p in a.params.items()}
    res = {"model": "integrated-mm" + ("+product-inhibition" if "Kp" in a.params else ""),
           "params": {k: p.to_dict() for k, p in a.params.items()},
           "n_curves": len(names), "n": a.fit.n, "aicc": a.fit.aicc, "sigma_uM": a.fit.sigma,
           "runs_test_p": a.fit.runs_p,
           "curves": [{"trace": n, "S0_uM": float(s), "conversion": float(cv),
                       "enzyme": None if enzyme is None else float(e)}
                      for n, s, cv, e in zip(names, s0, a.conversion,
                                             enzyme if enzyme is not None else [None] * len(names),
                                             strict=True)],
           "equation": "S = Km W((S0/Km) exp((S0 - Vmax t)/Km)) (Schnell & Mendoza 1997)",
           "notes": list(a.fit.notes)}
    results = [res]
    if a.selwyn:
        results.append({"test": "selwyn", **a.selwyn})
    settings = {"epsilon": eps, "pathlength_cm": b, "absorbing_species": o.get("species",
                                                                             "product"),
                "s0_source": "option" if o.get("s0") is not None else (
                    o.get("s0_column") or "plate map"), "ci": o.get("ci", "asymptotic"),
                "level": o.get("level", 0.95), "selwyn_column": o.get("selwyn")}
    doc = document("progress", [o["file"]], settings, results, a.warnings)
    rows = [{"p": k, "v": p.value, "se": p.se, "lo": p.ci_low, "hi": p.ci_high, "u": p.unit,
             "m": p.ci_method} for k, p in a.params.items()]
    lvl = 100 * o.get("level", 0.95)
    table = render_table(rows, [("p", "parameter"), ("v", "value"), ("se", "SE"),
                                ("lo", f"{lvl:g}% low"), ("hi", f"{lvl:g}% high"), ("u", "unit"),
                                ("m", "interval")],
                         title=f"integrated Michaelis-Menten, global fit of {len(names)} curves")
    table += "\n" + render_table(res["curves"], [("trace", "curve"), ("S0_uM", "S0 (uM)"),
                                          ("enzyme", "enzyme"),
                                          ("conversion", "conversion reached")])
    if a.selwyn:
        s = a.selwyn
        table += (f"\nSelwyn's test: enzyme_stable = {s['enzyme_stable']}\n  {s['reason']}\n")
    flat = [{"parameter": r["p"], "value": r["v"], "se": r["se"], "ci_low": r["lo"],
             "ci_high": r["hi"], "unit": r["u"]} for r in rows]
    return View(doc, table, rows_to_csv(flat, list(flat[0])), a)


def run_progress(o: dict, emit) -> View:
    """The ``progress`` command."""
    from .plots import progress_plots

    view = compute_progress(o)
    deliver(o, emit, view, "progress", lambda folder: progress_plots(view.analysis, folder))
    return view


# --------------------------------------------------------------------------- grading


def grade_pages(results: list[dict], rubric, out: Path) -> list[Path]:
    """Gradebook CSV, one feedback page per student and the class summary, into ``out``."""
    from .grade import safe_name
    from .plots import class_summary_plot
    from .report import esc, img, kv, notes, page, table

    out = Path(out)
    (out / "feedback").mkdir(parents=True, exist_ok=True)
    extra_cols = list(dict.fromkeys(k for r in results for k in r.get("extra", {})))
    book = []
    for r in results:
        row = {"student": r["student"], "file": r["file"], "value": r["value"],
               "unit": r["unit"], "reported": r["reported"], "reference": r["reference"],
               "score": r["score"], "status": r["status"],
               "part_data": r["parts"].get("data"), "part_report": r["parts"].get("report"),
               "part_reference": r["parts"].get("reference"),
               "diagnosis": " | ".join(r["diagnosis"])}
        row.update({c: r.get("extra", {}).get(c) for c in extra_cols})
        book.append(row)
    files = [write_text(out, "gradebook.csv", rows_to_csv(book, list(book[0])))]
    used = set()
    for r in results:
        name = safe_name(r["student"])
        while name in used:
            name += "_"
        used.add(name)
        r["page"] = f"feedback/{name}.html"
        parts = r["parts"]
        sections = [("Your result", kv([
            ("assignment", rubric.title), ("quantity", f"{rubric.quantity} ({rubric.unit})"),
            ("your data give", f"{r['value']:.4g} ± {r.get('value_se', float('nan')):.2g} "
                               f"{rubric.unit}" if r["value"] is not None else "-"),
            ("you reported", r["reported"]), ("class reference", f"{rubric.reference:g} "
                                                                  f"{rubric.unit}"),
            ("score", f"{r['score']:.1f} / 100")]))]
        if parts:
            sections.append(("How the score is built", table(
                [{"part": k, "marks": f"{100 * parts[k]:.0f} %", "weight": rubric.weights[k]}
                 for k in ("data", "report", "reference")],
                [("part", "part"), ("marks", "marks"), ("weight", "weight")], text_cols=("part",))
                + "<p>data: relative SE of your value (full marks at 2 % or better); report: "
                  "your number against your own data; reference: your data against the class "
                  f"reference; each within {rubric.tolerance_pct:g} % for full marks, none "
                  f"beyond {5 * rubric.tolerance_pct:g} %.</p>"))
        ok = r["status"] == "graded" and parts.get("report", 0) == 1
        sections.append(("What we found", notes(r["diagnosis"], "ok" if ok else "note")))
        if r.get("png"):
            sections.append(("Your data and the fit", img(r["png"], "readings and the fitted "
                                                          "model used to check your number")))
        html_text = page(f"Feedback for {r['student']}", f"{rubric.title}: {rubric.quantity}",
                         sections, cautions=())
        files.append(write_text(out, r["page"], html_text))
    png = class_summary_plot(results, rubric, out / "class_summary.png")
    graded = [r for r in results if r["value"] is not None]
    vals = np.array([r["value"] for r in graded]) if graded else np.array([])
    rows = [{"student": f'<a href="{esc(r["page"])}">{esc(r["student"])}</a>',
             "score": r["score"], "value": r["value"], "reported": r["reported"],
             "diagnosis": r["diagnosis"][0] if r["diagnosis"] else ""} for r in results]
    body = table([{k: (v if k != "student" else "@@" + str(i)) for k, v in row.items()}
                  for i, row in enumerate(rows)],
                 [("student", "student"), ("score", "score (/100)"),
                  ("value", f"own value ({rubric.unit})"),
                  ("reported", f"reported ({rubric.unit})"), ("diagnosis", "first finding")],
                 text_cols=("student", "diagnosis"))
    for i, row in enumerate(rows):            # links are built here, names escaped above
        body = body.replace(f">@@{i}<", f">{row['student']}<", 1)
    stats_kv = kv([("students", len(results)), ("analysed", len(graded)),
                   ("median own value", f"{np.median(vals):.4g} {rubric.unit}" if vals.size else
                    "-"), ("reference", f"{rubric.reference:g} {rubric.unit} ± "
                                         f"{rubric.tolerance_pct:g} %"),
                   ("median score", f"{np.median([r['score'] for r in results]):.1f}")])
    summary = page(f"Class summary: {rubric.title}", f"{rubric.quantity} in {rubric.unit}",
                   [("Class", stats_kv), ("Distribution", img(png, "each student's own value "
                                                         "against the reference and tolerance "
                                                         "band")),
                    ("Students", body)], cautions=())
    files.append(write_text(out, "class_summary.html", summary))
    return files


def run_grade(o: dict, emit, progressbar=None) -> View:
    """The ``grade`` command: grade in parallel, print the gradebook, write the pages."""
    from concurrent.futures import ProcessPoolExecutor

    from .grade import check_jobs, grade_class, read_rubric

    rubric = read_rubric(o["rubric"])
    jobs = check_jobs(o.get("jobs"))
    executor = ProcessPoolExecutor(max_workers=jobs) if jobs > 1 else None
    try:
        results = grade_class(o["folder"], rubric, executor=executor,
                              progress=progressbar, plots=bool(o.get("out")))
    finally:
        if executor is not None:
            executor.shutdown()
    if o.get("out"):
        grade_pages(results, rubric, Path(o["out"]))
    public = [{k: v for k, v in r.items() if k not in ("png",)} for r in results]
    settings = {"rubric": rubric.to_dict(), "jobs": jobs,
                "score": "100 x sum(weight x part) / sum(weights); parts data, report, "
                         "reference (see docs/formats.md)"}
    doc = document("grade", [o["folder"], o["rubric"]], settings, public, [])
    table_rows = [{"student": r["student"], "score": r["score"], "value": r["value"],
                   "reported": r["reported"], "diag": r["diagnosis"][0][:90] + (
                       "..." if len(r["diagnosis"][0]) > 90 else "")} for r in public]
    text = render_table(table_rows, [("student", "student"), ("score", "score"),
                                     ("value", f"own ({rubric.unit})"),
                                     ("reported", f"reported ({rubric.unit})"),
                                     ("diag", "finding")],
                        title=f"{rubric.title}: {rubric.quantity}, reference {rubric.reference:g} "
                              f"{rubric.unit} ± {rubric.tolerance_pct:g} %")
    flat = [{"student": r["student"], "file": r["file"], "value": r["value"],
             "reported": r["reported"], "reference": r["reference"], "unit": r["unit"],
             "score": r["score"], "status": r["status"], "diagnosis": r["diagnosis"]}
            for r in public]
    view = View(doc, text, rows_to_csv(flat, list(flat[0])), results)
    emit(o["fmt"], view.doc, view.table, view.csv, o.get("out"), "grade")
    return view
