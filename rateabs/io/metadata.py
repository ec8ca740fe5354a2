"""What the lines above a table say: key/value metadata, and the facts the reader takes from
them (wavelength, temperature, read interval, pathlength, reference intensity), each recorded
with the line it came from. Also the plate format: the one a header line states (``Plate:
384``, ``Plate type: 384 well``, ``Wells: 96``) when the well names fit in it, else the smallest
that the well names show.

>>> meta = preamble([["Wavelength: 340 nm"], ["Pathlength", "0.56 cm"]], 2, ",")
>>> facts, said = file_facts(meta)
>>> facts, said["pathlength_cm"]
({'wavelength_nm': 340.0, 'pathlength_cm': 0.56}, 'Pathlength: 0.56 cm')
>>> plate_format(["A1", "B7", "H12"])
(96, 'well names A1..H12')
>>> stated_plate({"Plate": "384"})
(384, 'Plate: 384')
>>> choose_plate(plate_format(["A1", "H12"]), (384, "Plate: 384"))
(384, "file header line 'Plate: 384'; the well names A1..H12 fit in it", None)
"""

from __future__ import annotations

import re

from ..errors import InputError
from ..units import TIME_UNITS
from ..wells import PLATES, READ_PLATES, plate_format, well_position  # noqa: F401 - home

_KEY_VALUE = re.compile(r"^([^:=]{1,60}?)\s*[:=]\s*(.+)$")
_NUMBER = re.compile(r"[-+]?\d+(?:[.,]\d+)?")
#: Header keys that name the plate format with a bare count (``Plate: 384``, ``Wells: 96``);
#: any key with ``plate`` in it counts when its value says ``384 well`` or ``384-well``.
_PLATE_KEYS = frozenset({"plate", "plate type", "plate format", "plate size", "microplate",
                         "wells", "number of wells", "well count", "plate wells"})
_COUNT = re.compile(r"(?<![\d.,])(\d{1,4})(?![\d.,])")
_COUNT_WELLS = re.compile(r"(?<![\d.,])(\d{1,4})\s*-?\s*wells?\b", re.IGNORECASE)
I0_KEY = re.compile(r"i0|i_0|reference.*", re.IGNORECASE)


def preamble(rows: list[list[str]], upto: int, delimiter: str | None) -> dict[str, str]:
    """Key/value metadata from the lines above the header (``Wavelength: 340 nm``, ``k;v``);
    a cell longer than 500 characters is cut there (with an ellipsis)."""
    meta: dict[str, str] = {}
    joiner = f"{delimiter} " if delimiter in (",", ";") else " "
    for r in rows[:upto]:
        cells = [_cut(c.strip()) for c in r if c.strip()]
        if not cells:
            continue
        m = _KEY_VALUE.match(cells[0])
        if m:
            meta[m.group(1).strip()] = joiner.join([m.group(2).strip()] + cells[1:])
        elif len(cells) == 1:
            meta.setdefault("title", cells[0])
        else:
            meta[cells[0]] = " ".join(cells[1:])
    return meta


def _cut(cell: str, limit: int = 500) -> str:
    return cell if len(cell) <= limit else cell[:limit - 1] + "…"


def file_facts(meta: dict[str, str]) -> tuple[dict[str, float], dict[str, str]]:
    """Wavelength (nm), temperature (K), read interval (s) and pathlength (cm) found in the
    metadata, and for each the line it was read from."""
    facts: dict[str, float] = {}
    said: dict[str, str] = {}
    for key, val in meta.items():
        k = key.lower()
        num = _NUMBER.search(val)
        if not num:
            continue
        x = float(num.group(0).replace(",", "."))
        rest = val[num.end():].strip().lower()
        if "wavelength" in k or k in ("lambda", "wl", "λ"):
            name, value = "wavelength_nm", x
        elif "temp" in k:
            name, value = "temperature_K", x if rest.startswith("k") else x + 273.15
        elif "interval" in k:
            unit = rest.split()[0].rstrip(".") if rest else "s"
            name, value = "read_interval_s", x * TIME_UNITS.get(unit, 1.0)
        elif "path" in k:
            name, value = "pathlength_cm", x * (0.1 if rest.startswith("mm") else 1.0)
        else:
            continue
        facts[name], said[name] = value, f"{key}: {val}"
    return facts, said


def reference_intensity(meta: dict[str, str]) -> tuple[float, str] | None:
    """The reference intensity I0 of an ``I0: 52000`` line and the line, or None."""
    key = next((k for k in meta if I0_KEY.fullmatch(k)), None)
    if key is None:
        return None
    num = _NUMBER.search(meta[key])
    if num is None:
        raise InputError(f"the metadata line '{key}: {meta[key][:40]}' gives no number for the "
                         "reference intensity I0", "write a number there, or give --i0")
    return float(num.group(0).replace(",", ".")), f"{key}: {meta[key]}"


def stated_plate(meta: dict[str, str]) -> tuple[int, str] | None:
    """The plate format a header line states, and the line (the first such line), or None.
    A key such as ``Plate``, ``Plate type``, ``Wells`` with a standard count in its value, or a
    key naming a plate with ``N well`` in its value; ``Plate ID: 12`` states nothing."""
    for key, val in meta.items():
        k = " ".join(str(key).lower().split())
        m = _COUNT_WELLS.search(val) if "plate" in k else None
        if m is None and k in _PLATE_KEYS:
            m = _COUNT.search(val)
        if m and int(m.group(1)) in PLATES:
            return int(m.group(1)), f"{key}: {val}"
    return None


def choose_plate(guess: tuple[int | None, str | None], stated: tuple[int, str] | None
                 ) -> tuple[int | None, str | None, str | None]:
    """The plate format and its source from the names' guess and the header's statement: the
    stated format when the well names fit in it (standard plates nest, so fitting is being no
    larger), else the guess; and the contradiction in words when the names need more wells."""
    fmt, src = guess
    if stated is None or fmt is None:
        return fmt, src, None
    if fmt <= stated[0]:
        return stated[0], f"file header line '{stated[1]}'; the {src} fit in it", None
    return fmt, src, (f"the file header line '{stated[1]}' states a {stated[0]}-well plate, but "
                      f"the {src} need a {fmt}-well plate")
