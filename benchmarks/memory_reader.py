"""Peak memory of reading large exports, against the size of the numbers they hold.

Makes wide plate exports of about 20, 50 and 200 MB (96 wells, one column per well, times in
seconds) in a temporary folder and runs each job in a fresh Python process, reading that
process's own peak resident set size from ``os.wait4``:

* ``read_traces``: the reader alone;
* ``inspect``: ``python -m rateabs.cli inspect FILE``;
* ``rates``: ``python -m rateabs.cli rates FILE --no-plots`` (the analysis, not only the reader).

The goal (issue 17): peak under 3 x the size of the numbers held as float64, plus the libraries
(about 300 MB; the ``libraries`` row measures them here).

    python benchmarks/memory_reader.py              # 20, 50 and 200 MB
    python benchmarks/memory_reader.py --sizes 20   # one size
    python benchmarks/memory_reader.py --skip rates
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
N_WELLS = 96
BYTES_PER_ROW = 8 + 7 * N_WELLS            # "12345.5," then "0.1234," per well

JOBS = {
    "libraries": ["-c", "import numpy, pandas, rateabs.io, rateabs.traces"],
    "read_traces": ["-c", "import sys; from rateabs.io import read_traces; "
                          "ts = read_traces(sys.argv[1]); assert len(ts) == 96"],
    "inspect": ["-m", "rateabs.cli", "inspect"],
    "rates": ["-m", "rateabs.cli", "rates", "--no-plots", "--format", "csv"],
}


def wells() -> list[str]:
    """A1..H12."""
    return [f"{r}{c}" for r in "ABCDEFGH" for c in range(1, 13)]


def write_export(path: Path, megabytes: float, seed: int = 7) -> tuple[int, int]:
    """A wide export of about ``megabytes`` MB; returns (wells, readings per well)."""
    n = int(megabytes * 1e6 / BYTES_PER_ROW)
    rng = np.random.default_rng(seed)
    slope = rng.uniform(1e-7, 5e-6, N_WELLS)
    with open(path, "w", newline="") as fh:
        fh.write("Memory benchmark export (simulated), 340 nm\n\n")
        fh.write("Time (s)," + ",".join(wells()) + "\n")
        step = 20000
        for j0 in range(0, n, step):
            t = np.arange(j0, min(n, j0 + step)) * 0.5
            y = 0.1 + slope[None, :] * t[:, None] + rng.normal(0, 0.002, (t.size, N_WELLS))
            block = np.column_stack([t, np.clip(y, 0, 1.9)])
            np.savetxt(fh, block, fmt=["%.1f"] + ["%.4f"] * N_WELLS, delimiter=",")
    return N_WELLS, n


def peak_mb(args: list[str]) -> tuple[float, float, int]:
    """Peak RSS (MB) and wall time (s) of one fresh Python process, and its exit code."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, *args], cwd=ROOT, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    err = proc.stderr.read().decode(errors="replace").strip() if proc.stderr else ""
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode:
        print(f"    ({args[-1]}: exit {proc.returncode}: {err.splitlines()[-1] if err else ''})")
    return usage.ru_maxrss / 1024.0, time.perf_counter() - t0, proc.returncode


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=float, nargs="+", default=[20, 50, 200], help="MB")
    ap.add_argument("--skip", nargs="*", default=[], choices=list(JOBS)[1:])
    a = ap.parse_args()
    libs, _, _ = peak_mb(JOBS["libraries"])
    print(f"libraries (numpy, pandas, rateabs.io): {libs:.0f} MB peak")
    print(f"{'file MB':>8} {'numbers MB':>10} {'goal MB':>8}  {'job':<12} {'peak MB':>8} "
          f"{'x file':>6} {'time s':>7}  within goal")
    with tempfile.TemporaryDirectory() as d:
        for size in a.sizes:
            path = Path(d) / f"export_{size:g}MB.csv"
            n_wells, n = write_export(path, size)
            file_mb = path.stat().st_size / 1e6
            numbers_mb = (n_wells + 1) * n * 8 / 1e6           # readings and times as float64
            goal = 3 * numbers_mb + 300
            for job, args in JOBS.items():
                if job == "libraries" or job in a.skip:
                    continue
                peak, secs, code = peak_mb([*args, str(path)])
                ok = "yes" if peak <= goal and code == 0 else "NO"
                print(f"{file_mb:8.1f} {numbers_mb:10.1f} {goal:8.0f}  {job:<12} {peak:8.0f} "
                      f"{peak / file_mb:6.1f} {secs:7.1f}  {ok}", flush=True)
            path.unlink()


if __name__ == "__main__":
    main()
