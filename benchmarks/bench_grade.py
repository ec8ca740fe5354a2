"""Grading: throughput with feedback pages, regrading from kept analyses, and diagnosis precision.

    python benchmarks/bench_grade.py [n_students]

Prints, for a simulated class of ``n_students`` (default 300) graded with feedback pages into an
--out folder, as the command does (``views.run_grade``):

* first grade, students/s at 1 process and at 2 processes (worker start-up included);
* regrade after a scoring change in the rubric (tolerance and weights), which reuses the
  analyses kept in --out: seconds for the class, and students/s;

and on the planted class of tests/grade_truth.py (slips from definitions: 60 s/min, ln 10,
ln 2 / k, A = 2 - log10 %T): the precision of the named slips, the recall, and the share of
honest reports left alone.
"""

from __future__ import annotations

import os
import resource
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]       # this checkout, and the test truths

from grade_truth import FIRST_ORDER_PLAN, first_order_class  # noqa: E402

from rateabs import simulate  # noqa: E402
from rateabs.grade import grade_class, read_rubric  # noqa: E402
from rateabs.options import GradeOptions  # noqa: E402
from rateabs.views import write_only  # noqa: E402
from rateabs.views.grading import run_grade  # noqa: E402


def _cpu() -> float:
    """CPU seconds of this process and of its finished workers."""
    me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(
        resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime


def _grade(folder: Path, rubric: Path, out: Path, jobs: int) -> tuple[float, float]:
    """(wall seconds, CPU seconds) of one graded class with its pages, as the command runs."""
    t0, c0 = time.perf_counter(), _cpu()
    run_grade(GradeOptions(str(folder), rubric=str(rubric), jobs=jobs, fmt="json",
                           out=str(out)), write_only)
    return time.perf_counter() - t0, _cpu() - c0


def throughput(n: int) -> None:
    """First grade and regrade of a class of ``n`` with feedback pages."""
    with tempfile.TemporaryDirectory() as d:
        folder = simulate.first_order_class(Path(d) / "class", n, spread=0.02,
                                            minutes_slip_every=7)
        rubric = folder / "rubric.toml"
        warm = simulate.first_order_class(Path(d) / "warm", 3)
        _grade(warm, warm / "rubric.toml", Path(d) / "warm-out", 1)      # imports, once
        print(f"load average before: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
        for jobs in (1, 2):
            out = Path(d) / f"out{jobs}"
            first, cpu = _grade(folder, rubric, out, jobs)
            changed = Path(d) / f"rubric{jobs}.toml"
            changed.write_text(rubric.read_text().replace("tolerance_pct = 5",
                                                          "tolerance_pct = 8")
                               + "\n[weights]\ndata = 10\nreport = 60\nreference = 30\n")
            again, cpu2 = _grade(folder, changed, out, jobs)
            print(f"{n} students with feedback pages, {jobs} process(es): first grade "
                  f"{first:6.2f} s ({n / first:5.1f} students/s, {1e3 * cpu / n:.0f} ms of CPU "
                  f"per student); regrade after a scoring change {again:5.2f} s "
                  f"({n / again:6.1f} students/s, {cpu2:.1f} s of CPU)")


def precision() -> None:
    """Diagnosis precision, recall and honest reports left alone on the planted class."""
    with tempfile.TemporaryDirectory() as d:
        planted = first_order_class(Path(d) / "c")
        rows = grade_class(Path(d) / "c", read_rubric(Path(d) / "c" / "rubric.toml"),
                           plots=False)
    named = [r for r in rows if r["slip"]]
    right = [r for r in named if r["slip"] == FIRST_ORDER_PLAN[planted[r["student"]]][1]]
    slips = [r for r in rows if FIRST_ORDER_PLAN[planted[r["student"]]][1]]
    honest = [r for r in rows if FIRST_ORDER_PLAN[planted[r["student"]]][1] is None]
    alone = [r for r in honest if r["slip"] is None]
    print(f"planted class of {len(rows)}: {len(right)} of {len(named)} named slips right "
          f"(precision {len(right) / max(len(named), 1):.2f}); {len(right)} of {len(slips)} "
          f"planted slips named (recall {len(right) / max(len(slips), 1):.2f}); "
          f"{len(alone)} of {len(honest)} honest reports left alone")


if __name__ == "__main__":
    throughput(int(sys.argv[1]) if len(sys.argv) > 1 else 300)
    precision()
