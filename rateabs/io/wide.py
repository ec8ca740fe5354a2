"""Tables with a header row: wide (a time column and one column per trace) and, when a column
names the trace of each reading, long (handed to :mod:`rateabs.io.long`).

A wide table is read chunk by chunk into arrays allocated once, so a large export costs its
numbers and little more.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .body import Body, ChunkTable, RowLog
from .columns import Columns, Sample, assign
from .headers import time_unit_from_header
from .long import read_long
from .parsed import Grower, Parsed
from .sniffing import width
from .source import Source
from .times import TimeUnit, check_times, need_time_points, past_midnight

SAMPLE_ROWS = 200


def read_normal(src: Source, hdr: int, decimal: str, option: str | None, log: RowLog,
                partial: bool) -> Parsed:
    """Read the table whose header is head row ``hdr``: wide, or long when a column names
    each reading's trace."""
    header = [c.strip() for c in src.head[hdr][:width(src.head[hdr])]]
    line = src.head_nos[hdr]
    cols = assign(header, Sample(header, _sample_rows(src, hdr), decimal), line, option)
    tu = TimeUnit(header[cols.time], option, time_unit_from_header(header[cols.time]))
    body = Body(src, hdr + 1, len(header), len(src.head[hdr]), log, partial)
    if cols.trace_name is not None:
        return read_long(src, body, cols, decimal, tu)
    return _read_wide(src, body, cols, decimal, tu)


def _sample_rows(src: Source, hdr: int) -> list[list[str]]:
    rows = []
    for r in src.head[hdr + 1:]:
        if not any(c.strip() for c in r):
            if rows:
                break
            continue
        rows.append(r)
        if len(rows) >= SAMPLE_ROWS:
            break
    return rows


def _read_wide(src: Source, body: Body, cols: Columns, decimal: str, tu: TimeUnit) -> Parsed:
    header = cols.header
    if not cols.traces:
        raise InputError("no trace columns were found next to the time column",
                         "export one column (or row) of readings per well or sample")
    grow = Grower(len(cols.traces), src.estimated_lines())
    aside = {j: [] for j in cols.set_aside}
    for chunk in body:
        table = ChunkTable(chunk, src, len(header), decimal, set())
        _refuse_data_in_unnamed(table, cols)
        sl = grow.room(len(table))
        grow.times[sl] = table.times(cols.time, tu)
        grow.lines[sl] = table.nos
        block = table.readings_block(cols.traces)
        if block is not None:
            grow.values[:, sl], grow.flags[:, sl] = block
        else:
            for k, j in enumerate(cols.traces):
                grow.values[k, sl], grow.flags[k, sl] = table.readings(j, header[j])
        for j, parts in aside.items():
            parts.append(table.lenient(j))
    t, values, flags, lines = grow.finish()
    t = past_midnight(t, tu)
    check_times(t, lines)
    need_time_points(t.size, int(lines[0]) if lines.size else None)
    tu.assumed_notes(t)
    return Parsed(
        "wide", [header[j] for j in cols.traces], t, values, flags, tu,
        set_aside={header[j]: role for j, role in cols.set_aside.items()},
        extra={header[j]: np.concatenate(parts) for j, parts in aside.items()},
        header_words=" ".join(header[j] for j in cols.traces), notes=list(cols.notes))


def _refuse_data_in_unnamed(table: ChunkTable, cols: Columns) -> None:
    for j in cols.empty:
        filled = table.filled(j)
        if filled.any():
            i = int(np.argmax(filled))
            raise InputError("a column with readings has no name in the header",
                             "name every column", row=table.nos[i], column=j + 1)
