"""The ``saturation`` command's view."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import RateabsError, UsageError
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

    df = read_table(o.file, o.sheet)
    notes = list(df.attrs.get("notes", []))
    if "role" in df.columns:
        df = _keep_rows(df, df["role"].astype(str).str.strip().str.lower() == "sample")
    df = _select_rows(df, o.select)
    df.attrs.update(source=o.file, notes=notes)
    return df


def _without_empty_columns(df, named):
    """The table without columns that hold no value in any row (a many-plate rates table has
    every column, e.g. an empty inhibitor_uM), unless an option names them."""
    empty = [c for c in df.columns if c not in named
             and df[c].astype(str).str.strip().isin(["", "nan", "None"]).all()]
    if not empty:
        return df
    out = df.drop(columns=empty)
    out.attrs = dict(df.attrs)
    return out


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


def _pooled_warning(df, o: SaturationOptions) -> list[str]:
    """Rows of several samples fitted as one series, said out loud: a rates.csv names each
    well's sample, and pooling a lysate's rates with the purified enzyme's gave one Km for
    both (69 uM, where the enzyme alone gives 114 uM)."""
    if "sample" not in df.columns or o.each == "sample":
        return []
    names = [n for n in dict.fromkeys(df["sample"].astype(str).str.strip())
             if n and n.lower() not in ("nan", "none")]
    if len(names) < 2:
        return []
    shown = ", ".join(names[:4]) + (" ..." if len(names) > 4 else "")
    return [f"the rows come from {len(names)} samples ({shown}) and are fitted together as one "
            "series; give --each sample to fit each sample on its own, or --select "
            f"sample={names[0]} for one"]


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


def _residual_se(best, rate_unit: str) -> str:
    """The residual SE in words: in the rate unit (no weights), as a fraction of the rate
    (relative weighting) or in units of the given SDs (sd weighting)."""
    if best.weighting == "relative":
        rel = np.sqrt(np.sum((best.residuals / best.fitted) ** 2) / max(best.dof, 1))
        return f"{100 * rel:.3g} % of the rate (relative weighting)"
    if best.weighting == "sd":
        return f"{best.sigma:.4g} x the given SDs"
    return f"{best.sigma:.4g} {rate_unit}".rstrip()


def _text(a, data, results, level: float) -> str:
    chosen = next(r for r in results if r.get("chosen"))
    prow = [{"param": k, **v, "ci_high": "open" if v.get("ci_high") is None and (
        v.get("ci_low") is not None) else v.get("ci_high")} for k, v in chosen["params"].items()]
    table = render_table(prow, [("param", "parameter"), ("value", "value"), ("se", "SE"),
                                ("ci_low", f"{100 * level:g}% low"),
                                ("ci_high", f"{100 * level:g}% high"), ("unit", "unit"),
                                ("ci_method", "interval")],
                         title=f"chosen model: {a.chosen}   ({chosen['equation']})")
    table += (f"n = {a.best.n} points, residual SE = {_residual_se(a.best, data.rate_unit)}, "
              f"runs test p = {a.best.runs_p:.3g}\n")
    if a.comparison is not None:
        table += "\nevidence\n" + a.comparison.report() + "\n"
    if a.cross_check:
        cc = a.cross_check
        table += (f"\ncross-check, {cc['method']}: Vmax = {cc['Vmax']:.4g} {data.rate_unit}"
                  .rstrip() + f", Km = {cc['Km']:.4g} {data.conc_unit}".rstrip() + "\n")
    return table


def compute_saturation(o: SaturationOptions) -> View:
    """The ``saturation`` command's results (one result per group with ``--each``)."""
    df = _table(o)
    view = each_group(o, df) if o.each else fit_table(o, df)
    view.doc["warnings"][:0] = df.attrs["notes"]        # which sheet of a workbook was read
    return view


def fit_table(o: SaturationOptions, df) -> View:
    """The fits of one table of rates: the whole file, or one group of ``--each``."""
    from ..output import flatten_params
    from ..saturation import analyse, results_json, table_data

    df = _without_empty_columns(df, (o.conc, o.rate, o.inhibitor, o.sd))
    data = table_data(df, conc=o.conc, rate=o.rate, inhibitor=o.inhibitor, sd=o.sd,
                      conc_unit=o.conc_unit, rate_unit=o.rate_unit, inhib_unit=o.inhibitor_unit,
                      need_inhibitor=o.model == "ic50")
    boot = o.bootstrap() if o.ci == "bootstrap" else {}
    a = analyse(data, model=o.model, ci=o.ci, level=o.level, weighting=o.weighting, fix=o.fix,
                enzyme_M=o.enzyme, mode=o.mode, substrate=o.substrate, km=o.km, **boot)
    a.warnings.extend(_bent_warning(df) + _pooled_warning(df, o))
    results = results_json(a)
    doc = document("saturation", [o.file], _settings_json(o, data), results, a.warnings)
    flat = [flatten_params({"model": r["model"], "chosen": r["chosen"], "aicc": r.get("aicc"),
                            "status": r.get("status"), "params": r["params"]}) for r in results]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, _text(a, data, results, o.level), rows_to_csv(flat, cols), a)


