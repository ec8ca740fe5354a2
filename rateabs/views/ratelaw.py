"""The ``ratelaw`` command's view."""

from __future__ import annotations

from ..errors import UsageError
from ..fitting import fmt_interval, fmt_pm
from ..options import RatelawOptions
from ..output import document, flatten_params, render_table, rows_to_csv
from . import View, check_rate_law_fix, deliver, each_trace, rate_law_orders, read_for


def _fit_one(o: RatelawOptions, ph):
    """The per-trace analysis: the rate law, and Guggenheim's k when asked for."""
    from ..ratelaws import fit_trace, guggenheim

    def one(name, t, y):
        law = fit_trace(t, y, name, order=o.order, photometry=ph, fix=o.fix, ci=o.ci,
                        level=o.level, expect=o.expect, a0=o.a0, b0=o.b0)
        gg = None
        if o.guggenheim is not None:
            gg = guggenheim(t, y, None if o.guggenheim == 0 else o.guggenheim, level=o.level)
        return law, gg

    return one


def _result(name, law, gg, ts) -> dict:
    d = law.to_dict()
    d["status"] = "ok"
    if "temperature_K" in ts.meta.columns and name in ts.meta.index:
        d["temperature_K"] = float(ts.meta.loc[name, "temperature_K"])
    if gg is not None:
        d["guggenheim"] = {"k": gg["k"].to_dict(), "half_life_s": gg["half_life"].to_dict(),
                           "delta_s": gg["delta_s"], "n_pairs": gg["n_pairs"]}
    return d


def _row(r: dict) -> dict:
    """One table row for a person."""
    k = (r.get("params") or {}).get("k") or {}
    hl = r.get("half_life_s") or {}
    kc = r.get("k_conc") or {}
    return {"trace": r["trace"], "order": r.get("order") or "-",
            "k": fmt_pm(k.get("value"), k.get("se")), "k_unit": k.get("unit", ""),
            "ci": fmt_interval(k.get("ci_low"), k.get("ci_high")),
            "kc": fmt_pm(kc.get("value"), kc.get("se"), unit=kc.get("unit", "")) if kc else "-",
            "half": fmt_pm(hl.get("value"), hl.get("se")),
            "hci": fmt_interval(hl.get("ci_low"), hl.get("ci_high")),
            "status": r.get("status", "ok"), "next": _runner_up(r)}


def _text(results, laws, series) -> str:
    rows = [_row(r) for r in results]
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
        k2, k0 = series["k2"], series["k0"]
        table += (f"\npseudo-first-order series: k2 = {fmt_pm(k2['value'], k2['se'])} L/(mol s) "
                  f"{fmt_interval(k2['ci_low'], k2['ci_high'])}, intercept k0 = "
                  f"{fmt_pm(k0['value'], k0['se'], 3)} 1/s\n")
    return table


def _flat(r: dict) -> dict:
    """One CSV row: parameters flattened, the half-life with its interval."""
    f = {"trace": r["trace"], "order": r.get("order"), "status": r.get("status")}
    f.update({k: v for k, v in flatten_params(r.get("params") or {}).items()})
    hl = r.get("half_life_s") or {}
    f["half_life_s"], f["half_life_s_ci_low"], f["half_life_s_ci_high"] = (
        hl.get("value"), hl.get("ci_low"), hl.get("ci_high"))
    if r.get("temperature_K") is not None:
        f["temperature_K"] = r["temperature_K"]
    return f


def compute_ratelaw(o: RatelawOptions) -> View:
    """The ``ratelaw`` command's results."""
    from ..ratelaws import Photometry

    check_rate_law_fix(o.fix, rate_law_orders(o.order))
    ts, names = read_for(o)
    ph = Photometry(**o.photometry_values())
    results, warnings, laws = [], list(ts.info.get("warnings", [])), {}
    for name, res, why in each_trace(o.file, ts, names, _fit_one(o, ph)):
        if res is None:
            results.append({"trace": name, "order": None, "params": {}, "half_life_s": None,
                            "status": f"not fitted: {why}"})
            warnings.append(f"{name}: {why}")
            continue
        laws[name] = res[0]
        results.append(_result(name, *res, ts))
        warnings += [f"{name}: {n}" for n in res[0].notes]
    series = _pseudo_series(o, laws) if o.excess else None
    settings = {"order": o.order, "ci": o.ci, "level": o.level, "epsilon": ph.epsilon,
                "epsilon_product": ph.epsilon_product, "pathlength_cm": ph.pathlength_cm,
                "c0_M": ph.c0_M, "fixed": o.fix, "time_unit": ts.info["time_unit"],
                "expect": o.expect, "guggenheim_delta_s": o.guggenheim,
                "pseudo_first_order": series}
    doc = document("ratelaw", [o.file], settings, results, warnings)
    flat = [_flat(r) for r in results]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, _text(results, laws, series), rows_to_csv(flat, cols),
                {"traces": ts, "laws": laws, "series": series})


def _pseudo_series(o: RatelawOptions, laws):
    from ..io import read_table
    from ..layout import conc_column, parse_conc_cells
    from ..ratelaws import pseudo_first_order

    df = read_table(o.excess)
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    cols = {c.lower(): c for c in df.columns}
    tcol = cols.get("trace") or cols.get("well") or df.columns[0]
    ccol = conc_column(df, "conc") or conc_column(df, "excess") or df.columns[-1]
    conc = parse_conc_cells(df, ccol, o.excess, lines)
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
    s = pseudo_first_order(kobs, x, level=o.level)
    return {"k2": s["k2"].to_dict(), "k0": s["k0"].to_dict(), "n_runs": len(kobs),
            "weighting": s["weighting"], "conc_M": list(map(float, x)),
            "kobs_per_s": [p.value for p in kobs]}


def _runner_up(result: dict) -> str:
    """The second-best order by AICc and how far behind it is (for --order auto)."""
    rows = ((result.get("evidence") or {}).get("aicc_table") or [])
    if len(rows) < 2:
        return "-"
    return f"{rows[1]['model']} (+{rows[1]['delta_aicc']:.1f})"


def run_ratelaw(o: RatelawOptions, emit) -> View:
    """The ``ratelaw`` command."""
    from ..plots import ratelaw_plots

    view = compute_ratelaw(o)
    deliver(o, emit, view, "ratelaw", lambda folder: ratelaw_plots(view.analysis, folder))
    return view
