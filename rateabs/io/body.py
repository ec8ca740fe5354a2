"""The rows below a header, read in chunks: where the table ends, ragged and short rows, a
half-written last line, and the numbers of each chunk as float columns.

Rules, in every mode:

* blank lines between the header and the first row are skipped; a blank line after data ends
  the table, and any lines after it (a second section) are left out and counted;
* a row wider than the header is refused; so is a row with fewer fields, except the last line of
  a file that does not end with a line end: that is a half-written line (a torn write), left out
  with a note. So is an unterminated last line whose last number has fewer decimals than the
  line above (a number cut short) or that holds an undecodable character. With ``partial`` (a
  file still being written) an unterminated last line is always left out.

The numbers of a chunk of text lines are converted by pandas' C parser where the chunk allows;
columns it cannot read as numbers (overflow markers, missing-value words, clock times) are read
cell by cell with the rules of :mod:`rateabs.io.values`.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import InputError
from .decoding import REPLACEMENT
from .sniffing import field_count, width
from .source import Line, Source
from .times import TimeUnit
from .values import cell_kind, decimals, float_flags, parse_values, to_float

#: Why a row was left out, by reason code.
DROP_REASONS = {
    "half-written": "the file ends in the middle of this line (a write that was cut short)",
    "after-table": "it follows the blank line that ends the table (another section)",
    "unfinished": "the file is still being written and this line has no line end yet",
}


@dataclass
class RowLog:
    """Rows left out, by reason (every one counted, the first few line numbers kept)."""

    dropped: dict[str, list[int]] = field(default_factory=dict)
    counts: dict[str, int] = field(default_factory=dict)

    def drop(self, reason: str, line: int) -> None:
        """Record one row left out."""
        self.counts[reason] = self.counts.get(reason, 0) + 1
        lines = self.dropped.setdefault(reason, [])
        if len(lines) < 20:
            lines.append(line)

    def summary(self) -> dict[str, dict]:
        """``{reason: {"count", "lines", "why"}}`` for TraceSet.info."""
        return {r: {"count": self.counts[r], "lines": self.dropped[r], "why": DROP_REASONS[r]}
                for r in self.dropped}

    def warnings(self) -> list[str]:
        """One warning line per reason."""
        out = []
        for r, lines in self.dropped.items():
            n = self.counts[r]
            where = f"line {lines[0]}" if n == 1 else f"lines {lines[0]}-{lines[-1]}" if (
                n == len(lines)) else f"lines {lines[0]}, {lines[1]}, ..."
            out.append(f"left out {n} row{'s' if n > 1 else ''} ({where}): {DROP_REASONS[r]}")
        return out


def with_last(items: Iterable) -> Iterator[tuple[object, bool]]:
    """Each item with whether it is the last one."""
    it = iter(items)
    try:
        prev = next(it)
    except StopIteration:
        return
    for item in it:
        yield prev, False
        prev = item
    yield prev, True


def is_blank(line: Line) -> bool:
    """True for a line with no content."""
    return not (line.strip() if isinstance(line, str) else any(c.strip() for c in line))


def torn(src: Source, cells: list[str], before: list[str] | None) -> bool:
    """An unterminated last line that was cut: an undecodable character, or its last number has
    fewer decimals than the same cell of the line above."""
    if any(REPLACEMENT in c for c in cells):
        return True
    j = width(cells) - 1
    if before is None or j < 0 or j >= len(before):
        return False
    return decimals(cells[j]) < decimals(before[j])


@dataclass
class Chunk:
    """Consecutive body rows: their line numbers and lines (each with the header's width),
    and the lines joined, when they were taken whole from the file."""

    nos: np.ndarray
    lines: list[Line]
    text: str | None = None


class Body:
    """Iterate the rows below a header in :class:`Chunk` s, applying the module's rules.

    A block of lines that all have the header's number of fields (no blank line, no quotes, not
    the unfinished end of the file) is taken whole; any other block line by line.
    """

    def __init__(self, src: Source, start: int, ncols: int, header_len: int, log: RowLog,
                 partial: bool = False) -> None:
        self.src, self.start, self.ncols, self.header_len = src, start, ncols, header_len
        self.log, self.partial = log, partial
        self.rows = 0
        self.ended = False
        self._prev: tuple[int, Line] | None = None

    def __iter__(self) -> Iterator[Chunk]:
        for (first, block), last in with_last(self.src.blocks_from(self.start)):
            if self.ended:
                self._after_table(first, block)
                continue
            text = self._whole(block, last)
            chunk = Chunk(np.arange(first, first + len(block)), block, text) if text else (
                self._line_by_line(first, block, last))
            if chunk is not None and len(chunk.nos):
                self.rows += len(chunk.nos)
                self._prev = (int(chunk.nos[-1]), chunk.lines[-1])
                yield chunk
        if not self.rows:
            raise InputError("the header has no data rows below it", "export the readings too",
                             row=self.src.head_nos[self.start - 1])

    def _whole(self, block: list[Line], last: bool) -> str | None:
        """The block's text when every line passes without a closer look, else None."""
        if not block or not isinstance(block[0], str) or (last and not self.src.terminated):
            return None
        d = self.src.delimiter
        if d == " ":
            ok = all(len(ln.split()) == self.ncols for ln in block)
        else:
            want = self.ncols - 1
            ok = all(ln.count(d) == want for ln in block)
        text = "\n".join(block) if ok else ""
        return text if ok and '"' not in text else None

    def _line_by_line(self, first: int, block: list[Line], last: bool) -> Chunk | None:
        nos: list[int] = []
        lines: list[Line] = []
        for k, line in enumerate(block):
            no = first + k
            if is_blank(line):
                if self.rows or nos:
                    self.ended = True
                    self._after_table(no + 1, block[k + 1:])
                    break
                continue
            kept = self._row(no, line, last and k == len(block) - 1)
            if kept is not None:
                self._prev = (no, kept)
                nos.append(no)
                lines.append(kept)
        return Chunk(np.asarray(nos, dtype=np.int64), lines)

    def _after_table(self, first: int, block: list[Line]) -> None:
        for k, line in enumerate(block):
            if not is_blank(line):
                self.log.drop("after-table", first + k)

    def _row(self, no: int, line: Line, last: bool) -> Line | None:
        """The line trimmed to the header's width, or None when it is left out."""
        unterminated = last and not self.src.terminated
        if unterminated and self.partial:
            self.log.drop("unfinished", no)
            return None
        n = field_count(line, self.src.delimiter) if isinstance(line, str) else len(line)
        if n == self.ncols and not unterminated:
            return line
        cells = self.src.split(line, no)
        w = width(cells)
        if self.ncols < w <= self.header_len:
            raise InputError(f"column {w} holds readings but has no name in the header",
                             "name every column", row=no, column=w)
        if w > self.ncols:
            raise InputError(f"this row has {w} fields but the header has {self.ncols}",
                             "fix the ragged row or the header", row=no)
        if unterminated and (len(cells) < self.ncols or torn(self.src, cells, self._above())):
            self.log.drop("half-written", no)
            return None
        if len(cells) < self.ncols:
            raise InputError(f"this row has {w} fields but the header has {self.ncols}",
                             "fill the missing cells (leave them empty between delimiters)",
                             row=no)
        if n == self.ncols:
            return line
        cells = cells[:self.ncols]
        delim = self.src.delimiter
        if delim and delim != " " and not any(delim in c or '"' in c for c in cells):
            return delim.join(cells)
        return cells

    def _above(self) -> list[str] | None:
        return None if self._prev is None else self.src.split(self._prev[1], self._prev[0])


