"""Grading throughput: runs per second for a class of 300, at one process and at all cores.

    python benchmarks/bench_grade.py [n_students]
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

from rateabs.grade import grade_class, read_rubric
from rateabs.simulate import first_order_class
from rateabs.views.grading import draw_figures


def main(n: int = 300) -> None:
    cores = os.cpu_count() or 1
    with tempfile.TemporaryDirectory() as d:
        folder = Path(d)
        first_order_class(folder, n, spread=0.02, minutes_slip_every=7)
        rub = read_rubric(folder / "rubric.toml")
        with tempfile.TemporaryDirectory() as w:          # warm up imports before timing
            first_order_class(w, 3)
            grade_class(w, read_rubric(Path(w) / "rubric.toml"), plots=True)
        for plots in (False, True):
            t0 = time.perf_counter()
            a = grade_class(folder, rub, plots=plots)
            if plots:                       # the feedback figures are drawn by the views layer
                draw_figures(a)
            t1 = time.perf_counter() - t0
            t0 = time.perf_counter()
            with ProcessPoolExecutor(cores) as ex:
                b = grade_class(folder, rub, executor=ex, plots=plots)
                if plots:
                    draw_figures(b, ex)
            tn = time.perf_counter() - t0
            assert [x["score"] for x in a] == [x["score"] for x in b]
            what = "with feedback plots" if plots else "numbers only"
            print(f"{n} runs, {what}: 1 process {n / t1:6.1f} runs/s; {cores} processes "
                  f"{n / tn:6.1f} runs/s (speed-up {t1 / tn:4.2f}x, start-up included)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 300)
