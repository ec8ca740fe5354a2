"""The rubric: what is graded, how it is scored and how every run is read, checked once.

A rubric is a TOML file with three tables (docs/formats.md):

* ``[assignment]``: ``quantity`` (k, half_life, v0, Km, Vmax), ``unit``, ``reference``,
  ``tolerance_pct``, ``title``, ``model``; for v0 ``epsilon`` and ``pathlength``; for Km/Vmax
  ``conc_unit`` and ``rate_unit``; ``deadline`` (a TOML date-time or date) against which the
  roster's ``submitted`` column is checked.
* ``[weights]``: ``data``, ``report``, ``reference`` (defaults 20 / 50 / 30).
* ``[runs]``: settings of the whole class: ``time_unit`` (the unit of a time column that names
  none), ``trace`` (the trace to grade in files holding several) and, for v0, ``window`` (the
  initial-rate window, ``auto`` or START-END).

:func:`read_rubric` checks every key before any student is graded: known keys only (a misspelt
or misplaced one is named with a suggestion), types, finite values in sane ranges, units and
quantities parsed. Every problem found is one line naming its key; all of them are raised
together as one :class:`RubricError` (exit 3).
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError, UsageError
from ..options import EPSILON, PATHLENGTH, TIME_UNIT_CHOICES
from ..rules import ConcUnit, Number, OneOf, Rule, Text, Window
from ..units import UnitError, concentration_factor, rate_constant_unit, time_factor

#: Seconds per time unit of a rubric or a report (the time units a slip between is named for;
#: their spellings are read by rateabs.units).
TIME_S = {"s": 1.0, "min": 60.0, "h": 3600.0}
#: Micromolar per concentration unit, for naming a slip between them (reading a unit is
#: rateabs.units' business).
CONC_UM = {"M": 1e6, "mM": 1e3, "uM": 1.0, "nM": 1e-3}

#: quantity -> the model that gives it from a student's run
MODELS = {"k": "first-order", "half_life": "first-order", "v0": "initial-rate",
          "Km": "michaelis-menten", "Vmax": "michaelis-menten"}
#: What each quantity is called in a sentence.
NAMES = {"k": "rate constant k", "half_life": "half-life", "v0": "initial rate",
         "Km": "Km", "Vmax": "Vmax"}
DEFAULT_WEIGHTS = {"data": 20.0, "report": 50.0, "reference": 30.0}

KEYS = {
    "assignment": ("title", "quantity", "model", "unit", "reference", "tolerance_pct",
                   "epsilon", "pathlength", "conc_unit", "rate_unit", "deadline"),
    "weights": tuple(DEFAULT_WEIGHTS),
    "runs": ("time_unit", "trace", "window"),
}
EXAMPLES = {
    "title": '"Fading of Kestrel Red"', "quantity": '"k"', "model": '"first-order"',
    "unit": '"1/s"', "reference": "8.0e-4", "tolerance_pct": "5",
    "epsilon": '"6220 M^-1 cm^-1"', "pathlength": '"1 cm"', "conc_unit": '"uM"',
    "rate_unit": '"uM/min"', "deadline": "2026-03-14T17:00:00", "data": "20", "report": "50",
    "time_unit": '"min"', "trace": '"A520"', "window": '"0-120 s"',
}

TOLERANCE = Number(0, 100, lo_open=True, unit="%", example="5")
WEIGHT = Number(0, math.inf, unit="relative weight", example="20")
REFERENCE = Number(0, math.inf, lo_open=True, example="8.0e-4")


@dataclass(frozen=True)
class Unit:
    """A unit a value is graded in: the factor from the analysis's base unit and its parts."""

    text: str
    per_base: float
    time: str | None = None
    conc: str | None = None


