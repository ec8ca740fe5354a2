"""Transposed tables: a row of times under a label, then one row per trace (the label in the
first cell). Label rows right above the time row (cycle numbers, temperatures) and rows below it
named like them are set aside, by the same rules as columns of a wide table.
"""

from __future__ import annotations

import itertools

import numpy as np

from ..errors import InputError
from ..units import TIME_UNITS
from .body import RowLog, torn, with_last
from .headers import is_index, is_temperature, is_time, is_time_unit_word, time_unit_from_header
from .parsed import Parsed
from .sniffing import width
from .source import Source
from .times import TimeUnit, check_times, need_time_points, past_midnight
from .values import cell_kind, parse_values, to_float


def label_rows_above(src: Source, hdr: int, decimal: str) -> int:
    """Head index of the first of the label rows (numbers under a text label) that sit right
    above the time row, as wide as it; ``hdr`` when there are none."""
    w = width(src.head[hdr])
    top = hdr
    while top > 0:
        r = src.head[top - 1]
        kinds = [cell_kind(c, decimal) for c in r[1:width(r)]]
        if width(r) != w or cell_kind(r[0], decimal) != "text" or not all(
                k in ("num", "empty") for k in kinds):
            break
        top -= 1
    return top


def read_transposed(src: Source, hdr: int, decimal: str, option: str | None, log: RowLog,
                    partial: bool) -> Parsed:
    """Read a transposed table whose time row is head row ``hdr``."""
    header = src.head[hdr]
    w = width(header)
    label = header[0].strip()
    line = src.head_nos[hdr]
    tu = TimeUnit(label or "time row", option, time_unit_from_header(label))
    t = past_midnight(tu.seconds(header[1:w], decimal, [line] * (w - 1)), tu)
    check_times(t, [line] * t.size)
    need_time_points(t.size, line)
    tu.assumed_notes(t)
    top = label_rows_above(src, hdr, decimal)
    rows = [(src.head_nos[i], src.head[i]) for i in range(top, hdr)]
    rows_below = _rows_below(src, hdr, w, log, partial)
    names, values, flags = [], [], []
    out = Parsed("transposed", names, t, np.empty((0, t.size)), np.empty((0, t.size), np.int8),
                 tu)
    for no, r in itertools.chain(rows, rows_below):      # one row of cells at a time
        cells = list(r[1:w]) + [""] * (w - max(len(r), 1))
        name = r[0].strip()
        role = _role(name, cells, decimal, t, out.notes)
        if role:
            out.set_aside[name] = role
            out.extra[name] = np.array([to_float(c, decimal) if cell_kind(c, decimal) == "num"
                                        else np.nan for c in cells])
            continue
        if not name:
            raise InputError("the trace name is empty", "name every row of readings", row=no)
        if name in names:
            raise InputError(f"the trace name {name!r} appears twice",
                             "give every row its own name", row=no)
        v, f = parse_values(cells, decimal, [no] * len(cells), name)
        names.append(name)
        values.append(v)
        flags.append(f)
    if names:
        out.values, out.flags = np.vstack(values), np.vstack(flags)
    out.header_words = label + " " + " ".join(names)
    return out


def _rows_below(src: Source, hdr: int, w: int, log: RowLog, partial: bool):
    """The non-blank rows below the time row; a half-written last row is left out."""
    before = None
    for (no, r), last in with_last(src.rows_from(hdr + 1)):
        if width(r) == 0:
            continue
        if last and not src.terminated and (partial or len(r) < w or torn(src, r, before)):
            log.drop("unfinished" if partial else "half-written", no)
            continue
        if width(r) > w:
            raise InputError(f"this row has {width(r)} fields but the time row has {w}",
                             "fix the ragged row", row=no)
        before = r
        yield no, r


def _role(name: str, cells: list[str], decimal: str, t: np.ndarray, notes: list[str]):
    """The set-aside role of a labelled row, or None for a trace."""
    if is_temperature(name):
        return "temperature"
    if is_time(name):
        return "time"
    if not (is_time_unit_word(name) or is_index(name)):
        return None
    nums = np.array([to_float(c, decimal) if cell_kind(c, decimal) == "num" else np.nan
                     for c in cells])
    ok = np.isfinite(nums)
    if is_time_unit_word(name):
        factor = TIME_UNITS[time_unit_from_header(name)]
        if ok.sum() >= 2 and np.allclose(nums[ok] * factor, t[ok], rtol=1e-3):
            return "time"
        notes.append(f"row {name!r} is named like a unit of time but its values are not the "
                     "times: read as a trace")
    elif is_index(name):
        v = nums[ok]
        if v.size >= 2 and np.all(v == np.round(v)) and np.all(np.diff(v) > 0):
            return "index"
        notes.append(f"row {name!r} is named like a counter of reads but does not hold rising "
                     "whole numbers: read as a trace")
    return None
