"""The executor seam (rateabs.parallel): one way to run batch work serially, on local processes
or on a Dask cluster; results in submission order; workers that die with their parent.

Every process test runs real processes with bounded waits and no wall-clock assertion.
"""

from __future__ import annotations

import json
import os
import pickle
import signal
import subprocess
import sys
import textwrap
import time
from concurrent.futures import Executor, ThreadPoolExecutor
from pathlib import Path

import pytest
from helpers import session_processes

from rateabs.errors import UsageError
from rateabs.grade import grade_class, read_rubric
from rateabs.parallel import (
    BatchInterrupted,
    ClusterExecutor,
    LocalPool,
    check_jobs,
    check_scheduler,
    make_executor,
    open_executor,
    run,
)
from rateabs.simulate import first_order_class

ROOT = Path(__file__).resolve().parents[1]
CLASS = ROOT / "sample_runs" / "class_kestrel_red"
ENV = {**os.environ, "PYTHONPATH": str(ROOT)}
LINUX = sys.platform.startswith("linux")


# --------------------------------------------------------------------------- checks


@pytest.mark.parametrize("given, n", [(1, 1), (2, 2), ("3", 3), (None, os.cpu_count() or 1)])
def test_jobs_accepted(given, n):
    assert check_jobs(given) == n


@pytest.mark.parametrize("given", [0, -1, 1.5, True, "two", ""])
def test_jobs_refused_with_an_example(given):
    with pytest.raises(UsageError) as e:
        check_jobs(given)
    assert "--jobs" in e.value.one_line() and "e.g. --jobs 2" in e.value.one_line()


@pytest.mark.parametrize("given, norm", [
    ("tcp://10.0.0.5:8786", "tcp://10.0.0.5:8786"), ("10.0.0.5:8786", "tcp://10.0.0.5:8786"),
    ("sched-1.lab.example:8786", "tcp://sched-1.lab.example:8786"),
    ("[::1]:8786", "tcp://[::1]:8786"), (" localhost:1 ", "tcp://localhost:1")])
def test_scheduler_address_shapes(given, norm):
    assert check_scheduler(given) == norm


@pytest.mark.parametrize("given", ["10.0.0.5", "http://10.0.0.5:8786", "tcp://host:0",
                                   "tcp://host:70000", "tcp://:8786", "host:port", "a b:1",
                                   "tls://10.0.0.5:8786"])
def test_scheduler_address_refused_with_an_example(given):
    with pytest.raises(UsageError) as e:
        check_scheduler(given)
    assert "e.g. --scheduler tcp://10.0.0.5:8786" in e.value.one_line()


def test_jobs_and_scheduler_together_refused():
    with pytest.raises(UsageError, match="both"):
        make_executor(jobs=2, scheduler="tcp://127.0.0.1:8786")


def test_one_job_is_serial_and_more_are_local_processes():
    assert make_executor(1) is None
    with open_executor(2) as ex:
        assert isinstance(ex, LocalPool) and ex.jobs == 2


def test_without_distributed_the_scheduler_says_how_to_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)      # import fails as if missing
    with pytest.raises(UsageError) as e:
        make_executor(scheduler="tcp://127.0.0.1:8786")
    line = e.value.one_line()
    assert "\n" not in line and 'pip install "rateabs[cluster]"' in line


def test_unreachable_scheduler_is_one_line():
    pytest.importorskip("distributed")
    import socket

    with socket.socket() as s:                                  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    with pytest.raises(UsageError) as e:
        ClusterExecutor(f"127.0.0.1:{port}", timeout=2)
    assert "no Dask scheduler answered" in e.value.one_line()


# --------------------------------------------------------------------------- order, errors


def slow_square(x: int) -> int:
    """Later items finish first (sleeps shrink with x); 7 fails."""
    time.sleep(0.02 * (6 - x % 6))
    if x == 7:
        raise ValueError("seven")
    return x * x


