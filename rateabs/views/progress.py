"""The ``progress`` command's view."""

from __future__ import annotations

import re

import numpy as np

from ..errors import UsageError
from ..options import ProgressOptions
from ..output import document, render_table, rows_to_csv
from . import View, deliver, origin_settings, origin_words, read_for, time_settings, time_words


def _column(o: ProgressOptions, meta, col: str, flag: str):
    if col not in meta.columns:
        raise UsageError(f"{flag} {col!r}: no such per-curve column in {o.file}",
                         f"use one of {', '.join(map(str, meta.columns)) or '(none)'}")
    return meta[col]


#: A per-curve column of the file that holds S0 (used with --s0-column only).
_S0_COLUMN = re.compile(r"^\s*(s0|\[s\]0?|substrate)(\b|_)", re.IGNORECASE)


def _span(values, unit: str = "uM") -> str:
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    text = f"{v.min():g}" if v.min() == v.max() else f"{v.min():g} to {v.max():g}"
    return f"{text} {unit}".rstrip()


def _one_s0_source(o: ProgressOptions, meta, names) -> None:
    """Refuse --s0 or --s0-column where the plate map gives each curve's substrate, and --s0
    where the file has a per-curve S0 column: one source of S0, the two named (an --s0 that
    overrode the map's 20-200 uM gave Km 1e-9 uM without a word)."""
    flag = ("--s0" if o.s0 is not None else "--s0-column" if o.s0_column else None)
    if flag is None:
        return
    given = (f"--s0 {o.s0 * 1e6:g} uM" if o.s0 is not None else f"--s0-column {o.s0_column!r}")
    if "substrate_M" in meta.columns and meta.loc[names, "substrate_M"].notna().any():
        raise UsageError(f"{given} and the plate map {o.layout_file} (substrate per curve: "
                         f"{_span(meta.loc[names, 'substrate_M'] * 1e6)}) both give S0",
                         f"leave {flag} out to use the map's, or give a map without a substrate "
                         "column")
    if o.s0 is not None:
        for col in meta.columns:
            if col in names or not _S0_COLUMN.search(str(col)):
                continue
            vals = np.asarray(meta.loc[names, col].to_numpy(), float)
            if np.isfinite(vals).any():
                raise UsageError(f"{given} and the column {col!r} of {o.file} (per curve: "
                                 f"{_span(vals, '')}) both give S0",
                                 f"give --s0-column {str(col)!r} to use the file's, or leave "
                                 "--s0 out")


def _s0_uM(o: ProgressOptions, meta, names) -> np.ndarray:
    """Each curve's S0 in µM: from --s0, --s0-column (unit in its header) or the plate map (one
    of them: :func:`_one_s0_source`)."""
    from ..units import concentration_factor, unit_from_header

    _one_s0_source(o, meta, names)
    if o.s0 is not None:
        return np.full(len(names), o.s0 * 1e6)
    if o.s0_column:
        col = _column(o, meta, o.s0_column, "--s0-column")
        f = concentration_factor(unit_from_header(o.s0_column) or "uM") * 1e6
        return np.array([float(col.loc[n]) * f for n in names])
    if "substrate_M" in meta.columns:
        return np.array([float(meta.loc[n, "substrate_M"]) * 1e6 for n in names])
    return np.full(len(names), np.nan)


def _unit(o: ProgressOptions) -> str:
    """The unit Km and Vmax are reported in: that of --s0, or of the S0 column's header."""
    from ..units import unit_from_header

    if o.s0 is None and o.s0_column:
        unit = unit_from_header(o.s0_column).replace("µ", "u")
        return unit if unit in ("M", "mM", "uM", "nM") else "uM"
    return o.s0_unit


def _enzyme(o: ProgressOptions, meta, names) -> np.ndarray | None:
    """Each curve's enzyme amount from the --selwyn column, or None."""
    if not o.selwyn:
        return None
    col = _column(o, meta, o.selwyn, "--selwyn")
    enzyme = np.array([float(col.loc[n]) for n in names])
    if np.any(~np.isfinite(enzyme)) or np.any(enzyme <= 0):
        raise UsageError(f"every curve needs a positive enzyme amount in {o.selwyn!r}",
                         "fill the column")
    return enzyme


