"""An export opened for reading: its format, the first lines as cells (enough to find the table
and its header) and the rest of its lines, read lazily so that a large file is never held
whole in memory.

A *line* is the text of one line of a text export, or the cells of one row of a workbook;
:meth:`Source.split` turns either into cells.
"""

from __future__ import annotations

import itertools
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from .decoding import HEAD_BYTES, ends_with_line_end, open_text, sniff_encoding
from .sniffing import FORMATS, sniff_delimiter, split_line
from .workbook import Workbook

HEAD_LINES = 2000             # lines examined to find the table, its header and its kinds
HEAD_CHARS = 4_000_000        # ... or fewer when lines are long
BLOCK_CHARS = 4_000_000       # text read at a time after the head
BLOCK_ROWS = 5_000            # workbook rows read at a time
Line = str | list[str]


class Source:
    """An open export; use as a context manager. ``head``: the first rows as cells."""

    def __init__(self, path: str, sheet: str | None = None) -> None:
        self.path = path
        p = Path(path)
        if not p.exists():
            raise InputError("no such file", "check the path", file=path)
        if p.is_dir():
            raise InputError("is a folder, not a data file", "give the path of one export file",
                             file=path)
        self.size = p.stat().st_size
        with open(p, "rb") as fh:
            raw = fh.read(HEAD_BYTES)
        if not raw.strip():
            if self.size <= HEAD_BYTES:
                raise InputError("the file is empty", "export the kinetic read again", file=path)
        self._refuse_other_formats(raw, p.suffix.lower())
        if raw[:4] == b"PK\x03\x04":
            self._open_workbook(sheet)
        else:
            self._open_text(raw)
        try:
            self._read_head()
        except BaseException:
            self.close()
            raise

    def _refuse_other_formats(self, raw: bytes, suffix: str) -> None:
        if raw[:4] == b"PK\x03\x04":
            return
        if suffix in (".xlsx", ".xlsm"):
            raise InputError("the file is named .xlsx but is not an Excel workbook",
                             "rename it to .csv if it holds text, or save it again as .xlsx",
                             file=self.path)
        if suffix == ".xls" or raw[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1":
            raise InputError("old binary .xls workbooks are not read",
                             "save the sheet as .xlsx or CSV", file=self.path)

    def _open_workbook(self, sheet: str | None) -> None:
        self.fmt, self.delimiter, self.encoding, self.terminated = "xlsx", None, None, True
        self._book = Workbook(self.path, sheet)
        self.notes = [self._book.note] if self._book.note else []
        self._lines: Iterator[tuple[int, Line]] = iter(self._book)
        self.text = False

    def _open_text(self, raw: bytes) -> None:
        try:
            self.encoding = sniff_encoding(raw, complete=self.size <= HEAD_BYTES)
        except InputError as exc:
            raise exc.located(self.path) from None
        self.notes: list[str] = []
        self.terminated = ends_with_line_end(self.path, self.encoding, self.size)
        self._stream = open_text(self.path, self.encoding)
        self._book = None
        self._lines = ((i, ln.rstrip("\n")) for i, ln in enumerate(self._stream, start=1))
        self.text = True

    def _read_head(self) -> None:
        head: list[tuple[int, Line]] = []
        chars = filled = 0
        for no, line in self._lines:
            head.append((no, line))
            chars += len(line) + 1 if isinstance(line, str) else sum(map(len, line)) + 1
            filled += bool(line.strip() if isinstance(line, str) else any(line))
            if filled >= HEAD_LINES or chars >= HEAD_CHARS:
                break
        self.chars_per_line = max(chars / max(len(head), 1), 1.0)
        if self.text:
            texts = [ln for _, ln in head]
            if not any(t.strip() for t in texts):
                raise InputError("the file is empty", "export the kinetic read again",
                                 file=self.path)
            self.delimiter = sniff_delimiter(texts)
            self.fmt = FORMATS[self.delimiter]
        self.head_nos = [no for no, _ in head]
        self.head_lines = [ln for _, ln in head]
        self.head = [self.split(ln, no) for no, ln in head]

    def split(self, line: Line, line_no: int) -> list[str]:
        """The cells of a line."""
        return line if isinstance(line, list) else split_line(line, self.delimiter, line_no)

    def blocks_from(self, k: int) -> Iterator[tuple[int, list[Line]]]:
        """From head index ``k`` to the end of the file (once), in blocks of consecutive lines:
        ``(number of the first line, lines)``."""
        if k < len(self.head_lines):
            yield self.head_nos[k], self.head_lines[k:]
        no = self.head_nos[-1] + 1 if self.head_nos else 1
        while True:
            if self.text:
                block = [ln.rstrip("\n") for ln in self._stream.readlines(BLOCK_CHARS)]
            else:
                block = [cells for _, cells in itertools.islice(self._lines, BLOCK_ROWS)]
            if not block:
                return
            yield no, block
            no += len(block)

    def lines_from(self, k: int) -> Iterator[tuple[int, Line]]:
        """``(line number, line)`` from head index ``k`` to the end of the file (once)."""
        for first, block in self.blocks_from(k):
            yield from zip(itertools.count(first), block)

    def rows_from(self, k: int) -> Iterator[tuple[int, list[str]]]:
        """``(line number, cells)`` from head index ``k`` to the end of the file (once)."""
        return ((no, self.split(ln, no)) for no, ln in self.lines_from(k))

    def estimated_lines(self) -> int:
        """About how many lines the file has (from its size and the head's line length)."""
        per_char = 2 if (self.encoding or "").startswith("utf-16") else 1
        return int(self.size / per_char / self.chars_per_line * 1.05) + 16

    def close(self) -> None:
        """Release the file."""
        if self._book is not None:
            self._book.close()
        else:
            self._stream.close()

    def __enter__(self) -> Source:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


@dataclass
class Cells:
    """Every row of a file as string cells, with the file's own line numbers (1-based)."""

    rows: list[list[str]]
    lines: list[int]
    fmt: str
    delimiter: str | None
    encoding: str | None
    notes: list[str] = field(default_factory=list)      # which sheet of a workbook was read


def load_cells(path: str | Path, sheet: str | None = None, partial: bool = False) -> Cells:
    """Read a file into rows of string cells (no interpretation yet).

    With ``partial`` a last line without its line end (a file still being written) is left out.
    """
    with Source(str(path), sheet) as src:
        pairs = list(src.rows_from(0))
        if partial and not src.terminated and pairs:
            pairs.pop()
        return Cells([r for _, r in pairs], [n for n, _ in pairs], src.fmt, src.delimiter,
                     src.encoding, list(src.notes))