def parse_unit(quantity: str, text: str) -> Unit | None:
    """The unit ``text`` for ``quantity`` (None when it does not fit). Times and
    concentrations are read by :mod:`rateabs.units` (one home for their spellings: "1/sec",
    "umol/L"); a time must be one of :data:`TIME_S`, the units a slip between is named for.

    Base units: k 1/s, half_life s, v0 uM/min (or A/min), Km uM, Vmax uM/min.

    >>> parse_unit("k", "1/min").per_base
    60.0
    >>> parse_unit("v0", "mM/min").conc
    'mM'
    >>> parse_unit("Km", "umol/L").per_base, parse_unit("k", "1/d")
    (1.0, None)
    """
    u = str(text).strip().replace("µ", "u").replace("μ", "u").replace(" ", "")
    for minus in ("^-1", "-1", "⁻¹"):                 # s^-1, s-1, s⁻¹ and /s are 1/s
        if u.endswith(minus) and _time(u[:-len(minus)]):
            u = "1/" + u[:-len(minus)]
    if u.startswith("/") and _time(u[1:]):
        u = "1" + u
    if quantity == "k":
        rk = rate_constant_unit(str(text))
        t = _time(1 / rk[1]) if rk is not None and rk[0] == 1 else None
        return Unit(u, TIME_S[t], time=t) if t else None
    if quantity == "half_life":
        t = _time(u)
        return Unit(u, 1 / TIME_S[t], time=t) if t else None
    if quantity == "Km":
        um = _micromolar(u)
        return Unit(u, 1 / um, conc=u) if um else None
    c, _, t = u.rpartition("/")                      # umol/L/min: umol/L per min
    t = _time(t)
    um = 1.0 if quantity == "v0" and c == "A" else _micromolar(c)
    if t is None or um is None:
        return None
    return Unit(u, TIME_S[t] / 60.0 / um, time=t, conc=c)


def _time(text: str | float) -> str | None:
    """The key of :data:`TIME_S` that ``text`` spells ("sec", "minutes", "hr") or that lasts
    ``text`` seconds, or None."""
    seconds = text if isinstance(text, float) else time_factor(text) if text else None
    return next((k for k, v in TIME_S.items()
                 if seconds is not None and math.isclose(v, seconds, rel_tol=1e-9)), None)


def _micromolar(text: str) -> float | None:
    """Micromolar per concentration unit ``text`` (M, mM, uM, nM, pM, mol/L ...), or None."""
    try:
        return concentration_factor(text) * 1e6 if text else None
    except UnitError:
        return None


@dataclass(frozen=True)
class Rubric:
    """What is graded and how (read from a TOML file by :func:`read_rubric`)."""

    quantity: str
    model: str
    unit: str
    reference: float
    tolerance_pct: float
    weights: dict = field(default_factory=lambda: dict(DEFAULT_WEIGHTS))
    title: str = "kinetics assignment"
    epsilon: float | None = None            # L mol^-1 cm^-1 (v0 only)
    pathlength_cm: float = 1.0              # v0 only
    conc_unit: str | None = None            # Km/Vmax tables without units
    rate_unit: str | None = None
    deadline: dt.datetime | dt.date | None = None
    time_unit: str | None = None            # [runs]: unit of a time column that names none
    trace: str | None = None                # [runs]: the trace to grade
    window: object = "auto"                 # [runs]: v0 window, "auto" or (start_s, end_s)
    source: str | None = None

    @property
    def graded_unit(self) -> Unit:
        """The parsed unit values are graded in."""
        return parse_unit(self.quantity, self.unit) or Unit(self.unit, 1.0)

    def to_dict(self) -> dict:
        """Plain values for the JSON document."""
        d = dict(self.__dict__)
        d["deadline"] = self.deadline.isoformat() if self.deadline else None
        d["window"] = list(self.window) if isinstance(self.window, tuple) else self.window
        return d


class RubricError(InputError):
    """Every problem of a rubric: the first as the message, the others in :attr:`also`."""

    def __init__(self, problems: list[InputError]) -> None:
        first = problems[0]
        super().__init__(first.problem, first.fix, file=first.file)
        self.problems = problems
        self.also = [p.one_line() for p in problems[1:]]


def read_rubric(path: str | Path) -> Rubric:
    """Read a rubric TOML file and check every key; raises :class:`RubricError` listing every
    problem (each one line naming its key) before any student is graded."""
    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10
        import tomli as tomllib
    path = Path(path)
    if not path.is_file():
        raise InputError("no such rubric file", "give --rubric FILE.toml", file=str(path))
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"the rubric is not valid TOML ({exc})", "fix the syntax",
                         file=str(path)) from None
    return RubricCheck(str(path)).build(data)


