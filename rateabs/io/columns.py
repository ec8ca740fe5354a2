"""Which column of a table with a header is what: the time, the traces, a trace-name column
(a long table), and the columns set aside, decided from the header words *and* the values of
the first rows.

Decisions by position and values, for names that could mean two things:

* the time column is the first whose header names time (``Time (s)``); failing that, the
  leftmost numeric column if its header is only a unit of time (``min``, ``seconds``) and its
  values rise; failing that, the first column of clock times;
* another column whose header is only a unit of time (a trace called ``second`` or ``min``)
  is set aside as a second time column only when its values are the times in that unit;
  otherwise it is a trace, and a warning says so;
* a column named like a counter (``Step``, ``n``, ``Cycle``) is set aside only when it holds
  rising whole numbers; otherwise it is a trace, and a warning says so.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..units import TIME_UNITS
from .headers import (
    is_index,
    is_temperature,
    is_time,
    is_time_unit_word,
    is_trace_name,
    time_unit_from_header,
)
from .times import clock_seconds
from .values import all_plain_numbers, column_kinds, to_float


@dataclass
class Columns:
    """The role of every column of a table with a header."""

    header: list[str]
    time: int
    traces: list[int]
    trace_name: int | None = None                        # a long table's trace column
    text: list[int] = field(default_factory=list)        # text columns (long tables)
    set_aside: dict[int, str] = field(default_factory=dict)
    empty: set[int] = field(default_factory=set)
    notes: list[str] = field(default_factory=list)


class Sample:
    """Cell kinds and numbers of the first rows below a header, column by column."""

    def __init__(self, header: list[str], rows: list[list[str]], decimal: str) -> None:
        n = len(header)
        rows = [r[:n] if len(r) >= n else r + [""] * (n - len(r)) for r in rows]
        self.cells = [list(col) for col in zip(*rows, strict=True)] if rows else [[]] * n
        self.decimal = decimal
        self._counts: dict[int, Counter] = {}
        self.kinds = []
        for j, col in enumerate(self.cells):
            if col and all_plain_numbers(col, decimal):      # the common case, at once
                self.kinds.append(["num"] * len(col))
                self._counts[j] = Counter(num=len(col))
            else:
                self.kinds.append(column_kinds(col, decimal))

    def frac(self, j: int, kinds: tuple[str, ...]) -> float:
        """Share of the non-empty cells of column ``j`` that are of one of ``kinds``."""
        if j not in self._counts:
            self._counts[j] = Counter(k for k in self.kinds[j] if k != "empty")
        counts = self._counts[j]
        total = sum(counts.values())
        return sum(counts[k] for k in kinds) / total if total else 0.0

    def numbers(self, j: int) -> np.ndarray:
        """Column ``j`` as floats (NaN where a cell is not a number)."""
        return np.array([to_float(c, self.decimal) if k == "num" else np.nan
                         for c, k in zip(self.cells[j], self.kinds[j], strict=True)])

    def seconds(self, j: int, unit: str | None) -> np.ndarray:
        """Column ``j`` as times in seconds (clock strings, or numbers in ``unit``)."""
        if self.frac(j, ("clock",)) > 0.5:
            return np.array([clock_seconds(c) if k == "clock" else np.nan
                             for c, k in zip(self.cells[j], self.kinds[j], strict=True)])
        with np.errstate(over="ignore"):
            return self.numbers(j) * TIME_UNITS.get(unit or "s", 1.0)

    def rises(self, j: int) -> bool:
        """True when the numbers of column ``j`` rise strictly."""
        v = self.seconds(j, None)
        v = v[np.isfinite(v)]
        return v.size >= 2 and bool(np.all(np.diff(v) > 0))


def check_names(header: list[str], sample: Sample, header_line: int) -> set[int]:
    """Refuse unnamed columns holding data and repeated names; the empty unnamed columns."""
    empty = set()
    for j, h in enumerate(header):
        if h:
            continue
        if any(k != "empty" for k in sample.kinds[j]):
            raise InputError("a column with readings has no name in the header",
                             "name every column", row=header_line, column=j + 1)
        empty.add(j)
    named = [h for h in header if h]
    dup = [h for h, c in Counter(named).items() if c > 1]
    if dup:
        raise InputError(f"the column name {dup[0]!r} appears twice in the header",
                         "give every column its own name", row=header_line)
    return empty


def time_column(header: list[str], sample: Sample, empty: set[int], header_line: int) -> int:
    """The time column (see the module docstring for the order of the rules)."""
    timed = [j for j in range(len(header)) if j not in empty
             and sample.frac(j, ("num", "clock")) > 0.5]
    found = next((j for j in timed if is_time(header[j])), None)
    if found is None and timed and is_time_unit_word(header[timed[0]]) and sample.rises(timed[0]):
        found = timed[0]
    if found is None:
        found = next((j for j in range(len(header)) if j not in empty
                      and sample.frac(j, ("clock",)) > 0.9), None)
    if found is None:
        raise InputError("no time column found",
                         "name the time column, e.g. 'Time (s)', 'time_min' or 'Time'",
                         row=header_line)
    return found


def assign(header: list[str], sample: Sample, header_line: int, option: str | None) -> Columns:
    """The role of every column."""
    empty = check_names(header, sample, header_line)
    tj = time_column(header, sample, empty, header_line)
    cols = Columns(header, tj, [], empty=empty)
    rest = [j for j in range(len(header)) if j not in empty and j != tj]
    cols.text = [j for j in rest if sample.frac(j, ("text",)) > 0.5]
    if cols.text:
        cols.trace_name = next((j for j in cols.text if is_trace_name(header[j])), cols.text[0])
    t_sample = sample.seconds(tj, option or time_unit_from_header(header[tj]))
    for j in rest:
        if j in cols.text:
            continue
        role = _set_aside_role(header, j, tj, sample, t_sample, cols.notes)
        if role:
            cols.set_aside[j] = role
        else:
            cols.traces.append(j)
    return cols


def _set_aside_role(header, j, tj, sample: Sample, t_sample, notes: list[str]) -> str | None:
    """``temperature``, ``time`` or ``index`` for a column kept out of the traces, or None."""
    h = header[j]
    if is_temperature(h):
        return "temperature"
    if is_time(h):
        return "time"
    if is_time_unit_word(h):
        own = sample.seconds(j, time_unit_from_header(h))
        ok = np.isfinite(own) & np.isfinite(t_sample)
        if ok.sum() >= 2 and np.allclose(own[ok], t_sample[ok], rtol=1e-3, atol=1e-9):
            return "time"
        notes.append(f"column {h!r} is named like a unit of time but it is not the time column "
                     f"({header[tj]!r}) and its values are not those times: read as a trace")
        return None
    if is_index(h):
        v = sample.numbers(j)
        v = v[np.isfinite(v)]
        if v.size >= 2 and np.all(v == np.round(v)) and np.all(np.diff(v) > 0):
            return "index"
        notes.append(f"column {h!r} is named like a counter of reads but does not hold rising "
                     "whole numbers: read as a trace")
    return None
