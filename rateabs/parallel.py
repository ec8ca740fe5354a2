"""One way to run batch work: here, on local processes, or on an existing Dask cluster.

::

    with open_executor(jobs=2) as ex:              # or scheduler="tcp://10.0.0.5:8786"
        for done in run(fn, items, ex, progress=bar.update):
            ...                                    # done.index, done.value or done.error

* :func:`open_executor` builds the executor from a ``jobs``/``scheduler`` pair, checked as the
  command line gives them: ``None`` for serial work (one job), a :class:`LocalPool` of worker
  processes (default: one per CPU), or a :class:`ClusterExecutor` on a Dask distributed
  scheduler (``pip install "rateabs[cluster]"``). Any ``concurrent.futures.Executor`` serves.
* :func:`run` submits the work and yields an :class:`Outcome` per item **in submission
  order**, each as soon as it and every earlier one are done, whatever ran where; a failed item
  is an outcome with its error, not the end of the batch. ``progress(1)`` is called as each item
  finishes, in any order.
* Workers get what ``fn`` and the items hold (file paths, small settings), never file bytes:
  they read their files themselves.

Workers die with their parent. A :class:`LocalPool` worker ignores Ctrl-C (the parent handles
it and stops the workers), asks the Linux kernel to kill it when its parent dies
(``prctl(PR_SET_PDEATHSIG)``), and watches ``os.getppid()`` from a thread everywhere, so a
parent ended by SIGKILL or SIGTERM leaves no worker behind for more than a fraction of a second.
Ctrl-C raises :class:`BatchInterrupted` (a ``KeyboardInterrupt``) saying how much was done,
also when it landed where Python swallows it (:func:`ctrl_c_remembered`).

Layer: low (standard library only; Dask is imported when a scheduler is asked for).
"""

from __future__ import annotations

import importlib
import multiprocessing
import os
import re
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Executor, Future, ProcessPoolExecutor, wait
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

from .errors import UsageError

#: At most this many items are submitted and not yet yielded (bounds the memory of a batch).
DEFAULT_AHEAD = 256
#: How often a worker checks that its parent is still there (seconds).
WATCH_INTERVAL_S = 0.2
#: How long to wait for a Dask scheduler to answer (seconds).
CONNECT_TIMEOUT_S = 10.0
INSTALL_HINT = ('install it with: pip install "rateabs[cluster]" (in a rateabs checkout: pip install '
                '".[cluster]"; or pip install "dask[distributed]")')
ADDRESS_EXAMPLE = "e.g. --scheduler tcp://10.0.0.5:8786 or --scheduler 10.0.0.5:8786"
_PR_SET_PDEATHSIG = 1


@dataclass(frozen=True)
class Outcome:
    """One item's result: its position in the batch, and its value or the error it raised."""

    index: int
    value: Any = None
    error: BaseException | None = None

    @property
    def ok(self) -> bool:
        """True when the item gave a value."""
        return self.error is None


class BatchInterrupted(KeyboardInterrupt):
    """Ctrl-C during a batch; the message says how much was done."""

    def __init__(self, done: int, total: int | None) -> None:
        self.done, self.total = done, total
        of = f" of {total}" if total is not None else ""
        super().__init__(f"{done}{of} item(s) finished before Ctrl-C; the workers were stopped")


# --------------------------------------------------------------------------- checks


def check_jobs(jobs: int | str | None) -> int:
    """Number of worker processes: a whole number of at least 1; default one per CPU."""
    n = os.cpu_count() or 1
    if jobs is None:
        return n
    if isinstance(jobs, str) and jobs.strip().isdigit():
        jobs = int(jobs)
    if isinstance(jobs, bool) or not isinstance(jobs, int):
        raise UsageError(f"--jobs {jobs!r} is not a whole number", f"use 1 to {n}, e.g. --jobs 2")
    if jobs < 1:
        raise UsageError("--jobs must be at least 1", f"use 1 to {n}, e.g. --jobs 2")
    return jobs