def test_order_progress_and_failures_same_serial_and_on_processes():
    got = {}
    for jobs in (1, 2):
        ticks = []
        with open_executor(jobs) as ex:
            got[jobs] = [(o.index, o.value, type(o.error).__name__ if o.error else None)
                         for o in run(slow_square, range(14), ex, progress=ticks.append)]
        assert sum(ticks) == 14
    want = [(i, None if i == 7 else i * i, "ValueError" if i == 7 else None) for i in range(14)]
    assert got[1] == want and got[2] == want


def wait_for_file(path: str) -> str:
    """Return once ``path`` exists (bounded: 'timed out' after 60 s)."""
    for _ in range(600):
        if os.path.exists(path):
            return "released"
        time.sleep(0.1)
    return "timed out"


def test_results_are_consumed_as_they_arrive(tmp_path):
    # the last item waits for a file that the consumer creates only after it has received the
    # first result: a run() that held results back until the end would time out
    gate = tmp_path / "gate"
    items = [str(tmp_path / "exists")] + [str(gate)]
    (tmp_path / "exists").touch()
    with open_executor(2) as ex:
        outcomes = run(wait_for_file, items, ex)
        first = next(outcomes)
        gate.touch()
        rest = list(outcomes)
    assert (first.index, first.value) == (0, "released")
    assert [(o.index, o.value) for o in rest] == [(1, "released")]


class CountingExecutor(Executor):
    """Threads, counting how many submitted items are not yet collected."""

    def __init__(self):
        self.inner, self.submitted = ThreadPoolExecutor(2), 0

    def submit(self, fn, /, *args, **kwargs):
        self.submitted += 1
        return self.inner.submit(fn, *args, **kwargs)

    def shutdown(self, wait=True, *, cancel_futures=False):
        self.inner.shutdown(wait=wait, cancel_futures=cancel_futures)


def test_at_most_ahead_items_in_flight():
    ex = CountingExecutor()
    peak = 0
    with ex:
        for n, _ in enumerate(run(abs, range(-20, 0), ex, ahead=3)):
            peak = max(peak, ex.submitted - n)
    assert peak <= 3 and ex.submitted == 20


def test_interrupt_in_a_batch_says_how_much_was_done():
    def stop_at_three(x):
        if x == 3:
            raise KeyboardInterrupt
        return x

    with pytest.raises(BatchInterrupted) as e:
        list(run(stop_at_three, range(10)))
    assert isinstance(e.value, KeyboardInterrupt)
    assert "3 of 10 item(s) finished before Ctrl-C" in str(e.value)


# --------------------------------------------------------------------------- grade_class


def _scores(results):
    return [{k: v for k, v in r.items() if k != "png"} for r in results]


def test_grade_class_identical_serial_processes_and_threads(tmp_path):
    first_order_class(tmp_path / "c", 10, minutes_slip_every=4)
    rub = read_rubric(tmp_path / "c" / "rubric.toml")
    serial = grade_class(tmp_path / "c", rub, plots=False)
    with open_executor(2) as ex:
        local = grade_class(tmp_path / "c", rub, executor=ex, plots=False)
    with ThreadPoolExecutor(2) as ex:                          # any Executor still works
        threads = grade_class(tmp_path / "c", rub, executor=ex, plots=False)
    assert _scores(serial) == _scores(local) == _scores(threads)
    assert [r["student"] for r in local] == [f"s{i:03d}" for i in range(10)]


# --------------------------------------------------------------------------- Dask


def where_am_i(_):
    import rateabs

    return os.getpid(), str(Path(rateabs.__file__).resolve().parents[1])


@pytest.mark.xdist_group("dask")          # one cluster for the session
def test_dask_workers_are_other_processes_running_this_checkout(dask_scheduler):
    with open_executor(scheduler=dask_scheduler) as ex:
        got = [o.value for o in run(where_am_i, range(6), ex)]
    assert all(pid != os.getpid() for pid, _ in got)
    assert {root for _, root in got} == {str(ROOT)}


class PayloadSpy(Executor):
    """Wraps an executor and keeps the pickled payload of every submitted call."""

    def __init__(self, inner):
        self.inner, self.payloads = inner, []

    def submit(self, fn, /, *args, **kwargs):
        self.payloads.append(pickle.dumps((fn, args, kwargs)))
        return self.inner.submit(fn, *args, **kwargs)

    def shutdown(self, wait=True, *, cancel_futures=False):
        self.inner.shutdown(wait=wait, cancel_futures=cancel_futures)


