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

import numpy as np

from rateabs.grade import grade_class, read_rubric
from rateabs.models import order1


def make_class(folder: Path, n: int) -> None:
    rng = np.random.default_rng(0)
    t = np.arange(0, 2401, 30.0)
    rows = ["student,file,reported"]
    for i in range(n):
        k = 8e-4 * (1 + rng.normal(0, 0.02))
        a = order1(t, 1.1, 0.05, k) + rng.normal(0, 0.004, t.size)
        (folder / f"r{i}.csv").write_text("time (s),A\n" + "".join(
            f"{tt:g},{v:.4f}\n" for tt, v in zip(t, a, strict=True)))
        rows.append(f"s{i:03d},r{i}.csv,{k * (60 if i % 7 == 0 else 1):.4g}")
    (folder / "roster.csv").write_text("\n".join(rows) + "\n")
    (folder / "rubric.toml").write_text('[assignment]\nquantity = "k"\nunit = "1/s"\n'
                                        'reference = 8e-4\ntolerance_pct = 5\n')


def main(n: int = 300) -> None:
    cores = os.cpu_count() or 1
    with tempfile.TemporaryDirectory() as d:
        folder = Path(d)
        make_class(folder, n)
        rub = read_rubric(folder / "rubric.toml")
        for plots in (False, True):
            t0 = time.perf_counter()
            a = grade_class(folder, rub, plots=plots)
            t1 = time.perf_counter() - t0
            t0 = time.perf_counter()
            with ProcessPoolExecutor(cores) as ex:
                b = grade_class(folder, rub, executor=ex, plots=plots)
            tn = time.perf_counter() - t0
            assert [x["score"] for x in a] == [x["score"] for x in b]
            what = "with feedback plots" if plots else "numbers only"
            print(f"{n} runs, {what}: 1 process {n / t1:6.1f} runs/s; {cores} processes "
                  f"{n / tn:6.1f} runs/s (speed-up {t1 / tn:4.2f}x, start-up included)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 300)
