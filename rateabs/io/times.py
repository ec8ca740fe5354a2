"""Times: clock strings, numbers in a unit, and how the unit was decided.

The unit of numeric times comes, in this order, from ``--time-unit`` (source ``option``), from
the header (``header``), or is assumed to be seconds (``assumed``), which the reader says in a
warning with the way to override it, and with the reason when the times look like minutes.
Clock times (``h:mm:ss``, ``mm:ss``) and times written with their unit (``30 s``) carry their
own (``clock``). A stated ``--time-unit`` beats the header; a clash between them is a warning
naming both.

>>> clock_seconds("1:02:03.5"), clock_seconds("02:30"), clock_seconds("1.5 min")
(3723.5, 150.0, 90.0)
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..units import TIME_UNITS
from .values import CLOCK2, CLOCK3, TIMED, cell_kind, show_cell, to_float

MAX_TIME_S = 1e10          # about 317 years: no kinetic read runs longer
MIN_TIME_POINTS = 3        # a slope with an uncertainty needs three readings
_MINUTE_STEPS = (0.1, 0.2, 0.25, 0.5)


def clock_seconds(cell: str) -> float | None:
    """Seconds of a clock string (``h:mm:ss``, ``mm:ss``) or a time with its unit (``30 s``)."""
    c = cell.strip().replace(",", ".")
    m = CLOCK3.match(c)
    if m:
        return int(m.group(1)) * 3600 + int(m.group(2)) * 60 + float(m.group(3))
    m = CLOCK2.match(c)
    if m:
        return int(m.group(1)) * 60 + float(m.group(2))
    m = TIMED.match(c)
    if m:
        return float(m.group(1)) * TIME_UNITS[m.group(2).lower()]
    return None


@dataclass
class TimeUnit:
    """How the times of one file were read: the decided unit and where it came from."""

    label: str                      # the time column's header, or the time row's label
    option: str | None              # --time-unit, if given
    header_unit: str | None         # the unit the header names, if any
    clock: bool | None = None       # clock strings (decided by the first times read)
    unit: str = ""
    source: str = ""
    looks_like: str | None = None
    warnings: list[str] = field(default_factory=list)

    def decide(self, clock: bool) -> None:
        """Fix the unit once the first times show whether they are clock strings."""
        self.clock = clock
        if clock:
            self.unit, self.source = "clock", "clock"
            if self.option:
                self.warnings.append(f"--time-unit {self.option} is not used: the times in "
                                     f"{self.label!r} are clock times that carry their unit")
        elif self.option:
            self.unit, self.source = self.option, "option"
            if self.header_unit and self.header_unit != self.option:
                self.warnings.append(f"--time-unit {self.option} overrides the header "
                                     f"{self.label!r}, which names {self.header_unit}")
        elif self.header_unit:
            self.unit, self.source = self.header_unit, "header"
        else:
            self.unit, self.source = "s", "assumed"

    def seconds(self, cells, decimal: str, lines) -> np.ndarray:
        """Times in seconds of a run of time cells (numbers or clock strings, not mixed)."""
        kinds = [cell_kind(c, decimal) for c in cells]
        for i, k in enumerate(kinds):
            if k not in ("num", "clock"):
                what = "is empty" if k == "empty" else f"{show_cell(cells[i])} is not a time"
                raise InputError(f"the time {what}",
                                 "every reading needs a time in s, min, h or h:mm:ss",
                                 row=lines[i], column=self.label)
        if self.clock is None and kinds:
            self.decide(kinds[0] == "clock")
        want = "clock" if self.clock else "num"
        bad = next((i for i, k in enumerate(kinds) if k != want), None)
        if bad is not None:
            raise InputError(f"time {show_cell(cells[bad])} mixes with "
                             f"{'clock' if self.clock else 'numeric'} times",
                             "write every time the same way", row=lines[bad], column=self.label)
        if self.clock:
            return np.array([clock_seconds(c) for c in cells], dtype=float)
        with np.errstate(over="ignore"):         # beyond float range: refused as implausible
            return np.array([to_float(c, decimal) for c in cells], dtype=float) * self.factor

    @property
    def factor(self) -> float:
        """Seconds per unit of numeric times."""
        return TIME_UNITS[self.unit] if self.unit in TIME_UNITS else 1.0

    def assumed_notes(self, t: np.ndarray) -> None:
        """The warning for an assumed unit, with the reason when the times look like minutes."""
        if self.source != "assumed":
            return
        text = (f"the time column {self.label!r} names no unit: read as seconds (assumed); "
                "if it is in minutes, rerun with --time-unit min (or h)")
        if looks_like_minutes(t):
            self.looks_like = "min"
            step = float(np.median(np.diff(t)))
            text += (f"; its {t.size} readings step by {step:g} and end at {t[-1]:g}, "
                     "which looks like minutes")
        self.warnings.append(text)


def looks_like_minutes(t: np.ndarray) -> bool:
    """True for times (read as s) that step by 0.1-0.5 and end before 60: minutes, likely."""
    t = t[np.isfinite(t)]
    if t.size < 5 or not 0 < t[-1] < 60:
        return False
    step = float(np.median(np.diff(t)))
    return any(abs(step - s) <= 1e-6 * s for s in _MINUTE_STEPS)


def check_plausible(t: np.ndarray, lines, label: str = "") -> None:
    """Refuse times that are not finite or beyond any kinetic read."""
    bad = ~np.isfinite(t) | (np.abs(t) > MAX_TIME_S)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"time {t[i]:g} s is not plausible for a kinetic read (beyond "
                         f"{MAX_TIME_S:.0e} s){label}", "fix the time or its unit",
                         row=int(lines[i]))


def check_times(t: np.ndarray, lines, label: str = "") -> None:
    """Refuse times that are not plausible, repeat, or run backwards."""
    check_plausible(t, lines, label)
    d = np.diff(t)
    if np.any(d == 0):
        i = int(np.argmax(d == 0)) + 1
        raise InputError(f"time {t[i]:g} s appears twice{label}",
                         "remove the duplicated reading or fix the time", row=int(lines[i]))
    if np.any(d < 0):
        i = int(np.argmax(d < 0)) + 1
        raise InputError(f"times go backwards ({t[i - 1]:g} s then {t[i]:g} s){label}",
                         "sort the readings by time or fix the time column",
                         row=int(lines[i]))


def need_time_points(n: int, line: int | None) -> None:
    """Refuse a file with fewer time points than a slope with an uncertainty needs."""
    if n < MIN_TIME_POINTS:
        count = {0: "no", 1: "only one", 2: "only two"}.get(n, f"only {n}")
        raise InputError(f"{count} time point{'s were' if n != 1 else ' was'} read; kinetics "
                         f"needs at least {MIN_TIME_POINTS} readings over time",
                         "export the whole kinetic read", row=line)

