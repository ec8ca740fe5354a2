"""The ``ratelaw`` command's view."""

from __future__ import annotations

from ..errors import UsageError
from ..fitting import NOT_IDENTIFIABLE, fmt_interval, fmt_pm
from ..options import RatelawOptions
from ..output import document, flatten_params, render_table, rows_to_csv
from . import (
    View,
    check_rate_law_fix,
    deliver,
    each_trace,
    origin_settings,
    origin_words,
    rate_law_orders,
    read_for,
    readings_left_out,
    time_settings,
    time_words,
)


def reader_lines(ts, t0s=(), fit_from: float | None = None) -> list[str]:
    """What the reader decided, for the head of a table: the time column and its unit, where
    times are counted from (``t0s``: each fitted trace's first usable reading, s in the file;
    or ``fit_from``, the --fit-from time), and every column it set aside (never read as a
    trace)."""
    info = ts.info
    lines = [f"time: {time_words(info)}"]
    if fit_from is not None:
        lines.append(f"time origin: {fit_from_words(info, fit_from)}")
    elif len(t0s):
        lines.append(f"time origin: {origin_words(info, t0s)}")
    aside = info.get("set_aside") or {}
    if aside:
        lines.append("columns set aside (not traces): " + ", ".join(
            f"{col!r} ({role})" for col, role in aside.items()))
    return lines


def fit_from_words(info: dict, fit_from: float) -> str:
    """Where times are counted from with --fit-from, in words."""
    from . import file_time_text

    return (f"--fit-from {file_time_text(fit_from, info)} in the file: the readings before it "
            "are not fitted, and A0, the conversion and every time are counted from it (the "
            "reaction's start as given)")


def fit_from_settings(info: dict, fit_from: float | None) -> dict:
    """The settings entries of a --fit-from run (time origin in s and in words)."""
    if fit_from is None:
        return {"fit_from_s": None}
    return {"fit_from_s": fit_from, "times_counted_from": "--fit-from",
            "time_origin_s": fit_from, "time_origin_in_words": fit_from_words(info, fit_from)}


def warning_block(warnings: list[str]) -> str:
    """The warnings, one per line, under the table (so none is only in the JSON)."""
    return "".join(f"warning: {w}\n" for w in dict.fromkeys(warnings)) if warnings else ""


def param_text(p: dict | None, unit: bool = False) -> str:
    """A JSON parameter object for a person: value ± SE, 'not identifiable', or '-'."""
    if not p:
        return "-"
    if p.get("ci_method") == NOT_IDENTIFIABLE:
        return NOT_IDENTIFIABLE
    return fmt_pm(p.get("value"), p.get("se"), unit=p.get("unit", "") if unit else "")


def interval_text(p: dict | None) -> str:
    """The interval of a JSON parameter object ('open' above for an unbounded upper end)."""
    if not p or p.get("ci_method") == NOT_IDENTIFIABLE:
        return "-"
    if p.get("ci_low") is not None and p.get("ci_high") is None and p.get("value") is not None:
        return f"[{p['ci_low']:.4g}, open]"
    return fmt_interval(p.get("ci_low"), p.get("ci_high"), se=p.get("se"))


def _fit_one(o: RatelawOptions, ph):
    """The per-trace analysis: the rate law, and Guggenheim's k when asked for."""
    from ..ratelaws import fit_trace, guggenheim

    def one(name, t, y):
        law = fit_trace(t, y, name, order=o.order, photometry=ph, fix=o.fix, ci=o.ci,
                        level=o.level, expect=o.expect, a0=o.a0, b0=o.b0, drift=o.drift,
                        fit_from=o.fit_from)
        gg = None
        if o.guggenheim is not None:
            keep = t >= o.fit_from if o.fit_from is not None else slice(None)
            gg = guggenheim(t[keep], y[keep], None if o.guggenheim == 0 else o.guggenheim,
                            level=o.level)
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
    p = r.get("params") or {}
    k = p.get("k") or {}
    drift = p.get("drift")
    return {"trace": r["trace"], "order": r.get("model") or r.get("order") or "-",
            "k": param_text(k), "k_unit": k.get("unit", ""),
            "ci": interval_text(k), "kc": param_text(r.get("k_conc"), unit=True),
            "half": param_text(r.get("half_life_s")),
            "hci": interval_text(r.get("half_life_s")),
            "drift": param_text({**drift, "value": drift["value"] * 6e4,
                                 "se": drift["se"] * 6e4}) if drift and
            drift.get("value") is not None else "-",
            "flags": ",".join(r.get("flags") or []) or "-",
            "status": r.get("status", "ok"), "next": _runner_up(r)}


