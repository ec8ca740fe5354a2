"""Many plates in one command: ``rateabs rates FILE...`` gives one combined table.

The FILE arguments (files, folders, glob patterns) and ``--layout`` (one map for every plate, or
a folder of ``STEM_map.csv``) are resolved by the rules of :mod:`rateabs.batch`. Each file gets
its own :class:`~rateabs.options.RatesOptions` (the command's settings with that file and its
map) and is analysed by :func:`rateabs.views.rates.compute_rates`, the per-file unit of work,
here, on ``--jobs`` local processes or on a Dask cluster (``--scheduler``), always through
:mod:`rateabs.parallel`. A worker gets a path and small settings, reads the file itself, and
sends back that plate's rows, warnings and settings; nothing else of the plate leaves it.

What the run gives, in the order of the files whatever ran where:

* every row carries ``file``, the name as given (a folder's files as ``FOLDER/NAME``); a file
  that failed has one row with ``file`` and ``error`` (the one-line reason), the others are
  analysed as usual, and the command exits with :data:`rateabs.errors.SOME_FAILED`;
* the JSON document: ``settings.plates`` holds each file's own settings (blank, replicates, Z',
  time unit...), status and warnings; ``warnings`` lists every file's warnings prefixed with its
  name; ``settings.ran_on`` says where the work ran (the only part that differs between a serial
  run, ``--jobs`` and ``--scheduler``);
* ``--out``: ``rates.csv`` (the combined rows), ``rates.json``, ``rates_files.csv`` (one line
  per file) and ``rates_replicates.csv`` (every plate's replicate groups); ``--report`` a page
  with one line per file. Figures are drawn for one plate at a time (``rateabs rates FILE``).

Not held whole: the CSV is written as each file's rows arrive (to stdout with ``--format csv``,
and into ``--out`` through a temporary file renamed into place when the run completes). A JSON
document cannot be streamed in the same way: its ``settings`` (which hold each plate's own) come
before ``results``. So each file's rows are appended to a temporary spool, one JSON line per row,
as they arrive, and the document is written at the end by reading the spool back row by row
(byte for byte what :func:`rateabs.output.to_json` gives for the whole document). The process
that collects results holds one plate's rows at a time and a short summary per file.
"""

from __future__ import annotations

import json
import os
import tempfile
from collections.abc import Callable, Iterator
from contextlib import ExitStack, nullcontext
from dataclasses import dataclass, replace
from pathlib import Path

from ..batch import Inputs, expand, maps_for, names_many
from ..errors import SOME_FAILED, RateabsError
from ..options import OutputOptions, RatesOptions, WhereOptions
from ..output import document, render_table, rows_to_csv, to_json
from ..rules import refusal
from .rates import RATE_FIELDS

#: Columns of the combined CSV (fixed, so that every run over any plates has the same ones).
CSV_FIELDS = ["file", *RATE_FIELDS, "error"]
#: Columns of the one-line-per-file summary (``rates_files.csv``, the table, the report).
SUMMARY_FIELDS = ["file", "layout", "status", "traces", "flagged", "z_prime", "warnings", "error"]
_MARK = "\u0000rows of the spool"


@dataclass(frozen=True)
class Plan:
    """A many-file run: the command's settings, its files, and each file's settings (or the
    error that stops that file before it runs)."""

    options: RatesOptions
    inputs: Inputs
    tasks: tuple
    notes: tuple[str, ...]

    def __len__(self) -> int:
        return len(self.tasks)


@dataclass(frozen=True)
class Finished:
    """How a many-file run ended: files analysed and files failed."""

    files: int
    failed: int

    @property
    def exit_code(self) -> int:
        """0 when every file was analysed, else :data:`rateabs.errors.SOME_FAILED`."""
        return SOME_FAILED if self.failed else 0

    def summary(self) -> str:
        """One line for stderr."""
        return (f"{self.failed} of {self.files} file(s) failed (their rows say why); the other "
                f"{self.files - self.failed} were analysed and written")


