"""Many plates in one command: plates/s on 1 process, on 2 processes and on a local Dask
cluster with 2 workers, beside the speed-up the machine itself gives a pure CPU task.

    python benchmarks/bench_plates.py [n_plates=24] [rounds=2]

Each plate is a simulated 96-well kinetic read (61 reads, 10 s apart; straight, bending and
lagging traces from benchmarks/common.py). Each mode runs the whole many-file ``rates`` run
(``rateabs.views.batch.run_plates``: plan, workers reading their own files, rows streamed, the
JSON document assembled), printing nothing. The local processes are started inside the timing,
as a user's command starts them. The Dask cluster (a ``dask scheduler`` and a ``dask worker
--nworkers 2``, each its own process on 127.0.0.1, as a user starts them) exists beforehand with
its workers warmed, as a lab's cluster would. The machine's own speed-up is the same pure-Python
task run 4 times in this process and then on 2 warm worker processes. Rounds are interleaved and
the best time of each mode is kept, so that other work on a shared machine touches every mode
alike; the load average is printed beside the figures.

Goals (issue 15): the 2-process speed-up is at least 0.8 of the machine's; Dask costs at most
20 % more time than local processes.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from contextlib import contextmanager
from pathlib import Path

sys.path[:0] = [str(Path(__file__).parent), str(Path(__file__).parents[1])]   # this checkout

from common import write_plate  # noqa: E402

from rateabs.options import RatesOptions  # noqa: E402
from rateabs.views.batch import plan_plates, run_plates  # noqa: E402

SPIN = 3_000_000      # iterations of the pure CPU task (about 0.2-0.4 s on one core)


def spin(n: int) -> int:
    """A pure-Python CPU task: no I/O, no library, no shared state."""
    s = 0
    for i in range(n):
        s = (s + i * i) % 1_000_003
    return s


def machine_speedup(pool: ProcessPoolExecutor) -> tuple[float, float]:
    """Time of 4 tasks here, and on the 2-process pool."""
    t0 = time.perf_counter()
    serial = [spin(SPIN) for _ in range(4)]
    t1 = time.perf_counter()
    parallel = list(pool.map(spin, [SPIN] * 4))
    t2 = time.perf_counter()
    assert serial == parallel
    return t1 - t0, t2 - t1


def _quiet(text="", nl=True, err=False) -> None:
    """An echo that prints nothing."""


def run_once(folder: Path, **where) -> tuple[float, list]:
    """Wall time of one many-file run over the folder, and its results (from --out)."""
    with tempfile.TemporaryDirectory() as out:
        o = RatesOptions.build(file=str(folder), epsilon="6220", pathlength="0.6 cm",
                               fmt="json", out=out, **where)
        t0 = time.perf_counter()
        done = run_plates(plan_plates(o), _quiet)
        elapsed = time.perf_counter() - t0
        assert done.failed == 0
        rows = (Path(out) / "rates.csv").read_text()
    return elapsed, rows


def warm_worker() -> str:
    """Import what a rates task needs (run on every Dask worker before timing)."""
    import rateabs.views.batch  # noqa: F401
    import rateabs.views.rates  # noqa: F401

    return "ready"


@contextmanager
def dask_cluster(folder: Path, n_workers: int = 2):
    """A Dask scheduler and workers in their own processes on 127.0.0.1, started as a user
    would (``dask scheduler``, ``dask worker --nworkers 2``), warmed, and always stopped."""
    from distributed import Client

    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path[:2])}   # this checkout
    info = folder / "scheduler.json"
    argv = [sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
            "--port", "0", "--no-dashboard", "--scheduler-file", str(info)]
    procs = [subprocess.Popen(argv, env=env, start_new_session=True,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    try:
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", "--scheduler-file", str(info),
             "--nworkers", str(n_workers), "--nthreads", "1", "--no-dashboard", "--host",
             "127.0.0.1"], env=env, start_new_session=True, stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL))
        with Client(scheduler_file=str(info), timeout=120) as c:
            c.wait_for_workers(n_workers, timeout=120)
            c.run(warm_worker)
            address = c.scheduler.address
        yield address
    finally:
        for p in reversed(procs):                    # the workers, then the scheduler
            os.killpg(p.pid, signal.SIGTERM)
            try:
                p.wait(timeout=30)
            except subprocess.TimeoutExpired:
                os.killpg(p.pid, signal.SIGKILL)
                p.wait(timeout=30)


def main(n: int = 24, rounds: int = 2) -> None:
    best = {"serial": float("inf"), "local": float("inf"), "dask": float("inf"),
            "cpu1": float("inf"), "cpu2": float("inf")}
    with tempfile.TemporaryDirectory() as d, ProcessPoolExecutor(2) as pool:
        plates = Path(d) / "plates"
        plates.mkdir()
        for k in range(n):
            write_plate(plates / f"plate{k + 1:03d}.csv", n_rows=8, n_cols=12, n_reads=61,
                        seed=k)
        list(pool.map(spin, [10, 10]))                          # start the pool's workers
        with dask_cluster(Path(d)) as scheduler:
            run_once(plates, jobs=1)                            # warm this process's imports
            reference = None
            for _ in range(rounds):
                cpu1, cpu2 = machine_speedup(pool)
                best["cpu1"], best["cpu2"] = min(best["cpu1"], cpu1), min(best["cpu2"], cpu2)
                for mode, where in (("serial", {"jobs": 1}), ("local", {"jobs": 2}),
                                    ("dask", {"scheduler": scheduler})):
                    elapsed, rows = run_once(plates, **where)
                    reference = reference or rows
                    assert rows == reference, f"{mode} gave other numbers"
                    best[mode] = min(best[mode], elapsed)
    report(n, rounds, best)


def report(n: int, rounds: int, best: dict) -> None:
    """Print plates/s per mode, the speed-ups and the two goals."""
    machine = best["cpu1"] / best["cpu2"]
    local = best["serial"] / best["local"]
    dask = best["serial"] / best["dask"]
    cost = best["dask"] / best["local"]
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    print(f"{n} simulated 96-well plates (61 reads each), best of {rounds} interleaved rounds; "
          f"{os.cpu_count()} CPUs, load average {load} (a shared machine slows every mode)")
    print(f"  1 process           {n / best['serial']:6.2f} plates/s")
    print(f"  2 local processes   {n / best['local']:6.2f} plates/s   speed-up {local:4.2f}x "
          "(process start-up included)")
    print(f"  Dask, 2 workers     {n / best['dask']:6.2f} plates/s   speed-up {dask:4.2f}x "
          "(existing cluster, warm workers)")
    print(f"  the machine's own 2-process speed-up on a pure CPU task: {machine:4.2f}x")
    print(f"  goal: 2-process speed-up / machine's = {local / machine:4.2f} (>= 0.8: "
          f"{'met' if local / machine >= 0.8 else 'missed'})")
    print(f"  goal: Dask time / 2-process time = {cost:4.2f} (<= 1.2: "
          f"{'met' if cost <= 1.2 else 'missed'}); identical rates.csv in every mode")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