@pytest.mark.xdist_group("dask")          # one cluster for the session
def test_serial_local_and_dask_give_identical_grades_and_ship_paths_not_bytes(
        tmp_path, dask_scheduler):
    folder = first_order_class(tmp_path / "c", 12, seed=3, minutes_slip_every=5)
    rub = read_rubric(folder / "rubric.toml")
    serial = grade_class(folder, rub, plots=False)
    with open_executor(2) as ex:
        local = grade_class(folder, rub, executor=ex, plots=False)
    with open_executor(scheduler=dask_scheduler) as ex:
        spy = PayloadSpy(ex)
        dask = grade_class(folder, rub, executor=spy, plots=False)
    assert _scores(serial) == _scores(local) == _scores(dask)
    assert json.dumps(_scores(dask), sort_keys=True) == json.dumps(_scores(serial),
                                                                   sort_keys=True)
    # each call carries its run's path; none carries the run's readings
    assert len(spy.payloads) == 12
    for i, payload in enumerate(spy.payloads):
        data = (folder / f"r{i}.csv").read_bytes()
        assert str(folder / f"r{i}.csv").encode() in payload
        assert data.splitlines()[5] not in payload and len(payload) < len(data)


@pytest.mark.xdist_group("dask")          # one cluster for the session
def test_sample_class_identical_on_dask(dask_scheduler, tmp_path):
    # five of the sample class's runs (a run per Dask worker and more) keep the test short
    import shutil

    for name in ("rubric.toml", "run_01.csv", "run_02.csv", "run_03.csv", "run_04.csv",
                 "run_05.csv"):
        shutil.copy(CLASS / name, tmp_path / name)
    roster = (CLASS / "roster.csv").read_text().splitlines()
    (tmp_path / "roster.csv").write_text("\n".join(roster[:6]) + "\n")
    rub = read_rubric(tmp_path / "rubric.toml")
    serial = grade_class(tmp_path, rub, plots=False)
    with open_executor(scheduler=dask_scheduler) as ex:
        dask = grade_class(tmp_path, rub, executor=ex, plots=False)
    assert len(serial) == 5 and _scores(serial) == _scores(dask)


# --------------------------------------------------------------------------- parent death


def _wait_until(cond, limit_s: float = 60.0, every: float = 0.1) -> bool:
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        if cond():
            return True
        time.sleep(every)
    return cond()


SLOW_SCRIPT = textwrap.dedent("""
    import time
    from rateabs.parallel import open_executor, run

    def nap(x):
        time.sleep(120)
        return x

    if __name__ == "__main__":
        with open_executor(2) as ex:
            for o in run(nap, range(8), ex):
                print(o.index, flush=True)
""")


def _start(argv, cwd) -> subprocess.Popen:
    return subprocess.Popen(argv, cwd=cwd, env=ENV, start_new_session=True,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)


def _kill_and_count_survivors(p: subprocess.Popen, sig: int, n_workers: int = 2) -> tuple:
    try:
        assert _wait_until(lambda: len(session_processes(p.pid)) >= 1 + n_workers), \
            "the workers never started"
        workers = [q for q in session_processes(p.pid) if q != p.pid]
        os.kill(p.pid, sig)
        p.wait(timeout=60)
        _wait_until(lambda: not session_processes(p.pid), limit_s=15)
        return session_processes(p.pid), workers
    finally:
        for q in session_processes(p.pid):                              # never leave one behind
            os.kill(q, signal.SIGKILL)
        if p.poll() is None:
            p.kill()
            p.wait(timeout=30)


@pytest.mark.skipif(not LINUX, reason="reads /proc")
@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGTERM])
def test_seam_workers_die_with_their_parent(tmp_path, sig):
    script = tmp_path / "slow.py"
    script.write_text(SLOW_SCRIPT)
    p = _start([sys.executable, str(script)], tmp_path)
    survivors, workers = _kill_and_count_survivors(p, sig)
    assert len(workers) >= 2 and survivors == []