_ADDRESS = re.compile(r"^(?:tcp://)?(?P<host>\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9](?:[A-Za-z0-9.-]*"
                      r"[A-Za-z0-9])?):(?P<port>\d{1,5})$")


def check_scheduler(address: str) -> str:
    """A Dask scheduler address as ``tcp://host:port`` (``host:port`` is accepted too)."""
    m = _ADDRESS.match(str(address).strip())
    if not m or not 1 <= int(m["port"]) <= 65535:
        raise UsageError(f"--scheduler {address!r} is not a scheduler address (tcp://host:port)",
                         ADDRESS_EXAMPLE)
    return f"tcp://{m['host']}:{int(m['port'])}"


def describe(executor: Executor | None) -> str:
    """Where the work runs, for the settings of a document: 'serial', '2 local processes'..."""
    if executor is None:
        return "serial (this process)"
    if isinstance(executor, LocalPool):
        return f"{executor.jobs} local processes"
    if isinstance(executor, ClusterExecutor):
        return f"Dask cluster at {executor.address}"
    return type(executor).__name__


def slots(executor: Executor | None) -> int:
    """How many items the executor runs at once: 1 here, the pool's processes, or the threads
    of the cluster's workers (at least 1; ``os.cpu_count()`` for another executor)."""
    if executor is None:
        return 1
    if isinstance(executor, LocalPool):
        return executor.jobs
    if isinstance(executor, ClusterExecutor):
        return max(1, sum(executor.client.nthreads().values()))
    return os.cpu_count() or 1


# --------------------------------------------------------------------------- executors


def make_executor(jobs: int | str | None = None, scheduler: str | None = None) -> Executor | None:
    """The executor for a ``jobs``/``scheduler`` pair (None: serial). The caller shuts it down;
    :func:`open_executor` does so itself and stops the workers at once on an error or Ctrl-C."""
    if scheduler is not None:
        if jobs is not None:
            raise UsageError("--jobs and --scheduler were both given",
                             "give --scheduler to run on the cluster, or --jobs for local "
                             "processes")
        return ClusterExecutor(check_scheduler(scheduler))
    n = check_jobs(jobs)
    return None if n == 1 else LocalPool(n)


@contextmanager
def open_executor(jobs: int | str | None = None,
                  scheduler: str | None = None) -> Iterator[Executor | None]:
    """``with open_executor(jobs, scheduler) as ex``: the executor, stopped on leaving.

    Leaving normally waits for submitted work; leaving by an exception (Ctrl-C included) stops
    local workers at once and cancels cluster work.
    """
    ex = make_executor(jobs, scheduler)
    if ex is None:
        yield None
        return
    with stopping(ex):
        yield ex


@contextmanager
def stopping(ex) -> Iterator:
    """``with stopping(ex)``: an executor of this module (:class:`LocalPool` or
    :class:`ClusterExecutor`), shut down on leaving once its work is done, and stopped at once
    when left by an exception (Ctrl-C included)."""
    try:
        yield ex
    except BaseException:
        ex.terminate()
        raise
    ex.shutdown(wait=True)


class _TrackingContext:
    """A multiprocessing context that remembers the processes it starts (the pool's workers)."""

    def __init__(self, base) -> None:
        self.base = base
        self.started: list = []

    def __getattr__(self, name):
        return getattr(self.base, name)

    def Process(self, *args, **kwargs):  # noqa: N802 - the multiprocessing context's name
        """A process of the base context, remembered."""
        p = self.base.Process(*args, **kwargs)
        self.started.append(p)
        return p


