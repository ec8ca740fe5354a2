"""The ``completion`` command's view, including ``--follow``."""

from __future__ import annotations

import json

from ..options import CompletionOptions
from ..output import document, rows_to_csv, safe_filename
from . import (
    View,
    check_rate_law_fix,
    deliver,
    each_trace,
    file_time_text,
    origin_settings,
    rate_law_orders,
    read_for,
    readings_left_out,
    run_outputs,
    time_settings,
    write_outputs,
)
from .ratelaw import (
    fit_from_settings,
    interval_text,
    param_text,
    reader_lines,
    warning_block,
)


def _minutes(p: dict | None) -> str:
    """A time parameter object (s) in minutes for a person: value [low, high] min."""
    if not p or p.get("value") is None:
        return "no forecast"
    hi = "open" if p.get("ci_high") is None else f"{p['ci_high'] / 60:.1f}"
    lo = "-" if p.get("ci_low") is None else f"{p['ci_low'] / 60:.1f}"
    return f"{p['value'] / 60:.1f} min [{lo}, {hi}]"


def _percent(p: dict | None) -> str:
    if not p or p.get("value") is None:
        return "-"
    lo, hi = p.get("ci_low"), p.get("ci_high")
    band = f" [{100 * lo:.2f} %, {100 * hi:.2f} %]" if lo is not None and hi is not None else ""
    return f"{100 * p['value']:.2f} %{band}"


def _describe(r: dict, info: dict) -> str:
    """One trace's forecast for a person, every number with its unit; times counted from the
    time origin, the forecast moment also in the file's own times (``info``)."""
    k = r["k"]
    order = r["model"]
    lines = [f"{r['trace']}: order {order}"
             + (" (orders not told apart: " + ", ".join(r["orders_not_told_apart"]) + ")"
                if r["orders_not_told_apart"] else ""),
             f"  k = {param_text(k)} {k.get('unit', '')} "
             f"{interval_text(k)}"]
    kc = r.get("k_conc")
    if kc and kc.get("unit") != k.get("unit"):
        lines.append(f"  k (concentration units) = {param_text(kc)} {kc.get('unit', '')} "
                     f"{interval_text(kc)}")
    if r.get("drift_A_per_s") and r["drift_A_per_s"].get("value") is not None:
        d = r["drift_A_per_s"]
        per_min = {**d, "value": d["value"] * 6e4, "se": d["se"] * 6e4}
        lines.append(f"  baseline drift = {param_text(per_min)} mAU/min (fitted with the rate "
                     "law)")
    basis = "of the charge" if r["conversion_basis"] == "charge" else "of the fitted change"
    lines.append(f"  conversion at the last reading ({r['t_now_s'] / 60:.1f} min from the "
                 "time origin): "
                 f"{_percent(r['conversion'])} {basis}")
    t = r["t_target_s"]
    target = f"{100 * r['target']:g} %"
    if t.get("value") is not None:
        rest = max(t["value"] - r["t_now_s"], 0) / 60
        when = (f"at {file_time_text(r['time_origin_s'] + t['value'], info)} in the file's "
                "times; " if r["time_origin_s"] else "")
        after = (f"{rest:.1f} min after the last reading" if t["value"] > r["t_now_s"] else
                 f"passed {(r['t_now_s'] - t['value']) / 60:.1f} min before the last reading")
        lines.append(f"  time to {target}: {_minutes(t)} from the time origin ({when}"
                     f"{after}; "
                     f"{r['extrapolation_multiple']:.1f} times the observed span)")
    else:
        lines.append(f"  time to {target}: no forecast: {r['no_forecast_because']}")
    if len(r["forecasts"]) > 1:
        lines.append("  forecast under each model that carries weight (the interval above spans "
                     "them): " + "; ".join(
            f"{f['model']} (AICc weight {f['aicc_weight']:.2f}): {_minutes(f['t_target_s'])}"
            for f in r["forecasts"]))
    end = r["end_absorbance"]
    lines.append(f"  predicted end absorbance: {param_text(end)} AU {interval_text(end)}")
    if r.get("charge"):
        lines.append(f"  charge: {r['charge']}")
    lines.append(f"  {r['verdict']}")
    if r["flags"]:
        lines.append(f"  flags: {', '.join(r['flags'])}")
    return "\n".join(lines)


