"""The ``progress`` command's view."""

from __future__ import annotations

import re

import numpy as np

from ..errors import UsageError
from ..output import document, render_table, rows_to_csv
from . import View, _traces_for, deliver


def compute_progress(o: dict) -> View:
    """The ``progress`` command's results."""

    from ..layout import read_layout
    from ..photometry import resolve_epsilon
    from ..progress import Curves, analyse
    from ..units import (
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
    from ..plots import progress_plots

    view = compute_progress(o)
    deliver(o, emit, view, "progress", lambda folder: progress_plots(view.analysis, folder))
    return view
