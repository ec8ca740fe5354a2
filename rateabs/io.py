"""Readers: turn the file an instrument wrote into a :class:`~rateabs.traces.TraceSet`.

The reader recognises shapes, not vendors: CSV, TSV, semicolon-separated text and ``.xlsx``;
decimal point or comma; UTF-8 (with or without BOM), UTF-16 and Latin-1; metadata lines above
the header (kept as key/value metadata); three layouts:

* **wide**: a time column and one column per trace (wells A1..P24 or any names);
* **long**: a trace column, a time column and a value column, one row per reading;
* **transposed**: one row per trace, times across the header row;
* **plate blocks**: one plate grid (rows A..P, columns 1..24) per read, each under a line that
  names its time.

Times in s, min or h (from header words such as ``min``, ``(min)``, ``time_min``, ``h``) or clock
strings ``h:mm:ss`` / ``mm:ss``. Columns such as temperature or cycle number are kept as metadata,
never read as traces. Overflow markers (``OVER``, ``overflow``, ``>3.5``, ``sat``, ``****``) are
masked and flagged, never turned into numbers. Transmittance, percent transmittance and raw
intensities are converted to absorbance.
"""

from __future__ import annotations

import codecs
import csv
import datetime as _dt
import re
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError, UsageError
from .photometry import (
    absorbance_from_intensity,
    absorbance_from_percent_t,
    absorbance_from_transmittance,
)
from .traces import TraceSet
from .units import TIME_UNITS

SIGNAL_KINDS = ("absorbance", "transmittance", "percent", "intensity")

_NUM_DOT = re.compile(r"^[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$")
_NUM_COMMA = re.compile(r"^[-+]?(\d+,?\d*|,\d+)([eE][-+]?\d+)?$")
_CLOCK3 = re.compile(r"^(\d+):([0-5]?\d):([0-5]?\d(?:[.,]\d+)?)$")
_CLOCK2 = re.compile(r"^(\d+):([0-5]?\d(?:[.,]\d+)?)$")
_TIMED = re.compile(r"^(\d+(?:[.,]\d+)?)\s*(s|sec|min|h)$", re.IGNORECASE)   # "30 s", "2 min"
_OVERFLOW = re.compile(
    r"^(over(flow)?|ovrflw|sat(urated)?|\*+|>\s*[-+]?[\d.,]+([eE][-+]?\d+)?|oor|out of range|"
    r"range\?|hi(gh)?|[-+]?inf(inity)?)$", re.IGNORECASE)
_MISSING = {"", "nan", "na", "n/a", "-", "--", "none", "null", "#n/a", "?"}

_TIME_HDR = re.compile(r"(^|[^a-z])(time|zeit|tiempo|temps|elapsed|seconds?|secs?|minutes?|"
                       r"mins?|hours?|hrs?)([^a-z]|$)", re.IGNORECASE)
_TEMP_HDR = re.compile(r"(temp|°|\bdeg\s*c\b|celsius|kelvin|\(c\)|\[c\]|\(k\)|\[k\])",
                       re.IGNORECASE)
_INDEX_HDR = re.compile(r"^(cycle|cycle\s*(no\.?|nr|#)|read\s*(no\.?|#)?|kinetic\s*read|index|"
                        r"no\.?|#|point|scan|step|n)$", re.IGNORECASE)
_TRACE_HDR = re.compile(r"^(well|trace|sample|id|name|cuvette|run|channel|position|pos|"
                        r"sample\s*id|well\s*id|curve|series)$", re.IGNORECASE)
_VALUE_HDR = re.compile(r"(abs|absorbance|^a$|^a\s*\(|^a\d{3}|od|value|signal|reading|%\s*t|"
                        r"trans|intensity|counts|^i$|^y$|raw)", re.IGNORECASE)


@dataclass
class _Cells:
    """Rows of string cells with the file's own line numbers (1-based)."""

    rows: list[list[str]]
    lines: list[int]
    fmt: str
    delimiter: str | None
    encoding: str | None


# --------------------------------------------------------------------------- low level


def _decode(raw: bytes, path: str) -> tuple[str, str]:
    """Decode bytes as UTF-8 (BOM or not), UTF-16 (BOM or not) or Latin-1; refuse binary."""
    if raw.startswith(codecs.BOM_UTF8):
        return raw[len(codecs.BOM_UTF8):].decode("utf-8", errors="replace"), "utf-8-sig"
    if raw.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        return raw.decode("utf-16"), "utf-16"
    if len(raw) >= 4 and raw.count(b"\x00") > len(raw) // 4:
        # UTF-16 without a BOM: every other byte is NUL for ASCII text
        even_nul = raw[0::2].count(b"\x00")
        odd_nul = raw[1::2].count(b"\x00")
        enc = "utf-16-le" if odd_nul > even_nul else "utf-16-be"
        try:
            text = raw.decode(enc)
        except UnicodeDecodeError:
            text = None
        if text is not None and _looks_textual(text):
            return text, enc
        raise InputError("the file is binary, not a text or .xlsx export",
                         "export the data as CSV, TSV or .xlsx", file=path)
    try:
        text, enc = raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        text, enc = raw.decode("latin-1"), "latin-1"
    if not _looks_textual(text):
        raise InputError("the file is binary, not a text or .xlsx export",
                         "export the data as CSV, TSV or .xlsx", file=path)
    return text, enc