def run_saturation(o: SaturationOptions, emit) -> View:
    """The ``saturation`` command."""
    view = compute_saturation(o)
    if o.each:
        deliver(o, emit, view, "saturation", lambda folder: group_plots(view, folder))
        return view
    a = view.analysis

    def plot(folder):
        from ..plots import linearised, saturation_fit

        files = [saturation_fit(a, folder / "saturation_fit.png", title=Path(o.file).stem)]
        if a.chosen != "ic50":
            files.append(linearised(a, folder / "saturation_linearised.png"))
        return files

    deliver(o, emit, view, "saturation", plot)
    return view


# --------------------------------------------------------------------------- --each


def _groups(df, column: str) -> tuple[list[tuple[str, object]], int]:
    """The table's groups by ``column`` in order of first appearance, and the rows without a
    value there (left out)."""
    if column not in df.columns:
        raise UsageError(f"--each {column}: the table has no column {column!r}",
                         f"use one of {', '.join(map(str, df.columns))}")
    keys = df[column].astype(str).str.strip()
    keys = keys.where(~df[column].isna(), "")
    groups = [(k, _keep_rows(df, (keys == k).to_numpy())) for k in dict.fromkeys(keys) if k]
    return groups, int((keys == "").sum())


def _group_result(o: SaturationOptions, name: str, df) -> tuple[dict, list[str], object]:
    """One group's result (its chosen model, or why it failed), its warnings and analysis."""
    try:
        view = fit_table(o, df)
    except UsageError:
        raise                   # an option the table refuses is the command's error, not a group's
    except RateabsError as exc:
        return ({"group": name, "model": None, "params": {}, "chosen": False,
                 "status": "failed", "error": exc.one_line()}, [exc.one_line()], None)
    chosen = next(r for r in view.doc["results"] if r.get("chosen"))
    return ({"group": name, "n_points": view.doc["settings"]["n_points"], **chosen},
            view.doc["warnings"], view.analysis)


def each_group(o: SaturationOptions, df) -> View:
    """``--each COLUMN``: every group of rows fitted on its own; a group that cannot be fitted
    costs that group only (its result says why; the command exits with
    :data:`rateabs.errors.SOME_FAILED`)."""
    from ..output import flatten_params

    groups, unnamed = _groups(df, o.each)
    results, warnings, fits = [], [], {}
    if unnamed:
        warnings.append(f"{unnamed} row(s) have no {o.each}: left out")
    for name, rows in groups:
        result, said, analysis = _group_result(o, name, rows)
        results.append(result)
        warnings += [f"{o.each} {name}: {w}" for w in said]
        if analysis is not None:
            fits[name] = analysis
    settings = {"model": o.model, "ci": o.ci, "level": o.level, "weighting": o.weighting,
                "fixed": o.fix, "each": o.each, "groups": len(groups),
                "failed": sum(r["status"] == "failed" for r in results),
                "selected": [f"{c}={v}" for c, v in o.select]}
    if o.ci == "bootstrap":
        b = o.bootstrap()
        settings.update(resamples=b["n_boot"], resample=b["resample"], seed=b["seed"])
    doc = document("saturation", [o.file], settings, results, warnings)
    flat = [flatten_params({k: r.get(k) for k in ("group", "model", "n_points", "aicc",
                                                  "status", "error", "params")})
            for r in results]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, _each_text(results, o.each), rows_to_csv(flat, cols), fits)


def _each_text(results: list[dict], column: str) -> str:
    from ..fitting import fmt_pm

    rows = []
    for r in results:
        params = "; ".join(f"{k} = {fmt_pm(p['value'], p['se'], unit=p.get('unit') or '')}"
                           for k, p in r["params"].items() if p.get("value") is not None)
        rows.append({"group": r["group"], "model": r["model"] or "-",
                     "n": r.get("n_points"), "params": params or r.get("error") or "-"})
    return render_table(rows, [("group", column), ("model", "model"), ("n", "n"),
                               ("params", "parameters (value ± SE)")],
                        title=f"one fit per {column}")


def group_plots(view: View, folder: Path) -> list[Path]:
    """One saturation plot per fitted group of ``--each``."""
    from ..output import safe_filename
    from ..plots import saturation_fit

    return [saturation_fit(a, folder / f"saturation_fit_{safe_filename(name, 40)}.png",
                           title=str(name)) for name, a in view.analysis.items()]
