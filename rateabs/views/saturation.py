"""The ``saturation`` command's view."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import UsageError
from ..options import SaturationOptions
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
    for col, val in select:
        if col not in df.columns:
            raise UsageError(f"--select {col}={val}: the table has no column {col!r}",
                             f"use COL=VALUE with one of {', '.join(map(str, df.columns))}")
        df = _keep_rows(df, df[col].astype(str).str.strip() == val.strip())
        if df.empty:
            raise UsageError(f"--select {col}={val} keeps no rows", "check the value")
    return df


def _table(o: SaturationOptions):
    """The rate table: sample rows only (of a rates.csv), then --select."""
    from ..io import read_table

    df = read_table(o.file)
    if "role" in df.columns:
        df = _keep_rows(df, df["role"].astype(str).str.strip().str.lower() == "sample")
    df = _select_rows(df, o.select)
    df.attrs["source"] = o.file
    return df


def _bent_warning(df) -> list[str]:
    """Rates from a rates.csv whose window slopes are bent by depletion, said out loud."""
    if "flags" not in df.columns:
        return []
    method = df["method"] if "method" in df.columns else ["window"] * len(df)
    bent = [f for f, m in zip(df["flags"].astype(str), method, strict=True)
            if m == "window" and any(w in f for w in ("over-10pct", "curved"))]
    if not bent:
        return []
    return [f"{len(bent)} of {len(df)} rates come from wells flagged over-10pct or curved: "
            "window slopes there underestimate the initial rate; consider "
            "`rateabs rates --slope-from curve`"]


def _settings_json(o: SaturationOptions, data) -> dict:
    settings = {"model": o.model, "ci": o.ci, "level": o.level, "weighting": o.weighting,
                "fixed": o.fix, "columns": data.columns, "conc_unit": data.conc_unit,
                "rate_unit": data.rate_unit, "inhibitor_unit": data.inhib_unit,
                "enzyme_M": o.enzyme, "n_points": int(data.v.size),
                "selected": [f"{c}={v}" for c, v in o.select]}
    if o.ci == "bootstrap":
        b = o.bootstrap()
        settings.update(resamples=b["n_boot"], resample=b["resample"], seed=b["seed"])
    if o.model == "ic50" and o.mode:
        settings.update(cheng_prusoff={"mode": o.mode, "substrate": o.substrate, "km": o.km})
    return settings


def _text(a, data, results, level: float) -> str:
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
    return table


def compute_saturation(o: SaturationOptions) -> View:
    """The ``saturation`` command's results."""
    from ..output import flatten_params
    from ..saturation import analyse, results_json, table_data

    df = _table(o)
    data = table_data(df, conc=o.conc, rate=o.rate, inhibitor=o.inhibitor, sd=o.sd,
                      conc_unit=o.conc_unit, rate_unit=o.rate_unit, inhib_unit=o.inhibitor_unit,
                      need_inhibitor=o.model == "ic50")
    boot = o.bootstrap() if o.ci == "bootstrap" else {}
    a = analyse(data, model=o.model, ci=o.ci, level=o.level, weighting=o.weighting, fix=o.fix,
                enzyme_M=o.enzyme, mode=o.mode, substrate=o.substrate, km=o.km, **boot)
    a.warnings.extend(_bent_warning(df))
    results = results_json(a)
    doc = document("saturation", [o.file], _settings_json(o, data), results, a.warnings)
    flat = [flatten_params({"model": r["model"], "chosen": r["chosen"], "aicc": r.get("aicc"),
                            "status": r.get("status"), "params": r["params"]}) for r in results]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, _text(a, data, results, o.level), rows_to_csv(flat, cols), a)


def run_saturation(o: SaturationOptions, emit) -> View:
    """The ``saturation`` command."""
    view = compute_saturation(o)
    a = view.analysis

    def plot(folder):
        from ..plots import linearised, saturation_fit

        files = [saturation_fit(a, folder / "saturation_fit.png", title=Path(o.file).stem)]
        if a.chosen != "ic50":
            files.append(linearised(a, folder / "saturation_linearised.png"))
        return files

    deliver(o, emit, view, "saturation", plot)
    return view
