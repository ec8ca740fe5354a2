"""Plate grids per read: a line naming the time of the read (``Time: 0:00:30``, ``Read 2,
30 s``), a row of column numbers (an empty corner, then 1, 2, ...), then rows lettered A, B, ...
Every block is one time point; a well missing from a block is a missing reading there, and a
well empty in every block is set aside.
"""

from __future__ import annotations

import re
from collections import deque
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .body import RowLog, torn, with_last
from .locate import WELL_ROW, is_column_numbers, looks_like_column_numbers
from .metadata import PLATES, well_position
from .parsed import Parsed
from .sniffing import width
from .source import Source
from .times import TimeUnit, check_times, need_time_points, past_midnight
from .values import MISSING, parse_values

#: The unit of a label's time, as :data:`~rateabs.io.values.TIMED` writes it.
UNIT_OF = {"s": "s", "sec": "s", "seconds": "s", "min": "min", "minutes": "min", "h": "h",
           "hours": "h"}
TIME_IN_TEXT = re.compile(r"(\d+:\d{1,2}(?::\d{1,2}(?:[.,]\d+)?)?)|(\d+(?:[.,]\d+)?)\s*"
                          r"(s|sec|seconds|min|minutes|h|hours)\b", re.IGNORECASE)


@dataclass
class _Block:
    time: str                  # the label's time: a clock string or a number with its unit
    line: int
    ncols: int
    letters: set[str] = field(default_factory=set)
    wells: list[str] = field(default_factory=list)
    values: list[np.ndarray] = field(default_factory=list)
    flags: list[np.ndarray] = field(default_factory=list)


def read_blocks(src: Source, start: int, decimal: str, option: str | None, log: RowLog,
                partial: bool) -> Parsed:
    """Read plate grids per read, the first column row at head index ``start``."""
    top = max(0, start - 3)
    blocks: list[_Block] = []
    recent: deque = deque(maxlen=3)
    cur: _Block | None = None
    before = None
    for (no, r), last in with_last(src.rows_from(top)):
        if last and not src.terminated and (partial or (cur is not None and (
                len(r) < cur.ncols + 1 or torn(src, r, before)))):
            log.drop("unfinished" if partial else "half-written", no)
            continue
        if is_column_numbers(r):
            cur = _Block(_label_time(recent, no), no, width(r) - 1)
            blocks.append(cur)
            recent.clear()
        elif looks_like_column_numbers(r):
            shown = ", ".join(c.strip() for c in r[1:width(r)])
            raise InputError(f"the column numbers of this plate block read "
                             f"{shown if len(shown) <= 60 else shown[:57] + '...'!r}",
                             "number the columns 1, 2, 3, ... in plain digits", row=no)
        elif r and WELL_ROW.match(r[0].strip()) and width(r) > 1 and (cur or blocks):
            if cur is None:
                raise InputError(f"plate row {r[0].strip()} has no row of column numbers "
                                 "above it", "give each block its row ',1,2,3,...'", row=no)
            _grid_row(cur, no, r, decimal)
        else:
            cur = None
            if width(r):
                recent.append(r)
        before = r
    names, values, flags, notes = _assemble(blocks)
    tu = TimeUnit("block labels", option, None)
    tu.decide(True)
    times = past_midnight(tu.clock_times([b.time for b in blocks], [b.line for b in blocks]), tu)
    check_times(times, [b.line for b in blocks])
    need_time_points(times.size, blocks[0].line if blocks else None)
    tu.assumed_notes(times)
    rows = max(well_position(w)[0] + 1 for w in names) if names else 0
    cols = max(b.ncols for b in blocks)
    plate = next((n for n, (pr, pc) in PLATES.items() if rows <= pr and cols <= pc), None)
    out = Parsed("plate-blocks", names, times, values, flags, tu, notes=notes,
                 plate=(plate, f"plate grids of {rows} rows x {cols} columns"))
    out.set_aside = {w: "empty-well" for w in _empty_wells(blocks, names)}
    return out


def _label_time(recent: deque, line: int) -> str:
    """The time named by the last line above a block: a clock string, or a number with its
    unit (``30 s``)."""
    label = " ".join(recent[-1]) if recent else ""
    m = TIME_IN_TEXT.search(label)
    if not m:
        bare = re.search(r"(?<![\w.,])(\d+(?:[.,]\d+)?)\s*$", label)
        if bare:
            raise InputError(f"the time above a plate block, {bare.group(1)!r}, has no unit",
                             f"write it with its unit, e.g. 'Time: {bare.group(1)} s' (or "
                             "'Time: 0:00:30'), in every block label", row=line)
        raise InputError("a plate block has no time in the line above it",
                         "each read needs a line such as 'Time: 0:00:30' above its grid",
                         row=line)
    if m.group(1):
        return m.group(1)
    return f"{m.group(2)} {UNIT_OF[m.group(3).lower()]}"


def _grid_row(cur: _Block, no: int, r: list[str], decimal: str) -> None:
    letter = r[0].strip().upper()
    if letter in cur.letters:
        raise InputError(f"row {letter} appears twice in the plate block of line {cur.line}",
                         "give each plate row once per block", row=no)
    if width(r) > cur.ncols + 1:
        raise InputError(f"this plate row has {width(r) - 1} values but the block has "
                         f"{cur.ncols} columns", "fix the ragged row", row=no)
    cells = list(r[1:cur.ncols + 1]) + [""] * (cur.ncols + 1 - len(r))
    v, f = parse_values(cells, decimal, [no] * cur.ncols, f"row {letter}")
    cur.letters.add(letter)
    cur.wells += [f"{letter}{c + 1}" for c in range(cur.ncols)]
    cur.values.append(v)
    cur.flags.append(f)


def _assemble(blocks: list[_Block]):
    """Wells x blocks arrays; wells ordered as first met; wells empty everywhere left out."""
    index: dict[str, int] = {}
    for b in blocks:
        for w in b.wells:
            index.setdefault(w, len(index))
    values = np.full((len(index), len(blocks)), np.nan)
    flags = np.full((len(index), len(blocks)), MISSING, dtype=np.int8)
    present = np.zeros((len(index), len(blocks)), dtype=bool)
    for k, b in enumerate(blocks):
        if b.wells:
            rows = np.array([index[w] for w in b.wells])
            values[rows, k] = np.concatenate(b.values)
            flags[rows, k] = np.concatenate(b.flags)
            present[rows, k] = True
    read = ~np.all(flags == MISSING, axis=1)
    names = [w for w, i in index.items() if read[i]]
    values, flags = values[read], flags[read]
    absent = int((~present[read]).any(axis=1).sum())
    notes = [f"{absent} well(s) are missing from some plate blocks; their readings there are "
             "flagged missing"] if absent else []
    return names, values, flags, notes


def _empty_wells(blocks: list[_Block], names: list[str]) -> list[str]:
    seen = dict.fromkeys(w for b in blocks for w in b.wells)
    kept = set(names)
    return [w for w in seen if w not in kept]
