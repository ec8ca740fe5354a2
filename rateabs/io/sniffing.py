"""Delimiter and decimal mark, and splitting a line into cells.

``csv.Sniffer`` is not used for the delimiter: it cannot see past the metadata lines above a
table, and on decimal-comma data (``0,12;0,15``) it prefers the comma. The rule here: the
delimiter is the one (tab, semicolon, comma) that gives the longest run of consecutive lines
with the same number of fields, two or more; failing all three, whitespace when every line of
the table part has some. The decimal mark is a comma when comma decimals outnumber point
decimals in the cells of a non-comma-separated table.

>>> sniff_delimiter(["Note: 1,5 mM", "t;A1;A2", "0;0,1;0,2", "1;0,2;0,3"])
';'
>>> sniff_decimal([["0", "0,1"], ["1", "0,2"]], ";")
','
"""

from __future__ import annotations

import csv
import re

from ..errors import InputError

DELIMITERS = ("\t", ";", ",")
FORMATS = {"\t": "tsv", ";": "semicolon", ",": "csv", " ": "whitespace"}
_COMMA_DEC = re.compile(r"^[-+]?\d*,\d+([eE][-+]?\d+)?$")
_POINT_DEC = re.compile(r"^[-+]?\d*\.\d+([eE][-+]?\d+)?$")


def field_count(line: str, delimiter: str) -> int:
    """Number of fields of a line (quotes respected where the line has any)."""
    if delimiter == " ":
        return len(line.split())
    if '"' not in line:
        return line.count(delimiter) + 1
    return len(split_line(line, delimiter, 0))


def split_line(line: str, delimiter: str, line_no: int) -> list[str]:
    """The cells of one line."""
    if delimiter == " ":
        return line.split()
    if '"' not in line:
        return line.split(delimiter)
    try:
        return next(csv.reader([line], delimiter=delimiter), [])
    except csv.Error as exc:          # e.g. a quoted field over the csv module's 128 kB limit
        raise InputError(f"this line cannot be split into fields ({exc})",
                         "check the quotes and the delimiter of the export", row=line_no) from None


def sniff_delimiter(lines: list[str]) -> str:
    """The delimiter of a table (``" "`` for whitespace-separated columns)."""
    nonblank = [ln for ln in lines if ln.strip()][:2000]
    best, best_score = None, (0, 0)
    for prio, delim in enumerate(DELIMITERS):
        run = longest = prev = 0
        for ln in nonblank:
            c = field_count(ln, delim) if delim in ln else 1
            run = run + 1 if c == prev and c >= 2 else (1 if c >= 2 else 0)
            longest, prev = max(longest, run), c
        score = (longest, -prio)
        if longest >= 2 and score > best_score:
            best, best_score = delim, score
    if best is not None:
        return best
    tail = nonblank[len(nonblank) // 3:] or nonblank
    if tail and all(" " in ln.strip() for ln in tail[:50]):
        return " "
    return ","


def sniff_decimal(rows: list[list[str]], delimiter: str | None) -> str:
    """``","`` when decimal commas outnumber decimal points in the cells, else ``"."``."""
    if delimiter == ",":
        return "."
    comma = dot = 0
    for r in rows[-400:]:
        for c in r:
            c = c.strip()
            if _COMMA_DEC.match(c):
                comma += 1
            elif _POINT_DEC.match(c):
                dot += 1
    return "," if comma > dot else "."


def width(row: list[str]) -> int:
    """Number of cells up to the last non-empty one."""
    n = len(row)
    while n and not row[n - 1].strip():
        n -= 1
    return n
