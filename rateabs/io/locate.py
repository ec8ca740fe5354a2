"""Where the table is: the header row and the shape of the table, from the first lines.

Three answers: ``normal`` (a header row naming columns, readings below: wide or long),
``transposed`` (a row of times, one row per trace below) and ``blocks`` (a plate grid per
read, each under a line naming its time).

>>> locate([["Run 3"], ["Time (s)", "A1"], ["0", "0.1"], ["30", "0.2"]], ".")
Located(shape='normal', index=1)
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass

from ..errors import InputError
from .headers import is_time, is_time_unit_word
from .sniffing import width
from .values import cell_kind

WELL_ROW = re.compile(r"^([A-Z]|A[A-F])$", re.IGNORECASE)     # plate rows A..P, up to AF


@dataclass(frozen=True)
class Located:
    """The shape of the table and the head index of its header (blocks: first grid row)."""

    shape: str
    index: int


def is_column_numbers(cells: list[str]) -> bool:
    """A plate grid's column row: an empty corner, then 1, 2, ... k (ASCII digits, k >= 2)."""
    if len(cells) < 3 or cells[0].strip():
        return False
    nums = [c.strip() for c in cells[1:width(cells)]]
    return len(nums) >= 2 and all(re.fullmatch(r"[0-9]{1,6}", c) for c in nums) and [
        int(c) for c in nums] == list(range(1, len(nums) + 1))


def looks_like_column_numbers(cells: list[str]) -> bool:
    """An empty corner then cells starting with a digit, without a decimal mark
    (``1, 2, 3²``): a column row, maybe a damaged one."""
    if not cells or cells[0].strip():          # most rows: a value in the corner cell
        return False
    nums = [c.strip() for c in cells[1:width(cells)]]
    return len(nums) >= 2 and all(c[:1].isdigit() and not re.search(r"[.,]", c) for c in nums)


def locate(rows: list[list[str]], decimal: str) -> Located:
    """The table's shape and header row among the first rows of a file (plate blocks: two
    or more grids under column-number rows)."""
    starts = [i for i in range(1, len(rows) - 1) if looks_like_column_numbers(rows[i])
              and rows[i + 1] and WELL_ROW.match(rows[i + 1][0].strip())]
    exact = [i for i in starts if is_column_numbers(rows[i])]
    if len(starts) >= 2 and exact:
        return Located("blocks", starts[0])
    kinds = _Kinds(rows, decimal)
    found = _normal_header(rows, kinds)
    if found is not None:
        return Located("normal", found)
    found = _transposed_header(rows, kinds)
    if found is not None:
        return Located("transposed", found)
    if any(kinds.texty(i) for i in range(len(rows))):
        raise InputError("a header row was found but no numeric data below it",
                         "export the readings, not only the header")
    raise InputError("no header row naming the columns was found",
                     "add a header line such as 'Time (s),A1,A2,...'")


class _Kinds:
    """Cell kinds of the rows' first cells (enough to tell a header), classified when first
    asked for (headers sit near the top)."""

    CELLS = 256

    def __init__(self, rows: list[list[str]], decimal: str) -> None:
        self.rows, self.decimal = rows, decimal
        self.widths = [width(r) for r in rows]
        self.cache: dict[int, list[str]] = {}

    def __getitem__(self, i: int) -> list[str]:
        if i not in self.cache:
            cells = self.rows[i][:min(self.widths[i], self.CELLS)]
            self.cache[i] = [cell_kind(c, self.decimal) for c in cells]
        return self.cache[i]

    def texty(self, i: int) -> bool:
        """Row ``i`` has two or more filled cells, at least half of them words."""
        ks = [k for k in self[i] if k != "empty"]
        return len(ks) >= 2 and sum(k == "text" for k in ks) >= len(ks) / 2


def _normal_header(rows, kinds: _Kinds) -> int | None:
    """The last line of words above numeric data, with a word over a column of numbers."""
    widths = kinds.widths
    wide_rows = [w for w in widths if w >= 2]
    if not wide_rows:
        raise InputError("no table found: every line has a single field",
                         "export with one column for time and one per trace")
    mode = Counter(wide_rows).most_common(1)[0][0]
    for i in range(len(rows) - 1):
        if widths[i] < 2 or len(rows[i]) < mode or not kinds.texty(i):
            continue
        following = [j for j in range(i + 1, min(len(rows), i + 8)) if widths[j] >= 2][:5]
        if not following or all(k in ("text", "empty") for k in kinds[following[0]]):
            continue            # the header is the last line of words before the data
        for col, k in enumerate(kinds[i]):
            if k != "text":
                continue
            below = [kinds[j][col] if col < len(kinds[j]) else "empty" for j in following]
            if sum(b in ("num", "clock") for b in below) > len(below) / 2:
                return i
    return None


def _transposed_header(rows, kinds: _Kinds) -> int | None:
    """A row of times under a label (first cell text, the rest times), trace rows below; among
    label rows at the top (cycle, time, temperature) the one whose label names time."""
    widths = kinds.widths
    for i in range(len(rows) - 1):
        if widths[i] < 3 or kinds[i][0] != "text":
            continue
        rest = [k for k in kinds[i][1:] if k != "empty"]
        if not rest or not all(k in ("num", "clock") for k in rest):
            continue
        nxt = [j for j in range(i + 1, len(rows)) if widths[j] >= 2][:3]
        if nxt and all(kinds[j][0] == "text" for j in nxt):
            for j in range(i, min(i + 4, len(rows))):
                if widths[j] >= 3 and (is_time(rows[j][0]) or is_time_unit_word(rows[j][0])):
                    return j
            return i
    return None