def _flat(r: dict) -> dict:
    if r.get("status") != "ok":
        return {"trace": r["trace"], "status": r["status"]}
    t, c = r["t_target_s"], r["conversion"]
    return {"trace": r["trace"], "order": r["order"], "model": r["model"], "target": r["target"],
            "conversion": c["value"], "conversion_ci_low": c["ci_low"],
            "conversion_ci_high": c["ci_high"], "conversion_basis": r["conversion_basis"],
            "t_target_s": t["value"], "t_target_s_ci_low": t["ci_low"],
            "t_target_s_ci_high": t["ci_high"],
            "extrapolation_multiple": r["extrapolation_multiple"],
            "k": r["k"]["value"], "k_se": r["k"]["se"], "k_unit": r["k"]["unit"],
            "k_conc": (r.get("k_conc") or {}).get("value"),
            "k_conc_se": (r.get("k_conc") or {}).get("se"),
            "k_conc_unit": (r.get("k_conc") or {}).get("unit"),
            "end_absorbance_A": r["end_absorbance"]["value"], "complete": r["complete"],
            "verdict": r["verdict"], "flags": r["flags"], "status": "ok"}


def compute_completion(o: CompletionOptions, partial: bool = False) -> View:
    """The ``completion`` command's results (one per trace); ``partial`` leaves out a
    half-written last line (for --follow)."""
    from ..completion import CAUTION, assess
    from ..ratelaws import Photometry

    check_rate_law_fix(o.fix, rate_law_orders(o.order))
    ts, names = read_for(o, partial=partial)
    ph = Photometry(**o.photometry_values())

    def one(name, t, y):
        return assess(t, y, name, target=o.target / 100, order=o.order, level=o.level,
                      fix=o.fix, photometry=ph, end_absorbance=o.end_absorbance, drift=o.drift,
                      fit_from=o.fit_from)

    results, warnings, done = [], list(ts.info.get("warnings", [])), {}
    for name, c, why in each_trace(o.file, ts, names, one):
        left_out, said = readings_left_out(ts, name)
        if said:
            warnings.append(f"{name}: {said}")
        if c is None:
            results.append({"trace": name, "status": f"not assessed: {why}",
                            "complete": False})
            warnings.append(f"{name}: not assessed: {why}")
            continue
        done[name] = c
        results.append({**c.to_dict(), "readings_not_fitted": left_out, "status": "ok"})
        warnings += [f"{name}: {n}" for n in c.notes]
    warnings.append(CAUTION)
    t0s = [c.law.t0 for c in done.values()]
    settings = {"target": o.target / 100, "order": o.order, "drift": o.drift, "level": o.level,
                "fixed": o.fix, "c0_M": ph.c0_M, "epsilon": ph.epsilon,
                "epsilon_product": ph.epsilon_product, "pathlength_cm": ph.pathlength_cm,
                "end_absorbance": o.end_absorbance, **time_settings(ts.info),
                **origin_settings(ts.info, t0s), **fit_from_settings(ts.info, o.fit_from),
                "columns_set_aside": ts.info.get("set_aside") or {},
                "interval": "profile-likelihood interval of the rate mapped through t(rate); "
                            "the envelope of every order that carries weight",
                "rule": "complete when the lower bound of the conversion at the last reading "
                        "reaches the target under every order that carries weight (against the "
                        "charge too when it is given), the fit passes the quality gate and the "
                        "end point neither stalls short of the charge nor lies below zero"}
    doc = document("completion", [o.file], settings, results, warnings)
    head = [f"completion: {o.file}", *reader_lines(ts, t0s, o.fit_from),
            f"target: {o.target:g} % conversion "
            + ("of the charge" if ph.c0_M is not None or o.end_absorbance is not None
               else "of the fitted change (no charge given)")
            + f"; order: {'chosen by evidence' if o.order == 'auto' else o.order + ' (given)'}"
            f"; baseline drift: {o.drift}; intervals {100 * o.level:g} %"]
    lines = [_describe(r, ts.info) for r in doc["results"] if r.get("status") == "ok"]
    lines += [f"{r['trace']}: {r['status']}" for r in results if r.get("status", "ok") != "ok"]
    table = "\n".join(head) + "\n\n" + "\n\n".join(lines) + "\n\n" + warning_block(
        doc["warnings"])
    flat = [_flat(r) for r in doc["results"]]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, table, rows_to_csv(flat, cols), {"traces": ts, "done": done})