def _enzyme_unit(o: ProgressOptions) -> str:
    """The unit the --selwyn column's header states ('enzyme (nM)' -> 'nM'), or ''."""
    from ..units import unit_from_header

    return unit_from_header(o.selwyn).replace("µ", "u") if o.selwyn else ""


def _unit_warnings(o: ProgressOptions, curves) -> list[str]:
    """A unit that neither a header nor an option states, said with what was assumed or left
    out: an S0 column without one is read as uM; an enzyme column without a molar unit gives
    Vmax per enzyme amount and no kcat."""
    from ..units import concentration_factor, unit_from_header

    out = []
    if o.s0 is None and o.s0_column and not unit_from_header(o.s0_column):
        out.append(f"the S0 column {o.s0_column!r} states no unit: its numbers are taken as uM; "
                   "name the unit in the header ('S0 (mM)') if they are not")
    if curves.enzyme is not None:
        try:
            molar = bool(curves.enzyme_unit) and concentration_factor(curves.enzyme_unit) > 0
        except UsageError:
            molar = False
        if not molar:
            said = (f"states {curves.enzyme_unit}, not a molar concentration"
                    if curves.enzyme_unit else "states no unit")
            out.append(f"the enzyme column {o.selwyn!r} {said}: Vmax is per "
                       f"{curves.enzyme_unit or 'enzyme amount'} and kcat, kcat/Km are not "
                       "given; name a molar unit in the header ('enzyme (nM)') for them")
    return out


def _enzyme_warning(meta, names) -> list[str]:
    """One Vmax fitted to curves whose enzyme amounts differ is said out loud."""
    return [f"the curves differ in {col!r} but one Vmax was fitted to all; give --selwyn {col!r} "
            "so that the rate scales with the enzyme amount"
            for col in meta.columns
            if "enzyme" in str(col).lower() and meta.loc[names, col].nunique() > 1]


def _curves(o: ProgressOptions):
    """The progress curves (product formed, µM), the per-curve metadata and what the reader
    decided (``TraceSet.info``)."""
    from ..layout import read_layout
    from ..progress import curves_from_absorbance

    ts, names = read_for(o)
    meta = ts.meta
    if o.layout_file:
        meta = meta.join(read_layout(o.layout_file), how="left", rsuffix="_map")
    g = ts.grid()
    rows = [g.names.index(n) for n in names]
    curves = curves_from_absorbance(
        names, [g.times[i][g.usable[i]] for i in rows], [g.values[i][g.usable[i]] for i in rows],
        _s0_uM(o, meta, names), _enzyme(o, meta, names), epsilon=o.epsilon_value(),
        pathlength_cm=1.0 if o.pathlength is None else o.pathlength, species=o.species,
        enzyme_unit=_enzyme_unit(o))
    return curves, meta, ts.info


def _result(a, c) -> dict:
    enzyme = c.enzyme if c.enzyme is not None else [None] * len(c.names)
    origins = c.t0 if c.t0 is not None else [0.0] * len(c.names)
    return {"model": _model_name(a.params),
            "params": {k: p.to_dict() for k, p in a.params.items()},
            "chosen": a.corrected is None,
            "enzyme": ("assumed stable" if not a.selwyn else "assumed stable; "
                       + ("biased: Selwyn's test finds the enzyme not stable" if a.corrected
                          else "Selwyn's test finds it stable")),
            "n_curves": len(c.names), "n": a.fit.n, "aicc": a.fit.aicc,
            "sigma_uM": a.fit.sigma, "runs_test_p": a.fit.runs_p,
            "curves": [{"trace": n, "S0_uM": float(s), "conversion": float(cv),
                        "enzyme": None if e is None else float(e), "time_origin_s": float(t0)}
                       for n, s, cv, e, t0 in zip(c.names, c.s0, a.conversion, enzyme, origins,
                                                  strict=True)],
            "equation": "S = Km W((S0/Km) exp((S0 - Vmax t)/Km)) (Schnell & Mendoza 1997)",
            "notes": list(a.fit.notes)}


def _model_name(params: dict, decay: bool = False) -> str:
    return ("integrated-mm" + ("+product-inhibition" if "Kp" in params else "")
            + ("+inactivation" if decay else ""))


