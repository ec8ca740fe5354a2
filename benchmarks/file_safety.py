"""Outputs and processes under stress, with the real command line of this checkout.

    python benchmarks/file_safety.py [rounds] [kill_trials]

1. Writers side by side: ``rounds`` rounds of six ``rateabs rates`` runs (plots on), each on its
   own simulated input, all started at once into one ``--out``. Prints the runs, the runs that
   crashed (non-zero exit, traceback or "internal error"), the temporary files left, and the
   rounds whose folder was not one run's (files not matching the manifest's digests, or
   rates.json/rates.csv from different inputs).
2. Orphans: ``kill_trials`` times each of SIGKILL, SIGTERM and Ctrl-C (SIGINT to the process
   group) sent to ``rateabs grade --jobs 2`` on a 400-student class once its workers run. Prints
   the workers seen and those still alive 5 s after the parent ended (Linux: reads /proc).
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT)}
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]

from helpers import session_processes  # noqa: E402

from rateabs.files import MANIFEST, TMP_SUFFIX, read_manifest  # noqa: E402
from rateabs.simulate import first_order_class  # noqa: E402

CLI = [sys.executable, "-m", "rateabs.cli"]


def _input(path: Path, slope: float) -> Path:
    rows = ["time (s),A,B,C"] + [f"{t},{0.1 + slope * t:.5f},{0.2 + 2 * slope * t:.5f},"
                                 f"{0.3 - slope * t:.5f}" for t in range(0, 601, 20)]
    path.write_text("\n".join(rows) + "\n")
    return path


def _one_runs(folder: Path) -> bool:
    """Whether the folder holds exactly one run's files."""
    m = read_manifest(folder)
    if m is None or m["status"] != "complete":
        return False
    present = {p.relative_to(folder).as_posix() for p in folder.rglob("*")
               if p.is_file() and not p.name.startswith(".rateabs")}
    if present != {e["name"] for e in m["files"]}:
        return False
    if any(hashlib.sha256((folder / e["name"]).read_bytes()).hexdigest() != e["sha256"]
           for e in m["files"]):
        return False
    doc = json.loads((folder / "rates.json").read_text())
    return doc["inputs"] == m["inputs"]


def writers(rounds: int, procs: int = 6) -> None:
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        out = d / "shared"
        inputs = [_input(d / f"plate{i}.csv", 0.0005 * (i + 1)) for i in range(procs)]
        runs = crashes = mixed = 0
        leftovers = 0
        for _ in range(rounds):
            ps = [subprocess.Popen(CLI + ["rates", str(g), "--out", str(out), "--no-curve"],
                                   env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                                   text=True) for g in inputs]
            for p in ps:
                err = p.communicate(timeout=600)[1]
                runs += 1
                crashes += p.returncode != 0 or "Traceback" in err or "internal error" in err
            leftovers += sum(1 for p in d.rglob("*") if p.name.endswith((TMP_SUFFIX, ".tmp")))
            mixed += not _one_runs(out)
        print(f"writers side by side: {runs} runs ({rounds} rounds of {procs} into one --out): "
              f"{crashes} crashed, {leftovers} temporary files left, {mixed} rounds left a "
              f"folder that was not one run's (manifest {MANIFEST})")


def _until(cond, limit: float) -> bool:
    end = time.monotonic() + limit
    while time.monotonic() < end and not cond():
        time.sleep(0.05)
    return cond()


def orphans(trials: int) -> None:
    if not sys.platform.startswith("linux"):
        print("orphans: skipped (reads /proc)")
        return
    with tempfile.TemporaryDirectory() as d:
        cls = first_order_class(Path(d) / "c", 400)
        argv = CLI + ["grade", str(cls), "--rubric", str(cls / "rubric.toml"), "--jobs", "2"]
        for name, sig in (("SIGKILL", signal.SIGKILL), ("SIGTERM", signal.SIGTERM),
                          ("Ctrl-C", signal.SIGINT)):
            seen = alive = codes = 0
            for _ in range(trials):
                p = subprocess.Popen(argv, env=ENV, start_new_session=True, cwd=d,
                                     stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
                try:
                    _until(lambda pid=p.pid: len(session_processes(pid)) >= 3, 120)
                    seen += len(session_processes(p.pid)) - 1
                    (os.killpg if sig == signal.SIGINT else os.kill)(p.pid, sig)
                    p.wait(timeout=120)
                    codes += p.returncode == (130 if sig == signal.SIGINT else -sig)
                    time.sleep(5)
                    alive += len(session_processes(p.pid))
                finally:
                    for q in session_processes(p.pid):
                        os.kill(q, signal.SIGKILL)
            print(f"orphans after {name}: {trials} runs, {seen} workers seen, {alive} alive 5 s "
                  f"after the parent ended; expected exit status in {codes} of {trials}")


if __name__ == "__main__":
    writers(int(sys.argv[1]) if len(sys.argv) > 1 else 10)
    orphans(int(sys.argv[2]) if len(sys.argv) > 2 else 5)
