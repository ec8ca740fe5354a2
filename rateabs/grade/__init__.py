"""Batch grading of a class's runs.

Each student's run is analysed with the same engine as every other command (the first-order
fit of ``ratelaw``, the initial rate of ``rates``, the Michaelis–Menten fit of ``saturation``);
the reported number is checked against the value from the student's own data and against the
class reference; a slip is named only when it explains the difference far better than chance
(:mod:`~rateabs.grade.diagnosis`); every assumption the grader made is stated; work handed in by
several students and work handed in late are flagged.

The parts:

* :mod:`~rateabs.grade.rubric`: the rubric TOML, checked once before any student is graded;
* :mod:`~rateabs.grade.roster`: ``roster.csv``, reported values and submission times;
* :mod:`~rateabs.grade.analysis`: one run analysed (in a worker), as plain data;
* :mod:`~rateabs.grade.cache`: analyses kept by file content and analysis settings, so that a
  changed scoring regrades without analysing again;
* :mod:`~rateabs.grade.diagnosis`: candidate slips and the judgement;
* :mod:`~rateabs.grade.scoring`: parts, score, findings and assumptions of one student.

Batch work goes through the one executor seam, :mod:`rateabs.parallel` (:func:`grade_class`
takes any ``concurrent.futures.Executor``: local processes, a Dask cluster's, or none).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable
from functools import partial

from ..parallel import check_jobs, run
from .analysis import analyse_run, analysis_settings
from .cache import CACHE_FILE, AnalysisCache, run_key
from .roster import Task, lateness, read_roster
from .rubric import DEFAULT_WEIGHTS, MODELS, Rubric, RubricError, read_rubric
from .scoring import agreement, assess, base_row, data_quality, not_analysed

__all__ = ["CACHE_FILE", "DEFAULT_WEIGHTS", "MODELS", "AnalysisCache", "Rubric", "RubricError",
           "Task", "agreement", "check_jobs", "data_quality", "grade_class", "read_roster",
           "read_rubric"]


def grade_class(folder, rubric: Rubric, executor=None, progress: Callable | None = None,
                plots: bool = True, cache: AnalysisCache | None = None) -> list[dict]:
    """Grade every student of the roster; one row per student, in roster order.

    ``executor`` is any ``concurrent.futures.Executor`` (``parallel.open_executor`` gives local
    processes or a Dask cluster's); without one the work runs here, in order. Workers receive
    each run's path and the analysis settings, never the run's bytes; each distinct run is
    analysed once. ``cache`` (an :class:`AnalysisCache`) supplies analyses kept from an earlier
    run and keeps the new ones. ``progress`` is called once per student. A run whose analysis
    fails or crashes costs that student's row, never the class; ``plots`` adds each student's
    figure data (``figure``) to the rows.
    """
    tasks = read_roster(folder, (rubric.quantity, rubric.unit))
    settings = analysis_settings(rubric)
    keys, analyses, todo = {}, {}, {}
    for t in tasks:
        if t.problem:
            continue
        try:
            keys[t.index] = key = run_key(t.path, settings)
        except OSError as exc:
            keys[t.index] = key = f"unreadable:{t.index}"
            analyses[key] = {"ok": False, "problem": f"the file cannot be read ({exc.strerror})"}
            continue
        hit = cache.get(key) if cache is not None and key not in analyses else None
        if hit is not None:
            analyses[key] = hit
        elif key not in analyses:
            todo[key] = t.path
    if progress is not None and len(tasks) > len(todo):
        progress(len(tasks) - len(todo))
    for key, done in zip(todo, run(partial(analyse_run, settings=settings), list(todo.values()),
                                   executor, progress), strict=True):
        analyses[key] = done.value if done.ok else {
            "ok": False, "problem": f"analysing this run failed ({type(done.error).__name__})"}
        if done.ok and cache is not None:
            cache.put(key, done.value)
    rows = [_assess(t, analyses.get(keys.get(t.index)), rubric, plots) for t in tasks]
    mark_shared(rows)
    mark_late(rows, tasks, rubric)
    return rows


def _assess(t: Task, analysis: dict | None, rubric: Rubric, plots: bool) -> dict:
    """:func:`assess`, with any failure costing this student's row only."""
    try:
        return assess(t, analysis, rubric, plots)
    except Exception as exc:  # noqa: BLE001 - one student's grade never stops the class
        return not_analysed(base_row(t, rubric), f"grading this run failed "
                                                 f"({type(exc).__name__})")


def mark_shared(rows: list[dict]) -> None:
    """Flag runs handed in by several students: the same file, or the same readings under
    another file name. Each such row lists the others (``shared_with``) and says so, without
    their names (the gradebook has them)."""
    groups: dict[tuple, list[dict]] = defaultdict(list)
    for r in rows:
        if r["path"]:
            groups[("file", r["path"])].append(r)
        if r["readings"]:
            groups[("readings", r["readings"])].append(r)
    same_file: dict[int, set] = defaultdict(set)
    for (kind, _), members in groups.items():
        for r in members if len(members) > 1 else ():
            for m in members:
                if m is not r and m["student"] not in r["shared_with"]:
                    r["shared_with"].append(m["student"])
                if m is not r and kind == "file":
                    same_file[id(r)].add(m["student"])
    for r in rows:
        if r["shared_with"]:
            n, files = len(r["shared_with"]), len(same_file[id(r)])
            how = "the same file" if files == n else ("a copy under another file name" if not
                                                      files else "the same file or a copy")
            r["diagnosis"].append(f"shared data: {n} other student(s) handed in the same "
                                  f"readings ({how}); your instructor will look at it")


def mark_late(rows: list[dict], tasks: list[Task], rubric: Rubric) -> None:
    """Check each ``submitted`` time against the rubric's deadline; late work is flagged."""
    if rubric.deadline is None:
        return
    for r, t in zip(rows, tasks, strict=True):
        late, note = lateness(t.submitted, rubric.deadline)
        r["late"] = late
        if note:
            r["diagnosis"].append(note)

