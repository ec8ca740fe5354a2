"""Plain tables (a plate map, a table of rates, a roster): read with the same sniffing as the
exports, the header being the first row of the table, and columns picked and read as numbers.
"""

from __future__ import annotations

import re
from collections import Counter
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import InputError, UsageError
from .sniffing import sniff_decimal, width
from .source import load_cells
from .values import NUM_COMMA, is_missing, show_cell


def read_table(path: str | Path, sheet: str | None = None) -> pd.DataFrame:
    """Read a plain table (a plate map, a rates table, a roster) with the same sniffing.

    Lines starting with ``#`` and metadata lines above the header are skipped; the header is
    the first row as wide as the table. Every cell is kept as text; ``attrs`` hold the file's
    line number of each row (``lines``), the header's (``header_line``), the path and the
    reader's ``notes`` (which sheet of a workbook was read). ``sheet`` picks an .xlsx sheet.
    """
    path = str(path)
    try:
        cells = load_cells(path, sheet)
    except InputError as exc:
        raise exc.located(path) from None
    keep = [k for k, r in enumerate(cells.rows) if not (r and r[0].lstrip().startswith("#"))]
    rows = [cells.rows[k] for k in keep]
    lines = [cells.lines[k] for k in keep]
    widths = [width(r) for r in rows]
    if not any(widths):
        raise InputError("the table is empty", "add a header and rows", file=path)
    mode = Counter(w for w in widths if w >= 1).most_common(1)[0][0]
    # the header is followed by a row as wide; a row's empty trailing cells count for that,
    # so that a map whose first row leaves its last columns empty keeps its header
    start = next((i for i, w in enumerate(widths[:-1]) if w >= mode and len(rows[i + 1]) >= w),
                 next(i for i, w in enumerate(widths) if w >= mode))
    header = [c.strip() for c in rows[start][:widths[start]]]
    _check_header(header, path, lines[start])
    decimal = sniff_decimal(rows, cells.delimiter)
    body, body_lines = [], []
    for r, ln in zip(rows[start + 1:], lines[start + 1:], strict=True):
        if width(r) == 0:
            continue
        if width(r) > len(header):
            raise InputError(f"this row has {width(r)} fields but the header has {len(header)}",
                             "fix the ragged row", file=path, row=ln)
        cells_r = [c.strip() for c in r[:len(header)]] + [""] * (len(header) - len(r))
        if decimal == ",":
            cells_r = [c.replace(",", ".") if NUM_COMMA.match(c) else c for c in cells_r]
        body.append(cells_r)
        body_lines.append(ln)
    _check_unnamed(header, body, body_lines, path)
    df = pd.DataFrame(body, columns=header, dtype=object)
    df.attrs.update(lines=body_lines, source=path, header_line=lines[start], notes=cells.notes)
    return df


def _check_header(header: list[str], path: str, line: int) -> None:
    named = [h for h in header if h]
    dup = [h for h, c in Counter(named).items() if c > 1]
    if dup:
        raise InputError(f"the column name {dup[0]!r} appears twice in the header",
                         "give every column its own name", file=path, row=line)


def _check_unnamed(header: list[str], body: list[list[str]], lines: list[int], path: str) -> None:
    for j, h in enumerate(header):
        if h:
            continue
        filled = next((i for i, r in enumerate(body) if r[j]), None)
        if filled is not None:
            raise InputError("a column with values has no name in the header",
                             "name every column", file=path, row=lines[filled], column=j + 1)


def pick_column(df: pd.DataFrame, given: str | None, pattern: re.Pattern, what: str,
                option: str, required: bool = True) -> str | None:
    """The column a user named (``given``), else the first whose header matches ``pattern``."""
    path = df.attrs.get("source", "table")
    if given is not None:
        if given not in df.columns:
            raise UsageError(f"no column {given!r} in {path}",
                             f"use one of {', '.join(map(str, df.columns))}")
        return given
    for c in df.columns:
        if pattern.search(str(c).strip()):
            return c
    if required:
        raise InputError(f"no {what} column found", f"name it with {option} COLUMN", file=path)
    return None


def number_column(df: pd.DataFrame, col: str) -> np.ndarray:
    """A table column as floats; empty cells and missing-value words are NaN, text is refused
    with its row. Infinite numbers are refused too."""
    path = df.attrs.get("source", "table")
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    out = np.empty(len(df))
    for k, cell in enumerate(df[col].tolist()):
        c = str(cell).strip()
        if is_missing(c):
            out[k] = np.nan
            continue
        try:
            out[k] = float(c)
        except ValueError:
            raise InputError(f"{show_cell(c)} is not a number", "fix the cell or remove the row",
                             file=path, row=lines[k], column=col) from None
        if not np.isfinite(out[k]):
            raise InputError(f"{show_cell(c)} is not a finite number",
                             "fix the cell or remove the row", file=path, row=lines[k],
                             column=col)
    return out
