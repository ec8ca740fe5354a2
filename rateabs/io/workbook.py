"""``.xlsx`` workbooks: the rows of one sheet as text cells (read lazily, row by row)."""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterator

from ..errors import InputError, UsageError


class Workbook:
    """One sheet of a workbook, opened read-only; iterate for ``(line, cells)`` pairs."""

    def __init__(self, path: str, sheet: str | None) -> None:
        try:
            import openpyxl
        except ImportError:  # pragma: no cover - openpyxl is a dependency
            raise InputError("reading .xlsx needs openpyxl", "pip install openpyxl",
                             file=path) from None
        try:
            self.book = openpyxl.load_workbook(path, read_only=True, data_only=True)
        except Exception as exc:  # openpyxl raises many kinds for damaged files
            raise InputError(f"the workbook cannot be opened ({type(exc).__name__})",
                             "save it again as .xlsx or export CSV", file=path) from None
        names = self.book.sheetnames
        if sheet is not None and sheet not in names:
            self.book.close()
            raise UsageError(f"no sheet named {sheet!r}", f"use one of {', '.join(names)}",
                             file=path)
        if not names:
            self.book.close()
            raise InputError("the workbook has no sheet", "save it again with the data",
                             file=path)
        self.path = path
        self.note = ""
        if sheet:
            self.sheet = self.book[sheet]
        else:
            self.sheet = next((ws for ws in self.book.worksheets if _has_data(ws)),
                              self.book.worksheets[0])
            if len(names) > 1:
                self.note = (f"the workbook has {len(names)} sheets ({', '.join(names)}): sheet "
                             f"{self.sheet.title!r} was read, the first with data; --sheet "
                             "picks another")

    def __iter__(self) -> Iterator[tuple[int, list[str]]]:
        try:
            for i, row in enumerate(self.sheet.iter_rows(values_only=True), start=1):
                yield i, [cell_text(v) for v in row]
        except InputError:
            raise
        except Exception as exc:  # damaged sheet XML surfaces while iterating
            raise InputError(f"the workbook cannot be read ({type(exc).__name__})",
                             "save it again as .xlsx or export CSV", file=self.path) from None

    def close(self) -> None:
        """Release the file."""
        self.book.close()


def _has_data(ws, rows: int = 50) -> bool:
    """Whether a sheet holds a value in its first ``rows`` rows."""
    try:
        return any(v not in (None, "") for row in ws.iter_rows(max_row=rows, values_only=True)
                   for v in row)
    except Exception:  # noqa: BLE001 - a damaged sheet is found when it is read
        return True


def cell_text(v) -> str:
    """A workbook cell as the text an export would hold (times of day as h:mm:ss)."""
    if v is None:
        return ""
    if isinstance(v, bool):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, dt.timedelta):
        return clock_text(v.total_seconds())
    if isinstance(v, dt.datetime):
        return v.strftime("%H:%M:%S.%f")
    if isinstance(v, dt.time):
        return clock_text(v.hour * 3600 + v.minute * 60 + v.second + v.microsecond / 1e6)
    return str(v).replace("\r", " ").replace("\n", " ")


def clock_text(seconds: float) -> str:
    """Seconds as ``h:mm:ss.ffffff``."""
    h, rem = divmod(seconds, 3600)
    m, s = divmod(rem, 60)
    return f"{int(h)}:{int(m):02d}:{s:09.6f}"
