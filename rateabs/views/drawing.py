"""Pictures drawn beside the analysis: processes that load matplotlib while the numbers are
computed, then draw a command's figures in parallel.

A fresh ``rates`` run spends about as long loading matplotlib as analysing a 96-well plate, and
each figure then costs a few tenths of a second of text layout and PNG encoding. On a machine
with two or more cores the drawing processes start when the command starts (they are forked
from it, so they hold the command's modules already), load matplotlib while the analysis runs,
and then draw the figures, split into parts, while the command writes its tables. The figures
are the same as when drawn here, byte for byte; they are only drawn sooner.

``rates`` draws in two parts; ``inspect`` has one figure, drawn by one process that loads
matplotlib while the file is read. ``--jobs 1`` (``rates`` with one file) or a one-core machine
draws here, one figure after another. The processes are
:class:`~rateabs.parallel.LocalPool` workers: they die with the command and are stopped at once
on an error or Ctrl-C.
"""

from __future__ import annotations

import importlib
import os
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

#: Drawing processes when pictures are drawn and ``--jobs`` does not say (at most the cores).
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


@contextmanager
def drawing_pool(processes: int) -> Iterator[Any]:
    """``with drawing_pool(n) as pool``: ``n`` warm drawing processes (None for ``n`` = 0),
    started at once so that they load matplotlib while the caller computes."""
    if processes < 1:
        yield None
        return
    from ..parallel import LocalPool, stopping

    for name in PARENT_MODULES:     # loaded once, before the fork, instead of in each process
        importlib.import_module(name)
    with stopping(LocalPool(processes, warm=WARM_MODULES)) as pool:
        pool.submit(os.getpid)      # starts every process (forked) and their warm-up
        yield pool


def draw_parts(pool, parts: Sequence[tuple[Callable, tuple]]) -> list:
    """Each part's result, in the order given: ``fn(*args)`` on the pool's processes, or here
    one after another without a pool. An error in a part is raised here, as if drawn here.

    The processes write no file: what a part writes comes back with its result and is written
    here, through the command's open run (:func:`rateabs.files.collected_writes`). A part whose
    process died (killed, out of memory) is drawn here instead."""
    from concurrent.futures.process import BrokenProcessPool

    from ..files import write_atomic

    if pool is None:
        return [fn(*args) for fn, args in parts]
    try:
        futures = [pool.submit(drawn_elsewhere, fn, args) for fn, args in parts]
    except BrokenProcessPool:
        return [fn(*args) for fn, args in parts]
    results = []
    for future, (fn, args) in zip(futures, parts, strict=True):
        try:
            result, files = future.result()
        except BrokenProcessPool:
            results.append(fn(*args))
            continue
        for path, data in files:
            write_atomic(path, data)
        results.append(result)
    return results


def drawn_elsewhere(fn: Callable, args: tuple) -> tuple[Any, list]:
    """``fn(*args)`` in a drawing process: its result and the files it would have written."""
    from ..files import collected_writes

    with collected_writes() as files:
        result = fn(*args)
    return result, files
