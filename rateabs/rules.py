"""How option values are checked: the one home of every rule a setting follows.

A :class:`Rule` checks one value and returns it typed and in base units: :class:`Number` (a
finite number or integer within a range, with its unit), :class:`Quantity` (a string with a unit
such as "200 uL", parsed by :mod:`rateabs.units`), :class:`OneOf` (choices, written exactly),
:class:`Text`, :class:`Flag`, repeatable :class:`Many` and ``NAME=VALUE`` :class:`Pair` /
:class:`Pairs`, a time :class:`Window`, a :class:`ConcUnit`, and :class:`Refused` for an option a
command takes only to say why it does not use it. :func:`option` makes a settings field of one
command-line option (flag, rule, help, default); :class:`Checked` is the base of every settings
object and checks each field by its rule when the object is built. The command settings
themselves live in :mod:`rateabs.options`; the command line builds its click options from them
and checks typed values with the same rules.

>>> Number(0, 1, lo_open=True, example="0.1").check("nan", "--noisy-limit")  # doctest: +ELLIPSIS
Traceback (most recent call last):
rateabs.errors.UsageError: --noisy-limit nan is not a finite number; give a number above 0 ...
"""

from __future__ import annotations

import math
from dataclasses import MISSING, dataclass, field, fields
from pathlib import Path

from .errors import UnitError, UsageError
from .units import concentration_factor, quantity, written_unit


def _show(value) -> str:
    """A value as the user typed it, for a message."""
    return repr(value) if isinstance(value, str) and (not value or " " in value or
                                                      not _looks_numeric(value)) else str(value)


def _looks_numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _num(x: float) -> str:
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e15 else f"{x:g}"


# --------------------------------------------------------------------------- rules


class Rule:
    """How one option's value is checked; :meth:`check` returns it typed and in base units."""

    example = ""

    def check(self, value, option: str):
        """The value, typed and in base units; a one-line :class:`UsageError` when it is bad."""
        raise NotImplementedError

    def describe(self) -> str:
        """What the option takes, for help texts and messages."""
        return ""

    def _bad(self, option: str, value, problem: str) -> UsageError:
        fix = f"give {self.describe()}"
        if self.example:
            fix += f", e.g. {option} {self.example}"
        return UsageError(f"{option} {_show(value)} {problem}", fix)


@dataclass(frozen=True)
class Number(Rule):
    """A finite number (or integer) within a range; the one rule every numeric option uses.

    >>> Number(0, 1, lo_open=True, example="0.1").check("0.25", "--noisy-limit")
    0.25
    """

    lo: float = -math.inf
    hi: float = math.inf
    lo_open: bool = False
    hi_open: bool = False
    integer: bool = False
    unit: str = ""
    example: str = ""

    def describe(self) -> str:
        """``a number above 0 and at most 1 (unit)`` and the like."""
        parts = []
        if math.isfinite(self.lo):
            parts.append(f"{'above' if self.lo_open else 'at least'} {_num(self.lo)}")
        if math.isfinite(self.hi):
            parts.append(f"{'below' if self.hi_open else 'at most'} {_num(self.hi)}")
        kind = "a whole number" if self.integer else "a number"
        text = f"{kind} {' and '.join(parts)}".rstrip()
        return f"{text} ({self.unit})" if self.unit else text

    def contains(self, x: float) -> bool:
        """Whether a finite ``x`` lies within the range."""
        above = x > self.lo if self.lo_open else x >= self.lo
        below = x < self.hi if self.hi_open else x <= self.hi
        return above and below

    def read(self, value, option: str) -> float:
        """The value as a float (not yet range-checked); refuses text, bools, nan and inf."""
        if isinstance(value, bool):
            raise self._bad(option, value, "is not a number")
        try:
            x = float(value.strip() if isinstance(value, str) else value)
        except (TypeError, ValueError):
            comma = isinstance(value, str) and "," in value
            raise self._bad(option, value, "is not a number" + (
                " (write the decimal mark as a point)" if comma else "")) from None
        if not math.isfinite(x):
            raise self._bad(option, value, "is not a finite number")
        return x

    def check(self, value, option: str) -> float | int:
        """The number, an ``int`` where an integer is meant."""
        x = self.read(value, option)
        if self.integer and not float(x).is_integer():
            raise self._bad(option, value, "is not a whole number")
        if not self.contains(x):
            raise self._bad(option, value, "is out of range")
        return int(x) if self.integer else x


@dataclass(frozen=True)
class Quantity(Rule):
    """A quantity with a unit ("200 uL"), parsed into its base unit and range-checked there."""

    kind: str
    default_unit: str
    limits: Number = Number()
    example: str = ""
    words: str = ""          # the range in words where base units would confuse

    def describe(self) -> str:
        """``a volume above 0 (a bare number is uL)`` and the like."""
        rng = self.words or self.limits.describe().removeprefix("a number").strip()
        return f"a {self.kind} {rng} (a bare number is {self.default_unit})".replace("  ", " ")

    def check(self, value, option: str) -> float:
        """The quantity in base units."""
        if isinstance(value, bool):
            raise self._bad(option, value, f"is not a {self.kind}")
        try:
            x = quantity(value, self.kind, self.default_unit)
        except UnitError as exc:
            raise UsageError(f"{option} {_show(value)}: {exc.problem}",
                             f"give {self.describe()}, e.g. {option} {self.example}") from None
        if not math.isfinite(x):
            raise self._bad(option, value, "is not a finite quantity")
        if not self.limits.contains(x):
            raise self._bad(option, value, "is out of range")
        return x


