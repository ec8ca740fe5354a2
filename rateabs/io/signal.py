"""The signal kind of the readings (absorbance, transmittance, percent transmittance, raw
intensity), where that was learnt, whether the values agree, and the conversion to absorbance.

>>> decide_kind(None, "A1 A2", {"Mode": "%T"})
('percent', 'metadata')
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..photometry import (
    absorbance_from_intensity,
    absorbance_from_percent_t,
    absorbance_from_transmittance,
)
from .headers import detect_signal
from .metadata import reference_intensity
from .values import OVER

SIGNAL_KINDS = ("absorbance", "transmittance", "percent", "intensity")
MAX_ABSORBANCE = 10.0            # |A| beyond this is no reading of absorbance
_SAMPLE = 1_000_000              # readings examined for the plausibility checks
_META_KEYS = re.compile(r"mode|measure|signal|type|unit|read", re.IGNORECASE)
_REFERENCE = re.compile(r"i0|i_0|ref(erence)?", re.IGNORECASE)


def decide_kind(option: str | None, header_words: str, meta: dict[str, str]) -> tuple[str, str]:
    """(kind, source): from the option, the header words, the metadata lines, or assumed."""
    if option:
        return option, "option"
    found = detect_signal(header_words)
    if found:
        return found, "header"
    found = detect_signal(" ".join(f"{k} {v}" for k, v in meta.items() if _META_KEYS.search(k)))
    if found:
        return found, "metadata"
    return "absorbance", "assumed"


#: A signal unit written after every trace's name, in brackets: ``A1 (mAU)``, ``B2 [OD]``,
#: ``tube 3 (%T)``.
_NAME_UNIT = re.compile(r"^(?P<name>.*\S)\s*[(\[]\s*(?P<unit>m?AU|m?OD|m?Abs|A|%T|T)\s*[)\]]$",
                        re.IGNORECASE)
#: Each such unit: the signal kind it names and the factor to that kind's own scale
#: (milli-absorbance, mAU or mOD, is a thousandth of absorbance: common practice).
_UNIT_KINDS = {"au": ("absorbance", 1.0), "od": ("absorbance", 1.0), "abs": ("absorbance", 1.0),
               "a": ("absorbance", 1.0), "mau": ("absorbance", 1e-3),
               "mod": ("absorbance", 1e-3), "mabs": ("absorbance", 1e-3),
               "%t": ("percent", 1.0), "t": ("transmittance", 1.0)}


@dataclass(frozen=True)
class NameUnit:
    """A signal unit written after every trace name: the names without it, the unit as
    written, the signal kind it names and the factor to that kind's scale."""

    names: list[str]
    unit: str
    kind: str
    factor: float


def unit_in_names(names: list[str]) -> NameUnit | None:
    """The signal unit every trace name carries in brackets (``A1 (mAU)``, ``A2 (mAU)``), or
    None when not every name carries one, or not the same one (a name such as ``sample (A)``
    alone is kept as it is).

    >>> unit_in_names(["A1 (mAU)", "A2 (mAU)"])
    NameUnit(names=['A1', 'A2'], unit='mAU', kind='absorbance', factor=0.001)
    """
    found = [_NAME_UNIT.match(n.strip()) for n in names]
    if not names or not all(found):
        return None
    units = {m.group("unit").lower() for m in found}
    bare = [m.group("name") for m in found]
    if len(units) != 1 or len(set(bare)) != len(bare):
        return None
    kind, factor = _UNIT_KINDS[units.pop()]
    return NameUnit(bare, found[0].group("unit"), kind, factor)


def unit_in_header(header: str) -> NameUnit | None:
    """The signal unit in brackets at the end of the one column of readings of a long table
    (``absorbance (mAU)``), or None; no names change."""
    m = _NAME_UNIT.match(header.strip())
    if m is None:
        return None
    kind, factor = _UNIT_KINDS[m.group("unit").lower()]
    return NameUnit([], m.group("unit"), kind, factor)


def sample(values: np.ndarray) -> np.ndarray:
    """About a million finite readings at most, evenly spread over the times of every trace."""
    v = values[:, ::max(1, values.size // _SAMPLE)]       # a view: no copy of the readings
    return v[np.isfinite(v)]


def plausibility(kind: str, values: np.ndarray, forced: bool) -> tuple[list[str], str | None]:
    """Warnings for values that cannot be what the header (or option) says they are, and the
    signal kind they look like instead (``"percent"`` or None)."""
    v = sample(values)
    if v.size == 0:
        return [], None
    out, looks_like = [], None
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


@dataclass
class Absorbance:
    """Readings converted to absorbance, and what the conversion used."""

    names: list[str]
    values: np.ndarray
    flags: np.ndarray
    facts: dict = field(default_factory=dict)


def to_absorbance(kind: str, names: list[str], values: np.ndarray, flags: np.ndarray,
                  meta: dict[str, str], i0: float | None) -> Absorbance:
    """Convert readings of ``kind`` to absorbance; a reading that converts to no number
    (T <= 0: no light through) is flagged overflow."""
    out = Absorbance(names, values, flags)
    if kind == "absorbance":
        return out
    if kind == "intensity":
        out = _reference(out, meta, i0)
        converted = absorbance_from_intensity(out.values, out.facts.pop("_i0"))
    elif kind == "transmittance":
        converted = absorbance_from_transmittance(values)
    else:
        converted = absorbance_from_percent_t(values)
    with np.errstate(invalid="ignore"):
        lost = ~np.isfinite(converted) & (out.flags == 0)
    out.values = np.where(lost, np.nan, converted)
    out.flags = np.where(lost, OVER, out.flags).astype(np.int8)
    return out


def _reference(out: Absorbance, meta: dict[str, str], i0: float | None) -> Absorbance:
    """The reference intensity: --i0, else an I0/reference trace, else an ``I0:`` line."""
    ref = [i for i, n in enumerate(out.names) if _REFERENCE.fullmatch(n.strip())]
    if i0 is not None:
        out.facts.update(_i0=float(i0), i0_source="option")
    elif ref:
        keep = [i for i in range(len(out.names)) if i != ref[0]]
        out.facts.update(_i0=out.values[ref[0]], i0_source=f"trace {out.names[ref[0]]!r}")
        out.names = [out.names[i] for i in keep]
        out.values, out.flags = out.values[keep], out.flags[keep]
    else:
        found = reference_intensity(meta)
        if found is None:
            raise InputError("raw intensities need a reference intensity I0",
                             "add an 'I0' column, an 'I0: value' line, or use --i0")
        out.facts.update(_i0=found[0], i0=found[0], i0_source=f"metadata line {found[1]!r}")
    return out


def check_magnitude(values: np.ndarray, names: list[str], looks_like: str | None) -> None:
    """Refuse absorbances beyond +-10 (a column of something else), unless they look like %T."""
    if looks_like == "percent" or not np.isfinite(values).any():
        return
    with np.errstate(invalid="ignore"):
        if np.nanmax(values) <= MAX_ABSORBANCE and np.nanmin(values) >= -MAX_ABSORBANCE:
            return
        i, j = np.argwhere(np.abs(values) > MAX_ABSORBANCE)[0]
    raise InputError(f"absorbance {values[i, j]:.4g} in trace {names[i]} is not plausible "
                     f"(|A| > {MAX_ABSORBANCE:g})", "check that this column holds readings and "
                     "the signal kind (--signal)")