class RubricCheck:
    """Checks a rubric's tables key by key, gathering every problem."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.problems: list[InputError] = []
        self.pointed: set[str] = set()      # keys a misspelt or misplaced key already points to

    def fail(self, problem: str, fix: str) -> None:
        """Note one problem (a line naming the key and what to do)."""
        self.problems.append(InputError(problem, fix, file=self.source))

    def build(self, data: dict) -> Rubric:
        """The checked :class:`Rubric`, or :class:`RubricError` with every problem."""
        tables = self.tables(data)
        a, w, r = (tables.get(s, {}) for s in ("assignment", "weights", "runs"))
        q = self.quantity(a)
        unit = self.unit(q, a)
        values = {"quantity": q or "k", "model": MODELS.get(q, ""), "unit": unit,
                  "title": self.value(a, "assignment", "title", Text("title"),
                                      "kinetics assignment"),
                  "reference": self.value(a, "assignment", "reference", REFERENCE, None, True),
                  "tolerance_pct": self.value(a, "assignment", "tolerance_pct", TOLERANCE, None,
                                              True),
                  "weights": self.weights(w), "deadline": self.deadline(a)}
        self.model(q, a)
        values.update(self.photometry(q, unit, a), **self.tables_units(q, a), **self.runs(q, r))
        if self.problems:
            raise RubricError(self.problems)
        return Rubric(**values, source=self.source)

    # ------------------------------------------------------------------ keys and tables

    def tables(self, data: dict) -> dict:
        """The known tables; every unknown or misplaced key and table is named."""
        top = {k: v for k, v in data.items() if not isinstance(v, dict)}
        subs = {k: v for k, v in data.items() if isinstance(v, dict)}
        if top and "assignment" not in subs:       # written without the [assignment] header
            subs, top = {"assignment": top, **subs}, {}
        for key in top:
            self.unknown(None, key)
        tables = {}
        for name, table in subs.items():
            if name not in KEYS:
                close = difflib.get_close_matches(name, tuple(KEYS), n=1, cutoff=0.6)
                hint = f"did you mean [{close[0]}]?" if close else \
                    f"the tables are {', '.join(f'[{k}]' for k in KEYS)}"
                self.fail(f"[{name}] is not a rubric table", f"{hint} (see docs/formats.md)")
                continue
            tables[name] = {}
            for key, value in table.items():
                if key in KEYS[name]:
                    tables[name][key] = value
                else:
                    self.unknown(name, key)
        return tables

    def unknown(self, section: str | None, key: str) -> None:
        """An unknown key: where it belongs, or what it was probably meant to be."""
        where = f"[{section}] {key}" if section else key
        home = [s for s, keys in KEYS.items() if key in keys and s != section]
        if home:
            self.pointed.add(key)
            self.fail(f"{where} is in the wrong place" if section else
                      f"{where} stands outside any table", f"move it to the [{home[0]}] table")
            return
        known = KEYS[section] if section else KEYS["assignment"]
        every = [k for keys in KEYS.values() for k in keys]
        close = difflib.get_close_matches(key, known, n=1, cutoff=0.6) or \
            difflib.get_close_matches(key, every, n=1, cutoff=0.6)
        hint = f"did you mean {close[0]!r}?" if close else \
            f"known keys here: {', '.join(known)}"
        self.pointed.update(close[:1])
        self.fail(f"{where} is not a rubric key", f"{hint} (see docs/formats.md)")

    def value(self, table: dict, section: str, key: str, rule: Rule, default=None,
              required: bool = False):
        """One key checked by ``rule`` (its type first: TOML numbers for numbers)."""
        label = f"[{section}] {key}"
        if key not in table:
            if required and key not in self.pointed:
                self.fail(f"{label} is missing", f"add it, e.g. {key} = {EXAMPLES[key]}")
            return default
        v = table[key]
        if isinstance(rule, Number) and (isinstance(v, bool) or not isinstance(v, (int, float))):
            self.fail(f"{label} = {_show(v)} is not a number", f"write a number without quotes, "
                      f"e.g. {key} = {EXAMPLES[key]}")
            return default
        if isinstance(rule, (Text, OneOf, ConcUnit)) and not isinstance(v, str):
            self.fail(f"{label} = {_show(v)} is not text", f"write it in quotes, e.g. {key} = "
                      f"{EXAMPLES[key]}")
            return default
        try:
            return rule.check(v, f"{label} =")
        except UsageError as exc:
            self.fail(exc.problem, f"give {rule.describe()}, e.g. {key} = {EXAMPLES[key]}")
            return default

    # ------------------------------------------------------------------ the assignment

    def quantity(self, a: dict) -> str | None:
        """The graded quantity."""
        return self.value(a, "assignment", "quantity", OneOf(tuple(MODELS), "k"), None, True)

    def unit(self, q: str | None, a: dict) -> str:
        """The unit values are graded in, checked against the quantity."""
        text = self.value(a, "assignment", "unit", Text("unit", "1/s"), "", True)
        if q is None or not text:
            return text
        u = parse_unit(q, text)
        if u is None:
            fits = {"k": "1/s, 1/min, 1/h", "half_life": "s, min, h",
                    "v0": "uM/min, mM/min, M/min, nM/min, uM/s, A/min, A/s",
                    "Km": "M, mM, uM, nM", "Vmax": "uM/min, mM/min, uM/s ..."}[q]
            self.fail(f"[assignment] unit = {text!r} does not fit quantity {q}",
                      f"use one of {fits}")
            return text
        return u.text

    def model(self, q: str | None, a: dict) -> None:
        """The model, when given, must be the one that gives the quantity."""
        if q is None or "model" not in a:
            return
        if a["model"] != MODELS[q]:
            self.fail(f"[assignment] model = {_show(a['model'])} does not give {q}",
                      f"quantity {q} is graded with model = \"{MODELS[q]}\"; give that or "
                      "leave model out")

    def weights(self, w: dict) -> dict:
        """The weights (defaults for those not given); finite, not negative, not all zero."""
        out = dict(DEFAULT_WEIGHTS)
        for key in DEFAULT_WEIGHTS:
            out[key] = float(self.value(w, "weights", key, WEIGHT, out[key]))
        if w and sum(out.values()) <= 0:
            self.fail("[weights] add up to zero", "give at least one positive weight")
        return out

    def deadline(self, a: dict):
        """The deadline as a date-time or date (TOML value or ISO text)."""
        v = a.get("deadline")
        if v is None or isinstance(v, (dt.datetime, dt.date)):
            return v
        if isinstance(v, str):
            when = parse_when(v)
            if when is not None:
                return when
        self.fail(f"[assignment] deadline = {_show(v)} is not a date or date-time",
                  f"write it as e.g. deadline = {EXAMPLES['deadline']}")
        return None

    def photometry(self, q: str | None, unit: str, a: dict) -> dict:
        """epsilon and pathlength: for v0 only; a concentration unit needs epsilon."""
        out = {}
        for key, rule, name in (("epsilon", EPSILON, "epsilon"),
                                ("pathlength", PATHLENGTH, "pathlength_cm")):
            if key in a and q not in (None, "v0"):
                self.fail(f"[assignment] {key} is used for v0 assignments only",
                          f"remove it (quantity is {q})")
            elif key in a:
                v = a[key]
                if isinstance(v, bool) or not isinstance(v, (str, int, float)):
                    self.fail(f"[assignment] {key} = {_show(v)} is not a quantity",
                              f"e.g. {key} = {EXAMPLES[key]}")
                    continue
                got = self.value(a, "assignment", key, rule)
                if got is not None:
                    out[name] = got
        u = parse_unit(q, unit) if q == "v0" and unit else None
        if u is not None and u.conc != "A" and "epsilon" not in out and "epsilon" not in a:
            self.fail(f"[assignment] unit = {unit!r} is a concentration rate but the rubric "
                      "gives no epsilon", "add the molar absorptivity, e.g. epsilon = "
                      f"{EXAMPLES['epsilon']} (and pathlength, default 1 cm), or grade in A/min")
        return out

    def tables_units(self, q: str | None, a: dict) -> dict:
        """conc_unit and rate_unit: for Km/Vmax rate tables only."""
        out = {}
        for key, rule in (("conc_unit", ConcUnit()), ("rate_unit", Text("rate unit"))):
            if key in a and q not in (None, "Km", "Vmax"):
                self.fail(f"[assignment] {key} is used for Km and Vmax assignments only",
                          f"remove it (quantity is {q})")
            elif key in a:
                out[key] = self.value(a, "assignment", key, rule)
        return out

    def runs(self, q: str | None, r: dict) -> dict:
        """The [runs] settings, each refused where the quantity does not use it."""
        out = {}
        if q in ("Km", "Vmax"):
            for key in r:
                self.fail(f"[runs] {key} applies to kinetic runs; {q} is graded from rate "
                          "tables", "remove it")
            return out
        if "window" in r and q not in (None, "v0"):
            self.fail("[runs] window applies to v0 assignments only",
                      "remove it (a rate constant is fitted to the whole run)")
        elif "window" in r:
            win = self.value(r, "runs", "window", Window())
            if win is not None:
                out["window"] = win
        out["time_unit"] = self.value(r, "runs", "time_unit", OneOf(TIME_UNIT_CHOICES, "min"))
        out["trace"] = self.value(r, "runs", "trace", Text("trace name", "A520"))
        return out


def parse_when(text: str) -> dt.datetime | dt.date | None:
    """An ISO date or date-time ('2026-03-14', '2026-03-14 17:00', '...T17:00:00Z'), or None."""
    s = str(text).strip()
    if not s:
        return None
    try:
        if len(s) == 10:
            return dt.date.fromisoformat(s)
        return dt.datetime.fromisoformat(s.replace("Z", "+00:00"))
    except ValueError:
        return None


def _show(v) -> str:
    return repr(v) if isinstance(v, str) else str(v).lower() if isinstance(v, bool) else str(v)
