"""The roster: who handed in which run, what they reported and when.

``roster.csv`` in the class folder has the columns ``student``, ``file`` and ``reported`` (the
student's number, in the rubric's unit), optionally ``submitted`` (an ISO date or date-time,
checked against the rubric's ``deadline``); any other column is carried into the gradebook.
A roster whose columns cannot be told apart is refused; a student's bad cell (no file, a path
leaving the folder, a reported value that is not a number) costs that student a finding, never
the class.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError
from .rubric import parse_when

ROSTER = "roster.csv"
REQUIRED = ("student", "file", "reported")
KNOWN = REQUIRED + ("submitted",)


@dataclass(frozen=True)
class Task:
    """One student's work to grade."""

    student: str
    file: str
    path: str | None
    reported: float | None
    extra: dict
    problem: str | None = None              # why the run cannot be analysed
    index: int = 0                          # position in the roster, from 1
    row: int = 0                            # line of roster.csv
    reported_text: str = ""
    reported_problem: str | None = None     # why the reported value cannot be checked
    submitted: str = ""


def read_roster(folder: str | Path, unit: tuple[str, str] | None = None) -> list[Task]:
    """The roster of a class folder, every path checked to stay inside the folder; with the
    rubric's (quantity, unit), reported values typed with a unit are converted to it
    (:func:`parse_reported`)."""
    from ..io import read_table

    folder = Path(folder)
    if not folder.is_dir():
        raise InputError("is not a folder", "give the folder holding roster.csv and the runs",
                         file=str(folder))
    roster = folder / ROSTER
    if not roster.is_file():
        raise InputError("no roster.csv in the folder",
                         "add roster.csv with columns student, file, reported", file=str(folder))
    df = read_table(roster)
    cols = _columns(list(df.columns), str(roster))
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    base = folder.resolve()
    tasks, seen = [], {}
    for k, rec in enumerate(df.to_dict("records")):
        student = str(rec[cols["student"]]).strip()
        if not student:
            raise InputError("a roster row has no student name", "name every student",
                             file=str(roster), row=lines[k], column=cols["student"])
        if student in seen:
            raise InputError(f"student {student!r} appears twice (also on row {seen[student]})",
                             "give each student one row", file=str(roster), row=lines[k],
                             column=cols["student"])
        seen[student] = lines[k]
        fname = str(rec[cols["file"]]).strip()
        problem, path = _locate(folder, base, fname)
        text = str(rec[cols["reported"]]).strip()
        reported, why = parse_reported(text, unit)
        extra = {c: rec[c] for c in df.columns if c.strip().lower() not in KNOWN}
        sub = str(rec[cols["submitted"]]).strip() if "submitted" in cols else ""
        tasks.append(Task(student, fname, path, reported, extra, problem, k + 1, lines[k], text,
                          why, sub))
    if not tasks:
        raise InputError("roster.csv lists no students", "add a row per student",
                         file=str(roster))
    return tasks


#: File endings of runs a roster may name (what an instrument or a spreadsheet exports).
RUN_SUFFIXES = (".csv", ".tsv", ".txt", ".dat", ".xlsx")


def unlisted_runs(folder: str | Path, files, skip=()) -> list[str]:
    """Run-like files at the top of the class folder that none of the roster's ``files`` names
    (a student left out of the roster, or a misspelt file name), sorted; ``roster.csv`` and the
    paths in ``skip`` (the rubric, outputs written into the folder) are not runs.

    >>> unlisted_runs("class", ["run_01.csv", "run_02.csv"])    # doctest: +SKIP
    ['run_16.csv']
    """
    folder = Path(folder)
    named = {(folder / f).resolve() for f in files if f}
    named |= {Path(p).resolve() for p in skip}
    out = []
    for p in folder.iterdir():
        if p.name.startswith(".") or p.name == ROSTER or not p.is_file() or \
                p.suffix.lower() not in RUN_SUFFIXES:
            continue
        if p.resolve() not in named:
            out.append(p.name)
    return sorted(out)


def _columns(header: list[str], roster: str) -> dict[str, str]:
    """The roster's known columns by their lower-case name; two spellings of one are refused."""
    cols: dict[str, str] = {}
    for c in header:
        key = c.strip().lower()
        if key in KNOWN and key in cols:
            raise InputError(f"roster.csv has two {key!r} columns ({cols[key]!r} and {c!r})",
                             "keep one of them, or rename the other", file=roster)
        if key in KNOWN:
            cols[key] = c
    for need in REQUIRED:
        if need not in cols:
            raise InputError(f"roster.csv has no {need!r} column",
                             "columns student, file, reported are required", file=roster)
    return cols


def _locate(folder: Path, base: Path, fname: str) -> tuple[str | None, str | None]:
    """(problem, resolved path) of a roster file name: only files inside the class folder."""
    p = Path(fname)
    if not fname:
        return "no file named in the roster", None
    if p.is_absolute() or ".." in p.parts or fname.startswith(("~", "\\")):
        return (f"the file path {fname!r} leaves the class folder; only names inside it are "
                "read"), None
    full = (folder / p).resolve()
    if not full.is_relative_to(base):
        return f"the file path {fname!r} leads outside the class folder", None
    if not full.is_file():
        return f"the file {fname!r} is missing", None
    return None, str(full)


_NUMBER = re.compile(r"^[-+]?(\d+([.,]\d*)?|[.,]\d+)([eE][-+]?\d+)?$")


