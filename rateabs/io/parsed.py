"""What a shape reader hands back: the readings as arrays, and how each thing was decided."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .times import TimeUnit


@dataclass
class Parsed:
    """Readings of one table and the decisions taken while reading it.

    ``set_aside`` maps each column (or row) kept out of the traces to its role: ``temperature``,
    ``index`` (a counter of reads), ``time`` (another time column), ``text``, ``numbers``
    (other numbers of a long table) or ``empty-well`` (a well with no reading in any block).
    """

    layout: str
    names: list[str]
    times: np.ndarray            # (n_times,) shared by every trace, or (n_traces, n_times)
    values: np.ndarray           # (n_traces, n_times)
    flags: np.ndarray            # (n_traces, n_times) int8 codes of traces.FLAG_NAMES
    time: TimeUnit
    set_aside: dict[str, str] = field(default_factory=dict)          # name -> role
    extra: dict[str, np.ndarray] = field(default_factory=dict)       # numeric set-aside values
    per_trace: dict[str, dict] = field(default_factory=dict)         # column -> {trace: value}
    header_words: str = ""
    notes: list[str] = field(default_factory=list)
    plate: tuple[int | None, str | None] = (None, None)


class Grower:
    """Traces x times arrays filled chunk by chunk, allocated once from an estimate of the
    number of rows and grown (by half) only when the estimate falls short."""

    def __init__(self, n: int, estimate: int) -> None:
        self.n, self.m = n, 0
        cap = max(int(estimate), 16)
        self.values = np.empty((n, cap))
        self.flags = np.empty((n, cap), dtype=np.int8)
        self.times = np.empty(cap)
        self.lines = np.empty(cap, dtype=np.int64)

    def room(self, k: int) -> slice:
        """The slice of the next ``k`` rows, growing the arrays if needed."""
        need = self.m + k
        cap = self.times.size
        if need > cap:
            new = max(need, int(cap * 1.5))
            self.values = _grow(self.values, new)
            self.flags = _grow(self.flags, new)
            self.times = _grow(self.times, new)
            self.lines = _grow(self.lines, new)
        sl = slice(self.m, need)
        self.m = need
        return sl

    def finish(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(times, values, flags, line numbers) trimmed to the rows filled."""
        m = self.m
        trim = (lambda a: a[..., :m]) if m >= 0.9 * self.times.size else (
            lambda a: np.ascontiguousarray(a[..., :m]))
        return trim(self.times), trim(self.values), trim(self.flags), trim(self.lines)


def _grow(a: np.ndarray, cap: int) -> np.ndarray:
    out = np.empty(a.shape[:-1] + (cap,), dtype=a.dtype)
    out[..., :a.shape[-1]] = a
    return out
