"""Long tables: one row per reading, with a column naming the trace, a time column and a value
column. Other columns that hold one value per trace (substrate, enzyme...) become per-trace
metadata; the rest are set aside by name.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import InputError
from .body import Body, ChunkTable
from .columns import Columns
from .headers import is_value
from .parsed import Parsed
from .source import Source
from .times import TimeUnit, check_plausible, need_time_points
from .values import MISSING, cell_kind, to_float


def read_long(src: Source, body: Body, cols: Columns, decimal: str, tu: TimeUnit) -> Parsed:
    """Read a long table (see the module docstring)."""
    header = cols.header
    if not cols.traces:
        raise InputError("a trace column and a time column were found but no value column",
                         "add a column of readings, e.g. 'absorbance'",
                         row=src.head_nos[body.start - 1])
    vj = next((j for j in cols.traces if is_value(header[j])), cols.traces[-1])
    others = [j for j in cols.traces + cols.text if j not in (vj, cols.trace_name)]
    index: dict[str, int] = {}
    parts: dict[str, list] = {k: [] for k in ("code", "t", "v", "f", "line")}
    seen: dict[int, list[pd.DataFrame]] = {j: [] for j in others}
    for chunk in body:
        table = ChunkTable(chunk, src, len(header), decimal, {cols.trace_name, *cols.text})
        code = _codes(table, cols.trace_name, header, index)
        v, f = table.readings(vj, header[vj])
        for key, arr in (("code", code), ("t", table.times(cols.time, tu)), ("v", v), ("f", f),
                         ("line", np.asarray(table.nos, dtype=np.int32))):
            parts[key].append(arr)
        for j in others:
            seen[j].append(pd.DataFrame({"code": code, "cell": [c.strip() for c in
                                                                 table.cells(j)]}
                                        ).drop_duplicates())
    arrays = {key: np.concatenate(parts.pop(key)) for key in list(parts)}
    names = list(index)
    t, values, flags = _to_grid(arrays, names)
    per_trace, set_aside, notes = _other_columns(header, others, seen, names, decimal, vj)
    for j, role in cols.set_aside.items():
        set_aside[header[j]] = role
    first = t[0][np.isfinite(t[0])]
    tu.assumed_notes(first)
    return Parsed("long", names, t, values, flags, tu, set_aside=set_aside,
                  per_trace=per_trace, header_words=header[vj], notes=cols.notes + notes)


def _codes(table: ChunkTable, j: int, header: list[str], index: dict[str, int]) -> np.ndarray:
    """Trace numbers of a chunk's rows (new names numbered as met); empty names refused."""
    names = pd.Series(table.cells(j), dtype=object).str.strip()
    empty = (names == "").to_numpy()
    if empty.any():
        raise InputError("the trace name is empty", "name the trace of every reading",
                         row=table.nos[int(np.argmax(empty))], column=header[j])
    local, uniques = pd.factorize(names)
    to_global = np.array([index.setdefault(n, len(index)) for n in uniques], dtype=np.int32)
    return to_global[local]


def _to_grid(a: dict[str, np.ndarray], names: list[str]):
    """Traces x times arrays (NaN padding), each trace sorted by time; duplicates refused.
    The arrays of ``a`` are replaced as they are reordered, so that each is held once."""
    check_plausible(a["t"], a["line"])
    order = np.lexsort((a["t"], a["code"]))
    for key in a:
        a[key] = a[key][order]
    del order
    code, t = a["code"], a["t"]
    same = (np.diff(code) == 0) & (np.diff(t) == 0)
    if same.any():
        i = int(np.argmax(same)) + 1
        raise InputError(f"time {t[i]:g} s appears twice in trace {names[code[i]]}",
                         "remove the duplicated reading or fix the time", row=int(a["line"][i]))
    counts = np.bincount(code, minlength=len(names))
    m = int(counts.max())
    need_time_points(m, int(a["line"][0]))
    pos = np.arange(code.size) - np.repeat(np.cumsum(counts) - counts, counts)
    times = np.full((len(names), m), np.nan)
    times[code, pos] = t
    values = np.full((len(names), m), np.nan)
    values[code, pos] = a.pop("v")
    flags = np.full((len(names), m), MISSING, dtype=np.int8)
    flags[code, pos] = a.pop("f")
    return times, values, flags


def _other_columns(header, others, seen, names, decimal, vj):
    """Per-trace metadata from columns constant within each trace; the rest set aside."""
    per_trace: dict[str, dict] = {}
    set_aside: dict[str, str] = {}
    notes: list[str] = []
    for j in others:
        pairs = pd.concat(seen[j]).drop_duplicates()
        if len(pairs) == len(names) and pairs["code"].is_unique:
            per_trace[header[j]] = {
                names[c]: (to_float(x, decimal) if cell_kind(x, decimal) == "num" else x)
                for c, x in zip(pairs["code"], pairs["cell"], strict=True)}
            continue
        numeric = all(cell_kind(x, decimal) in ("num", "empty") for x in pairs["cell"][:200])
        set_aside[header[j]] = "numbers" if numeric else "text"
        if numeric:
            notes.append(f"column {header[j]!r} holds other numbers that change within a trace; "
                         f"it is not read (the readings are {header[vj]!r})")
    return per_trace, set_aside, notes