def _looks_textual(text: str) -> bool:
    if not text:
        return True
    sample = text[:20000]
    bad = sum(1 for ch in sample if (ord(ch) < 32 and ch not in "\t\r\n\f") or ch == "\ufffd")
    return bad <= max(2, len(sample) // 200)


def _split_rows(text: str, path: str) -> tuple[list[list[str]], list[int], str]:
    """Split text into cell rows, choosing the delimiter that gives the most consistent table."""
    lines = text.splitlines()
    nonblank = [ln for ln in lines if ln.strip()]
    if not nonblank:
        raise InputError("the file is empty", "export the kinetic read again", file=path)
    sample = nonblank[:2000]
    best, best_score = None, (0, -1)
    for prio, delim in enumerate(("\t", ";", ",")):
        counts = [len(r) for r in csv.reader(sample, delimiter=delim)]
        run = longest = 0
        for k, c in enumerate(counts):
            run = run + 1 if k and c == counts[k - 1] and c >= 2 else (1 if c >= 2 else 0)
            longest = max(longest, run)
        score = (longest, -prio)
        if longest >= 2 and score > best_score:
            best, best_score = delim, score
    tail = nonblank[len(nonblank) // 3:] or nonblank
    if best is None:
        best = ","
        if all(" " in ln.strip() for ln in tail[:50]):
            # whitespace-separated columns
            rows = [ln.split() for ln in lines]
            return rows, list(range(1, len(lines) + 1)), " "
    rows = list(csv.reader(lines, delimiter=best))
    # csv.reader yields one row per physical line here (no embedded newlines in exports)
    if len(rows) != len(lines):
        rows = [next(csv.reader([ln], delimiter=best), []) for ln in lines]
    return rows, list(range(1, len(lines) + 1)), best


def _xlsx_rows(path: str, sheet: str | None) -> tuple[list[list[str]], list[int]]:
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - openpyxl is a dependency
        raise InputError("reading .xlsx needs openpyxl", "pip install openpyxl", file=path) from None
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many kinds for damaged files
        raise InputError(f"the workbook cannot be opened ({type(exc).__name__})",
                         "save it again as .xlsx or export CSV", file=path) from None
    if sheet is not None and sheet not in wb.sheetnames:
        raise UsageError(f"no sheet named {sheet!r}",
                         f"use one of {', '.join(wb.sheetnames)}", file=path)
    ws = wb[sheet] if sheet else wb.worksheets[0]
    rows, lines = [], []
    for i, row in enumerate(ws.iter_rows(values_only=True), start=1):
        rows.append([_xlsx_cell(v) for v in row])
        lines.append(i)
    wb.close()
    return rows, lines


def _xlsx_cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return str(v)
    if isinstance(v, (int, float)):
        return repr(float(v)) if isinstance(v, float) else str(v)
    if isinstance(v, _dt.timedelta):
        return _fmt_clock(v.total_seconds())
    if isinstance(v, _dt.datetime):
        return v.strftime("%H:%M:%S.%f")
    if isinstance(v, _dt.time):
        return _fmt_clock(v.hour * 3600 + v.minute * 60 + v.second + v.microsecond / 1e6)
    return str(v)


def _fmt_clock(seconds: float) -> str:
    h, rem = divmod(seconds, 3600)
    m, s = divmod(rem, 60)
    return f"{int(h)}:{int(m):02d}:{s:09.6f}"


def load_cells(path: str | Path, sheet: str | None = None, partial: bool = False) -> _Cells:
    """Read a file into rows of string cells (no interpretation yet).

    With ``partial`` a last line without its line end (a file still being written) is left out.
    """
    path = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError("no such file", "check the path", file=path)
    if p.is_dir():
        raise InputError("is a folder, not a data file", "give the path of one export file",
                         file=path)
    raw = p.read_bytes()
    if not raw.strip():
        raise InputError("the file is empty", "export the kinetic read again", file=path)
    suffix = p.suffix.lower()
    if raw[:4] == b"PK\x03\x04":
        rows, lines = _xlsx_rows(path, sheet)
        return _Cells(rows, lines, "xlsx", None, None)
    if suffix in (".xlsx", ".xlsm"):
        raise InputError("the file is named .xlsx but is not an Excel workbook",
                         "rename it to .csv if it holds text, or save it again as .xlsx",
                         file=path)
    if suffix == ".xls" or raw[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1":
        raise InputError("old binary .xls workbooks are not read",
                         "save the sheet as .xlsx or CSV", file=path)
    text, enc = _decode(raw, path)
    if partial and text and not text.endswith(("\n", "\r")):
        text = text[: max(text.rfind("\n"), 0)]
    rows, lines, delim = _split_rows(text, path)
    fmt = {"\t": "tsv", ";": "semicolon", ",": "csv", " ": "whitespace"}[delim]
    return _Cells(rows, lines, fmt, delim, enc)


# --------------------------------------------------------------------------- cell kinds


def _kind(cell: str, decimal: str) -> str:
    c = cell.strip()
    if c.lower() in _MISSING:
        return "empty"
    if (_NUM_COMMA if decimal == "," else _NUM_DOT).match(c):
        return "num"
    if _CLOCK3.match(c) or _CLOCK2.match(c) or _TIMED.match(c):
        return "clock"
    if _OVERFLOW.match(c):
        return "marker"
    return "text"


def _to_float(cell: str, decimal: str) -> float:
    c = cell.strip()
    if decimal == ",":
        c = c.replace(",", ".")
    return float(c)


def _clock_seconds(cell: str) -> float | None:
    c = cell.strip().replace(",", ".")
    m = _CLOCK3.match(c)
    if m:
        return int(m.group(1)) * 3600 + int(m.group(2)) * 60 + float(m.group(3))
    m = _CLOCK2.match(c)
    if m:
        return int(m.group(1)) * 60 + float(m.group(2))
    m = _TIMED.match(c)
    if m:
        return float(m.group(1)) * TIME_UNITS[m.group(2).lower()]
    return None


def _detect_decimal(rows: list[list[str]], delimiter: str | None) -> str:
    if delimiter == ",":
        return "."
    comma = dot = 0
    for r in rows[-400:]:
        for c in r:
            c = c.strip()
            if re.match(r"^[-+]?\d*,\d+([eE][-+]?\d+)?$", c):
                comma += 1
            elif re.match(r"^[-+]?\d*\.\d+([eE][-+]?\d+)?$", c):
                dot += 1
    return "," if comma > dot else "."


def _width(row: list[str]) -> int:
    n = len(row)
    while n and not row[n - 1].strip():
        n -= 1
    return n


# --------------------------------------------------------------------------- header search


def _find_header(rows, decimal) -> tuple[int, str]:
    """Index of the header row and whether the table is ``normal`` or ``transposed``."""
    widths = [_width(r) for r in rows]
    wide_rows = [w for w in widths if w >= 2]
    if not wide_rows:
        raise InputError("no table found: every line has a single field",
                         "export with one column for time and one per trace")
    mode = Counter(wide_rows).most_common(1)[0][0]
    cache: dict[int, list[str]] = {}

    class _Kinds:
        """Cell kinds of a row, classified only when asked for (headers sit near the top)."""

        def __getitem__(self, i):
            if i not in cache:
                cache[i] = [_kind(c, decimal) for c in rows[i][:widths[i]]]
            return cache[i]

    kinds = _Kinds()

    def texty(i):
        ks = [k for k in kinds[i] if k != "empty"]
        return len(ks) >= 2 and sum(k == "text" for k in ks) >= len(ks) / 2

    for i in range(len(rows) - 1):
        if widths[i] < 2 or len(rows[i]) < mode or not texty(i):
            continue
        following = [j for j in range(i + 1, min(len(rows), i + 8)) if widths[j] >= 2][:5]
        if not following or all(k in ("text", "empty") for k in kinds[following[0]]):
            continue            # the header is the last line of words before the data
        for col, k in enumerate(kinds[i]):
            if k != "text":
                continue
            below = [kinds[j][col] if col < len(kinds[j]) else "empty" for j in following]
            if sum(b in ("num", "clock") for b in below) > len(below) / 2:
                return i, "normal"
    # transposed: first cell text, rest times; later rows first cell text, rest numbers
    for i in range(len(rows) - 1):
        if widths[i] < 3 or kinds[i][0] != "text":
            continue
        rest = [k for k in kinds[i][1:] if k != "empty"]
        if rest and all(k in ("num", "clock") for k in rest):
            nxt = [j for j in range(i + 1, len(rows)) if widths[j] >= 2][:3]
            if nxt and all(kinds[j][0] == "text" for j in nxt):
                # among the label rows at the top (cycle, time, temperature...), the time row
                for j in range(i, min(i + 4, len(rows))):
                    if widths[j] >= 3 and _is_time_header(rows[j][0]):
                        return j, "transposed"
                return i, "transposed"
    if any(texty(i) for i in range(len(rows))):
        raise InputError("a header row was found but no numeric data below it",
                         "export the readings, not only the header")
    raise InputError("no header row naming the columns was found",
                     "add a header line such as 'Time (s),A1,A2,...'")


def _preamble(rows: list[list[str]], upto: int, delimiter: str | None) -> dict[str, str]:
    """Key/value metadata from the lines above the header ("Wavelength: 340 nm", "k;v")."""
    meta: dict[str, str] = {}
    joiner = f"{delimiter} " if delimiter in (",", ";") else " "
    for r in rows[:upto]:
        cells = [c.strip() for c in r if c.strip()]
        if not cells:
            continue
        m = re.match(r"^([^:=]{1,60}?)\s*[:=]\s*(.+)$", cells[0])
        if m:
            rest = joiner.join([m.group(2).strip()] + cells[1:])
            meta[m.group(1).strip()] = rest
        elif len(cells) == 1:
            meta.setdefault("title", cells[0])
        else:
            meta[cells[0]] = " ".join(cells[1:])
    return meta


def _file_facts(meta: dict[str, str]) -> dict[str, float]:
    """Wavelength (nm), temperature (K), read interval (s), pathlength (cm) from metadata."""
    facts: dict[str, float] = {}
    for key, val in meta.items():
        k = key.lower()
        num = re.search(r"[-+]?\d+(?:[.,]\d+)?", val)
        if not num:
            continue
        x = float(num.group(0).replace(",", "."))
        rest = val[num.end():].strip().lower()
        if "wavelength" in k or k in ("lambda", "wl", "λ"):
            facts["wavelength_nm"] = x
        elif "temp" in k:
            facts["temperature_K"] = x if rest.startswith("k") else x + 273.15
        elif "interval" in k:
            unit = rest.split()[0] if rest else "s"
            facts["read_interval_s"] = x * TIME_UNITS.get(unit.rstrip("."), 1.0)
        elif "path" in k:
            facts["pathlength_cm"] = x * (0.1 if rest.startswith("mm") else 1.0)
    return facts


# --------------------------------------------------------------------------- time


def time_unit_from_header(header: str) -> str | None:
    """The time unit a header names: ``Time (min)`` -> ``min``; None if it names none."""
    h = header.strip().lower()
    tokens = re.split(r"[^a-zµ]+", h)
    tokens = [t for t in tokens if t]
    for tok in reversed(tokens):
        if tok in ("ms",):
            return "ms"
        if tok in ("s", "sec", "secs", "second", "seconds"):
            return "s"
        if tok in ("min", "mins", "minute", "minutes", "m"):
            return "min"
        if tok in ("h", "hr", "hrs", "hour", "hours"):
            return "h"
    return None


def _parse_times(cells, decimal, unit_hint, option_unit, lines, col_label):
    """Seconds from numbers (with a unit) or clock strings; returns (seconds, unit, source)."""
    out = np.empty(len(cells))
    kinds = [_kind(c, decimal) for c in cells]
    n_clock = sum(k == "clock" for k in kinds)
    for i, (c, k) in enumerate(zip(cells, kinds, strict=True)):
        if k not in ("num", "clock"):
            what = "is empty" if k == "empty" else f"{c.strip()!r} is not a time"
            raise InputError(f"the time {what}",
                             "every reading needs a time in s, min, h or h:mm:ss",
                             row=lines[i], column=col_label)
    if n_clock:
        if n_clock != len(cells):
            i = next(i for i, k in enumerate(kinds) if k != "clock")
            raise InputError(f"time {cells[i].strip()!r} mixes with clock times",
                             "write every time the same way", row=lines[i], column=col_label)
        for i, c in enumerate(cells):
            out[i] = _clock_seconds(c)
        return out, "clock", "clock"
    unit, source = option_unit, "option"
    if unit is None:
        unit, source = unit_hint, "header"
    if unit is None:
        unit, source = "s", "assumed"
    factor = TIME_UNITS[unit]
    for i, c in enumerate(cells):
        out[i] = _to_float(c, decimal) * factor
    return out, unit, source


def _check_times(t: np.ndarray, lines, label: str = "") -> None:
    d = np.diff(t)
    if np.any(d == 0):
        i = int(np.argmax(d == 0)) + 1
        raise InputError(f"time {t[i]:g} s appears twice{label}",
                         "remove the duplicated reading or fix the time", row=lines[i])
    if np.any(d < 0):
        i = int(np.argmax(d < 0)) + 1
        raise InputError(f"times go backwards ({t[i - 1]:g} s then {t[i]:g} s){label}",
                         "sort the readings by time or fix the time column", row=lines[i])


_WELL_ROW = re.compile(r"^[A-Pa-p]$")
_TIME_IN_TEXT = re.compile(r"(\d+:\d{1,2}(?::\d{1,2}(?:[.,]\d+)?)?)|(\d+(?:[.,]\d+)?)\s*"
                           r"(s|sec|seconds|min|minutes|h|hours)\b", re.IGNORECASE)


def _plate_blocks(rows, lines, decimal):
    """A plate grid per read: a line naming the time, a row of column numbers (1..12/24), then
    rows lettered A..P. Returns (first line index, layout parts) or None for other shapes."""
    starts = []
    for i in range(1, len(rows) - 1):
        cells = [c.strip() for c in rows[i][:_width(rows[i])]]
        if len(cells) >= 3 and not cells[0] and all(c.isdigit() for c in cells[1:]) \
                and [int(c) for c in cells[1:]] == list(range(1, len(cells))):
            nxt = rows[i + 1][0].strip() if rows[i + 1] else ""
            if _WELL_ROW.match(nxt):
                starts.append(i)
    if len(starts) < 2:
        return None
    times, grids = [], []
    for i in starts:
        label = next((" ".join(rows[j]) for j in range(i - 1, max(i - 4, -1), -1)
                      if _width(rows[j])), "")
        m = _TIME_IN_TEXT.search(label)
        if not m:
            raise InputError("a plate block has no time in the line above it",
                             "each read needs a line such as 'Time: 0:00:30' above its grid",
                             row=lines[i])
        t = _clock_seconds(m.group(1)) if m.group(1) else float(
            m.group(2).replace(",", ".")) * TIME_UNITS[m.group(3).lower()]
        ncol = _width(rows[i]) - 1
        grid = {}
        j = i + 1
        while j < len(rows) and rows[j] and _WELL_ROW.match(rows[j][0].strip()):
            letter = rows[j][0].strip().upper()
            cells = list(rows[j][1:ncol + 1]) + [""] * (ncol - len(rows[j][1:ncol + 1]))
            v, f = _parse_values(cells, decimal, [lines[j]] * ncol, f"row {letter}")
            for c in range(ncol):
                grid[f"{letter}{c + 1}"] = (v[c], f[c])
            j += 1
        times.append(t)
        grids.append(grid)
    names = [n for n in grids[0] if not all(np.isnan(g[n][0]) and g[n][1] == "missing"
                                            for g in grids)]
    t = np.asarray(times, float)
    _check_times(t, [lines[i] for i in starts])
    values = np.array([[g.get(n, (np.nan, "missing"))[0] for g in grids] for n in names])
    flags = np.array([[g.get(n, (np.nan, "missing"))[1] for g in grids] for n in names],
                     dtype=object)
    timesm = np.broadcast_to(t, values.shape).copy()
    return starts[0] - 1, (names, timesm, values, flags, {}, "per block", "block labels", "")


def _need_two(t: np.ndarray, lines) -> None:
    if t.size < 2:
        raise InputError("only one time point was read; kinetics needs readings over time",
                         "export the whole kinetic read", row=lines[0])


# --------------------------------------------------------------------------- values


def _parse_values(cells, decimal, lines, col_label) -> tuple[np.ndarray, np.ndarray]:
    """Floats and flags: overflow markers and missing cells become NaN with a flag."""
    vals = np.full(len(cells), np.nan)
    flags = np.full(len(cells), "", dtype=object)
    # fast path: a column of plain numbers converts in one call; otherwise cells one by one
    try:
        fast = np.array([c.replace(",", ".") for c in cells] if decimal == "," else cells,
                        dtype=float)
    except ValueError:
        fast = np.full(len(cells), np.nan)
    done = np.isfinite(fast)
    vals[done] = fast[done]
    for i in np.nonzero(~done)[0]:
        c = cells[i]
        k = _kind(c, decimal)
        if k == "num":
            vals[i] = _to_float(c, decimal)
            if not np.isfinite(vals[i]):
                flags[i] = "overflow"
                vals[i] = np.nan
        elif k == "marker":
            flags[i] = "overflow"
        elif k == "empty":
            flags[i] = "missing"
        else:
            raise InputError(f"{c.strip()!r} is not a reading",
                             "leave the cell empty, or mark an overflow as OVER",
                             row=lines[i], column=col_label)
    return vals, flags


def detect_signal(words: str) -> str | None:
    """Signal kind named by header or metadata words, or None."""
    w = words.lower()
    if re.search(r"%\s*t\b|percent\s*trans|%\s*trans|\bt\s*%|\(%\)", w):
        return "percent"
    if re.search(r"\bi0\b|\bi_0\b|intensit|\bcounts\b", w):
        return "intensity"
    if re.search(r"transmit|transmission|\btrans\b|^t$|\(t\)", w):
        return "transmittance"
    if re.search(r"absorb|\babs\b|\bod\b|\bod\d{3}|\ba\d{3}\b|\bextinction", w):
        return "absorbance"
    return None


# --------------------------------------------------------------------------- main entry


def read_traces(path: str | Path, *, time_unit: str | None = None, signal: str | None = None,
                i0: float | None = None, sheet: str | None = None,
                partial: bool = False) -> TraceSet:
    """Read a kinetic export into a :class:`TraceSet` of absorbance traces.

    Parameters: ``time_unit`` overrides the detected unit of a numeric time column (s, min, h);
    ``signal`` overrides the detected signal kind (absorbance, transmittance, percent,
    intensity); ``i0`` is the reference intensity for raw intensities when the file has no
    ``I0`` trace or metadata line; ``sheet`` picks an .xlsx sheet; ``partial`` leaves out a
    half-written last line (a file an instrument is still appending to).

    Raises :class:`~rateabs.errors.InputError` with file, row and column for anything it cannot
    read. Input files are only read, never written.

    >>> ts = read_traces("plate.csv")            # doctest: +SKIP
    >>> ts.info["layout"], ts.names[:3]          # doctest: +SKIP
    ('wide', ['A1', 'A2', 'A3'])
    """
    path = str(path)
    if time_unit is not None and time_unit not in TIME_UNITS:
        raise UsageError(f"unknown time unit {time_unit!r}", "use s, min or h")
    if signal is not None and signal not in SIGNAL_KINDS:
        raise UsageError(f"unknown signal kind {signal!r}", f"use one of {', '.join(SIGNAL_KINDS)}")
    try:
        return _read(path, time_unit, signal, i0, sheet, partial)
    except InputError as exc:
        raise exc.located(path) from None


def _read(path, time_unit, signal, i0, sheet, partial=False) -> TraceSet:
    cells = load_cells(path, sheet, partial)
    rows = cells.rows
    decimal = _detect_decimal(rows, cells.delimiter)
    blocks = _plate_blocks(rows, cells.lines, decimal)
    hdr, shape = (blocks[0], "plate-blocks") if blocks else _find_header(rows, decimal)
    meta = _preamble(rows, hdr, cells.delimiter)
    warnings: list[str] = []
    if shape == "plate-blocks":
        parts = blocks[1]
        layout = "plate-blocks"
    elif shape == "transposed":
        parts = _transposed(rows, cells.lines, hdr, decimal, time_unit)
        layout = "transposed"
    else:
        header = [c.strip() for c in rows[hdr][:_width(rows[hdr])]]
        body, body_lines, trailing = _body(rows, cells.lines, hdr, len(header))
        if trailing:
            warnings.append(f"ignored {trailing} line(s) after the table (a second section)")
        layout, parts = _normal(header, body, body_lines, decimal, time_unit)
    names, times, values, flags, extra, t_unit, t_source, hdr_words = parts
    per_trace = extra.pop("__per_trace__", {})
    if not names:
        raise InputError("no trace columns were found next to the time column",
                         "export one column (or row) of readings per well or sample")

    words = " ".join([hdr_words] + [f"{k} {v}" for k, v in meta.items()
                                   if re.search(r"mode|measure|signal|type|unit|read", k, re.I)])
    kind_found = detect_signal(words)
    kind = signal or kind_found or "absorbance"
    more, looks_like = _plausibility(kind, values, signal is not None)
    warnings += more

    # reference intensity for raw intensities
    if kind == "intensity":
        ref_idx = [i for i, n in enumerate(names) if re.fullmatch(r"(i0|i_0|ref(erence)?)", n, re.I)]
        if i0 is None and ref_idx:
            i0_arr = values[ref_idx[0]]
            keep = [i for i in range(len(names)) if i not in ref_idx]
            names = [names[i] for i in keep]
            times, values, flags = times[keep], values[keep], flags[keep]
        elif i0 is None:
            m = next((v for k, v in meta.items() if re.fullmatch(r"i0|i_0|reference.*", k, re.I)),
                     None)
            if m is None:
                raise InputError("raw intensities need a reference intensity I0",
                                 "add an 'I0' column, an 'I0: value' line, or use --i0")
            i0_arr = float(re.search(r"[-+]?\d+(?:[.,]\d+)?", m).group(0).replace(",", "."))
        else:
            i0_arr = float(i0)
        values = absorbance_from_intensity(values, i0_arr)
    elif kind == "transmittance":
        values = absorbance_from_transmittance(values)
    elif kind == "percent":
        values = absorbance_from_percent_t(values)

    converted_bad = ~np.isfinite(values) & (flags == "")
    flags = np.where(converted_bad, "overflow", flags)   # T <= 0: no light through
    finite = np.isfinite(values)
    if np.any(np.abs(values[finite]) > 10) and looks_like != "percent":
        i, j = np.argwhere(np.isfinite(values) & (np.abs(values) > 10))[0]
        raise InputError(f"absorbance {values[i, j]:.4g} in trace {names[i]} is not plausible "
                         "(|A| > 10)", "check that this column holds readings and the signal "
                         "kind (--signal)")
    usable = finite & (flags == "")
    if not usable.any():
        raise InputError("no usable readings: every value is missing or over range",
                         "export the readings again")

    ts = TraceSet.from_arrays(names, times, values, usable=usable, flags=flags)
    ts.info.update(
        source=path, format=cells.fmt, delimiter=cells.delimiter, decimal=decimal,
        encoding=cells.encoding, layout=layout, header_row=cells.lines[hdr],
        time_unit=t_unit, time_unit_source=t_source, signal_kind=kind,
        signal_source="option" if signal else ("header" if kind_found else "assumed"),
        metadata=meta, extra_columns=extra, warnings=warnings, looks_like=looks_like,
    )
    for col, vals in per_trace.items():
        ts.meta[col] = [vals.get(n) for n in ts.meta.index]
    ts.info["per_trace_columns"] = list(per_trace)
    facts = _file_facts(meta)
    ts.info.update(facts)
    for key, val in facts.items():
        ts.meta[key] = val
    for col, series in extra.items():
        if _TEMP_HDR.search(col):
            arr = np.asarray(series, dtype=float)
            if np.isfinite(arr).any():
                mean = float(np.nanmean(arr))
                kelvin = mean if re.search(r"\bk\b|\(k\)|\[k\]|kelvin", col, re.I) else mean + 273.15
                ts.meta["temperature_K"] = kelvin
                ts.info["temperature_K"] = kelvin
    return ts


def _body(rows, lines, hdr, ncols):
    """Data rows below the header, up to a blank line followed by another section."""
    body, body_lines = [], []
    i = hdr + 1
    while i < len(rows):
        r = rows[i]
        if _width(r) == 0:
            rest = [j for j in range(i + 1, len(rows)) if _width(rows[j])]
            if not body:          # blank lines between the header and the data
                i += 1
                continue
            if rest:
                return body, body_lines, len(rest)
            break
        w = _width(r)
        if ncols < w <= len(rows[hdr]):
            raise InputError(f"column {w} holds readings but has no name in the header",
                             "name every column", row=lines[i], column=w)
        if w > ncols:
            raise InputError(f"this row has {w} fields but the header has {ncols}",
                             "fix the ragged row or the header", row=lines[i])
        if len(r) < ncols:
            raise InputError(f"this row has {w} fields but the header has {ncols}",
                             "fill the missing cells (leave them empty between delimiters)",
                             row=lines[i])
        body.append(list(r[:ncols]) + [""] * (ncols - len(r)))
        body_lines.append(lines[i])
        i += 1
    if not body:
        raise InputError("the header has no data rows below it", "export the readings too",
                         row=lines[hdr])
    return body, body_lines, 0


_BARE_T = re.compile(r"^t\s*([(\[/_]\s*(s|sec|min|h|hr)\s*[)\]]?)?$", re.IGNORECASE)


def _is_time_header(h: str) -> bool:
    """True for headers naming time: 'Time (s)', 'time_min', 'Zeit', 't [h]', 't'."""
    return (bool(_TIME_HDR.search(h)) or bool(_BARE_T.match(h.strip()))) and not _TEMP_HDR.search(h)


def _normal(header, body, lines, decimal, time_unit):
    cols = list(zip(*body, strict=True))
    ncols = len(header)
    # kinds from a sample of rows (first 150 and last 50) decide what each column is
    pick = list(range(min(150, len(body)))) + list(range(max(150, len(body) - 50), len(body)))
    kinds = [[_kind(col[i], decimal) for i in pick] for col in cols]
    blank = [not any(c.strip() for c in col) for col in cols]

    def frac(j, ks):
        col = [k for k in kinds[j] if k != "empty"]
        return sum(k in ks for k in col) / len(col) if col else 0.0

    empty_cols = {j for j in range(ncols) if blank[j] and not header[j]}
    for j, h in enumerate(header):
        if not h and j not in empty_cols:
            raise InputError("a column with readings has no name in the header",
                             "name every column", row=lines[0] - 1, column=j + 1)
    named = [h for j, h in enumerate(header) if j not in empty_cols]
    dup = [h for h, c in Counter(named).items() if c > 1]
    if dup:
        raise InputError(f"the column name {dup[0]!r} appears twice in the header",
                         "give every column its own name", row=lines[0] - 1)

    # time column: by header word, else the first column of numbers or clocks
    time_j = next((j for j, h in enumerate(header) if j not in empty_cols and _is_time_header(h)
                   and frac(j, ("num", "clock")) > 0.5), None)
    if time_j is None:
        cand = next((j for j in range(ncols) if j not in empty_cols
                     and frac(j, ("clock",)) > 0.9), None)
        time_j = cand
    if time_j is None:
        raise InputError("no time column found",
                         "name the time column, e.g. 'Time (s)', 'time_min' or 'Time'",
                         row=lines[0] - 1)
    unit_hint = time_unit_from_header(header[time_j])

    text_cols = [j for j in range(ncols) if j not in empty_cols and j != time_j
                 and frac(j, ("text",)) > 0.5]
    trace_j = next((j for j in text_cols if _TRACE_HDR.match(header[j])), None)
    if trace_j is None and text_cols:
        trace_j = text_cols[0]
    meta_cols = {j for j in range(ncols) if j not in empty_cols and j != time_j
                 and (_TEMP_HDR.search(header[j]) or _INDEX_HDR.match(header[j])
                      or (_is_time_header(header[j]) and j != time_j))}
    extra = {}
    for j in meta_cols:
        vals = [(_to_float(c, decimal) if _kind(c, decimal) == "num" else np.nan) for c in cols[j]]
        extra[header[j]] = vals

    if trace_j is not None:
        return "long", _long(header, cols, lines, decimal, time_j, trace_j, text_cols, meta_cols,
                             empty_cols, unit_hint, time_unit, extra)

    t, t_unit, t_source = _parse_times(list(cols[time_j]), decimal, unit_hint, time_unit, lines,
                                       header[time_j])
    _check_times(t, lines)
    _need_two(t, lines)
    trace_js = [j for j in range(ncols) if j not in empty_cols and j != time_j
                and j not in meta_cols]
    names, values, flags = [], [], []
    for j in trace_js:
        v, f = _parse_values(cols[j], decimal, lines, header[j])
        names.append(header[j])
        values.append(v)
        flags.append(f)
    if not names:
        return "wide", ([], None, None, None, extra, t_unit, t_source, "")
    values = np.vstack(values)
    flags = np.vstack(flags)
    times = np.broadcast_to(t, values.shape).copy()
    hdr_words = " ".join(header[j] for j in trace_js)
    return "wide", (names, times, values, flags, extra, t_unit, t_source, hdr_words)


def _long(header, cols, lines, decimal, time_j, trace_j, text_cols, meta_cols, empty_cols,
          unit_hint, time_unit, extra):
    value_cands = [j for j in range(len(header)) if j not in empty_cols and j not in
                   (time_j, trace_j) and j not in text_cols and j not in meta_cols]
    value_j = next((j for j in value_cands if _VALUE_HDR.search(header[j])), None)
    if value_j is None:
        if not value_cands:
            raise InputError("a trace column and a time column were found but no value column",
                             "add a column of readings, e.g. 'absorbance'", row=lines[0] - 1)
        value_j = value_cands[-1]
    t, t_unit, t_source = _parse_times(list(cols[time_j]), decimal, unit_hint, time_unit, lines,
                                       header[time_j])
    v, f = _parse_values(cols[value_j], decimal, lines, header[value_j])
    ids = [c.strip() for c in cols[trace_j]]
    for i, name in enumerate(ids):
        if not name:
            raise InputError("the trace name is empty", "name the trace of every reading",
                             row=lines[i], column=header[trace_j])
    names = list(dict.fromkeys(ids))
    idx = {n: [i for i, x in enumerate(ids) if x == n] for n in names}
    m = max(len(ix) for ix in idx.values())
    times = np.full((len(names), m), np.nan)
    values = np.full((len(names), m), np.nan)
    flags = np.full((len(names), m), "missing", dtype=object)
    # other columns that are constant within a trace become per-trace metadata (S0, enzyme...)
    per_trace: dict[str, dict[str, object]] = {}
    for j in range(len(header)):
        if j in (time_j, trace_j, value_j) or j in empty_cols or j in meta_cols:
            continue
        vals = {}
        for n in names:
            cells = {cols[j][i].strip() for i in idx[n]}
            if len(cells) != 1:
                break
            c = cells.pop()
            vals[n] = _to_float(c, decimal) if _kind(c, decimal) == "num" else c
        else:
            per_trace[header[j]] = vals
    extra["__per_trace__"] = per_trace
    for r, n in enumerate(names):
        ix = np.asarray(idx[n])
        order = np.argsort(t[ix], kind="stable")
        ix = ix[order]
        _check_times(t[ix], [lines[i] for i in ix], f" in trace {n}")
        k = len(ix)
        times[r, :k], values[r, :k], flags[r, :k] = t[ix], v[ix], f[ix]
    return (names, times, values, flags, extra, t_unit, t_source, header[value_j])


def _transposed(rows, lines, hdr, decimal, time_unit):
    header = rows[hdr]
    w = _width(header)
    label = header[0].strip()
    tcells = [c for c in header[1:w]]
    unit_hint = time_unit_from_header(label)
    hdr_lines = [lines[hdr]] * len(tcells)
    t, t_unit, t_source = _parse_times(tcells, decimal, unit_hint, time_unit, hdr_lines,
                                       label or "time row")
    _check_times(t, hdr_lines)
    _need_two(t, hdr_lines)
    names, values, flags = [], [], []
    extra: dict[str, list[float]] = {}
    for i in range(hdr + 1, len(rows)):
        r = rows[i]
        if _width(r) == 0:
            continue
        if _width(r) > w:
            raise InputError(f"this row has {_width(r)} fields but the time row has {w}",
                             "fix the ragged row", row=lines[i])
        cells = list(r[1:w]) + [""] * (w - max(len(r), 1))
        name = r[0].strip()
        if _TEMP_HDR.search(name) or _INDEX_HDR.match(name):
            extra[name] = [(_to_float(c, decimal) if _kind(c, decimal) == "num" else np.nan)
                           for c in cells]
            continue
        if name in names:
            raise InputError(f"the trace name {name!r} appears twice", "give every row its own name",
                             row=lines[i])
        v, f = _parse_values(cells, decimal, [lines[i]] * len(cells), name)
        names.append(name)
        values.append(v)
        flags.append(f)
    if not names:
        return ([], None, None, None, extra, t_unit, t_source, "")
    values = np.vstack(values)
    flags = np.vstack(flags)
    times = np.broadcast_to(t, values.shape).copy()
    return (names, times, values, flags, extra, t_unit, t_source, label + " " + " ".join(names))


def _plausibility(kind: str, values: np.ndarray, forced: bool) -> tuple[list[str], str | None]:
    """Warnings for values that cannot be what the header (or option) says they are, and the
    signal kind they look like instead (``"percent"`` or None)."""
    v = values[np.isfinite(values)]
    if v.size == 0:
        return [], None
    out = []
    looks_like = None
    how = "--signal says" if forced else "the file says"
    if kind == "absorbance" and np.median(v) > 5 and np.all(v >= 0) and np.max(v) <= 100.5:
        looks_like = "percent"
        out.append(f"{how} absorbance but the values ({np.min(v):.3g}-{np.max(v):.3g}) look like "
                   "percent transmittance; use --signal percent if they are %T")
    if kind == "transmittance":
        if np.any(v < 0):
            out.append("negative transmittance values: transmittance lies between 0 and 1; "
                       "check the blank or the signal kind")
        if np.median(v) > 1.5 and np.max(v) <= 100.5:
            looks_like = "percent"
            out.append(f"{how} transmittance but values run to {np.max(v):.3g}: they look like "
                       "percent transmittance; use --signal percent")
    if kind == "percent" and (np.any(v < 0) or np.any(v > 101)):
        out.append("percent transmittance outside 0-100: check the signal kind")
    return out, looks_like


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a plain table (a plate map, a rates table, a roster) with the same sniffing.

    Metadata lines above the header are skipped; the header is the first row of the table.
    """
    path = str(path)
    try:
        cells = load_cells(path)
    except InputError as exc:
        raise exc.located(path) from None
    keep = [k for k, r in enumerate(cells.rows) if not (r and r[0].lstrip().startswith("#"))]
    rows = [cells.rows[k] for k in keep]
    lines = [cells.lines[k] for k in keep]
    widths = [_width(r) for r in rows]
    if not any(widths):
        raise InputError("the table is empty", "add a header and rows", file=path)
    mode = Counter(w for w in widths if w >= 1).most_common(1)[0][0]
    start = next((i for i, w in enumerate(widths[:-1]) if w >= mode and widths[i + 1] >= mode),
                 next(i for i, w in enumerate(widths) if w >= mode))
    header = [c.strip() for c in rows[start][:widths[start]]]
    body = []
    decimal = _detect_decimal(rows, cells.delimiter)
    for r, ln in zip(rows[start + 1:], lines[start + 1:], strict=True):
        if _width(r) == 0:
            continue
        if _width(r) > len(header):
            raise InputError(f"this row has {_width(r)} fields but the header has {len(header)}",
                             "fix the ragged row", file=path, row=ln)
        cells_r = [c.strip() for c in r[:len(header)]] + [""] * (len(header) - len(r))
        if decimal == ",":
            cells_r = [c.replace(",", ".") if _NUM_COMMA.match(c) else c for c in cells_r]
        body.append(cells_r)
    df = pd.DataFrame(body, columns=header, dtype=object)
    df.attrs["lines"] = [ln for r, ln in zip(rows[start + 1:], lines[start + 1:], strict=True)
                         if _width(r)]
    df.attrs["source"] = path
    df.attrs["header_line"] = lines[start]
    return df


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
    """A table column as floats; empty cells are NaN, text is refused with its row."""
    path = df.attrs.get("source", "table")
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    out = np.empty(len(df))
    for k, cell in enumerate(df[col].tolist()):
        c = str(cell).strip()
        if c == "" or c.lower() in ("nan", "na", "-"):
            out[k] = np.nan
            continue
        try:
            out[k] = float(c)
        except ValueError:
            raise InputError(f"{c!r} is not a number", "fix the cell or remove the row",
                             file=path, row=lines[k], column=col) from None
    return out


def sample_path(name: str) -> Path:
    """Path of an embedded sample run shipped with the package."""
    return Path(__file__).with_name("data") / "samples" / name