def run_completion(o: CompletionOptions, emit) -> View:
    """The ``completion`` command (one assessment)."""
    from ..plots.laws import completion_plot

    view = compute_completion(o)
    an = view.analysis
    deliver(o, emit, view, "completion", lambda folder: [
        completion_plot(c, an["traces"], folder / f"completion_{safe_filename(name)}.png")
        for name, c in an["done"].items()])
    return view


def _progress_line(stamp: str, r: dict) -> str:
    t = r["t_target_s"]
    when = (f"{100 * r['target']:g} % at {_minutes(t)}" if t.get("value") is not None
            else f"no forecast ({r['no_forecast_because']})")
    return (f"[{stamp}] {r['trace']}: {_percent(r['conversion'])} at {r['t_now_s'] / 60:.1f} "
            f"min from the time origin; {when}; {r['verdict']}"
            + (f"; flags: {', '.join(r['flags'])}" if r["flags"] else ""))


def _update(o: CompletionOptions, view: View, n: int, stamp: str, echo) -> None:
    """One update on stdout: a JSON line (json), CSV rows (csv) or a line per trace."""
    doc = view.doc
    if o.output.fmt == "json":
        echo(json.dumps({"update": n, "time": stamp, "results": doc["results"],
                         "warnings": doc["warnings"]}, allow_nan=False, ensure_ascii=False))
    elif o.output.fmt == "csv":
        text = view.csv if n == 1 else view.csv.split("\n", 1)[1]
        echo(text.rstrip("\n"))
    else:
        for r in doc["results"]:
            echo(_progress_line(stamp, r) if r.get("status") == "ok"
                 else f"[{stamp}] {r['trace']}: {r['status']}")


def follow_completion(o: CompletionOptions, echo, emit, sleep=None, progress=None) -> View | None:
    """Re-read a file an instrument is still writing every ``o.follow`` seconds; print an
    updated forecast each time.

    Results go to ``echo`` (stdout): with ``--format json`` one JSON document per line (JSON
    Lines), the last one the final summary; with csv the rows of each update; else one line per
    trace. What the follower itself says (started, waiting for data, stopped) goes to
    ``progress`` (stderr at the command line). Stops when every trace is complete, after
    ``o.max_updates`` reads, or on Ctrl-C. A half-written last line is left out with a warning;
    a read that cannot yet support a fit says why and waits for more data.
    """
    import time as _time

    from ..completion import CAUTION
    from ..errors import AnalysisError, InputError

    sleep = sleep or _time.sleep
    progress = progress or echo
    view, n = None, 0
    progress(f"following {o.file} every {o.follow:g} s (Ctrl-C stops); {CAUTION}")
    try:
        while True:
            n += 1
            stamp = _time.strftime("%H:%M:%S")
            try:
                view = compute_completion(o, partial=True)
                _update(o, view, n, stamp, echo)
                done = view.analysis["done"]
                if done and all(c.complete for c in done.values()):
                    break
            except (InputError, AnalysisError) as exc:
                progress(f"[{stamp}] waiting for data: {exc.one_line()}")
            if o.max_updates and n >= o.max_updates:
                break
            sleep(o.follow)
    except KeyboardInterrupt:
        progress("stopped (Ctrl-C)")
    if view is None:
        progress("no forecast could be made from the data read")
        return None
    progress("final summary:")
    with run_outputs(o, "completion", ["completion.json", "completion.csv"]):
        if o.output.fmt == "json":
            echo(json.dumps({"final": True, **view.doc}, allow_nan=False, ensure_ascii=False))
            write_outputs(view.doc, view.csv, o.output.out, "completion")
        else:
            emit(o.output.fmt, view.doc, view.table, view.csv, o.output.out, "completion")
    return view
