"""Microplate well names and formats: the one home of the plate geometry, with nothing but the
standard library, so that a drawing process can place wells without loading the readers (and
pandas with them)."""

from __future__ import annotations

import re

_WELL = re.compile(r"^([A-Z]{1,2})0*([1-9]\d?)$")

#: Standard microplates: wells -> (rows, columns) (common practice).
PLATES = {6: (2, 3), 12: (3, 4), 24: (4, 6), 48: (6, 8), 96: (8, 12), 384: (16, 24),
          1536: (32, 48)}


def well_position(name: str) -> tuple[int, int] | None:
    """(row, column), both from 0, of a well name such as ``B7`` or ``AF48``; else None."""
    m = _WELL.match(name.strip().upper())
    if not m:
        return None
    letters, col = m.group(1), int(m.group(2))
    row = ord(letters[-1]) - 65 + (26 * (ord(letters[0]) - 64) if len(letters) == 2 else 0)
    return row, col - 1
