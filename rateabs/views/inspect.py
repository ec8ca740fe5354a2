"""The ``inspect`` command's view."""

from __future__ import annotations

from pathlib import Path

from ..output import document, render_table, rows_to_csv
from . import View, deliver


def compute_inspect(o: dict) -> View:
    """The ``inspect`` command's document and table."""
    from ..inspecting import inspect_file

    summary = inspect_file(o["file"], time_unit=o.get("time_unit"), signal=o.get("signal"),
                           i0=o.get("i0"), sheet=o.get("sheet"),
                           linear_limit=o.get("linear_limit"))
    doc = document("inspect", [o["file"]], summary.settings, summary.results, summary.warnings)
    cols = [("trace", "trace"), ("n_points", "n"), ("t_start_s", "t start (s)"),
            ("t_end_s", "t end (s)"), ("A_first", "A first (AU)"), ("A_last", "A last (AU)"),
            ("flags", "flags")]
    st = summary.settings
    head = [f"file       {o['file']}",
            f"format     {st['format']} (delimiter {st['delimiter']!r}, decimal "
            f"{st['decimal']!r}, encoding {st['encoding']})",
            f"layout     {st['layout']}, header on line {st['header_row']}",
            f"time       {st['time_unit']} ({st['time_unit_source']})",
            f"signal     {st['signal_kind']} ({st['signal_source']}), shown as absorbance",
            f"limit      readings above A = {st['linear_limit']:g} flagged past-linear"]
    head += [f"meta       {k}: {v}" for k, v in st["metadata"].items()]
    head += [f"column     {k}: kept as metadata ({v})" for k, v in st["extra_columns"].items()]
    table = "\n".join(head) + "\n\n" + render_table(summary.results, cols)
    return View(doc, table, rows_to_csv(summary.results, [c for c, _ in cols]), summary)


def run_inspect(o: dict, emit) -> View:
    """The ``inspect`` command."""
    view = compute_inspect(o)

    def plot(folder):
        from ..plots import traces_overview

        return [traces_overview(view.analysis.traces, folder / "inspect_traces.png",
                                Path(o["file"]).name, "absorbance (AU)")]

    deliver(o, emit, view, "inspect", plot)
    return view