def _corrected_result(a) -> dict:
    """The fit with first-order enzyme inactivation, when Selwyn's test finds the enzyme not
    stable: the constants to use (``chosen``)."""
    r = a.decay_fit
    return {"model": _model_name(a.corrected, decay=True),
            "params": {k: p.to_dict() for k, p in a.corrected.items()},
            "chosen": True,
            "enzyme": "loses activity at first order, e^(-kd t); Km and Vmax at time zero",
            "n": r.n, "aicc": r.aicc, "sigma_uM": r.sigma, "runs_test_p": r.runs_p,
            "equation": "Km ln(S0/S) + (S0 - S) = Vmax (1 - exp(-kd t))/kd",
            "notes": list(r.notes)}


def _param_rows(params: dict) -> list[dict]:
    """Table rows of parameters; an upper bound that is open (a Km the curves bound only from
    below) reads 'open'."""
    return [{"p": k, "v": p.value, "se": p.se, "lo": p.ci_low,
             "hi": "open" if p.ci_high == np.inf and np.isfinite(p.ci_low) else p.ci_high,
             "u": p.unit, "m": p.ci_method} for k, p in params.items()]


def _settings_json(o: ProgressOptions) -> dict:
    return {"epsilon": o.epsilon_value(), "pathlength_cm": o.pathlength or 1.0,
            "absorbing_species": o.species, "concentration_unit": _unit(o),
            "s0_source": "option" if o.s0 is not None else (o.s0_column or "plate map"),
            "ci": o.ci, "level": o.level, "product_inhibition": o.product_inhibition,
            "selwyn_column": o.selwyn}


def _params_table(rows, level: float, title: str) -> str:
    return render_table(rows, [("p", "parameter"), ("v", "value"), ("se", "SE"),
                               ("lo", f"{100 * level:g}% low"), ("hi", f"{100 * level:g}% high"),
                               ("u", "unit"), ("m", "interval")], title=title)


def _text(a, res, rows, level: float) -> str:
    title = f"integrated Michaelis-Menten, global fit of {res['n_curves']} curves"
    if a.corrected:
        title += ", enzyme assumed stable (BIASED here: see Selwyn's test below)"
    table = _params_table(rows, level, title)
    table += "\n" + render_table(res["curves"], [("trace", "curve"), ("S0_uM", "S0 (uM)"),
                                                 ("enzyme", "enzyme"),
                                                 ("conversion", "conversion reached")])
    if a.selwyn:
        s = a.selwyn
        verdict = ("the enzyme is stable: the curves superimpose" if s["enzyme_stable"] else
                   "the enzyme is not stable: the curves do not superimpose")
        table += f"\nSelwyn's test: {verdict}\n  {s['reason']}\n"
    if a.corrected:
        table += "\n" + _params_table(
            _param_rows(a.corrected), level,
            "corrected for enzyme inactivation (activity e^(-kd t)): Km and Vmax at time zero, "
            "the constants to report")
    return table


def compute_progress(o: ProgressOptions) -> View:
    """The ``progress`` command's results."""
    from ..progress import analyse

    curves, meta, info = _curves(o)
    a = analyse(curves, product_inhibition=o.product_inhibition, ci=o.ci, level=o.level,
                selwyn=curves.enzyme is not None, unit=_unit(o))
    a.warnings[:0] = list(info.get("warnings", [])) + _unit_warnings(o, curves)  # reader's first
    if curves.enzyme is None:
        a.warnings.extend(_enzyme_warning(meta, curves.names))
    res = _result(a, curves)
    results = [res] + ([{"test": "selwyn", **a.selwyn}] if a.selwyn else [])
    if a.corrected:
        results.append(_corrected_result(a))
    t0s = curves.t0 if curves.t0 is not None else [0.0]
    doc = document("progress", [o.file], {**_settings_json(o), **time_settings(info),
                                          **origin_settings(info, t0s)}, results, a.warnings)
    rows = _param_rows(a.params)
    flat = [{"parameter": k, **{f: d[f] for f in ("value", "se", "ci_low", "ci_high", "unit")},
             "model": r["model"]}
            for r in results if "params" in r for k, d in r["params"].items()]
    text = (f"time: {time_words(info)}\ntime origin: {origin_words(info, t0s)}\n\n"
            + _text(a, res, rows, o.level))
    return View(doc, text, rows_to_csv(flat, list(flat[0])), a)


def run_progress(o: ProgressOptions, emit) -> View:
    """The ``progress`` command."""
    from ..plots import progress_plots

    view = compute_progress(o)
    deliver(o, emit, view, "progress", lambda folder: progress_plots(view.analysis, folder))
    return view