class LocalPool(Executor):
    """Worker processes on this machine that die with their parent and can be stopped at once.

    Built on ``concurrent.futures.ProcessPoolExecutor`` with the default start method. The
    Linux parent-death signal follows the thread that started the workers: submit from a thread
    that lives as long as the pool (as :func:`run` does).
    """

    def __init__(self, jobs: int, warm: tuple[str, ...] = ()) -> None:
        self.jobs = check_jobs(jobs)
        self._ctx = _TrackingContext(multiprocessing.get_context())
        self._pool = ProcessPoolExecutor(max_workers=self.jobs, mp_context=self._ctx,
                                         initializer=worker_start,
                                         initargs=(os.getpid(), warm))

    def submit(self, fn, /, *args, **kwargs) -> Future:
        """Schedule ``fn(*args, **kwargs)`` on a worker."""
        return self._pool.submit(fn, *args, **kwargs)

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        """Shut down like ``ProcessPoolExecutor.shutdown``."""
        self._pool.shutdown(wait=wait, cancel_futures=cancel_futures)

    @property
    def pids(self) -> list[int]:
        """Process ids of the workers started so far."""
        return [p.pid for p in self._ctx.started if p.pid is not None]

    def terminate(self) -> None:
        """Cancel what has not started and end every worker now (SIGTERM, then SIGKILL)."""
        self._pool.shutdown(wait=False, cancel_futures=True)
        alive = [p for p in self._ctx.started if p.is_alive()]
        for p in alive:
            p.terminate()
        for p in alive:
            p.join(timeout=2.0)
            if p.is_alive():
                p.kill()
                p.join(timeout=2.0)