def one_file(o: RatesOptions) -> RatesOptions | None:
    """The settings of a one-file run, or None when the FILE arguments name many files.

    ``--jobs`` and ``--scheduler`` share out the files of a many-file run, so one file refuses
    them; a ``--layout`` folder gives the one file its own map by the rule of
    :mod:`rateabs.batch`.
    """
    if names_many((o.file, *o.more_files)):
        return None
    if o.where.scheduler is not None:
        raise refusal("--scheduler", f"shares out the files of a many-file run; {o.file} is "
                      "one file, analysed here", "leave it out, or give several files, a "
                      "folder or a quoted pattern such as 'plates/*.csv'")
    if o.where.jobs is not None and not (o.output.plots and (o.output.out or o.output.report)):
        raise refusal("--jobs", f"shares out the files of a many-file run, or the pictures of "
                      f"one; {o.file} is one file and no pictures are drawn", "leave it out, "
                      "or give several files, a folder or a quoted pattern such as "
                      "'plates/*.csv'")
    if o.layout_file and os.path.isdir(o.layout_file):
        found = maps_for((o.file,), o.layout_file)[0][0]
        if isinstance(found, RateabsError):
            raise found
        return replace(o, layout_file=found)
    return o


def plan_plates(o: RatesOptions) -> Plan:
    """Resolve the files and maps of a many-file run and build each file's settings.

    A folder without data files, a pattern that matches none, or an ambiguous map is refused
    here (UsageError); a missing map or settings that do not suit one file cost that file only.
    """
    if o.well_pages != "flagged":
        raise refusal("--well-pages", "draws one plate's pages; a many-file run draws no "
                      "pictures", "leave it out, or run rateabs rates FILE --out DIR for one "
                      "plate's pages")
    inputs = expand((o.file, *o.more_files))
    maps, notes = maps_for(inputs.files, o.layout_file)
    if o.output.plots and (o.output.out or o.output.report):
        notes = [*notes, "no pictures in a many-file run (its report holds the tables); "
                 "rateabs rates FILE --out DIR draws one plate's"]
    tasks = []
    for path, found in zip(inputs.files, maps, strict=True):
        if isinstance(found, RateabsError):
            tasks.append(found)
            continue
        try:
            tasks.append(replace(o, file=path, layout_file=found, more_files=(),
                                 where=WhereOptions(), output=OutputOptions()))
        except RateabsError as exc:
            tasks.append(exc.located(path))
    return Plan(o, inputs, tuple(tasks), tuple(inputs.notes) + tuple(notes))


def rates_of_file(o: RatesOptions) -> dict:
    """One plate's rows, warnings and settings, or why it failed (runs on a worker, which reads
    the file itself). Python warnings stay off the worker's stderr, as on the command line."""
    import warnings

    from .rates import compute_rates

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            doc = compute_rates(o).doc
        except RateabsError as exc:
            return failure(exc.located(o.file))
    return {"rows": doc["results"], "warnings": doc["warnings"], "settings": doc["settings"]}


def failure(exc: BaseException) -> dict:
    """A failed file's result: the one-line reason and the exit code it would have alone."""
    if isinstance(exc, RateabsError):
        return {"error": exc.one_line(), "exit_code": exc.exit_code}
    name = type(exc).__name__
    if isinstance(exc, ImportError):
        why = (f"the worker cannot import what the analysis needs ({name}: {exc}); install "
               "rateabs on every worker of the cluster")
    elif name == "BrokenProcessPool":
        why = ("a worker process died (out of memory, or killed); rerun this file alone with "
               "rateabs rates FILE")
    else:
        why = (f"internal error ({name}: {exc}); rerun this file alone with rateabs --debug "
               "rates FILE and report it")
    return {"error": why, "exit_code": 1}


def _results(plan: Plan, executor, tick, ahead: int) -> Iterator[tuple[str, dict]]:
    """(file, result) per file, in the plan's order; files stopped before running included."""
    from ..parallel import run

    runnable = [t for t in plan.tasks if isinstance(t, RatesOptions)]
    outcomes = run(rates_of_file, runnable, executor, progress=tick, ahead=ahead)
    for path, task in zip(plan.inputs.files, plan.tasks, strict=True):
        if isinstance(task, RatesOptions):
            done = next(outcomes)
            yield path, done.value if done.ok else failure(done.error)
        else:
            tick(1)
            yield path, failure(task)


def _rows(path: str, result: dict) -> list[dict]:
    if "error" in result:
        return [{"file": path, "error": result["error"]}]
    return [{"file": path, **r} for r in result["rows"]]


def _csv_body(rows: list[dict]) -> str:
    return rows_to_csv(rows, CSV_FIELDS).split("\n", 1)[1]


