"""Times: clock strings, numbers in a unit, and how the unit was decided.

The unit of numeric times comes, in this order, from ``--time-unit`` (source ``option``), from
the header (``header``), or is assumed to be seconds (``assumed``), which the reader says in a
warning with the way to override it, and with the reason when the times look like minutes.
Clock times (``h:mm:ss``) and times written with their unit (``30 s``) carry their own
(``clock``). A stated ``--time-unit`` beats the header; a clash between them is a warning
naming both.

A two-part clock time ``a:b`` is either m:ss or h:mm, and the cell cannot say which; its
reading is decided, in this order, by ``--time-unit`` (``min`` m:ss, ``h`` h:mm, ``s`` refused),
by the header (a pattern such as ``hh:mm`` or ``m:ss``, or a unit word: ``Time (h)`` h:mm,
``Time (min)`` m:ss), by the cells (a decimal second part, ``1:30.5``, is seconds; beside
h:mm:ss times only one reading may keep the times rising), by a read interval the file header
states (:func:`rateabs.io.reader.interval_check`), and otherwise is m:ss (``default``), which
the reader says in a warning with the way to change it. What is no evidence: a second part that
never passes 59 (both readings need that), a first part over 59 (m:ss exports that do not roll
over to h:mm:ss write it, and so does a read of more than 59 h), the word ``Clock`` (elapsed
time is written on clocks either way).

>>> clock_seconds("1:02:03.5"), clock_seconds("02:30"), clock_seconds("02:30", "h:mm")
(3723.5, 150.0, 9000.0)
>>> clock_seconds("1.5 min")
90.0
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError, UsageError
from ..units import TIME_UNITS
from .headers import time_unit_from_header
from .values import CLOCK2, CLOCK3, TIMED, cell_kind, show_cell, to_float

MAX_TIME_S = 1e10          # about 317 years: no kinetic read runs longer
MIN_TIME_POINTS = 3        # a slope with an uncertainty needs three readings
_MINUTE_STEPS = (0.1, 0.2, 0.25, 0.5)

#: What a two-part clock time ``a:b`` means for each ``--time-unit`` (the unit of ``a``).
TWO_PART = {"min": "m:ss", "h": "h:mm"}
#: Seconds per unit of the first part, by reading; and the reading when nothing tells.
TWO_PART_SECONDS = {"m:ss": 60.0, "h:mm": 3600.0}
DEFAULT_TWO_PART = "m:ss"
TWO_PART_WORDS = {"m:ss": "minutes:seconds", "h:mm": "hours:minutes"}
#: ``hh:mm``, ``h:mm``, ``mm:ss``, ``m:ss`` written in a header (not part of ``hh:mm:ss``).
_PATTERN = re.compile(r"(?<![a-z:])(h{1,2}|m{1,2}):(mm|ss)(?![a-z:])", re.IGNORECASE)
_PATTERN_READING = {("h", "m"): "h:mm", ("m", "s"): "m:ss"}


def file_time_text(seconds: float, unit: str | None) -> str:
    """A moment (s) written as the file writes its times: h:mm:ss (hours past 24 kept) for
    clock times (``unit`` "clock"), else in the time column's unit ('12000 s', '200 min').

    >>> file_time_text(50400, "clock"), file_time_text(12000, "min")
    ('14:00:00', '200 min')
    """
    unit = unit or "s"
    if unit == "clock":
        h, rem = divmod(round(float(seconds)), 3600)
        m, sec = divmod(rem, 60)
        return f"{h:02d}:{m:02d}:{sec:02d}"
    per = TIME_UNITS.get(unit.lower(), 1.0)
    places = max(0, math.ceil(math.log10(per))) + 1          # to a tenth of a second or finer
    return f"{seconds / per:.{places}f}".rstrip("0").rstrip(".") + f" {unit}"


def clock_seconds(cell: str, two_part: str = DEFAULT_TWO_PART) -> float | None:
    """Seconds of a clock string (``h:mm:ss``; ``a:b`` read as ``two_part``, m:ss or h:mm) or
    of a time with its unit (``30 s``)."""
    c = cell.strip().replace(",", ".")
    m = CLOCK3.match(c)
    if m:
        return int(m.group(1)) * 3600 + int(m.group(2)) * 60 + float(m.group(3))
    m = CLOCK2.match(c)
    if m:
        unit = TWO_PART_SECONDS[two_part]
        return int(m.group(1)) * unit + float(m.group(2)) * (unit / 60)
    m = TIMED.match(c)
    if m:
        return float(m.group(1)) * TIME_UNITS[m.group(2).lower()]
    return None


@dataclass
class TimeUnit:
    """How the times of one file were read: the decided unit and where it came from, and for
    two-part clock times their reading (m:ss or h:mm), its source and the evidence."""

    label: str                      # the time column's header, or the time row's label
    option: str | None              # --time-unit, if given
    header_unit: str | None         # the unit the header names, if any
    clock: bool | None = None       # clock strings (decided by the first times read)
    unit: str = ""
    source: str = ""
    looks_like: str | None = None
    warnings: list[str] = field(default_factory=list)
    reading: str | None = None      # two-part clock times: "m:ss" or "h:mm"
    reading_source: str | None = None   # option, header, data, interval or default
    reading_why: str = ""           # the evidence, in words
    only_two_part: bool = True      # every clock time seen has two parts

    def decide(self, clock: bool) -> None:
        """Fix the unit once the first times show whether they are clock strings."""
        self.clock = clock
        if clock:
            self.unit, self.source = "clock", "clock"
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
            return self.clock_times(cells, lines)
        with np.errstate(over="ignore"):         # beyond float range: refused as implausible
            return np.array([to_float(c, decimal) for c in cells], dtype=float) * self.factor

    def clock_times(self, cells, lines) -> np.ndarray:
        """Seconds of clock cells, two-part ones in the reading decided by the first of them."""
        two = [CLOCK2.match(c.strip()) is not None for c in cells]
        self.only_two_part = self.only_two_part and all(two)
        if self.reading is None and any(two):
            first = two.index(True)
            self.reading, self.reading_source, self.reading_why = two_part_reading(
                self.label, self.option, cells)
            if self.reading_source == "option" and self.header_unit in TWO_PART and TWO_PART[
                    self.header_unit] != self.reading:
                self.warnings.append(f"--time-unit {self.option} overrides the header "
                                     f"{self.label!r}, which names {self.header_unit}")
            if self.option == "s":
                raise UsageError(
                    f"--time-unit s cannot say what the two-part clock time "
                    f"{show_cell(cells[first])} means",
                    "give --time-unit h if the times are hours:minutes (h:mm) or --time-unit "
                    "min if they are minutes:seconds (m:ss)", row=lines[first],
                    column=self.label)
        reading = self.reading or DEFAULT_TWO_PART
        return np.array([clock_seconds(c, reading) for c in cells], dtype=float)

    @property
    def factor(self) -> float:
        """Seconds per unit of numeric times."""
        return TIME_UNITS[self.unit] if self.unit in TIME_UNITS else 1.0

    def assumed_notes(self, t: np.ndarray) -> None:
        """The warnings of what was assumed: a numeric unit (with the reason when the times
        look like minutes), the reading of two-part clock times, an unused --time-unit."""
        if self.source == "clock":
            self.clock_notes(t)
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

    def clock_notes(self, t: np.ndarray) -> None:
        """The warning of a default two-part reading (with both readings' spans), or of a
        --time-unit that clock times made moot."""
        if self.reading is None:
            if self.option:
                self.warnings.append(f"--time-unit {self.option} is not used: the times in "
                                     f"{self.label!r} are clock times that carry their unit")
            return
        if self.reading_source == "default":
            self.warnings.append(default_reading_note(self.label, t, self.only_two_part))


def two_part_reading(label: str, option: str | None, cells) -> tuple[str, str, str]:
    """(reading, source, evidence in words) of two-part clock times: see the module
    docstring for the order."""
    if option:
        return TWO_PART.get(option, DEFAULT_TWO_PART), "option", f"--time-unit {option} says"
    m = _PATTERN.search(label)
    if m:
        reading = _PATTERN_READING.get((m.group(1)[0].lower(), m.group(2)[0].lower()))
        if reading:
            return reading, "header", f"the header {label!r} writes {m.group(0)}"
    unit = time_unit_from_header(label)
    if unit in TWO_PART:
        return TWO_PART[unit], "header", f"the header {label!r} names {unit}"
    cells = [c.strip().replace(",", ".") for c in cells]
    decimal_second = next((c for c in cells if (m := CLOCK2.match(c)) and "." in m.group(2)),
                          None)
    if decimal_second:
        return "m:ss", "data", (f"the time {decimal_second!r} has a decimal second part, "
                                "which only seconds have")
    rising = [r for r in TWO_PART_SECONDS if _rises([clock_seconds(c, r) for c in cells])]
    if len(rising) == 1 and not all(CLOCK2.match(c) for c in cells):
        other = "h:mm" if rising[0] == "m:ss" else "m:ss"
        return rising[0], "data", (f"beside the column's h:mm:ss times, only {rising[0]} keeps "
                                   f"the times rising ({other} runs backwards)")
    return DEFAULT_TWO_PART, "default", "nothing in the file says which"


def _rises(seconds: list[float | None]) -> bool:
    t = np.array([np.nan if x is None else x for x in seconds], dtype=float)
    t = t[np.isfinite(t)]
    return t.size >= 2 and bool(np.all(np.diff(t) > 0))


def default_reading_note(label: str, t: np.ndarray, only_two_part: bool) -> str:
    """The warning of two-part clock times read as m:ss by default, with the other reading."""
    t = t[np.isfinite(t)]
    span = (f" (a span of {t[-1] - t[0]:g} s = {(t[-1] - t[0]) / 60:.4g} min"
            + (f"; as hours:minutes it would be {(t[-1] - t[0]) / 60:.4g} h)" if only_two_part
               else ")")) if t.size else ""
    return (f"the clock times in {label!r} have two parts: read as m:ss, minutes:seconds, by "
            f"default{span}, as nothing in the file says which; if they are hours:minutes, "
            "rerun with --time-unit h (--time-unit min states m:ss)")


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


#: Seconds in a day: a clock of the time of day that drops by more than half of it has passed
#: midnight.
DAY_S = 86400.0


def past_midnight(t: np.ndarray, tu: TimeUnit) -> np.ndarray:
    """Clock times of day (h:mm:ss, or h:mm) that pass midnight, counted on into the next day:
    where such a clock drops by more than half a day (23:59:30 then 00:00:00), a day is added
    to every later time, and a warning says where. Other times are returned as they are (and
    :func:`check_times` refuses any that run backwards)."""
    if not tu.clock or tu.reading == "m:ss" or t.size < 2:
        return t
    drops = np.flatnonzero(np.diff(t) < -DAY_S / 2)
    if not drops.size:
        return t
    out = t + DAY_S * np.cumsum(np.r_[0.0, np.diff(t) < -DAY_S / 2])
    last = file_time_text(t[int(drops[0])], "clock")
    tu.warnings.append(f"the clock in {tu.label!r} passes midnight after {last} "
                       f"({len(drops)} time(s)): the later times are counted on the next day")
    return out


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

