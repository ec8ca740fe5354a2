"""The ``ratelaw`` command's view."""

from __future__ import annotations

from ..errors import UsageError
from ..output import document, render_table, rows_to_csv
from . import View, _ci, _photometry, _pm, _traces_for, deliver, each_trace


def compute_ratelaw(o: dict) -> View:
    """The ``ratelaw`` command's results."""
    from ..ratelaws import fit_trace, guggenheim, pseudo_first_order
    from ..units import parse_concentration

    ts, names = _traces_for(o)
    ph = _photometry(o)
    a0 = parse_concentration(o["a0"], default="uM") if o.get("a0") else None
    b0 = parse_concentration(o["b0"], default="uM") if o.get("b0") else None
    if o.get("order") == "mixed" and (a0 is None or b0 is None):
        raise UsageError("--order mixed needs --a0 and --b0", "e.g. --a0 '50 uM' --b0 '120 uM'")
    level = o.get("level", 0.95)

    def one(name, t, y):
        law = fit_trace(t, y, name, order=o.get("order", "auto"), photometry=ph, fix=o.get("fix"),
                        ci=o.get("ci", "profile"), level=level, expect=o.get("expect", "any"),
                        a0=a0, b0=b0)
        gg = None
        if o.get("guggenheim") is not None:
            gg = guggenheim(t, y, None if o["guggenheim"] == 0 else o["guggenheim"], level=level)
        return law, gg

    results, warnings, laws = [], list(ts.info.get("warnings", [])), {}
    for name, res, why in each_trace(o, ts, names, one):
        if res is None:
            results.append({"trace": name, "order": None, "params": {}, "half_life_s": None,
                            "status": f"not fitted: {why}"})
            warnings.append(f"{name}: {why}")
            continue
        law, gg = res
        laws[name] = law
        d = law.to_dict()
        d["status"] = "ok"
        if "temperature_K" in ts.meta.columns and name in ts.meta.index:
            d["temperature_K"] = ts.meta.loc[name, "temperature_K"]
        if gg is not None:
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
                     "status": r.get("status", "ok"), "next": _runner_up(r)})
    table = render_table(rows, [("trace", "trace"), ("order", "order"), ("k", "k"),
                                ("k_unit", "unit"), ("ci", "k interval"),
                                ("kc", "k (concentration units)"), ("half", "half-life (s)"),
                                ("hci", "half-life interval (s)")]
                         + ([("next", "next best order (dAICc)")]
                            if any(x["next"] != "-" for x in rows) else []))
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


def _pseudo_series(o, laws, pseudo_first_order):
    from ..io import read_table
    from ..layout import conc_column, parse_conc_cells

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


def _runner_up(result: dict) -> str:
    """The second-best order by AICc and how far behind it is (for --order auto)."""
    rows = ((result.get("evidence") or {}).get("aicc_table") or [])
    if len(rows) < 2:
        return "-"
    return f"{rows[1]['model']} (+{rows[1]['delta_aicc']:.1f})"


def run_ratelaw(o: dict, emit) -> View:
    """The ``ratelaw`` command."""
    from ..plots import ratelaw_plots

    view = compute_ratelaw(o)
    deliver(o, emit, view, "ratelaw", lambda folder: ratelaw_plots(view.analysis, folder))
    return view