@dataclass(frozen=True)
class OneOf(Rule):
    """One of a few choices, written exactly (``Up`` is not ``up``)."""

    choices: tuple
    example: str = ""

    def describe(self) -> str:
        """``one of a, b, c``."""
        return "one of " + ", ".join(map(str, self.choices))

    def check(self, value, option: str):
        """The choice; ``"96"`` stands for 96 and 1 for ``"1"``, but ``Up`` is not ``up``."""
        whole = isinstance(value, int) and not isinstance(value, bool)
        for c in self.choices:
            if value == c and not isinstance(value, bool):
                return c
            if isinstance(c, int) and isinstance(value, str) and value.strip() == str(c):
                return c                                    # "96" typed for 96
            if isinstance(c, str) and whole and str(value) == c:
                return c                                    # 1 passed for "1"
        raise UsageError(f"{option} {_show(value)} is not {self.describe()}",
                         f"give one of them as written, e.g. {option} {self.example or self.choices[0]}")


@dataclass(frozen=True)
class Text(Rule):
    """A non-empty piece of text: a column name, a file path, a sheet name."""

    what: str = "text"
    example: str = ""

    def describe(self) -> str:
        """``a column name`` and the like."""
        return f"a {self.what}"

    def check(self, value, option: str) -> str:
        """The text, as given."""
        if isinstance(value, Path):
            value = str(value)
        if not isinstance(value, str) or not value.strip():
            raise self._bad(option, value, f"is not a {self.what}")
        return value


@dataclass(frozen=True)
class Flag(Rule):
    """On or off."""

    def describe(self) -> str:
        """``on or off``."""
        return "on or off"

    def check(self, value, option: str) -> bool:
        """The flag as a bool (refuses anything but True and False)."""
        if not isinstance(value, bool):
            raise UsageError(f"{option} takes no value (got {_show(value)})",
                             f"give {option} alone, or leave it out")
        return value


@dataclass(frozen=True)
class Many(Rule):
    """A repeatable option: each value checked by ``item``; a tuple comes back."""

    item: Rule

    @property
    def example(self) -> str:
        """The item's example."""
        return self.item.example

    def describe(self) -> str:
        """What each value is."""
        return self.item.describe() + " (repeatable)"

    def check(self, value, option: str) -> tuple:
        """A tuple of checked items (a single string is one item)."""
        items = (value,) if isinstance(value, (str, int, float)) else tuple(value)
        return tuple(self.item.check(v, option) for v in items)


@dataclass(frozen=True)
class Pair(Rule):
    """``NAME=VALUE``: a name and a value checked by ``value`` (for --fix and --select)."""

    value: Rule
    example: str = ""

    def describe(self) -> str:
        """``NAME=VALUE with VALUE ...``."""
        return f"NAME=VALUE with VALUE {self.value.describe()}"

    def check(self, value, option: str) -> tuple[str, object]:
        """(name, checked value); a (name, value) pair is accepted as it is."""
        if isinstance(value, tuple) and len(value) == 2:
            name, val = value
        else:
            name, sep, val = str(value).partition("=")
            if not sep or not name.strip():
                raise self._bad(option, value, "is not NAME=VALUE")
        try:
            return str(name).strip(), self.value.check(val.strip() if isinstance(val, str)
                                                       else val, option)
        except UsageError:
            raise self._bad(option, value, "does not give a usable VALUE") from None


@dataclass(frozen=True)
class Pairs(Rule):
    """A repeatable ``NAME=VALUE`` option gathered into a dict (for --fix)."""

    item: Pair

    @property
    def example(self) -> str:
        """The item's example."""
        return self.item.example

    def describe(self) -> str:
        """What each value is."""
        return self.item.describe() + " (repeatable)"

    def check(self, value, option: str) -> dict:
        """A dict name -> checked value (from a dict, pairs or NAME=VALUE strings)."""
        items = value.items() if isinstance(value, dict) else (
            (value,) if isinstance(value, str) else value)
        out = {}
        for item in items:
            name, v = self.item.check(tuple(item) if isinstance(item, list) else item, option)
            if name in out:
                raise UsageError(f"{option} names {name!r} twice", "give each parameter once")
            out[name] = v
        return out


