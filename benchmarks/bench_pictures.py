"""What pictures cost, as ratios measured in one run (issue 14's goals).

``python benchmarks/bench_pictures.py [--no-suite] [--repeat N]``

Every command runs in a fresh process (``python -m rateabs.cli``, this checkout), as a user runs
it; each time is the best of ``--repeat`` runs (wall clock) with the CPU time of that run beside
it (the machine is shared, so CPU time is the steadier figure); the 96-well ratio is also
given as the median over pairs of runs side by side. The package is compiled to
bytecode first, as ``pip install`` leaves it. Printed goals:

* ``rateabs demo``: within 8 s.
* The whole test suite (``python -m pytest``): within 60 s on 2 cores.
* ``rates`` on the 96-well sample plate, pictures on / pictures off: at most 1.5.
* ``rates`` on a 1536-well x 300-read plate with pictures: at most 4 x the time pandas takes to
  read the file in a fresh process.
* ``inspect`` on the same 1536-well plate, pictures on / off (every trace drawn).
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

from common import write_plate  # noqa: E402

ENV = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
SAMPLES = ROOT / "rateabs" / "data" / "samples"


def run(argv: list[str], cwd: Path, repeat: int = 1) -> tuple[float, float]:
    """Best wall time of ``repeat`` runs of a command in a fresh process, and its CPU time."""
    best = (float("inf"), 0.0)
    for _ in range(repeat):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        r = subprocess.run(argv, cwd=cwd, env=ENV, capture_output=True, text=True)
        wall = time.perf_counter() - t0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        if r.returncode not in (0, 5):
            raise SystemExit(f"{' '.join(map(str, argv))} failed:\n{r.stdout[-3000:]}\n"
                             f"{r.stderr[-2000:]}")
        cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        best = min(best, (wall, cpu))
    return best


def run_paired(a: list[str], b: list[str], cwd: Path, repeat: int = 1):
    """Commands ``a`` and ``b`` run alternately ``repeat`` times (a shared machine drifts in
    speed; a pair run side by side sees the same machine): the best (wall, CPU) of each and the
    median of the pairs' wall-time ratios a / b."""
    best_a, best_b, ratios = (float("inf"), 0.0), (float("inf"), 0.0), []
    for _ in range(repeat):
        ta, tb = run(a, cwd), run(b, cwd)
        best_a, best_b = min(best_a, ta), min(best_b, tb)
        ratios.append(ta[0] / tb[0])
    return best_a, best_b, statistics.median(ratios)


def cli(*args) -> list[str]:
    """A rateabs command line in a fresh interpreter."""
    return [sys.executable, "-m", "rateabs.cli", *map(str, args)]


def line(what: str, a: tuple[float, float], b: tuple[float, float] | float, goal: str) -> None:
    """One ratio: a / b (wall), with the times and the CPU-time ratio beside it."""
    if isinstance(b, tuple):
        print(f"{what:58s} {a[0] / b[0]:6.2f}  (wall {a[0]:6.1f} s / {b[0]:6.1f} s; "
              f"CPU {a[1] / b[1]:.2f})  goal {goal}")
    else:
        print(f"{what:58s} {a[0] / b:6.2f}  (wall {a[0]:6.1f} s, CPU {a[1]:6.1f} s against "
              f"{b:g} s)  goal {goal}")


def main() -> None:
    """Measure and print every ratio."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--no-suite", action="store_true", help="leave out the test suite")
    ap.add_argument("--repeat", type=int, default=1, help="runs per command (best is kept)")
    args = ap.parse_args()
    # as installed by pip, which compiles the modules to bytecode (an environment that sets
    # PYTHONDONTWRITEBYTECODE would otherwise compile this checkout again in every process)
    subprocess.run([sys.executable, "-m", "compileall", "-q", str(ROOT / "rateabs")], check=True)
    print(f"bench_pictures: {os.cpu_count()} cores; fresh process per command; modules "
          "compiled to bytecode first, as pip installs them")
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        plate = write_plate(d / "plate1536.csv")
        rates96 = ["rates", SAMPLES / "plate_kbdh_340nm.csv", "--layout",
                   SAMPLES / "plate_kbdh_map.csv", "--chromophore", "NADH", "--well-volume",
                   "200 uL", "--total-volume", "200 uL", "--sample-volume", "20 uL"]
        on, off, paired = run_paired(cli(*rates96, "--out", d / "r96on"),
                                     cli(*rates96, "--out", d / "r96off", "--no-plots"), d,
                                     args.repeat)
        line("rates, 96-well plate: pictures on / off", on, off, "<= 1.5")
        print(f"{'  the same, median of runs side by side':58s} {paired:6.2f}")
        read = run([sys.executable, "-c", f"import pandas; pandas.read_csv({str(plate)!r}, "
                    "skiprows=3)"], d, args.repeat)
        big = run(cli("rates", plate, "--out", d / "r1536"), d, args.repeat)
        line("rates, 1536 x 300 with pictures / pandas read", big, read, "<= 4")
        ins_on = run(cli("inspect", plate, "--out", d / "i1536"), d, args.repeat)
        ins_off = run(cli("inspect", plate, "--out", d / "i1536off", "--no-plots"), d,
                      args.repeat)
        line("inspect, 1536 x 300: pictures on / off", ins_on, ins_off, "small")
        demo = run(cli("demo", "--out", d / "demo"), d, args.repeat)
        line("rateabs demo / 8 s", demo, 8.0, "<= 1")
        if not args.no_suite:
            suite = run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider"], ROOT)
            line("whole test suite (python -m pytest) / 60 s", suite, 60.0, "<= 1")


if __name__ == "__main__":
    main()
