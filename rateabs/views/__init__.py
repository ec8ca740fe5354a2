"""Views: turn command options into analysis settings (units parsed once, at the boundary) and
analysis results into the JSON document, the table for a person, CSV and plots.

The CLI and the demo both call the ``run_*`` functions; the analyses below never print or read
options. One module per command; shared helpers here.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import UsageError
from ..output import write_text


@dataclass
class View:
    """What a command shows: the JSON document, a table for a person and tidy CSV."""

    doc: dict
    table: str
    csv: str
    analysis: object = None


#: Option keys that name input files or folders (never written over; see files.RunOutputs).
INPUT_KEYS = ("file", "layout_file", "excess", "folder", "rubric")


def write_outputs(doc: dict, csv_text: str, out, name: str) -> None:
    """``NAME.json`` and ``NAME.csv`` into the --out folder (nothing without one)."""
    from ..output import to_json

    if out:
        write_text(out, f"{name}.json", to_json(doc))
        write_text(out, f"{name}.csv", csv_text)


def write_only(fmt, doc, table_text, csv_text, out, name) -> None:
    """An ``emit`` that prints nothing and only writes the --out files (the demo's)."""
    write_outputs(doc, csv_text, out, name)


def run_outputs(o: dict, command: str, planned=()):
    """The run's :class:`~rateabs.files.RunOutputs` (``--out`` folder, ``--report`` file),
    guarding every input file the options name; use it as ``with run_outputs(o, name):``."""
    from ..files import RunOutputs

    return RunOutputs(command, [o[k] for k in INPUT_KEYS if o.get(k)], out=o.get("out"),
                      report=o.get("report"), planned=planned if o.get("out") else ())


def deliver(o: dict, emit, view: View, name: str, plot=None, data=None) -> list[Path]:
    """Print the view, write --out files and plots, and the --report page; returns the plots.

    ``plot(folder)`` draws the command's figures into a folder and returns their paths; with
    --report but no --out they are drawn into a temporary folder and embedded in the page.
    ``data(folder)`` writes any further data files into --out. Everything is written through
    one :func:`run_outputs` for the run.
    """
    import tempfile

    with run_outputs(o, name, [f"{name}.json", f"{name}.csv"]) as run, \
            tempfile.TemporaryDirectory() as tmp:
        emit(o["fmt"], view.doc, view.table, view.csv, o.get("out"), name)
        if data is not None and o.get("out"):
            data(Path(o["out"]))
        pics: list[Path] = []
        target = Path(o["out"]) if o.get("out") else Path(tmp)
        if plot is not None and o.get("plots", True) and (o.get("out") or o.get("report")):
            pics = list(plot(target) or [])
        if o.get("report"):
            from ..report import document_page

            run.write(o["report"], document_page(view.doc, pics))
    return pics if o.get("out") else []


def _pm(v, se, digits):
    if v is None or not np.isfinite(v):
        return "-"
    if se is None or not np.isfinite(se):
        return f"{v:.{digits}g}"
    return f"{v:.{digits}g} ± {se:.2g}"


def _ci(p):
    if not p or p.get("ci_low") is None or p.get("ci_high") is None:
        return "-"
    return f"[{p['ci_low']:.4g}, {p['ci_high']:.4g}]"


def _traces_for(o: dict):
    from ..io import read_traces

    ts = read_traces(o["file"], time_unit=o.get("time_unit"), signal=o.get("signal"),
                     i0=o.get("i0"), sheet=o.get("sheet"), partial=o.get("partial", False))
    ts = ts.mask_above(o.get("linear_limit") or 2.0)
    names = ts.names
    if o.get("trace"):
        missing = [n for n in o["trace"] if n not in names]
        if missing:
            raise UsageError(f"no trace named {missing[0]!r} in {o['file']}",
                             f"use one of {', '.join(names[:12])}")
        names = list(o["trace"])
    return ts, names


def each_trace(o: dict, ts, names, fn) -> list[tuple]:
    """``fn(name, t, y)`` on each named trace's usable readings: [(name, result, why_not)].

    With one trace its failure is the command's error; with several it costs that trace only.
    """
    from ..errors import AnalysisError

    g = ts.grid()
    out = []
    for name in names:
        i = g.names.index(name)
        ok = g.usable[i]
        try:
            out.append((name, fn(name, g.times[i][ok], g.values[i][ok]), None))
        except AnalysisError as exc:
            if len(names) == 1:
                raise exc.located(o["file"]) from None
            out.append((name, None, exc.one_line()))
    return out


def _photometry(o: dict):
    from ..photometry import resolve_epsilon
    from ..ratelaws import Photometry
    from ..units import parse_concentration, parse_epsilon, parse_pathlength

    eps = resolve_epsilon(o.get("epsilon"), o.get("chromophore"))
    epp = parse_epsilon(o["epsilon_product"]) if o.get("epsilon_product") else None
    b = parse_pathlength(o["pathlength"]) if o.get("pathlength") else 1.0
    c0 = parse_concentration(o["c0"], default="uM") if o.get("c0") else None
    return Photometry(eps, epp, b, c0)


def __getattr__(name):
    """The ``run_*``/``compute_*`` functions of the command modules, imported on first use."""
    import importlib

    for mod in ("inspect", "saturation", "rates", "ratelaw", "completion", "temperature",
                "progress", "grading"):
        m = importlib.import_module(f"{__name__}.{mod}")
        if hasattr(m, name):
            return getattr(m, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
