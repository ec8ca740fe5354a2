"""The ``completion`` command's view, including ``--follow``."""

from __future__ import annotations

from ..output import document, rows_to_csv, safe_filename
from . import View, _photometry, _traces_for, deliver, each_trace, run_outputs


def compute_completion(o: dict) -> View:
    """The ``completion`` command's results (one per trace)."""
    from ..completion import CAUTION, assess

    ts, names = _traces_for(o)
    ph = _photometry(o)

    def one(name, t, y):
        return assess(t, y, name, target=o["target"] / 100, order=o.get("order", "1"),
                      level=o.get("level", 0.95), photometry=ph, fix=o.get("fix"))

    results, warnings, done = [], list(ts.info.get("warnings", [])), {}
    for name, c, why in each_trace(o, ts, names, one):
        if c is None:
            results.append({"trace": name, "status": f"not assessed: {why}"})
            continue
        done[name] = c
        d = c.to_dict()
        d["status"] = "ok"
        results.append(d)
    warnings.append(CAUTION)
    settings = {"target": o["target"] / 100, "order": o.get("order", "1"),
                "level": o.get("level", 0.95),
                "interval": "profile-likelihood interval of k mapped through t(k)",
                "rule": "complete when the lower bound of the conversion at the last reading "
                        "reaches the target"}
    doc = document("completion", [o["file"]], settings, results, warnings)
    lines = []
    for name, c in done.items():
        t = c.t_target
        lines.append(
            f"{name}: order {c.law.order}, k = {c.law.fit.params['k'].value:.4g} ± "
            f"{c.law.fit.params['k'].se:.2g} 1/s\n"
            f"  conversion at the last reading ({c.t_now / 60:.1f} min): "
            f"{100 * c.conversion.value:.2f} % [{100 * c.conversion.ci_low:.2f}, "
            f"{100 * c.conversion.ci_high:.2f}] %\n"
            f"  time to {100 * c.target:g} %: {t.value / 60:.1f} min "
            f"[{t.ci_low / 60:.1f}, {t.ci_high / 60:.1f}] min "
            f"({max(t.value - c.t_now, 0) / 60:.1f} min from the last reading)\n"
            f"  predicted end absorbance: {c.end_absorbance.value:.4f} ± "
            f"{c.end_absorbance.se:.2g} A\n"
            f"  {'COMPLETE' if c.complete else 'NOT YET COMPLETE'}: {c.rule}")
    for r in results:
        if r.get("status", "ok") != "ok":
            lines.append(f"{r['trace']}: {r['status']}")
    table = "\n".join(lines) + f"\n\n{CAUTION}\n"
    flat = []
    for r in results:
        if r.get("status") != "ok":
            flat.append({"trace": r["trace"], "status": r["status"]})
            continue
        flat.append({"trace": r["trace"], "order": r["order"], "target": r["target"],
                     "conversion": r["conversion"]["value"],
                     "conversion_ci_low": r["conversion"]["ci_low"],
                     "conversion_ci_high": r["conversion"]["ci_high"],
                     "t_target_s": r["t_target_s"]["value"],
                     "t_target_s_ci_low": r["t_target_s"]["ci_low"],
                     "t_target_s_ci_high": r["t_target_s"]["ci_high"],
                     "complete": r["complete"], "status": "ok"})
    cols = list(dict.fromkeys(k for f in flat for k in f))
    return View(doc, table, rows_to_csv(flat, cols), {"traces": ts, "done": done})


def run_completion(o: dict, emit) -> View:
    """The ``completion`` command (one assessment)."""
    from ..plots import completion_plot

    view = compute_completion(o)
    an = view.analysis
    deliver(o, emit, view, "completion", lambda folder: [
        completion_plot(c, an["traces"], folder / f"completion_{safe_filename(name)}.png")
        for name, c in an["done"].items()])
    return view


def follow_completion(o: dict, every: float, max_updates, echo, emit, sleep=None) -> View | None:
    """Re-read a file an instrument is still writing; print an updated forecast each time.

    Stops when every trace is complete, after ``max_updates`` reads, or on Ctrl-C, then prints
    the final summary. A half-written last line is left out; a read that cannot yet support a
    fit says why and waits for more data.
    """
    import time as _time

    from ..completion import CAUTION
    from ..errors import AnalysisError, InputError

    sleep = sleep or _time.sleep
    view, n = None, 0
    echo(f"following {o['file']} every {every:g} s (Ctrl-C stops); {CAUTION}")
    try:
        while True:
            n += 1
            stamp = _time.strftime("%H:%M:%S")
            try:
                view = compute_completion(dict(o, partial=True))
                done = view.analysis["done"]
                for name, c in done.items():
                    echo(f"[{stamp}] {name}: {100 * c.conversion.value:.1f} % at "
                         f"{c.t_now / 60:.1f} min; {100 * c.target:g} % at "
                         f"{c.t_target.value / 60:.1f} min [{c.t_target.ci_low / 60:.1f}, "
                         f"{c.t_target.ci_high / 60:.1f}]"
                         + ("; COMPLETE" if c.complete else ""))
                if done and all(c.complete for c in done.values()):
                    break
            except (InputError, AnalysisError) as exc:
                echo(f"[{stamp}] waiting for data: {exc.one_line()}")
            if max_updates and n >= max_updates:
                break
            sleep(every)
    except KeyboardInterrupt:
        echo("stopped (Ctrl-C)")
    if view is None:
        echo("no forecast could be made from the data read")
        return None
    echo("final summary:")
    with run_outputs(o, "completion", ["completion.json", "completion.csv"]):
        emit(o["fmt"], view.doc, view.table, view.csv, o.get("out"), "completion")
    return view