def _summary(path: str, task, result: dict) -> dict:
    """The file's line of the summary and its entry in ``settings.plates``."""
    own = dict(result.get("settings") or {})
    own.pop("flag_meanings", None)
    rows = result.get("rows") or []
    z = own.get("z_prime")
    return {"file": path, "layout": task.layout_file if isinstance(task, RatesOptions) else None,
            "status": "failed" if "error" in result else "ok", "traces": len(rows),
            "flagged": sum(1 for r in rows if r.get("flags")),
            "z_prime": z.get("value") if isinstance(z, dict) else None,
            "warnings": list(result.get("warnings", [])), "error": result.get("error"),
            "exit_code": result.get("exit_code"), "settings": own}


class _Echo:
    """stdout as a sink (the same ``write`` as a streamed file)."""

    def __init__(self, echo: Callable) -> None:
        self.echo = echo

    def write(self, text: str) -> None:
        self.echo(text, nl=False)


def _collect(plan: Plan, executor, sinks: list, spool, bar) -> tuple[list[dict], dict]:
    """Run the files; stream each one's rows to the CSV sinks and the JSON spool as it arrives.

    Returns the per-file summaries and the flag meanings (from the first analysed file)."""
    from ..parallel import slots

    for sink in sinks:
        sink.write(",".join(CSV_FIELDS) + "\n")
    plates, meanings = [], {}
    ahead = max(8, 4 * slots(executor))
    for (path, result), task in zip(_results(plan, executor, bar.update, ahead), plan.tasks,
                                    strict=True):
        rows = _rows(path, result)
        body = _csv_body(rows)
        for sink in sinks:
            sink.write(body)
        for r in rows:
            spool.write(_spooled(r))
        meanings = meanings or (result.get("settings") or {}).get("flag_meanings", {})
        plates.append(_summary(path, task, result))
    return plates, meanings


def _json_pieces(doc: dict, spool) -> Iterator[str]:
    """The document as :func:`rateabs.output.to_json` writes it, its results read from the
    spool one row at a time."""
    before, after = to_json({**doc, "results": [_MARK]}).split(json.dumps(_MARK), 1)
    spool.seek(0)
    rows = iter(spool)
    first = next(rows, None)
    if first is None:                               # no rows at all: "results": []
        yield before.rstrip() + after.lstrip()
        return
    yield before + _unspooled(first)
    for line in rows:
        yield ",\n    " + _unspooled(line)
    yield after


#: Stands for a line break inside a spooled row (JSON escapes every control character inside
#: its strings, so the raw character never occurs in the text json.dumps writes).
_BREAK = "\x1e"


def _spooled(row: dict) -> str:
    """A result row as the document will show it (indented, as to_json writes), on one line
    of the spool: encoded once, as it arrives, not again for each copy of the document."""
    return json.dumps(row, indent=2, ensure_ascii=False).replace("\n", _BREAK) + "\n"


def _unspooled(line: str) -> str:
    return line.rstrip("\n").replace(_BREAK, "\n    ")


def _document_head(plan: Plan, where: str, plates: list[dict], meanings: dict) -> dict:
    """The JSON document without its results (they come from the spool)."""
    o = plan.options
    layout = o.layout_file
    rule = (None if layout is None else f"each plate's own STEM_map.csv in {layout}"
            if os.path.isdir(layout) else "one map for every plate")
    settings = {"files": {"given": [o.file, *o.more_files], "analysed": len(plan.inputs.files),
                          "left_out": list(plan.inputs.left_out),
                          "order": "as given; a folder's or a pattern's files in natural name "
                                   "order"},
                "layout": {"given": layout, "rule": rule}, "ran_on": where,
                "plots": "none in a many-file run; rateabs rates FILE --out DIR draws one "
                         "plate's", "flag_meanings": meanings,
                "plates": plates}
    warnings = list(plan.notes)
    for p in plates:
        warnings += [f"{p['file']}: {w}" for w in p["warnings"]]
        if p["error"]:
            warnings.append(p["error"] if p["error"].startswith(p["file"]) else
                            f"{p['file']}: {p['error']}")
    inputs = list(plan.inputs.files) + sorted({p["layout"] for p in plates if p["layout"]})
    return document("rates", inputs, settings, [], warnings)


def _summary_rows(plates: list[dict]) -> list[dict]:
    return [{**{k: p[k] for k in SUMMARY_FIELDS if k != "warnings"},
             "warnings": len(p["warnings"])} for p in plates]


