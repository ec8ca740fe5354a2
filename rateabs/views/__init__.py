"""Views: run a command from its settings object (:mod:`rateabs.options`) and present the
analysis results as the JSON document, the table for a person, CSV, plots and a report.

The CLI and the demo both call the ``run_*`` functions with a settings object; ``compute_*``
returns the :class:`View` without printing. The analyses below never print or read options. One
module per command; shared helpers here.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..errors import UsageError
from ..output import write_text


@dataclass
class View:
    """What a command shows: the JSON document, a table for a person and tidy CSV."""

    doc: dict
    table: str
    csv: str
    analysis: object = None


#: Settings fields that name input files or folders (never written over; see files.RunOutputs).
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


def _output_part(o):
    """The --out folder and --report file of a command's settings (grade has no report)."""
    out = getattr(o, "output", o)
    return getattr(out, "out", None), getattr(out, "report", None)


def run_outputs(o, command: str, planned=()):
    """The run's :class:`~rateabs.files.RunOutputs` (``--out`` folder, ``--report`` file),
    guarding every input file the settings name; use it as ``with run_outputs(o, name):``."""
    from ..files import RunOutputs

    out, report = _output_part(o)
    inputs = [getattr(o, k) for k in INPUT_KEYS if getattr(o, k, None)]
    return RunOutputs(command, inputs, out=out, report=report, planned=planned if out else ())


def deliver(o, emit, view: View, name: str, plot=None, data=None, page=None) -> list[Path]:
    """Print the view, write --out files and plots, and the --report page; returns the plots.

    ``o`` is the command's settings (its ``output`` part is used). ``plot(folder)`` draws the
    command's figures into a folder and returns their paths; with --report but no --out they are
    drawn into a temporary folder and embedded in the page. ``data(folder)`` writes any further
    data files into --out. ``page(doc, pictures)`` builds the command's own report page (else
    the generic one). Everything is written through one :func:`run_outputs` for the run.
    """
    import tempfile

    out = o.output
    with run_outputs(o, name, [f"{name}.json", f"{name}.csv"]) as run, \
            tempfile.TemporaryDirectory() as tmp:
        emit(out.fmt, view.doc, view.table, view.csv, out.out, name)
        if data is not None and out.out:
            data(Path(out.out))
        pics: list[Path] = []
        target = Path(out.out) if out.out else Path(tmp)
        if plot is not None and out.plots and (out.out or out.report):
            pics = list(plot(target) or [])
        if out.report:
            from ..report import document_page

            built = page(view.doc, pics) if page is not None else document_page(
                view.doc, pics, settings=o, csv_text=view.csv, csv_name=f"{name}.csv")
            run.write(out.report, built)
    return pics if out.out else []


#: How the time unit was decided, in words (``TraceSet.info["time_unit_source"]``).
TIME_SOURCE_WORDS = {
    "header": "from the header of column {col!r}", "option": "given by --time-unit",
    "clock": "clock times h:mm:ss in column {col!r}",
    "assumed": "assumed: column {col!r} names no unit; give --time-unit if it is not seconds",
    "interval": "column {col!r} names no unit: from the read interval in the file header"}


def time_words(info: dict) -> str:
    """The time unit and where it came from, in words (one home for every command's
    header lines), with the reading of two-part clock times and how to change it."""
    unit, src = info.get("time_unit"), info.get("time_unit_source")
    if not unit:
        return "s (traces given in seconds)"
    col = info.get("time_column") or "time"
    how = TIME_SOURCE_WORDS.get(src, src or "").format(col=col)
    if src == "clock" and info.get("clock_reading"):
        how = f"clock times in column {col!r}; {clock_reading_words(info)}"
    return f"{'s' if unit == 'clock' else unit} ({how})"


def time_settings(info: dict) -> dict:
    """The time entries of a document's settings: unit, source, column, in words, and the
    reading of two-part clock times with its source (None without them)."""
    return {"time_unit": info.get("time_unit") or "s",
            "time_unit_source": info.get("time_unit_source") or "given",
            "time_column": info.get("time_column"), "time_unit_in_words": time_words(info),
            "clock_reading": info.get("clock_reading"),
            "clock_reading_source": info.get("clock_reading_source")}