#: A number followed by a unit, as students type it ("0.0008 1/s", "8e-4 s-1").
_WITH_UNIT = re.compile(r"^\s*([-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?)\s*(\S.*)$")


def parse_reported(text: str, unit=None) -> tuple[float | None, str | None]:
    """(value, why it cannot be checked): text, NaN and infinity give no value; 0 and negative
    numbers are values (the grade says what is wrong with them). With the rubric's ``unit``
    (``(quantity, unit text)``), a number followed by a unit is read in that unit and converted
    to the rubric's (a unit the quantity cannot have gives no value, saying so).

    >>> parse_reported("8,1e-4")
    (0.00081, None)
    >>> parse_reported("nan")[1]
    "the reported value 'nan' is not a finite number"
    >>> parse_reported("0.048 1/min", ("k", "1/s"))
    (0.0008, None)
    """
    s = text.strip()
    if not s:
        return None, "no reported value in the roster"
    m = _WITH_UNIT.match(s) if unit is not None and not _NUMBER.match(s) else None
    if m:
        return _with_unit(s, m.group(1), m.group(2), *unit)
    if not _NUMBER.match(s):
        special = s.lower().lstrip("+-") in ("nan", "inf", "infinity")
        what = "is not a finite number" if special else "is not a number"
        return None, f"the reported value {s!r} {what}"
    x = float(s.replace(",", "."))
    if not math.isfinite(x):
        return None, f"the reported value {s!r} is not a finite number"
    return x, None


def plain_number(text: str) -> bool:
    """Whether a reported cell is a bare number (no unit typed)."""
    return bool(_NUMBER.match(text.strip()))


def reported_reading(text: str, value: float | None, unit: str) -> str | None:
    """How the grader read a reported cell, one sentence (None when it holds no number): a bare
    number is taken in the rubric's ``unit``; a number typed with a unit is converted to it.

    >>> reported_reading("0.07225 1/min", 0.0012041666, "1/s")
    "your reported '0.07225 1/min' was converted to 0.001204 1/s, the unit graded"
    """
    if value is None:
        return None
    s = text.strip()
    if plain_number(s):
        return (f"your reported number {s!r} names no unit: read in {unit}, the unit the "
                "rubric grades in")
    return f"your reported {s!r} was converted to {value:.4g} {unit}, the unit graded"


def _with_unit(s: str, number: str, typed: str, quantity: str, unit: str):
    """A reported number with its typed unit, in the rubric's unit."""
    from .rubric import parse_unit

    given, want = parse_unit(quantity, typed), parse_unit(quantity, unit)
    if given is None or want is None:
        return None, (f"the reported value {s!r} carries a unit, {typed!r}, that is not one "
                      f"of {quantity} (the rubric grades it in {unit})")
    x = float(number.replace(",", ".")) / given.per_base * want.per_base
    return (x, None) if math.isfinite(x) else (None, f"the reported value {s!r} is not finite")


def lateness(submitted: str, deadline) -> tuple[bool | None, str | None]:
    """(late?, a sentence) for a ``submitted`` cell against the rubric's deadline.

    A date-only deadline runs to the end of that day; a date-only submission is late only on a
    later day. Where one side names a time zone and the other does not, wall-clock times are
    compared.
    """
    if deadline is None:
        return None, None
    if not submitted:
        return None, "no submission time in the roster's 'submitted' column"
    when = parse_when(submitted)
    if when is None:
        return None, (f"the submission time {submitted!r} is not a date (write e.g. "
                      "2026-03-14 16:55)")
    if isinstance(when, dt.datetime) != isinstance(deadline, dt.datetime):
        when_d = when.date() if isinstance(when, dt.datetime) else when
        dead_d = deadline.date() if isinstance(deadline, dt.datetime) else deadline
        late = when_d > dead_d
        return late, (f"submitted {submitted}, after the deadline {deadline.isoformat()}: "
                      "flagged as late" if late else None)
    a, b = when, deadline
    if isinstance(a, dt.datetime) and (a.tzinfo is None) != (b.tzinfo is None):
        a, b = a.replace(tzinfo=None), b.replace(tzinfo=None)
    if a <= b:
        return False, None
    return True, (f"submitted {submitted}, {_duration(a - b)} after the deadline "
                  f"{deadline.isoformat(sep=' ') if isinstance(deadline, dt.datetime) else deadline}"
                  ": flagged as late")


def _duration(d) -> str:
    if isinstance(d, dt.timedelta):
        mins = int(d.total_seconds() // 60)
        days, rem = divmod(mins, 1440)
        h, m = divmod(rem, 60)
        parts = [f"{days} d"] * bool(days) + [f"{h} h"] * bool(h) + [f"{m} min"] * bool(m)
        return " ".join(parts) or "less than a minute"
    return f"{d} day(s)"


def rounding(text: str) -> float:
    """The relative standard uncertainty of a reported number from its last written digit
    (half a unit of that digit, spread evenly: SD = half / sqrt(3)); 0 when it cannot be told.

    >>> round(rounding("0.0008"), 4)
    0.0361
    """
    s = text.strip().lstrip("+-").replace(",", ".")
    mant, _, exp = s.lower().partition("e")
    try:
        x = abs(float(s))
        e = int(exp) if exp else 0
    except ValueError:
        return 0.0
    if x == 0 or not math.isfinite(x):
        return 0.0
    place = -len(mant.partition(".")[2]) + e
    return 0.5 * 10.0 ** place / x / math.sqrt(3)