@dataclass(frozen=True)
class Window(Rule):
    """``auto`` or a fixed START-END in the trace's time (bare numbers in s)."""

    example: str = "30-300"

    def describe(self) -> str:
        """What the window takes."""
        return ("'auto' or START-END with START >= 0 and END > START (bare numbers are s; a "
                "unit after END, as in 1.5-5 min, is that of both ends)")

    def check(self, value, option: str):
        """``"auto"`` or a (start_s, end_s) tuple."""
        if value == "auto":
            return "auto"
        raw = value
        if isinstance(value, str):
            text = value.strip()
            a, sep, b = text.partition("-") if "-" in text.strip("-") else text.partition(":")
            if not sep:
                raise self._bad(option, value, "is neither 'auto' nor START-END")
            value = (a, b)
        try:
            lo, hi = _window_ends(*value)
        except (UnitError, TypeError, ValueError):
            raise self._bad(option, raw, "is neither 'auto' nor START-END") from None
        if not (math.isfinite(lo) and math.isfinite(hi)) or lo < 0 or not hi > lo:
            raise self._bad(option, raw, "is not a window of time: its end is not after its start")
        return (lo, hi)


def _window_ends(start, end) -> tuple[float, float]:
    """Both ends of a window in s; a bare START takes the unit written after END, as in
    ``1.5-5 min`` (common practice: the unit is written once, after the range)."""
    unit = written_unit(end) if isinstance(end, str) else ""
    return quantity(start, "time", unit or None), quantity(end, "time")


@dataclass(frozen=True)
class ConcUnit(Rule):
    """A concentration unit (M, mM, uM, nM, mol/L...)."""

    example: str = "uM"

    def describe(self) -> str:
        """What the option takes."""
        return "a concentration unit: M, mM, uM or nM"

    def check(self, value, option: str) -> str:
        """The unit, as written."""
        try:
            concentration_factor(str(value))
        except UnitError:
            raise self._bad(option, value, "is not a concentration unit") from None
        return str(value)


@dataclass(frozen=True)
class Refused(Rule):
    """An option a command accepts only to refuse it with a reason (nothing is silently ignored)."""

    reason: str
    fix: str

    def check(self, value, option: str):
        """Always refuses a given value."""
        raise UsageError(f"{option} is not used by this command: {self.reason}", self.fix)


# --------------------------------------------------------------------------- fields


def option(flag: str, rule: Rule, help: str, default=None, *, factory=None, hidden=False):
    """A settings field for one command-line option: its flag, rule, help and default."""
    meta = {"flag": flag, "rule": rule, "help": help, "hidden": hidden}
    if factory is not None:
        return field(default_factory=factory, metadata=meta)
    return field(default=default, metadata=meta)


def argument(what: str, help: str):
    """A settings field for the command's positional argument (FILE or FOLDER)."""
    return field(metadata={"argument": what, "rule": Text("file name"), "flag": what,
                           "help": help})


def part(cls):
    """A settings field holding a group of options (the reader's or the output's)."""
    return field(default_factory=cls, metadata={"part": cls})


class Checked:
    """Base of every settings object: each field is checked by its rule when the object is built,
    then the rules between fields (:meth:`check_together`)."""

    def __post_init__(self) -> None:
        for f in fields(self):
            rule = f.metadata.get("rule")
            value = getattr(self, f.name)
            if rule is None or _not_given(value):
                if rule is not None and value is None and f.default not in (None, MISSING):
                    raise UsageError(f"{f.metadata['flag']} needs a value",
                                     f"give {rule.describe()}")
                continue
            object.__setattr__(self, f.name, rule.check(value, _first_flag(f)))
        self.check_together()

    def check_together(self) -> None:
        """Rules that involve several fields (none here; commands add theirs)."""

    def given(self, name: str) -> bool:
        """Whether a field differs from its default (the user set it)."""
        f = next(f for f in fields(self) if f.name == name)
        default = f.default_factory() if f.default_factory is not MISSING else f.default
        return getattr(self, name) != default

    @classmethod
    def build(cls, **values):
        """Build from flat option values (as the command line passes them): the reader's and
        the output's options go into their parts.

        >>> from rateabs.options import InspectOptions
        >>> InspectOptions.build(file="run.csv", fmt="json", time_unit="min").reader.time_unit
        'min'
        """
        own, rest = {}, dict(values)
        unknown = set(rest) - {f.name for f in flat_fields(cls)}
        if unknown:
            raise UsageError(f"{cls.__name__} has no option {sorted(unknown)[0]!r}",
                             "see rateabs.options for the command's fields")
        for f in fields(cls):
            sub = f.metadata.get("part")
            if sub is not None:
                names = {g.name for g in fields(sub)}
                own[f.name] = sub(**{k: rest.pop(k) for k in list(rest) if k in names})
        own.update(rest)
        return cls(**own)


def _not_given(value) -> bool:
    return value is None or (isinstance(value, (tuple, list, dict)) and not value)


def _first_flag(f) -> str:
    return f.metadata["flag"].split("/")[0]


def flat_fields(cls) -> list:
    """The fields of a settings class with its parts expanded, in command-line order."""
    out = []
    for f in fields(cls):
        sub = f.metadata.get("part")
        if not f.metadata.get("derived"):
            out.extend(flat_fields(sub) if sub is not None else [f])
    return out


def refusal(flag: str, problem: str, fix: str) -> UsageError:
    """The one-line error for an option given where it has no use: what it is for, what to do."""
    return UsageError(f"{flag} {problem}", fix)