def file_time_text(seconds: float, info: dict) -> str:
    """A moment in the file's own times (:func:`rateabs.io.times.file_time_text`)."""
    from ..io.times import file_time_text as text

    return text(seconds, info.get("time_unit"))


def origin_words(info: dict, t0s) -> str:
    """Where times are counted from (:func:`rateabs.models.time_origin`), in plain words with
    that moment in the file's own times: 'times counted from the first usable reading,
    09:00:00 on the file's clock, not from the clock's zero long before it; windows and times
    shown are seconds from there', or from the file's own zero."""
    t0s = sorted({float(t) for t in t0s})
    moved = [t for t in t0s if t != 0]
    if not moved:
        return "times counted from the file's own zero (as in the file)"
    first, last = file_time_text(moved[0], info), file_time_text(moved[-1], info)
    clock = (info.get("time_unit") or "s") == "clock"
    where, zero = (("on the file's clock", "the clock's zero") if clock else
                   ("in the file's time column", "that column's zero"))
    if len(t0s) == 1:
        return (f"times counted from the first usable reading, {first} {where}, not from "
                f"{zero} long before it; windows and times shown are seconds from there")
    span = first if len(moved) == 1 else f"{first} to {last}"
    return (f"times counted from the file's own zero, or, for a trace whose first usable reading "
            f"lies long after it ({span} {where}), from that reading; times shown are seconds "
            "from there")


def origin_settings(info: dict, t0s) -> dict:
    """The time-origin entries of a document's settings: what times are counted from, that
    moment in seconds of the file's times (one value, or null where the traces differ: each
    result has its own ``time_origin_s``) and in words."""
    from ..models import TIME_ORIGIN

    t0s = sorted({float(t) for t in t0s})
    return {"times_counted_from": TIME_ORIGIN,
            "time_origin_s": t0s[0] if len(t0s) == 1 else None,
            "time_origin_in_words": origin_words(info, t0s)}


def clock_reading_words(info: dict) -> str:
    """How two-part clock times were read (m:ss or h:mm), why, and the option for the other
    reading."""
    from ..io.times import TWO_PART, TWO_PART_WORDS

    reading, src = info["clock_reading"], info.get("clock_reading_source")
    other = next(r for r in TWO_PART_WORDS if r != reading)
    flag = {r: u for u, r in TWO_PART.items()}
    why = ("by default, as nothing in the file says which" if src == "default" else
           f"as {info.get('clock_reading_why')}")
    return (f"two-part times read as {reading} ({TWO_PART_WORDS[reading]}) {why}; "
            f"--time-unit {flag[other]} reads them as {other} ({TWO_PART_WORDS[other]})")


def check_reader_use(o, ts) -> None:
    """Refuse reader options the file made moot (an accepted option is used or refused)."""
    info = ts.info
    if o.reader.i0 is not None and info.get("signal_kind") != "intensity":
        raise UsageError(f"--i0 applies to raw intensities; {o.file} holds "
                         f"{info.get('signal_kind')}", "leave --i0 out, or give --signal "
                         "intensity if the readings are intensities")
    if (o.reader.time_unit is not None and info.get("time_unit_source") == "clock"
            and info.get("clock_reading_source") != "option"):
        raise UsageError(f"--time-unit applies to a numeric time column or to two-part clock "
                         f"times; {o.file} gives clock times that carry their unit (h:mm:ss)",
                         "leave --time-unit out")


