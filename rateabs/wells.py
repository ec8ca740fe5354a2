"""Microplate well names and formats: the one home of the plate geometry, with nothing but the
standard library, so that a drawing process can place wells without loading the readers (and
pandas with them)."""

from __future__ import annotations

import re

#: Standard microplates: wells -> (rows, columns) (common practice).
PLATES = {6: (2, 3), 12: (3, 4), 24: (4, 6), 48: (6, 8), 96: (8, 12), 384: (16, 24),
          1536: (32, 48)}


def well_position(name: str) -> tuple[int, int] | None:
    """(row, column), both from 0, of a well name such as ``B7``, ``b07`` or ``AF48`` (columns 1
    to 99; :func:`well_key`); else None."""
    key = well_key(name)
    if key is None or not 1 <= key[1] <= 99:
        return None
    letters, col = key
    row = ord(letters[-1]) - 65 + (26 * (ord(letters[0]) - 64) if len(letters) == 2 else 0)
    return row, col - 1


#: The plates a kinetic read is taken to be on when only the well names tell: a read of A1..B3
#: is part of a 96-well plate far more often than a whole 6-well one (common practice); a
#: smaller plate is taken when a header line states it.
READ_PLATES = (96, 384, 1536)


def plate_format(names: list[str]) -> tuple[int | None, str | None]:
    """The smallest plate of :data:`READ_PLATES` holding every trace name as a well, and the
    evidence (which says when the names alone would fit a smaller plate)."""
    pos = [well_position(n) for n in names]
    if not names or any(p is None for p in pos):
        return None, None
    rows = max(p[0] for p in pos) + 1
    cols = max(p[1] for p in pos) + 1
    fits = [w for w, (r, c) in PLATES.items() if rows <= r and cols <= c]
    wells = next((w for w in fits if w in READ_PLATES), None)
    if wells is None:
        return None, None
    first = min(names, key=lambda n: well_position(n))
    last = max(names, key=lambda n: well_position(n))
    partial = f", the smallest of {'/'.join(map(str, READ_PLATES))} wells that holds them" if (
        fits[0] != wells) else ""
    return wells, f"well names {first}..{last}{partial}"


def well_key(name: str) -> tuple[str, int] | None:
    """(row letters, column number) of a well name such as A1, A01 or a001, else None: names
    with one key are one well, however padded or cased."""
    m = re.fullmatch(r"\s*([A-Za-z]{1,2})0*(\d{1,3})\s*", str(name))
    return (m.group(1).upper(), int(m.group(2))) if m else None


def same_well(name: str, names) -> str | None:
    """The one name of ``names`` that is ``name`` or the same well written otherwise (``a1``,
    ``A01`` for ``A1``), else None."""
    if name in names:
        return name
    key = well_key(name)
    found = [n for n in names if key is not None and well_key(n) == key]
    return found[0] if len(found) == 1 else None