def worker_start(creator: int, warm: tuple[str, ...] = ()) -> None:
    """Run in each local worker before any task: die with the parent, leave Ctrl-C to it, and
    import the ``warm`` modules (so that the first task does not wait for them)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _ask_kernel_for_death_signal()
    parent = os.getppid()
    if parent != creator and not alive(creator):    # the parent died before we got here
        os._exit(1)
    threading.Thread(target=_watch_parent, args=(parent,), name="rateabs-parent-watch",
                     daemon=True).start()
    for name in warm:       # "module" or "module:function" (called with no arguments)
        module, _, call = name.partition(":")
        loaded = importlib.import_module(module)
        if call:
            getattr(loaded, call)()


def forked(calls: Sequence[Callable[[], Any]]) -> list[Outcome]:
    """Each call's :class:`Outcome` (``index`` is its place in ``calls``): the first is run here,
    every other at the same time in a child forked from this process, so that it starts with
    everything this process has loaded (a warm worker's modules, caches and fonts).

    A child dies with this process and sends its value, or its error, back through a pipe. A
    child that died without an answer (killed, out of memory) gives an outcome whose ``error``
    is a :class:`ChildDied`; the caller may run that call again here. POSIX only (``os.fork``).
    """
    import pickle

    children = [_fork_one(call) for call in calls[1:]]
    outcomes = [_outcome(0, calls[0])] if calls else []
    for i, (pid, fd) in enumerate(children, start=1):
        with os.fdopen(fd, "rb") as pipe:
            data = pipe.read()
        os.waitpid(pid, 0)
        try:
            got = pickle.loads(data)
        except Exception:       # nothing or half an answer: the child died
            got = Outcome(i, error=ChildDied(f"forked child {pid} died"))
        outcomes.append(Outcome(i, got.value, got.error))
    return outcomes


#: How many lanes (this process and forked children) a long computation over many traces may
#: split into: 1 unless the command says its process may use more (:func:`lanes_allowed`).
_LANES = 1


@contextmanager
def lanes_allowed(n: int) -> Iterator[None]:
    """Within the block, computations over many traces may run in ``n`` lanes at once (this
    process and forked children, :func:`in_lanes`); at most the cores. A command that runs in
    its own process says so; a batch worker, which shares the cores with its siblings, does
    not."""
    global _LANES
    before, _LANES = _LANES, max(1, min(int(n), os.cpu_count() or 1))
    try:
        yield
    finally:
        _LANES = before


def lanes() -> int:
    """The lanes a computation may use now (see :func:`lanes_allowed`)."""
    return _LANES if hasattr(os, "fork") else 1


def in_lanes(calls: Sequence[Callable[[], Any]], n: int | None = None) -> list:
    """Each call's value, in order: the calls dealt out to ``n`` lanes (else :func:`lanes`;
    this process and children forked from it, :func:`forked`), or run here one after another
    with one lane. An error is raised here as if run here (the first lane's first); a lane
    whose child died is run here."""
    from functools import partial

    n = min(lanes() if n is None else n, len(calls)) if hasattr(os, "fork") else 1
    if n < 2:
        return [call() for call in calls]
    deal = [list(range(k, len(calls), n)) for k in range(n)]
    runs = [partial(_run_all, [calls[i] for i in lane]) for lane in deal]
    values: dict[int, Any] = {}
    for lane, run, outcome in zip(deal, runs, forked(runs), strict=True):
        if isinstance(outcome.error, ChildDied):
            outcome = Outcome(outcome.index, run())
        if outcome.error is not None:
            raise outcome.error
        values.update(zip(lane, outcome.value, strict=True))
    return [values[i] for i in range(len(calls))]


def _run_all(calls: Sequence[Callable[[], Any]]) -> list:
    return [call() for call in calls]


class ChildDied(RuntimeError):
    """A forked child ended without sending its answer (see :func:`forked`)."""


def _outcome(index: int, call: Callable[[], Any]) -> Outcome:
    try:
        return Outcome(index, call())
    except Exception as err:    # noqa: BLE001 - handed to the caller, who raises it
        return Outcome(index, error=err)


def _fork_one(call: Callable[[], Any]) -> tuple[int, int]:
    """Fork a child that runs ``call`` and writes its pickled outcome to a pipe: (pid, read end)."""
    import pickle

    parent = os.getpid()
    read, write = os.pipe()
    pid = os.fork()
    if pid:
        os.close(write)
        return pid, read
    try:                        # the child: never returns
        os.close(read)
        _ask_kernel_for_death_signal()
        if os.getppid() != parent:
            os._exit(1)
        outcome = _outcome(0, call)
        try:
            data = pickle.dumps(outcome)
        except Exception as err:    # noqa: BLE001 - an unpicklable value or error
            data = pickle.dumps(Outcome(0, error=RuntimeError(f"{type(err).__name__}: {err}")))
        with os.fdopen(write, "wb") as pipe:
            pipe.write(data)
    finally:
        os._exit(0)


def _ask_kernel_for_death_signal() -> None:
    """Linux: SIGKILL this process when its parent ends (elsewhere the watch thread does it)."""
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
    except (OSError, AttributeError):
        pass


def _watch_parent(parent: int) -> None:
    while True:
        time.sleep(WATCH_INTERVAL_S)
        if os.getppid() != parent:
            os._exit(1)


def alive(pid: int) -> bool:
    """Whether process ``pid`` runs. A zombie (ended, not yet reaped by its parent) does not:
    a worker forked just before its parent was killed sees the parent as a zombie, and must
    end rather than watch the process it was handed to (Linux: read from /proc)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    try:
        with open(f"/proc/{pid}/stat") as f:     # proc(5): the state follows the name's ")"
            state = f.read().rsplit(")", 1)[1].split()[0]
    except (OSError, IndexError):
        return True                             # no /proc: alive as far as we can tell
    return state not in ("Z", "X")


class ClusterExecutor(Executor):
    """Work on an existing Dask distributed cluster, as a ``concurrent.futures.Executor``.

    Connects a ``distributed.Client`` to ``address`` and submits through its executor
    (``Client.get_executor``); tasks are not deduplicated (``pure=False``). The cluster's
    workers need rateabs installed and must see the files the tasks name.
    """

    def __init__(self, address: str, timeout: float = CONNECT_TIMEOUT_S) -> None:
        try:
            from distributed import Client
        except ImportError:
            raise UsageError("running on a Dask scheduler needs the 'distributed' package",
                             INSTALL_HINT) from None
        self.address = check_scheduler(address)
        try:
            self.client = Client(self.address, timeout=timeout, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise UsageError(f"no Dask scheduler answered at {self.address} within "
                             f"{timeout:g} s ({type(exc).__name__})",
                             "check the address and that the scheduler runs; "
                             + ADDRESS_EXAMPLE) from None
        self._ex = self.client.get_executor(pure=False)

    def submit(self, fn, /, *args, **kwargs) -> Future:
        """Schedule ``fn(*args, **kwargs)`` on the cluster."""
        return self._ex.submit(fn, *args, **kwargs)

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        """Wait for (or cancel) the submitted work and disconnect from the scheduler."""
        try:
            self._ex.shutdown(wait=wait and not cancel_futures)
        finally:
            self.client.close()

    def terminate(self) -> None:
        """Cancel the submitted work and disconnect."""
        self.shutdown(wait=False)


# --------------------------------------------------------------------------- running


def run(fn: Callable[[Any], Any], items: Iterable, executor: Executor | None = None,
        progress: Callable[[int], Any] | None = None,
        ahead: int = DEFAULT_AHEAD) -> Iterator[Outcome]:
    """``fn(item)`` for every item, as :class:`Outcome` objects in the items' order.

    Without an executor the items run here, one by one. With one, at most ``ahead`` items are
    in flight or waiting for an earlier one; each is yielded once it and all before it are done.
    """
    total = len(items) if hasattr(items, "__len__") else None
    counter = [0]

    def tick() -> None:
        counter[0] += 1
        if progress is not None:
            progress(1)

    steps = _here(fn, items, tick) if executor is None else \
        _there(fn, items, executor, tick, max(1, ahead))
    try:
        with ctrl_c_remembered() as pressed:
            for outcome in steps:
                yield outcome
                if pressed():       # a Ctrl-C that was swallowed (see ctrl_c_remembered)
                    raise KeyboardInterrupt
    except KeyboardInterrupt:
        raise BatchInterrupted(counter[0], total) from None


@contextmanager
def ctrl_c_remembered() -> Iterator[Callable[[], bool]]:
    """``with ctrl_c_remembered() as pressed``: Ctrl-C raises ``KeyboardInterrupt`` as usual,
    and ``pressed()`` says afterwards whether it came. Python swallows an exception raised
    while it runs a finalizer (it prints "Exception ignored in ..."), so a Ctrl-C that lands
    there would be lost; a batch asks ``pressed()`` between items and stops all the same.
    Outside the main thread, or where Ctrl-C is not Python's default, nothing changes."""
    seen = [False]
    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGINT) is not signal.default_int_handler):
        yield lambda: seen[0]
        return

    def handler(signum, frame):
        seen[0] = True
        raise KeyboardInterrupt

    signal.signal(signal.SIGINT, handler)
    try:
        yield lambda: seen[0]
    finally:
        signal.signal(signal.SIGINT, signal.default_int_handler)


def _here(fn, items, tick) -> Iterator[Outcome]:
    for i, item in enumerate(items):
        try:
            out = Outcome(i, fn(item))
        except Exception as exc:  # one item's failure is its outcome, as on a worker
            out = Outcome(i, error=exc)
        tick()
        yield out


def _there(fn, items, executor: Executor, tick, ahead: int) -> Iterator[Outcome]:
    source = enumerate(items)
    pending: dict[Future, int] = {}
    finished: dict[int, Outcome] = {}
    following, exhausted = 0, False
    try:
        while True:
            while not exhausted and len(pending) + len(finished) < ahead:
                nxt = next(source, None)
                if nxt is None:
                    exhausted = True
                else:
                    pending[executor.submit(fn, nxt[1])] = nxt[0]
            if following in finished:
                yield finished.pop(following)
                following += 1
                continue
            if not pending:
                return
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for f in done:
                i = pending.pop(f)
                try:
                    finished[i] = Outcome(i, f.result())
                except Exception as exc:  # includes a worker that died
                    finished[i] = Outcome(i, error=exc)
                tick()
    finally:
        for f in pending:
            f.cancel()