def read_for(o, linear_limit: float | None = None, partial: bool = False):
    """The command's traces (reader options applied, readings above the linear limit masked)
    and the names of the traces to analyse (``--trace`` where the command has it)."""
    from ..io import read_traces
    from ..options import DEFAULT_LINEAR_LIMIT
    from ..photometry import epsilon_doubt, wavelength_mismatch

    ts = read_traces(o.file, partial=partial, **o.reader.read_kwargs())
    check_reader_use(o, ts)
    said = [wavelength_mismatch(getattr(o, "chromophore", None), ts.info.get("wavelength_nm")),
            *(epsilon_doubt(getattr(o, name, None), flag) for name, flag in
              (("epsilon", "--epsilon"), ("epsilon_product", "--epsilon-product")))]
    if any(said):
        ts.info["warnings"] = [*ts.info.get("warnings", []), *filter(None, said)]
    ts = ts.mask_above(DEFAULT_LINEAR_LIMIT if linear_limit is None else linear_limit)
    names = ts.names
    chosen = getattr(o, "trace", ())
    if chosen:
        missing = [n for n in chosen if n not in names]
        if missing:
            raise UsageError(f"no trace named {missing[0]!r} in {o.file}",
                             f"use one of {', '.join(names[:12])}")
        names = list(chosen)
    return ts, names


def each_trace(file: str, ts, names, fn) -> list[tuple]:
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
        except UsageError as exc:            # an option this trace cannot take (--fit-from)
            raise exc.located(file) from None
        except AnalysisError as exc:
            if len(names) == 1:
                raise exc.located(file) from None
            out.append((name, None, exc.one_line()))
    return out


def readings_left_out(ts, name: str) -> tuple[dict, str | None]:
    """A trace's readings that were not fitted, by reading flag ({flag: count}), and a sentence
    naming them with their times in the file's own times (None when every reading was used):
    a masked reading is said, never dropped in silence."""
    import numpy as np

    from ..traces import FLAG_NAMES

    g = ts.grid()
    i = g.names.index(name)
    real = np.isfinite(g.times[i]) & ~g.usable[i]
    if not real.any():
        return {}, None
    codes = (g.flags[i] if g.flags is not None else np.full(g.times[i].shape, 2))[real]
    times = g.times[i][real]
    counts, parts = {}, []
    for code in sorted(set(codes.tolist())):
        flag = FLAG_NAMES[code] or "missing"
        at = times[codes == code]
        counts[flag] = int(at.size)
        shown = ", ".join(file_time_text(float(t), ts.info) for t in at[:4])
        parts.append(f"{at.size} {flag} (at {shown}{', ...' if at.size > 4 else ''})")
    n = int(real.sum())
    return counts, (f"{n} reading{'s' if n > 1 else ''} not fitted: {'; '.join(parts)}")


def check_rate_law_fix(fix: dict, orders) -> None:
    """Refuse a --fix name that none of the rate laws to be fitted has."""
    from ..models import RATE_LAWS

    known = sorted({p for o in orders if o in RATE_LAWS for p in RATE_LAWS[o].params}
                   | ({"A0", "Ainf", "k"} if "mixed" in orders else set()))
    for name in fix:
        if name not in known:
            raise UsageError(f"--fix {name}: no rate law fitted here has such a parameter",
                             f"its parameters are {', '.join(known)}")


def rate_law_orders(order: str) -> tuple[str, ...]:
    """The orders a --order choice fits (auto: 0, 1 and 2)."""
    return ("0", "1", "2") if order == "auto" else (order,)


#: The command modules, in the order their names are looked up.
COMMAND_MODULES = ("inspect", "saturation", "rates", "ratelaw", "completion", "temperature",
                   "progress", "grading")


def __getattr__(name):
    """The ``run_*``/``compute_*`` functions of the command modules, imported on first use:
    first from the module the name's last part names (``run_rates``: rates; ``run_grade``:
    grading), so that a command loads no other command's module (``rates`` loaded
    ``saturation`` first, 0.15 s, only to look in it)."""
    import importlib

    own = {"grade": "grading"}.get(name.rsplit("_", 1)[-1], name.rsplit("_", 1)[-1])
    for mod in sorted(COMMAND_MODULES, key=lambda m: m != own):
        m = importlib.import_module(f"{__name__}.{mod}")
        if hasattr(m, name):
            return getattr(m, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
