"""The ``completion`` command's view, including ``--follow``."""

from __future__ import annotations

from ..fitting import fmt_pm
from ..options import CompletionOptions
from ..output import document, rows_to_csv, safe_filename
from . import View, check_rate_law_fix, deliver, each_trace, rate_law_orders, read_for, run_outputs


def _describe(name: str, c) -> str:
    """One trace's forecast for a person."""
    t, k = c.t_target, c.law.fit.params["k"]
    return (f"{name}: order {c.law.order}, k = {fmt_pm(k.value, k.se, unit='1/s')}\n"
            f"  conversion at the last reading ({c.t_now / 60:.1f} min): "
            f"{100 * c.conversion.value:.2f} % [{100 * c.conversion.ci_low:.2f}, "
            f"{100 * c.conversion.ci_high:.2f}] %\n"
            f"  time to {100 * c.target:g} %: {t.value / 60:.1f} min "
            f"[{t.ci_low / 60:.1f}, {t.ci_high / 60:.1f}] min "
            f"({max(t.value - c.t_now, 0) / 60:.1f} min from the last reading)\n"
            f"  predicted end absorbance: "
            f"{fmt_pm(c.end_absorbance.value, c.end_absorbance.se, 4, 'A')}\n"
            f"  {'COMPLETE' if c.complete else 'NOT YET COMPLETE'}: {c.rule}")


def _flat(r: dict) -> dict:
    if r.get("status") != "ok":
        return {"trace": r["trace"], "status": r["status"]}
    return {"trace": r["trace"], "order": r["order"], "target": r["target"],
            "conversion": r["conversion"]["value"],
            "conversion_ci_low": r["conversion"]["ci_low"],
            "conversion_ci_high": r["conversion"]["ci_high"],
            "t_target_s": r["t_target_s"]["value"],
            "t_target_s_ci_low": r["t_target_s"]["ci_low"],
            "t_target_s_ci_high": r["t_target_s"]["ci_high"],
            "complete": r["complete"], "status": "ok"}


def compute_completion(o: CompletionOptions, partial: bool = False) -> View:
    """The ``completion`` command's results (one per trace); ``partial`` leaves out a
    half-written last line (for --follow)."""
    from ..completion import CAUTION, assess

    check_rate_law_fix(o.fix, rate_law_orders(o.order))
    ts, names = read_for(o, partial=partial)

    def one(name, t, y):
        return assess(t, y, name, target=o.target / 100, order=o.order, level=o.level,
                      fix=o.fix)

    results, warnings, done = [], list(ts.info.get("warnings", [])), {}
    for name, c, why in each_trace(o.file, ts, names, one):
        if c is None:
            results.append({"trace": name, "status": f"not assessed: {why}"})
            continue
        done[name] = c
        results.append({**c.to_dict(), "status": "ok"})
    warnings.append(CAUTION)
    settings = {"target": o.target / 100, "order": o.order, "level": o.level, "fixed": o.fix,
                "interval": "profile-likelihood interval of k mapped through t(k)",
                "rule": "complete when the lower bound of the conversion at the last reading "
                        "reaches the target"}
    doc = document("completion", [o.file], settings, results, warnings)
    lines = [_describe(name, c) for name, c in done.items()]
    lines += [f"{r['trace']}: {r['status']}" for r in results if r.get("status", "ok") != "ok"]
    table = "\n".join(lines) + f"\n\n{CAUTION}\n"
    flat = [_flat(r) for r in results]
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, table, rows_to_csv(flat, cols), {"traces": ts, "done": done})


def run_completion(o: CompletionOptions, emit) -> View:
    """The ``completion`` command (one assessment)."""
    from ..plots import completion_plot

    view = compute_completion(o)
    an = view.analysis
    deliver(o, emit, view, "completion", lambda folder: [
        completion_plot(c, an["traces"], folder / f"completion_{safe_filename(name)}.png")
        for name, c in an["done"].items()])
    return view


def _progress_line(stamp: str, name: str, c) -> str:
    return (f"[{stamp}] {name}: {100 * c.conversion.value:.1f} % at {c.t_now / 60:.1f} min; "
            f"{100 * c.target:g} % at {c.t_target.value / 60:.1f} min "
            f"[{c.t_target.ci_low / 60:.1f}, {c.t_target.ci_high / 60:.1f}]"
            + ("; COMPLETE" if c.complete else ""))


def follow_completion(o: CompletionOptions, echo, emit, sleep=None) -> View | None:
    """Re-read a file an instrument is still writing every ``o.follow`` seconds; print an
    updated forecast each time.

    Stops when every trace is complete, after ``o.max_updates`` reads, or on Ctrl-C, then prints
    the final summary. A half-written last line is left out; a read that cannot yet support a
    fit says why and waits for more data.
    """
    import time as _time

    from ..completion import CAUTION
    from ..errors import AnalysisError, InputError

    sleep = sleep or _time.sleep
    view, n = None, 0
    echo(f"following {o.file} every {o.follow:g} s (Ctrl-C stops); {CAUTION}")
    try:
        while True:
            n += 1
            stamp = _time.strftime("%H:%M:%S")
            try:
                view = compute_completion(o, partial=True)
                done = view.analysis["done"]
                for name, c in done.items():
                    echo(_progress_line(stamp, name, c))
                if done and all(c.complete for c in done.values()):
                    break
            except (InputError, AnalysisError) as exc:
                echo(f"[{stamp}] waiting for data: {exc.one_line()}")
            if o.max_updates and n >= o.max_updates:
                break
            sleep(o.follow)
    except KeyboardInterrupt:
        echo("stopped (Ctrl-C)")
    if view is None:
        echo("no forecast could be made from the data read")
        return None
    echo("final summary:")
    with run_outputs(o, "completion", ["completion.json", "completion.csv"]):
        emit(o.output.fmt, view.doc, view.table, view.csv, o.output.out, "completion")
    return view