def _text(results, laws, series, head: list[str], warnings: list[str], level: float) -> str:
    rows = [_row(r) for r in results]
    cols = [("trace", "trace"), ("order", "order"), ("k", "k"), ("k_unit", "k unit"),
            ("ci", f"k {100 * level:g} % interval"), ("kc", "k (concentration units)"),
            ("half", "half-life (s)"), ("hci", f"half-life {100 * level:g} % interval (s)")]
    if any(x["drift"] != "-" for x in rows):
        cols.append(("drift", "drift (mAU/min)"))
    if any(x["next"] != "-" for x in rows):
        cols.append(("next", "next best order (dAICc)"))
    cols.append(("flags", "flags"))
    table = "\n".join(head) + "\n\n" + render_table(rows, cols)
    if len(laws) == 1:
        law = next(iter(laws.values()))
        if law.comparison is not None:
            table += "\norder chosen by evidence\n" + law.comparison.report() + "\n"
    for r in results:
        if r.get("status", "ok") != "ok":
            table += f"{r['trace']}: {r['status']}\n"
        gg = r.get("guggenheim")
        if gg:
            table += (f"{r['trace']}: Guggenheim (interval {gg['delta_s']:g} s, "
                      f"{gg['n_pairs']} pairs): k = {param_text(gg['k'])} 1/s "
                      f"{interval_text(gg['k'])}, half-life = {param_text(gg['half_life_s'])} s "
                      f"{interval_text(gg['half_life_s'])}\n")
    if series:
        k2, k0 = series["k2"], series["k0"]
        table += (f"\npseudo-first-order series ({series['n_runs']} runs): k2 = "
                  f"{param_text(k2)} L/(mol s) {interval_text(k2)}, intercept k0 = "
                  f"{param_text(k0)} 1/s {interval_text(k0)}\n")
    return table + "\n" + warning_block(warnings)


def _flat(r: dict, excess: dict) -> dict:
    """One CSV row: parameters flattened, the half-life with its SE and interval."""
    f = {"trace": r["trace"], "order": r.get("order"), "model": r.get("model"),
         "status": r.get("status")}
    f.update({k: v for k, v in flatten_params(r.get("params") or {}).items()})
    hl = r.get("half_life_s") or {}
    f["half_life_s"], f["half_life_s_se"], f["half_life_s_ci_low"], f["half_life_s_ci_high"] = (
        hl.get("value"), hl.get("se"), hl.get("ci_low"), hl.get("ci_high"))
    if r.get("temperature_K") is not None:
        f["temperature_K"] = r["temperature_K"]
    gg = r.get("guggenheim")
    if gg:
        f.update({"guggenheim_k": gg["k"]["value"], "guggenheim_k_se": gg["k"]["se"],
                  "guggenheim_k_ci_low": gg["k"]["ci_low"],
                  "guggenheim_k_ci_high": gg["k"]["ci_high"],
                  "guggenheim_delta_s": gg["delta_s"]})
    if r["trace"] in excess:
        f["excess_M"] = excess[r["trace"]]
    f["flags"] = r.get("flags") or []
    return f


def _series_row(series: dict) -> dict:
    """The CSV row of a pseudo-first-order series: k2 and k0 with their intervals."""
    row = {"trace": "pseudo-first-order series", "order": "1", "model": "kobs = k2 [B] + k0",
           "status": "ok"}
    for name in ("k2", "k0"):
        p = series[name]
        row.update({name: p["value"], f"{name}_se": p["se"], f"{name}_ci_low": p["ci_low"],
                    f"{name}_ci_high": p["ci_high"], f"{name}_unit": p["unit"]})
    return row