def _flagged(nums: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Numbers pandas read as readings and flag codes: an infinite reading is an overflow, not
    a number."""
    flags = float_flags(nums)
    return (np.where(flags != 0, np.nan, nums) if flags.any() else nums), flags


class ChunkTable:
    """The columns of one chunk: floats where pandas reads them, else text cells."""

    def __init__(self, chunk: Chunk, src: Source, ncols: int, decimal: str,
                 text_cols: set[int]) -> None:
        self.nos = chunk.nos
        self.decimal = decimal
        self.frame = _fast_frame(chunk, src, ncols, decimal, text_cols)
        self.rows = None
        if self.frame is None:
            self.rows = [src.split(ln, no) for no, ln in zip(chunk.nos, chunk.lines, strict=True)]
            self.rows = [r + [""] * (ncols - len(r)) for r in self.rows]

    def __len__(self) -> int:
        return len(self.nos)

    def _numbers(self, j: int) -> np.ndarray | None:
        if self.frame is None:
            return None
        col = self.frame[j]
        return col.to_numpy(dtype=float) if col.dtype.kind in "iuf" else None

    def cells(self, j: int) -> list[str]:
        """Column ``j`` as text cells."""
        if self.frame is None:
            return [r[j] for r in self.rows]
        col = self.frame[j]
        if col.dtype.kind in "iuf":
            return ["" if np.isnan(x) else repr(float(x)) for x in col.to_numpy(dtype=float)]
        return ["" if not isinstance(x, str) else x for x in col.tolist()]

    def readings(self, j: int, label: str) -> tuple[np.ndarray, np.ndarray]:
        """Column ``j`` as readings and flag codes."""
        nums = self._numbers(j)
        if nums is not None:
            return _flagged(nums)
        return parse_values(self.cells(j), self.decimal, self.nos, label)

    def readings_block(self, js: list[int]) -> tuple[np.ndarray, np.ndarray] | None:
        """The columns ``js`` as readings and flag codes, (len(js), rows) each, taken from
        pandas at once where it read every one of them as numbers (else None: column by
        column with :meth:`readings`)."""
        if self.frame is None or not js:
            return None
        dtypes = self.frame.dtypes.to_numpy()
        if not all(dtypes[j].kind in "iuf" for j in js):
            return None
        return _flagged(self.frame.iloc[:, js].to_numpy(dtype=float).T)

    def times(self, j: int, tu: TimeUnit) -> np.ndarray:
        """Column ``j`` as times in seconds."""
        nums = self._numbers(j)
        if nums is None or np.isnan(nums).any():
            return tu.seconds(self.cells(j), self.decimal, self.nos)
        if tu.clock is None:
            tu.decide(False)
        if tu.clock:
            return tu.seconds(self.cells(j), self.decimal, self.nos)
        with np.errstate(over="ignore"):         # beyond float range: refused as implausible
            return nums * tu.factor

    def lenient(self, j: int) -> np.ndarray:
        """Column ``j`` as floats, NaN where a cell is not a number (set-aside columns)."""
        nums = self._numbers(j)
        if nums is not None:
            return nums
        return np.array([to_float(c, self.decimal) if cell_kind(c, self.decimal) == "num"
                         else np.nan for c in self.cells(j)])

    def filled(self, j: int) -> np.ndarray:
        """True where column ``j`` holds something."""
        nums = self._numbers(j)
        if nums is not None:
            return ~np.isnan(nums)
        return np.array([bool(c.strip()) for c in self.cells(j)])


def _fast_frame(chunk: Chunk, src: Source, ncols: int, decimal: str,
                text_cols: set[int]) -> pd.DataFrame | None:
    """The chunk parsed by pandas' C parser, or None where the lines need the slow path."""
    if not src.text or not all(isinstance(ln, str) for ln in chunk.lines):
        return None
    sep = r"\s+" if src.delimiter == " " else src.delimiter
    text = chunk.text if chunk.text is not None else "\n".join(chunk.lines)
    try:
        frame = pd.read_csv(
            io.StringIO(text), sep=sep, header=None, names=range(ncols),
            index_col=False, decimal=decimal, na_values=[""], keep_default_na=False,
            dtype={j: object for j in text_cols}, skip_blank_lines=False, engine="c",
            quoting=csv.QUOTE_MINIMAL, low_memory=False)
    except (ValueError, pd.errors.ParserError, csv.Error):
        return None
    return frame if frame.shape == (len(chunk.lines), ncols) else None
