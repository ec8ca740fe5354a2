"""Pictures drawn beside the analysis: a process that loads matplotlib while the numbers are
computed, then draws a command's figures, split into parts, in parallel.

A fresh ``rates`` run spends about as long loading matplotlib as analysing a 96-well plate, and
each figure then costs a few tenths of a second of text layout and PNG encoding. On a machine
with two or more cores one drawing process starts when the command starts (forked from it, so
it holds the command's modules already) and loads matplotlib while the analysis runs. When the
figures are wanted it draws the first part itself and forks a child per further part
(:func:`rateabs.parallel.forked`): the children start warm, so only one process pays for the
loading, and the command's analysis shares the cores with one process instead of several. The
figures are the same as when drawn here, byte for byte; they are only drawn sooner.

``rates`` draws in two parts; ``inspect`` has one figure. ``--jobs 1`` (``rates`` with one
file) or a one-core machine draws here, one figure after another. The drawing process is a
:class:`~rateabs.parallel.LocalPool` worker and its children die with it: nothing outlives the
command, and an error or Ctrl-C stops them at once.
"""

from __future__ import annotations

import importlib
import os
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

#: Parts drawn at once when pictures are drawn and ``--jobs`` does not say (at most the cores).
DRAWING_PROCESSES = 2

#: What a drawing process loads while the analysis runs.
WARM_MODULES = ("rateabs.plots.rates", "rateabs.plots.inspect", "rateabs.plots.style:warm_up")

#: What the command loads before the drawing processes are forked: the analysis needs it, and
#: the processes need it to take in what they draw.
PARENT_MODULES = ("pandas", "rateabs.rates", "rateabs.layout", "rateabs.io")


def drawing_processes(jobs: int | None, wanted: bool, parts: int = 2) -> int:
    """How many processes draw: none when no pictures are drawn, when ``jobs`` (else
    :data:`DRAWING_PROCESSES`) is 1 or the machine has one core; else that many, at most the
    cores and the command's ``parts``."""
    n = DRAWING_PROCESSES if jobs is None else jobs
    cores = os.cpu_count() or 1
    if not wanted or n < 2 or cores < 2:
        return 0
    return min(n, cores, parts)


class DrawingProcess:
    """One warm drawing process (a :class:`~rateabs.parallel.LocalPool` of one) that draws up
    to ``at_once`` parts at the same time, forking a child per part beyond the first."""

    def __init__(self, at_once: int) -> None:
        from ..parallel import LocalPool

        self.at_once = at_once
        self.pool = LocalPool(1, warm=WARM_MODULES)

    def submit(self, fn, /, *args, **kwargs):
        """Schedule ``fn(*args, **kwargs)`` on the drawing process."""
        return self.pool.submit(fn, *args, **kwargs)

    @property
    def pids(self) -> list[int]:
        """Process id of the drawing process, once started."""
        return self.pool.pids

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        """Shut down once its work is done."""
        self.pool.shutdown(wait=wait, cancel_futures=cancel_futures)

    def terminate(self) -> None:
        """End the drawing process (and so its children) now."""
        self.pool.terminate()


@contextmanager
def drawing_pool(processes: int, modules: Sequence[str] = PARENT_MODULES,
                 fork_first: bool = False) -> Iterator[DrawingProcess | None]:
    """``with drawing_pool(n) as pool``: a warm drawing process that draws ``n`` parts at once
    (None for ``n`` = 0), started at once so that it loads matplotlib while the caller
    computes. The command's ``modules`` are loaded too, with or without pictures, and kept
    out of the garbage collector's way (:func:`settle_loaded`): before the process is forked
    (it then holds them, for what it draws from them), or, with ``fork_first``, after it, in
    the command alone, while the process loads matplotlib. ``fork_first`` is for figures drawn
    from plain arrays (``rates``: :mod:`rateabs.plots.rate_data`), which the process takes in
    without pandas: on the 96-well sample plate it is warm about 0.2 s sooner."""
    if processes < 1 or not fork_first:
        _load(modules)
    if processes < 1:
        yield None
        return
    from ..parallel import stopping

    with stopping(DrawingProcess(processes)) as pool:
        pool.submit(os.getpid)      # starts the process (forked) and its warm-up
        if fork_first:
            _load(modules)
        yield pool


def _load(modules: Sequence[str]) -> None:
    """Load the command's modules (once, instead of in each process) and settle them."""
    for name in modules:
        importlib.import_module(name)
    settle_loaded()


def draw_parts(pool: DrawingProcess | None, parts: Sequence[tuple[Callable, tuple]]) -> list:
    """Each part's result, in the order given: ``fn(*args)`` on the drawing process (and its
    forked children), or here one after another without one. An error in a part is raised
    here, as if drawn here.

    The processes write no file: what a part writes comes back with its result and is written
    here, through the command's open run (:func:`rateabs.files.collected_writes`). A part whose
    child died is drawn again by the drawing process; if the drawing process itself died
    (killed, out of memory), every part is drawn here."""
    from concurrent.futures.process import BrokenProcessPool

    from ..files import write_atomic

    if pool is None:
        return [fn(*args) for fn, args in parts]
    try:
        drawn = pool.submit(drawn_at_once, list(parts), pool.at_once).result()
    except BrokenProcessPool:
        return [fn(*args) for fn, args in parts]
    results = []
    for result, files in drawn:
        for path, data in files:
            write_atomic(path, data)
        results.append(result)
    return results


def drawn_at_once(parts: list[tuple[Callable, tuple]], at_once: int) -> list[tuple[Any, list]]:
    """In the drawing process: each part's result and the files it would have written, the
    parts dealt out to ``at_once`` lanes (this process and children forked from it,
    :func:`rateabs.parallel.in_lanes`); a lane whose child died is drawn here. An error in a
    part is raised (the first lane's first)."""
    from functools import partial

    from ..parallel import in_lanes

    settle_loaded()         # the parts and matplotlib, before the lanes fork
    return in_lanes([partial(drawn_elsewhere, fn, args) for fn, args in parts], at_once)


#: Whether this process runs one command and ends (the command line; set by
#: :func:`one_command_process`): only then is the loaded heap frozen (:func:`settle_loaded`).
_ONE_COMMAND = False


def one_command_process() -> None:
    """Say that this process runs one command and ends (``rateabs`` from a shell)."""
    global _ONE_COMMAND
    _ONE_COMMAND = True


def settle_loaded() -> None:
    """In a process that runs one command (:func:`one_command_process`), move everything
    loaded so far (modules, the parts to draw) out of the cyclic garbage collector's way
    (``gc.freeze``): a full collection then no longer walks pandas, scipy and matplotlib, only
    what the command makes afterwards, and a forked child does not write to the pages it shares
    with its parent to do so. On the 1536-well benchmark plate the collections after loading
    took 0.075 s before, 0.03 s after. A frozen reference cycle that becomes garbage is only
    freed when the process ends, which is why a library user's session (or the test runner,
    which runs many commands in one process) is left alone."""
    import gc

    if _ONE_COMMAND:
        gc.freeze()


def drawn_elsewhere(fn: Callable, args: tuple) -> tuple[Any, list]:
    """``fn(*args)`` in a drawing process: its result and the files it would have written."""
    from ..files import collected_writes

    with collected_writes() as files:
        result = fn(*args)
    return result, files
