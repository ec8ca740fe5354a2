"""Cells: what a cell holds, the one vocabulary of missing-value words and overflow markers,
and columns of readings as floats with reading flags.

>>> cell_kind("0,25", ","), cell_kind("OVER", "."), cell_kind("n/a", "."), cell_kind("1:30", ".")
('num', 'marker', 'empty', 'clock')
"""

from __future__ import annotations

import re

import numpy as np

from ..errors import InputError
from ..traces import FLAG_CODE

#: Words that mean "no reading here" (compared case-insensitively, after stripping spaces).
MISSING_WORDS = frozenset({"", "nan", "na", "n/a", "-", "--", "none", "null", "#n/a", "?"})

#: What instruments write for a reading over their range (masked and flagged, never a number).
OVERFLOW = re.compile(
    r"^(over(flow)?|ovrflw|sat(urated)?|\*+|>\s*[-+]?[\d.,]+([eE][-+]?\d+)?|oor|out of range|"
    r"range\?|hi(gh)?|[-+]?inf(inity)?)$", re.IGNORECASE)

# (written so that no cell, however long, makes the regular expressions backtrack)
NUM_DOT = re.compile(r"^[-+]?(\d+(\.\d*)?|\.\d+)([eE][-+]?\d+)?$")
NUM_COMMA = re.compile(r"^[-+]?(\d+(,\d*)?|,\d+)([eE][-+]?\d+)?$")
#: Clock times h:mm:ss and mm:ss, and times written with their unit ("30 s", "1.5 min").
CLOCK3 = re.compile(r"^(\d+):([0-5]?\d):([0-5]?\d(?:[.,]\d+)?)$")
CLOCK2 = re.compile(r"^(\d+):([0-5]?\d(?:[.,]\d+)?)$")
TIMED = re.compile(r"^(\d+(?:[.,]\d+)?)\s*(s|sec|min|h)$", re.IGNORECASE)

OVER = np.int8(FLAG_CODE["overflow"])
MISSING = np.int8(FLAG_CODE["missing"])


#: A whole column of plain numbers, one per line (the cells joined by newlines): the patterns
#: above with spaces allowed around each cell, matched once per column instead of per cell.
_COLUMN_DOT = re.compile(r"(?:[ \t]*[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?[ \t]*\n)*")
_COLUMN_COMMA = re.compile(r"(?:[ \t]*[-+]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][-+]?\d+)?[ \t]*\n)*")


def column_kinds(cells: list[str], decimal: str) -> list[str]:
    """:func:`cell_kind` of every cell of a column; a column of plain numbers is recognised
    in one regular-expression pass (the common case, and the reader's hot spot)."""
    whole = "\n".join(cells) + "\n"
    plain = _COLUMN_COMMA if decimal == "," else _COLUMN_DOT
    if whole.count("\n") == len(cells) and plain.fullmatch(whole):
        return ["num"] * len(cells)
    return [cell_kind(c, decimal) for c in cells]


#: What a block of plain numbers may hold (anything else sends it to :func:`column_kinds`).
_NOT_PLAIN = {".": re.compile(r"[^0-9.eE+\- \t\n]"), ",": re.compile(r"[^0-9,eE+\- \t\n]")}


def all_plain_numbers(cells: list[str], decimal: str) -> bool:
    """True when every cell is a plain number (:func:`cell_kind` ``num``), checked for a whole
    block at once: the cells hold only digits, the decimal mark, exponent letters, signs and
    spaces, and Python's float reads each of them (within that alphabet its grammar is the
    number pattern's, spaces around allowed). False says only "look cell by cell"."""
    whole = "\n".join(cells)
    if whole.count("\n") != len(cells) - 1 or _NOT_PLAIN[decimal].search(whole):
        return False
    try:
        list(map(float, whole.replace(",", ".").split("\n") if decimal == "," else cells))
    except ValueError:
        return False
    return True


def is_missing(cell: str) -> bool:
    """True for an empty cell or a missing-value word (``NaN``, ``n/a``, ``-``...)."""
    return cell.strip().lower() in MISSING_WORDS


def cell_kind(cell: str, decimal: str) -> str:
    """``empty``, ``num``, ``clock`` (a time with its own unit), ``marker`` or ``text``."""
    c = cell.strip()
    if c.lower() in MISSING_WORDS:
        return "empty"
    if (NUM_COMMA if decimal == "," else NUM_DOT).match(c):
        return "num"
    if CLOCK3.match(c) or CLOCK2.match(c) or TIMED.match(c):
        return "clock"
    if OVERFLOW.match(c):
        return "marker"
    return "text"


def to_float(cell: str, decimal: str) -> float:
    """A number cell as a float (decimal comma allowed)."""
    c = cell.strip()
    return float(c.replace(",", ".") if decimal == "," else c)


def parse_values(cells, decimal: str, lines, label) -> tuple[np.ndarray, np.ndarray]:
    """Floats and flag codes of a column of cells: missing cells and overflow markers become
    NaN with their flag; any other text is refused, naming its row and column."""
    cells = ["" if not isinstance(c, str) else c for c in cells]
    vals = np.full(len(cells), np.nan)
    flags = np.zeros(len(cells), dtype=np.int8)
    try:      # a column of plain numbers converts in one call; otherwise cell by cell
        fast = np.array([c.replace(",", ".") for c in cells] if decimal == "," else cells,
                        dtype=float)
    except (ValueError, OverflowError):
        fast = np.full(len(cells), np.nan)
    done = np.isfinite(fast)
    vals[done] = fast[done]
    for i in np.flatnonzero(~done):
        kind = cell_kind(cells[i], decimal)
        if kind == "num":
            vals[i] = to_float(cells[i], decimal)
            if not np.isfinite(vals[i]):
                flags[i], vals[i] = OVER, np.nan
        elif kind == "marker":
            flags[i] = OVER
        elif kind == "empty":
            flags[i] = MISSING
        else:
            raise InputError(f"{show_cell(cells[i])} is not a reading",
                             "leave the cell empty, or mark an overflow as OVER",
                             row=lines[i], column=label)
    return vals, flags


def float_flags(vals: np.ndarray) -> np.ndarray:
    """Flag codes of readings already parsed as floats: NaN is missing, +-inf overflow."""
    flags = np.zeros(vals.shape, dtype=np.int8)
    flags[np.isnan(vals)] = MISSING
    flags[np.isinf(vals)] = OVER
    return flags


def decimals(cell: str) -> int:
    """Digits after the decimal mark of a number cell (0 without one)."""
    c = cell.strip()
    for mark in ".,":
        if mark in c:
            return len(re.split(r"[eE]", c.rsplit(mark, 1)[1])[0])
    return 0


def show_cell(cell: str) -> str:
    """A cell for a message: stripped, cut to 40 characters."""
    c = cell.strip()
    return repr(c if len(c) <= 40 else c[:37] + "...")