def _table(plates: list[dict], where: str) -> str:
    rows = _summary_rows(plates)
    failed = sum(p["status"] == "failed" for p in plates)
    text = render_table(rows, [("file", "file"), ("status", "status"), ("traces", "traces"),
                               ("flagged", "flagged"), ("z_prime", "Z'"),
                               ("warnings", "warnings"), ("error", "why it failed")],
                        title=f"{len(plates)} file(s): {len(plates) - failed} analysed, "
                              f"{failed} failed; ran on {where}")
    return text + ("every trace's rate: --format csv or --format json, or --out DIR "
                   "(rates.csv)\n")


def _replicates_csv(plates: list[dict]) -> str | None:
    rows = [{"file": p["file"], **r} for p in plates
            for r in (p["settings"].get("replicates") or [])]
    if not rows:
        return None
    return rows_to_csv(rows, list(dict.fromkeys(k for r in rows for k in r)))


def _outputs(plan: Plan):
    """The run's :class:`~rateabs.files.RunOutputs`, guarding every input file and folder."""
    from ..files import RunOutputs

    o = plan.options
    given = [a for a in (o.file, *o.more_files) if os.path.exists(a)]
    maps = [t.layout_file for t in plan.tasks if isinstance(t, RatesOptions) and t.layout_file]
    inputs = list(dict.fromkeys([*given, *plan.inputs.files, *maps,
                                 *([o.layout_file] if o.layout_file else [])]))
    planned = ["rates.json", "rates.csv", "rates_files.csv", "rates_replicates.csv"]
    return RunOutputs("rates", inputs, out=o.output.out, report=o.output.report,
                      planned=planned if o.output.out else ())


def run_plates(plan: Plan, echo: Callable, progress: Callable | None = None) -> Finished:
    """The ``rates`` command over many files: run them, stream the combined table, write the
    document, the summary and the --out files.

    ``echo(text, nl=..., err=...)`` prints (``click.echo``); ``progress(n)`` gives a context
    manager whose value has ``update(k)`` (``click.progressbar``), drawn while files finish.
    """
    from ..parallel import describe, open_executor

    o = plan.options
    fmt, out = o.output.fmt, o.output.out
    with _outputs(plan) as run, ExitStack() as files:
        sinks = [files.enter_context(run.stream(Path(out) / "rates.csv"))] if out else []
        sinks += [_Echo(echo)] if fmt == "csv" else []
        spool = files.enter_context(tempfile.TemporaryFile("w+", encoding="utf-8"))
        with open_executor(*_where(o.where, len(plan))) as ex:
            where = describe(ex)
            bar = progress(len(plan)) if progress is not None else nullcontext(_NoBar())
            with bar as b:
                plates, meanings = _collect(plan, ex, sinks, spool, b)
        head = _document_head(plan, where, plates, meanings)
        _finish(plan, run, head, spool, plates, where, echo)
    return Finished(len(plates), sum(p["status"] == "failed" for p in plates))


def _where(where: WhereOptions, n: int) -> tuple[int | None, str | None]:
    """(jobs, scheduler) for the seam: the cluster, or local processes (default one per CPU)
    but never more than there are files."""
    from ..parallel import check_jobs

    if where.scheduler is not None:
        return None, where.scheduler
    return max(1, min(check_jobs(where.jobs), n)), None


class _NoBar:
    def update(self, n: int) -> None:
        """No progress bar."""


def _finish(plan: Plan, run, head: dict, spool, plates: list[dict], where: str,
            echo: Callable) -> None:
    """Print the document or the summary table; write the --out files and the --report page."""
    o = plan.options
    fmt, out = o.output.fmt, o.output.out
    if fmt == "json":
        for piece in _json_pieces(head, spool):
            echo(piece, nl=False)
    elif fmt == "table":
        echo(_table(plates, where), nl=False)
        for w in head["warnings"]:
            echo(f"warning: {w}", err=True)
    if out:
        with run.stream(Path(out) / "rates.json") as sink:
            for piece in _json_pieces(head, spool):
                sink.write(piece)
        run.write_in("rates_files.csv", rows_to_csv(_summary_rows(plates), SUMMARY_FIELDS))
        reps = _replicates_csv(plates)
        if reps is not None:
            run.write_in("rates_replicates.csv", reps)
    if o.output.report:
        from ..report import document_page

        page_doc = {**head, "results": _summary_rows(plates),
                    "settings": {k: v for k, v in head["settings"].items() if k != "plates"}}
        run.write(o.output.report, document_page(page_doc, [], title="rateabs rates: many "
                                                 "plates"))