@pytest.fixture(scope="module")
def big_class(tmp_path_factory):
    return first_order_class(tmp_path_factory.mktemp("big") / "c", 400)


def _grade_argv(folder):
    return [sys.executable, "-m", "rateabs.cli", "grade", str(folder), "--rubric",
            str(folder / "rubric.toml"), "--jobs", "2"]


@pytest.mark.skipif(not LINUX, reason="reads /proc")
@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGTERM])
def test_killed_grade_leaves_no_worker(big_class, tmp_path, sig):
    p = _start(_grade_argv(big_class), tmp_path)
    survivors, workers = _kill_and_count_survivors(p, sig)
    assert len(workers) >= 2 and survivors == []


@pytest.mark.skipif(not LINUX, reason="reads /proc")
def test_ctrl_c_on_grade_exits_130_with_a_summary_and_no_worker(big_class, tmp_path):
    p = _start(_grade_argv(big_class), tmp_path)
    try:
        assert _wait_until(lambda: len(session_processes(p.pid)) >= 3), "the workers never started"
        os.killpg(p.pid, signal.SIGINT)                        # as a terminal's Ctrl-C does
        err = p.communicate(timeout=60)[1]
        assert _wait_until(lambda: not session_processes(p.pid), limit_s=15)
    finally:
        for q in session_processes(p.pid):
            os.kill(q, signal.SIGKILL)
    lines = [ln for ln in err.splitlines() if ln.startswith("rateabs:")]
    assert p.returncode == 130, err[-3000:]
    assert len(lines) == 1 and "interrupted" in lines[0] and "of 400 item(s) finished" in lines[0]
    assert "Traceback" not in err


class _CtrlCInFinalizer:
    """Ctrl-C sent to this process while Python runs this object's finalizer, where Python
    swallows the KeyboardInterrupt ("Exception ignored in ...")."""

    def __del__(self):
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(0.05)                    # the handler runs here, inside the finalizer


def _lose_ctrl_c(i):
    if i == 2:
        _CtrlCInFinalizer()                 # made and finalized at once
    return i


@pytest.mark.skipif(not LINUX, reason="signals to this process")
@pytest.mark.filterwarnings("ignore::pytest.PytestUnraisableExceptionWarning")
def test_a_ctrl_c_swallowed_by_a_finalizer_still_stops_the_batch():
    from rateabs.parallel import BatchInterrupted, run

    got = []
    with pytest.raises(BatchInterrupted, match="3 of 6"):
        for out in run(_lose_ctrl_c, list(range(6))):
            got.append(out.value)
    assert got == [0, 1, 2]                 # stopped after the item it came in, not at the end
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler   # restored


@pytest.mark.skipif(not LINUX, reason="reads /proc")
def test_a_zombie_parent_is_not_alive():
    # a worker forked just before its parent was killed finds the parent a zombie (ended, not
    # reaped); it must count as gone, or the worker outlives it (seen as a rare survivor)
    from rateabs.parallel import alive

    pid = os.fork()
    if pid == 0:
        os._exit(0)
    assert _wait_until(lambda: not alive(pid), limit_s=10)   # ended, still unreaped
    assert os.waitpid(pid, os.WNOHANG)[0] == pid              # it was a zombie until now
    assert alive(os.getpid())


def _boom():
    raise ValueError("lane 1 failed")


def test_in_lanes_keeps_the_order_and_raises_a_lanes_error_here():
    from functools import partial

    from rateabs.parallel import in_lanes, lanes_allowed

    calls = [partial(os.getpid)] + [partial(int, str(k)) for k in range(1, 6)]
    with lanes_allowed(2):
        got = in_lanes(calls)
        assert got[1:] == [1, 2, 3, 4, 5] and got[0] == os.getpid()
        with pytest.raises(ValueError, match="lane 1 failed"):
            in_lanes([partial(int, "0"), _boom])
    with lanes_allowed(1):                   # one lane: everything here, in order
        assert in_lanes([os.getpid, os.getpid]) == [os.getpid()] * 2