def compute_ratelaw(o: RatelawOptions) -> View:
    """The ``ratelaw`` command's results."""
    from ..ratelaws import Photometry

    check_rate_law_fix(o.fix, rate_law_orders(o.order))
    ts, names = read_for(o)
    ph = Photometry(**o.photometry_values())
    results, warnings, laws = [], list(ts.info.get("warnings", [])), {}
    for name, res, why in each_trace(o.file, ts, names, _fit_one(o, ph)):
        left_out, said = readings_left_out(ts, name)
        if said:
            warnings.append(f"{name}: {said}")
        if res is None:
            results.append({"trace": name, "order": None, "params": {}, "half_life_s": None,
                            "status": f"not fitted: {why}", "flags": ["not_fitted"]})
            warnings.append(f"{name}: {why}")
            continue
        laws[name] = res[0]
        results.append({**_result(name, *res, ts), "readings_not_fitted": left_out})
        warnings += [f"{name}: {n}" for n in res[0].notes + list(res[0].fit.notes)]
    series = _pseudo_series(o, laws, warnings) if o.excess else None
    t0s = [law.t0 for law in laws.values()]
    settings = {"order": o.order, "drift": o.drift, "ci": o.ci, "level": o.level,
                "epsilon": ph.epsilon, "epsilon_product": ph.epsilon_product,
                "pathlength_cm": ph.pathlength_cm, "c0_M": ph.c0_M, "fixed": o.fix,
                **time_settings(ts.info), **origin_settings(ts.info, t0s),
                **fit_from_settings(ts.info, o.fit_from),
                "columns_set_aside": ts.info.get("set_aside") or {}, "expect": o.expect,
                "guggenheim_delta_s": o.guggenheim, "pseudo_first_order": series}
    doc = document("ratelaw", [o.file], settings, results, warnings)
    excess = dict(zip(series["traces"], series["conc_M"], strict=True)) if series else {}
    flat = [_flat(r, excess) for r in results] + ([_series_row(series)] if series else [])
    cols = list(dict.fromkeys(k for f in flat for k in f))
    head = [f"ratelaw: {o.file}", *reader_lines(ts, t0s, o.fit_from),
            "order: " + ("chosen by evidence (AICc over orders 0, 1, 2)" if o.order == "auto"
                         else f"{o.order} (given)") + f"; baseline drift: {o.drift}"]
    return View(doc, _text(results, laws, series, head, doc["warnings"], o.level),
                rows_to_csv(flat, cols), {"traces": ts, "laws": laws, "series": series})


def _pseudo_series(o: RatelawOptions, laws, warnings: list):
    from ..io import read_table
    from ..layout import conc_column, parse_conc_cells
    from ..ratelaws import pseudo_first_order

    df = read_table(o.excess)
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    cols = {c.lower(): c for c in df.columns}
    tcol = cols.get("trace") or cols.get("well") or df.columns[0]
    ccol = conc_column(df, "conc") or conc_column(df, "excess") or df.columns[-1]
    conc = parse_conc_cells(df, ccol, o.excess, lines)
    kobs, x, used = [], [], []
    for name, c in zip(df[tcol], conc, strict=True):
        name = str(name).strip()
        law = laws.get(name)
        fit1 = law.fits.get("1") if law is not None else None
        if fit1 is None:
            warnings.append(f"--excess names {name!r}, which has no first-order fit: left out "
                            "of the series")
            continue
        if law.order != "1":
            warnings.append(f"{name}: order {law.order} fits better, but the first-order kobs "
                            "enters the pseudo-first-order series as --excess asks")
        kobs.append(fit1.params["k"])
        x.append(c)
        used.append(name)
    if len(kobs) < 2:
        raise UsageError("the pseudo-first-order series needs first-order kobs for at least two "
                         "runs named in --excess", "use --order 1 and name the traces")
    s = pseudo_first_order(kobs, x, level=o.level)
    return {"k2": s["k2"].to_dict(), "k0": s["k0"].to_dict(), "n_runs": len(kobs),
            "weighting": s["weighting"], "traces": used, "conc_M": list(map(float, x)),
            "kobs_per_s": [p.value for p in kobs], "kobs_se_per_s": [p.se for p in kobs],
            "covariance_k0_k2": s["fit"].cov.tolist() if s["fit"].cov is not None else None}


def _runner_up(result: dict) -> str:
    """The second-best order by AICc and how far behind it is (for --order auto)."""
    rows = ((result.get("evidence") or {}).get("aicc_table") or [])
    if len(rows) < 2:
        return "-"
    return f"{rows[1]['model']} (+{rows[1]['delta_aicc']:.1f})"


def run_ratelaw(o: RatelawOptions, emit) -> View:
    """The ``ratelaw`` command."""
    from ..plots.laws import pseudo_first_order_plot, ratelaw_plots

    view = compute_ratelaw(o)

    def plots(folder):
        files = ratelaw_plots(view.analysis, folder)
        if view.analysis["series"]:
            files.append(pseudo_first_order_plot(view.analysis["series"],
                                                 folder / "ratelaw_pseudo_first_order.png"))
        return files

    deliver(o, emit, view, "ratelaw", plots)
    return view
