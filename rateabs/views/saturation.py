"""The ``saturation`` command's view."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UsageError
from ..output import document, render_table, rows_to_csv
from . import View, deliver


def _keep_rows(df, keep):
    """Rows where ``keep`` is true, with the table's line numbers kept for error messages."""
    keep = np.asarray(keep, dtype=bool)
    attrs = dict(df.attrs)
    if attrs.get("lines") is not None:
        attrs["lines"] = [ln for ln, k in zip(attrs["lines"], keep, strict=True) if k]
    out = df[keep]
    out.attrs = attrs
    return out


def _select_rows(df, select):
    for item in select or ():
        col, sep, val = item.partition("=")
        if not sep or col.strip() not in df.columns:
            raise UsageError(f"--select {item!r} does not name a column of the table",
                             f"use COL=VALUE with one of {', '.join(map(str, df.columns))}")
        df = _keep_rows(df, df[col.strip()].astype(str).str.strip() == val.strip())
        if df.empty:
            raise UsageError(f"--select {item!r} keeps no rows", "check the value")
    return df


def compute_saturation(o: dict) -> View:
    """The ``saturation`` command's results."""
    from ..io import read_table
    from ..output import flatten_params
    from ..saturation import analyse, results_json, table_data
    from ..units import parse_concentration

    df = read_table(o["file"])
    if "role" in df.columns:
        df = _keep_rows(df, df["role"].astype(str).str.strip().str.lower() == "sample")
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
        from ..plots import linearised, saturation_fit

        files = [saturation_fit(a, folder / "saturation_fit.png", title=Path(o["file"]).stem)]
        if a.chosen != "ic50":
            files.append(linearised(a, folder / "saturation_linearised.png"))
        return files

    deliver(o, emit, view, "saturation", plot)
    return view
