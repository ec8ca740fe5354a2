"""The ``inspect`` command's view."""

from __future__ import annotations

from pathlib import Path

from ..options import InspectOptions
from ..output import document, render_table, rows_to_csv
from . import View, check_reader_use, deliver, time_words

COLUMNS = [("trace", "trace"), ("n_points", "n"), ("t_start_s", "t start (s)"),
           ("t_end_s", "t end (s)"), ("A_first", "A first (AU)"), ("A_last", "A last (AU)"),
           ("flags", "flags")]


def _head(file: str, s: dict) -> list[str]:
    """What the reader decided about the file, one line per decision."""
    head = [f"file       {file}",
            f"format     {s['format']} (delimiter {s['delimiter']!r}, decimal "
            f"{s['decimal']!r}, encoding {s['encoding']})",
            f"layout     {s['layout']}, header on line {s['header_row']}",
            f"time       {time_words(s)}",
            f"signal     {s['signal_kind']} ({s['signal_source']}), shown as absorbance",
            f"limit      readings above A = {s['linear_limit']:g} flagged past-linear"]
    head += [f"meta       {k}: {v}" for k, v in s["metadata"].items()]
    head += [f"column     {k}: kept as metadata ({v})" for k, v in s["extra_columns"].items()]
    return head


def compute_inspect(o: InspectOptions) -> View:
    """The ``inspect`` command's document and table."""
    from ..inspecting import inspect_file

    summary = inspect_file(o.file, linear_limit=o.linear_limit, **o.reader.read_kwargs())
    check_reader_use(o, summary.traces)
    doc = document("inspect", [o.file], summary.settings, summary.results, summary.warnings)
    table = "\n".join(_head(o.file, summary.settings)) + "\n\n" + render_table(summary.results,
                                                                               COLUMNS)
    return View(doc, table, rows_to_csv(summary.results, [c for c, _ in COLUMNS]), summary)


#: What ``inspect`` loads (after its drawing process is forked: the process draws plain arrays,
#: :class:`rateabs.plots.inspect.TraceArrays`, and needs none of them).
INSPECT_MODULES = ("pandas", "rateabs.io", "rateabs.inspecting")


def run_inspect(o: InspectOptions, emit) -> View:
    """The ``inspect`` command."""
    from .drawing import draw_parts, drawing_pool, drawing_processes

    out = o.output
    with drawing_pool(drawing_processes(None, out.plots and bool(out.out or out.report),
                                        parts=1), INSPECT_MODULES, fork_first=True) as pool:
        view = compute_inspect(o)

        def plot(folder):
            from ..plots.inspect import TraceArrays

            flagged = [bool(r["flags"]) for r in view.analysis.results]
            return draw_parts(pool, [(traces_picture, (TraceArrays.of(view.analysis.traces),
                                                       Path(folder), Path(o.file).name,
                                                       flagged))])

        deliver(o, emit, view, "inspect", plot)
    return view


def traces_picture(traces, folder: Path, title: str, flagged: list[bool]) -> Path:
    """Every trace of the file in one figure (drawn where :mod:`rateabs.views.drawing` says)."""
    from ..plots import traces_overview

    return traces_overview(traces, folder / "inspect_traces.png", title, "absorbance (AU)",
                           flagged=flagged)
