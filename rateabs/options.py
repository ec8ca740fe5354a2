"""Every command's settings as one typed object, checked when it is built.

One frozen dataclass per command (:class:`InspectOptions`, :class:`RatesOptions`,
:class:`SaturationOptions`, :class:`RatelawOptions`, :class:`CompletionOptions`,
:class:`TemperatureOptions`, :class:`ProgressOptions`, :class:`GradeOptions`), made of the
reader options, the output options and one field per command-line option of the command. Each
field names its option, its rule (type, choices or range, unit) and its help; the command line is
built from these fields, so what a command accepts is read here and nowhere else. The analysis
settings of ``rates`` (:class:`RateSettings`) are checked by the same rules.

Values: a quantity given as a string with a unit ("200 uL", "6.22 mM^-1 cm^-1", "25 C") is
parsed once, when the object is built, into the base unit of :mod:`rateabs.units` (s, mol/L, L,
cm, L mol^-1 cm^-1, K, mg/mL); a bare number in a string takes the option's documented unit; a
Python number is taken to be in the base unit already. Errors are one line that names the option
as typed on the command line and says what to give instead.

>>> RatesOptions("plate.csv", chromophore="NADH", well_volume="200 uL").rate_settings().epsilon
6220.0
>>> RateSettings(direction="Up")  # doctest: +ELLIPSIS
Traceback (most recent call last):
rateabs.errors.UsageError: --direction 'Up' is not one of auto, up, down; give one of them ...
"""

from __future__ import annotations

import math
from dataclasses import MISSING, dataclass, field, fields
from pathlib import Path

from .errors import RateabsError, UnitError, UsageError
from .units import concentration_factor, quantity

#: Absorbance above which readings are flagged as past the linear range (common practice:
#: most instruments are trusted to about 1.5-2; the instrument's own specification overrides it).
DEFAULT_LINEAR_LIMIT = 2.0

SIGNAL_KINDS = ("absorbance", "transmittance", "percent", "intensity")
TIME_UNIT_CHOICES = ("s", "min", "h")
FORMATS = ("table", "csv", "json")


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
            raise self._bad(option, value, "is not a number") from None
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
        for c in self.choices:
            same_text = isinstance(value, (str, int)) and not isinstance(value, bool) and (
                str(value).strip() == str(c)) and (isinstance(value, int) or not isinstance(c, str))
            if value == c or same_text:
                return c
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
        return "'auto' or START-END with START >= 0 and END > START (a bare number is s)"

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
            lo, hi = (quantity(v, "time") for v in value)
        except (UnitError, TypeError, ValueError):
            raise self._bad(option, raw, "is neither 'auto' nor START-END") from None
        if not (math.isfinite(lo) and math.isfinite(hi)) or lo < 0 or not hi > lo:
            raise self._bad(option, raw, "is not a window of time: its end is not after its start")
        return (lo, hi)


@dataclass(frozen=True)
class Chromophore(Rule):
    """A chromophore of :data:`rateabs.photometry.CHROMOPHORES` (or a common alias)."""

    example: str = "NADH"

    def describe(self) -> str:
        """What the option takes."""
        return "a chromophore: NADH, NADPH, TNB or p-nitrophenolate"

    def check(self, value, option: str) -> str:
        """The chromophore's table name."""
        from .photometry import chromophore

        try:
            return chromophore(str(value)).name
        except UsageError as exc:
            raise UsageError(f"{option}: {exc.problem}", exc.fix) from None


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


def _refuse(flag: str, problem: str, fix: str) -> UsageError:
    return UsageError(f"{flag} {problem}", fix)


# --------------------------------------------------------------------------- shared rules

LEVEL = Number(0, 1, lo_open=True, hi_open=True, example="0.95")
POSITIVE_CONC = Number(0, math.inf, lo_open=True)
EPSILON = Quantity("molar absorptivity", "M^-1 cm^-1", POSITIVE_CONC,
                   "'6.22 mM^-1 cm^-1'")
PATHLENGTH = Quantity("pathlength", "cm", Number(0, 100, lo_open=True), "'1 cm'")
LINEAR_LIMIT = Number(0, 10, lo_open=True, unit="absorbance, AU", example="2")
NOISY_LIMIT = Number(0, 1, lo_open=True, unit="relative SE of the slope", example="0.1")
MIN_POINTS = Number(3, math.inf, integer=True, unit="readings", example="5")
DILUTION = Number(1, math.inf, unit="fold; 10 for a 1:10 dilution", example="10")
BLANK_MODES = ("auto", "slope", "trace", "none")
DIRECTIONS = ("auto", "up", "down")
SLOPE_SOURCES = ("window", "curve")
CALIBRATION = ("auto", "standards", "none")
FIX = Pairs(Pair(Number(example="120"), example="Km=120"))


def _level():
    return option("--level", LEVEL, "Confidence level of every interval.", 0.95)


def _epsilon(help: str = "Molar absorptivity, e.g. '6220 M^-1 cm^-1' (a bare number is "
             "M^-1 cm^-1)."):
    return option("--epsilon", EPSILON, help)


def _chromophore():
    return option("--chromophore", Chromophore(), "Take epsilon from the table: NADH, NADPH, "
                  "TNB, p-nitrophenolate.")


def _pathlength(help: str = "Optical pathlength, e.g. '1 cm' (default 1 cm).", default=None):
    return option("--pathlength", PATHLENGTH, help, default)


def _traces():
    return option("--trace", Many(Text("trace name", "A1")), "Analyse only this trace "
                  "(repeatable).", ())


def _fix(example: str = "Km=120"):
    return option("--fix", FIX, f"Hold a parameter at a value: NAME=VALUE, e.g. {example} "
                  "(repeatable).", factory=dict)


# --------------------------------------------------------------------------- parts


@dataclass(frozen=True)
class ReaderOptions(Checked):
    """How the reader takes the file (everything else it detects and states)."""

    time_unit: str | None = option("--time-unit", OneOf(TIME_UNIT_CHOICES, "min"),
                                   "Unit of a numeric time column (detected from the header).")
    signal: str | None = option("--signal", OneOf(SIGNAL_KINDS, "percent"),
                                "What the readings are (detected from the header when not "
                                "given).")
    i0: float | None = option("--i0", Number(0, math.inf, lo_open=True,
                                             unit="same unit as the intensities",
                                             example="50000"),
                              "Reference intensity I0 for raw intensities.")
    sheet: str | None = option("--sheet", Text("sheet name", "Sheet1"),
                               "Sheet of an .xlsx workbook.")

    def read_kwargs(self) -> dict:
        """Keyword arguments of :func:`rateabs.io.read_traces`."""
        return {"time_unit": self.time_unit, "signal": self.signal, "i0": self.i0,
                "sheet": self.sheet}


@dataclass(frozen=True)
class OutputOptions(Checked):
    """Where and how results go."""

    fmt: str = option("--format", OneOf(FORMATS, "json"), "table for a person, csv, or one "
                      "json document.", "table")
    out: str | None = option("--out", Text("folder", "results"), "Folder for the JSON, CSV and "
                             "plots.")
    report: str | None = option("--report", Text("file name", "report.html"),
                                "Write one self-contained HTML report (plots inline) to this "
                                "file.")
    plots: bool = option("--plots/--no-plots", Flag(), "Draw plots into --out (and into "
                         "--report).", True)


def _check_sheet(file: str, reader: ReaderOptions) -> None:
    if reader.sheet is not None and Path(file).suffix.lower() not in (".xlsx", ".xlsm"):
        raise _refuse("--sheet", f"applies to .xlsx workbooks only; {file} is not one",
                      "leave --sheet out")


# --------------------------------------------------------------------------- inspect


@dataclass(frozen=True)
class InspectOptions(Checked):
    """``rateabs inspect FILE``: what the reader found."""

    file: str = argument("FILE", "The export to inspect.")
    reader: ReaderOptions = part(ReaderOptions)
    output: OutputOptions = part(OutputOptions)
    linear_limit: float = option("--linear-limit", LINEAR_LIMIT, "Absorbance above which "
                                 "readings are flagged.", DEFAULT_LINEAR_LIMIT)

    def check_together(self) -> None:
        """--sheet only for workbooks."""
        _check_sheet(self.file, self.reader)


# --------------------------------------------------------------------------- rates


def _window():
    return option("--window", Window(), "'auto' or a fixed START-END, e.g. 30-300 (a bare "
                  "number is s).", "auto")


def _min_points():
    return option("--min-points", MIN_POINTS, "Fewest readings in an automatic window "
                  "(default: 5 or a tenth of the readings, whichever is more).")


def _blank():
    return option("--blank", OneOf(BLANK_MODES, "slope"), "Subtract the mean blank slope or "
                  "the time-matched mean blank trace (auto: slope when the map has blanks).",
                  "auto")


def _direction():
    return option("--direction", OneOf(DIRECTIONS, "up"), "Whether product formation raises or "
                  "lowers the signal.", "auto")


def _linear_limit():
    return option("--linear-limit", LINEAR_LIMIT, "Absorbance above which readings are "
                  "masked.", DEFAULT_LINEAR_LIMIT)


def _katal():
    return option("--katal", Flag(), "Also report activity in nkat/mL.", False)


def _slope_from():
    return option("--slope-from", OneOf(SLOPE_SOURCES, "curve"), "Report the straight-window "
                  "slope, or the initial slope of the whole-curve fit (better when substrate "
                  "depletion bends every trace).", "window")


def _curve():
    return option("--curve/--no-curve", Flag(), "Also fit each whole trace for its initial slope "
                  "(--no-curve is faster).", True)


def _calibrate():
    return option("--calibrate", OneOf(CALIBRATION, "standards"), "Convert with a standard "
                  "curve from 'standard' wells (auto: when no epsilon is given).", "auto")


def _dilution():
    return option("--dilution", DILUTION, "Dilution factor of the sample (the plate map may give "
                  "it per well).", 1.0)


@dataclass(frozen=True)
class RateSettings(Checked):
    """What the ``rates`` analysis uses, in base units (built from :class:`RatesOptions`, or
    directly from Python). Every field is checked as the matching option is."""

    epsilon: float | None = _epsilon()
    epsilon_se: float = option("--epsilon-se", Quantity("molar absorptivity", "M^-1 cm^-1",
                                                        Number(0, math.inf), "'100 M^-1 cm^-1'"),
                               "Standard error of epsilon (same unit).", 0.0)
    pathlength_cm: float = _pathlength(default=1.0)
    total_volume_L: float | None = option("--total-volume", Quantity(
        "volume", "uL", POSITIVE_CONC, "'200 uL'"), "Reaction volume, e.g. '200 uL'.")
    sample_volume_L: float | None = option("--sample-volume", Quantity(
        "volume", "uL", POSITIVE_CONC, "'20 uL'"), "Volume of enzyme sample added.")
    protein_mg_per_mL: float | None = option("--protein", Quantity(
        "mass concentration", "mg/mL", POSITIVE_CONC, "'0.8 mg/mL'"),
        "Protein concentration of the sample.")
    dilution: float = _dilution()
    window: object = _window()
    min_points: int | None = _min_points()
    blank: str = _blank()
    direction: str = _direction()
    linear_limit: float = _linear_limit()
    noisy_rel_se: float = option("--noisy-limit", NOISY_LIMIT, "Relative SE of a slope above "
                                 "which it is flagged noisy.", 0.10)
    katal: bool = _katal()
    slope_from: str = _slope_from()
    curve: bool = _curve()
    calibrate: str = _calibrate()

    def check_together(self) -> None:
        """Volumes in pairs, the sample inside the total, a curve for --slope-from curve."""
        if (self.total_volume_L is None) != (self.sample_volume_L is None):
            raise UsageError("activity needs both --total-volume and --sample-volume",
                             "give both, e.g. --total-volume '200 uL' --sample-volume '20 uL'")
        if self.total_volume_L is not None and self.sample_volume_L > self.total_volume_L:
            raise UsageError("the sample volume is larger than the total volume",
                             "check --sample-volume and --total-volume")
        if self.slope_from == "curve" and not self.curve:
            raise UsageError("--slope-from curve needs the whole-curve fit", "drop --no-curve")


@dataclass(frozen=True)
class RatesOptions(Checked):
    """``rateabs rates FILE``: initial rates, converted to concentration and activity."""

    file: str = argument("FILE", "The plate or cuvette export.")
    reader: ReaderOptions = part(ReaderOptions)
    layout_file: str | None = option("--layout", Text("file name", "map.csv"), "Plate map CSV "
                                     "(roles, concentrations, dilutions, groups).")
    epsilon: float | None = _epsilon()
    epsilon_se: float | None = option("--epsilon-se", Quantity(
        "molar absorptivity", "M^-1 cm^-1", Number(0, math.inf), "'100 M^-1 cm^-1'"),
        "Standard error of epsilon (same unit; with --epsilon or --chromophore).")
    chromophore: str | None = _chromophore()
    pathlength: float | None = _pathlength()
    well_volume: float | None = option("--well-volume", Quantity(
        "volume", "uL", POSITIVE_CONC, "'200 uL'"), "Liquid volume per well, e.g. '200 uL': "
        "pathlength from the plate's well geometry.")
    plate: int | None = option("--plate", OneOf((96, 384), "384"), "Plate format for "
                               "--well-volume (96 when not given).")
    total_volume: float | None = option("--total-volume", Quantity(
        "volume", "uL", POSITIVE_CONC, "'200 uL'"), "Reaction volume, e.g. '200 uL'.")
    sample_volume: float | None = option("--sample-volume", Quantity(
        "volume", "uL", POSITIVE_CONC, "'20 uL'"), "Volume of enzyme sample added, e.g. '20 uL'.")
    protein: float | None = option("--protein", Quantity(
        "mass concentration", "mg/mL", POSITIVE_CONC, "'0.8 mg/mL'"), "Protein concentration of "
        "the sample, e.g. '0.8 mg/mL' (for U/mg; the plate map may give it per well).")
    dilution: float = _dilution()
    window: object = _window()
    min_points: int | None = _min_points()
    blank: str = _blank()
    direction: str = _direction()
    linear_limit: float = _linear_limit()
    noisy_limit: float = option("--noisy-limit", NOISY_LIMIT, "Relative SE of a slope above "
                                "which it is flagged noisy.", 0.10)
    katal: bool = _katal()
    calibrate: str = _calibrate()
    curve: bool = _curve()
    slope_from: str = _slope_from()
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """Refuse options that would be ignored; build the analysis settings once to check."""
        _check_sheet(self.file, self.reader)
        if self.pathlength is not None and self.well_volume is not None:
            raise UsageError("both --pathlength and --well-volume given", "give only one of them")
        if self.plate is not None and self.well_volume is None:
            raise _refuse("--plate", "is used only to turn --well-volume into a pathlength",
                          "give --well-volume too, or leave --plate out")
        if self.epsilon_se is not None and self.epsilon is None and self.chromophore is None:
            raise _refuse("--epsilon-se", "needs an epsilon to qualify",
                          "give --epsilon or --chromophore too")
        no_activity = self.total_volume is None and self.sample_volume is None
        for name, flag in (("protein", "--protein"), ("katal", "--katal"),
                           ("dilution", "--dilution")):
            if no_activity and self.given(name):
                raise _refuse(flag, "applies to activity, which needs the volumes",
                              "give --total-volume and --sample-volume too")
        if self.min_points is not None and self.window != "auto":
            raise _refuse("--min-points", "applies to the automatic window only",
                          "leave it out with a fixed --window")
        self.rate_settings()

    def epsilon_value(self) -> float | None:
        """epsilon (L mol^-1 cm^-1) from --epsilon or --chromophore, or None."""
        from .photometry import resolve_epsilon

        return resolve_epsilon(self.epsilon, self.chromophore)

    def pathlength_cm(self) -> float:
        """Pathlength (cm) from --pathlength, or --well-volume in the plate's geometry, else 1."""
        if self.well_volume is None:
            return 1.0 if self.pathlength is None else self.pathlength
        from .photometry import pathlength_from_volume

        try:
            return pathlength_from_volume(self.well_volume, self.plate or 96)
        except RateabsError as exc:
            raise UsageError(f"--well-volume: {exc.problem}", exc.fix) from None

    def pathlength_source(self) -> str:
        """Where the pathlength came from, stated in the output."""
        if self.well_volume is not None:
            how = "given" if self.plate else "assumed, give --plate"
            return (f"--well-volume {self.well_volume * 1e6:g} uL in a {self.plate or 96}-well "
                    f"plate ({how}), typical well geometry")
        return "--pathlength" if self.pathlength is not None else "assumed 1 cm (no option given)"

    def rate_settings(self) -> RateSettings:
        """The analysis settings, in base units."""
        return RateSettings(
            epsilon=self.epsilon_value(), epsilon_se=self.epsilon_se or 0.0,
            pathlength_cm=self.pathlength_cm(), total_volume_L=self.total_volume,
            sample_volume_L=self.sample_volume, protein_mg_per_mL=self.protein,
            dilution=self.dilution, window=self.window, min_points=self.min_points,
            blank=self.blank, direction=self.direction, linear_limit=self.linear_limit,
            noisy_rel_se=self.noisy_limit, katal=self.katal, slope_from=self.slope_from,
            curve=self.curve, calibrate=self.calibrate)


# --------------------------------------------------------------------------- saturation

MODELS = ("mm", "hill", "substrate-inhibition", "competitive", "uncompetitive",
          "noncompetitive", "mixed", "ic50", "auto")
CI_METHODS = ("asymptotic", "profile", "bootstrap")
WEIGHTINGS = ("none", "relative", "sd")
CHENG_PRUSOFF_MODES = ("competitive", "uncompetitive", "noncompetitive")
#: Bootstrap defaults: percentile intervals want 1000 or more resamples (Efron & Tibshirani
#: 1993, An Introduction to the Bootstrap, Chapman & Hall, section 13.3).
DEFAULT_RESAMPLES = 2000
RESAMPLES = Number(100, 1_000_000, integer=True, unit="resamples; 1000 or more for percentile "
                   "intervals", example="2000")


@dataclass(frozen=True)
class SaturationOptions(Checked):
    """``rateabs saturation FILE``: Michaelis–Menten family and inhibition fits."""

    file: str = argument("FILE", "A table of rates vs concentrations (or a rates.csv).")
    conc: str | None = option("--conc", Text("column name", "'S (uM)'"), "Substrate "
                              "concentration column (detected if not given).")
    rate: str | None = option("--rate", Text("column name", "v"), "Rate column (detected if "
                              "not given).")
    inhibitor: str | None = option("--inhibitor", Text("column name", "inhibitor_uM"),
                                   "Inhibitor concentration column.")
    sd: str | None = option("--sd", Text("column name", "sd"), "Column of rate SDs (with "
                            "--weighting sd).")
    model: str = option("--model", OneOf(MODELS, "mm"), "Model to fit; auto compares the "
                        "candidates by AICc.", "auto")
    ci: str = option("--ci", OneOf(CI_METHODS, "profile"), "How intervals are computed.",
                     "asymptotic")
    level: float = _level()
    weighting: str = option("--weighting", OneOf(WEIGHTINGS, "relative"), "Residual weights: "
                            "none, 1/|v| (relative) or 1/SD (sd, with --sd).", "none")
    fix: dict = _fix()
    enzyme: float | None = option("--enzyme", Quantity("concentration", "nM", POSITIVE_CONC,
                                                       "'1 nM'"),
                                  "Enzyme concentration for kcat, e.g. '1 nM' (a bare number is "
                                  "nM).")
    conc_unit: str | None = option("--conc-unit", ConcUnit(), "Unit of the concentrations "
                                   "(else from the header).")
    rate_unit: str | None = option("--rate-unit", Text("unit", "uM/min"), "Unit of the rates, "
                                   "e.g. uM/min (else from the header).")
    inhibitor_unit: str | None = option("--inhibitor-unit", ConcUnit(), "Unit of the inhibitor "
                                        "concentrations.")
    mode: str | None = option("--mode", OneOf(CHENG_PRUSOFF_MODES, "competitive"),
                              "Inhibition mode for the Cheng–Prusoff Ki from an IC50.")
    substrate: float | None = option("--substrate", Number(0, math.inf, lo_open=True,
                                                           unit="the Km unit", example="100"),
                                     "[S] of the IC50 assay (in the Km unit), for "
                                     "Cheng–Prusoff.")
    km: float | None = option("--km", Number(0, math.inf, lo_open=True, unit="the [S] unit",
                                             example="50"),
                              "Km for Cheng–Prusoff (same unit as --substrate).")
    resamples: int | None = option("--resamples", RESAMPLES, "Bootstrap resamples (with --ci "
                                   f"bootstrap; default {DEFAULT_RESAMPLES}).")
    resample: str | None = option("--resample", OneOf(("residual", "case"), "case"),
                                  "Bootstrap scheme (with --ci bootstrap; default residual).")
    seed: int | None = option("--seed", Number(0, 2**63 - 1, integer=True, example="1"),
                              "Bootstrap seed (with --ci bootstrap; default 0).")
    select: tuple = option("--select", Many(Pair(Text("value", "KbDH1"), "sample=KbDH1")),
                           "Use only rows whose COL equals VALUE (repeatable), e.g. "
                           "sample=KbDH1.", ())
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """Refuse options the chosen model or interval method would ignore."""
        if self.weighting == "sd" and self.sd is None:
            raise UsageError("--weighting sd needs the column of SDs", "name it with --sd COLUMN")
        if self.sd is not None and self.weighting != "sd":
            raise _refuse("--sd", "is used only with --weighting sd", "add --weighting sd")
        if self.ci != "bootstrap":
            for name in ("resamples", "resample", "seed"):
                if getattr(self, name) is not None:
                    raise _refuse(f"--{name}", "applies to bootstrap intervals only",
                                  "add --ci bootstrap, or leave it out")
        cp = [n for n in ("mode", "substrate", "km") if getattr(self, n) is not None]
        if cp and self.model != "ic50":
            raise _refuse(f"--{cp[0]}", "is used for the Cheng–Prusoff Ki of an IC50 fit only",
                          "add --model ic50, or leave it out")
        if cp and len(cp) < 3:
            raise UsageError("the Cheng–Prusoff Ki needs --mode, --substrate and --km together",
                             "give all three")
        if self.enzyme is not None and self.model == "ic50":
            raise _refuse("--enzyme", "gives kcat from Vmax, which an IC50 fit has not",
                          "leave it out with --model ic50")

    def bootstrap(self) -> dict:
        """Resamples, scheme and seed with their defaults (used with --ci bootstrap)."""
        return {"n_boot": self.resamples or DEFAULT_RESAMPLES,
                "resample": self.resample or "residual", "seed": self.seed or 0}


# --------------------------------------------------------------------------- rate laws

ORDERS = ("0", "1", "2", "auto", "mixed")


def _conc(flag: str, help: str, example: str = "'50 uM'"):
    return option(flag, Quantity("concentration", "uM", POSITIVE_CONC, example), help)


@dataclass(frozen=True)
class RatelawOptions(Checked):
    """``rateabs ratelaw FILE``: integrated rate laws (order, k, half-life)."""

    file: str = argument("FILE", "The export of one or more traces.")
    reader: ReaderOptions = part(ReaderOptions)
    level: float = _level()
    fix: dict = _fix("Ainf=0.05")
    trace: tuple = _traces()
    epsilon: float | None = _epsilon("Molar absorptivity of the reactant (or of the one "
                                     "absorbing species).")
    chromophore: str | None = _chromophore()
    epsilon_product: float | None = option("--epsilon-product", EPSILON, "Molar absorptivity of "
                                           "the product when both species absorb.")
    pathlength: float | None = _pathlength("Pathlength, e.g. '1 cm' (default 1 cm; with an "
                                           "epsilon).")
    c0: float | None = _conc("--c0", "Initial reactant concentration, e.g. '50 uM' (a bare "
                             "number is uM).")
    order: str = option("--order", OneOf(ORDERS, "1"), "Rate-law order; mixed: A + B with "
                        "unequal [A]0, [B]0.", "auto")
    a0: float | None = _conc("--a0", "[A]0 for --order mixed, e.g. '50 uM'.")
    b0: float | None = _conc("--b0", "[B]0 for --order mixed, e.g. '120 uM'.", "'120 uM'")
    ci: str = option("--ci", OneOf(("asymptotic", "profile"), "asymptotic"), "How intervals "
                     "are computed.", "profile")
    expect: str = option("--expect", OneOf(("any", "decay", "rise"), "decay"), "Refuse traces "
                         "that move the other way.", "any")
    guggenheim: float | None = option("--guggenheim", Quantity(
        "time", "s", Number(0, math.inf), "'10 min'"), "Also apply Guggenheim's method with "
        "this interval (a bare number is s; 0: half the run).")
    excess: str | None = option("--excess", Text("file name", "excess.csv"), "CSV trace,conc of "
                                "a pseudo-first-order series: k2 from kobs vs [excess].")
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """Mixed order needs both concentrations; nothing given is left unused."""
        _check_sheet(self.file, self.reader)
        if self.epsilon is not None and self.chromophore is not None:
            raise UsageError("both --epsilon and --chromophore given", "give only one of them")
        mixed = [n for n in ("a0", "b0") if getattr(self, n) is not None]
        if self.order == "mixed" and len(mixed) < 2:
            raise UsageError("--order mixed needs --a0 and --b0", "e.g. --a0 '50 uM' --b0 "
                             "'120 uM'")
        if mixed and self.order != "mixed":
            raise _refuse(f"--{mixed[0]}", "is used with --order mixed only",
                          "add --order mixed, or leave it out")
        has_eps = any(getattr(self, n) is not None for n in
                      ("epsilon", "chromophore", "epsilon_product"))
        if self.pathlength is not None and not has_eps:
            raise _refuse("--pathlength", "converts absorbance with an epsilon only",
                          "give --epsilon, --epsilon-product or --chromophore too")

    def photometry_values(self) -> dict:
        """epsilon, epsilon_product, pathlength_cm and c0_M for :class:`rateabs.ratelaws.Photometry`."""
        from .photometry import resolve_epsilon

        return {"epsilon": resolve_epsilon(self.epsilon, self.chromophore),
                "epsilon_product": self.epsilon_product,
                "pathlength_cm": 1.0 if self.pathlength is None else self.pathlength,
                "c0_M": self.c0}


_NOT_FOR_COMPLETION = ("completion computes conversion from the absorbance alone for now",
                       "leave it out (ratelaw reports k and c0 in concentration units)")


def _refused(flag: str):
    return option(flag, Refused(*_NOT_FOR_COMPLETION), "Not used by completion.", hidden=True)


@dataclass(frozen=True)
class CompletionOptions(Checked):
    """``rateabs completion FILE``: conversion, time to a target, complete or not."""

    file: str = argument("FILE", "The export of the reaction's trace(s).")
    reader: ReaderOptions = part(ReaderOptions)
    level: float = _level()
    fix: dict = _fix("Ainf=0.05")
    trace: tuple = _traces()
    target: float = option("--target", Number(0, 100, lo_open=True, hi_open=True,
                                              unit="percent conversion", example="99"),
                           "Target conversion in percent.", 99.0)
    order: str = option("--order", OneOf(("1", "2", "auto"), "2"), "Rate-law order of the "
                        "forecast.", "1")
    follow: float | None = option("--follow", Quantity("time", "s", Number(0, math.inf,
                                                                           lo_open=True),
                                                       "30"),
                                  "Re-read FILE every SECONDS while the instrument writes it; "
                                  "stop at completion or Ctrl-C.")
    max_updates: int | None = option("--max-updates", Number(1, math.inf, integer=True,
                                                             example="60"),
                                     "With --follow: stop after N reads.")
    c0: None = _refused("--c0")
    epsilon: None = _refused("--epsilon")
    epsilon_product: None = _refused("--epsilon-product")
    chromophore: None = _refused("--chromophore")
    pathlength: None = _refused("--pathlength")
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """--max-updates only with --follow."""
        _check_sheet(self.file, self.reader)
        if self.max_updates is not None and self.follow is None:
            raise _refuse("--max-updates", "limits --follow only", "add --follow SECONDS")


# --------------------------------------------------------------------------- temperature


@dataclass(frozen=True)
class TemperatureOptions(Checked):
    """``rateabs temperature FILE``: Arrhenius and Eyring from k vs T."""

    file: str = argument("FILE", "A table of rate constants vs temperature.")
    temp_column: str | None = option("--temp-column", Text("column name", "'T (C)'"),
                                     "Temperature column (detected if not given).")
    k_column: str | None = option("--k-column", Text("column name", "k_per_s"), "Rate-constant "
                                  "column (detected if not given).")
    se_column: str | None = option("--se-column", Text("column name", "k_se"), "Column of SE(k), "
                                   "for weights.")
    temp_unit: str | None = option("--temp-unit", OneOf(("C", "K"), "C"), "Unit of the "
                                   "temperatures (else from the header or the values).")
    at: tuple = option("--at", Many(Quantity("temperature", "C", Number(0, math.inf, lo_open=True),
                                             "'60 C'", "above absolute zero")),
                       "Predict k at this temperature, e.g. '60 C' (repeatable; a bare number "
                       "is C).", ())
    level: float = _level()
    output: OutputOptions = part(OutputOptions)


# --------------------------------------------------------------------------- progress


@dataclass(frozen=True)
class ProgressOptions(Checked):
    """``rateabs progress FILE``: integrated Michaelis–Menten fit of whole progress curves."""

    file: str = argument("FILE", "The export of the progress curves.")
    reader: ReaderOptions = part(ReaderOptions)
    s0: float | None = _conc("--s0", "Initial substrate concentration of every curve, e.g. "
                             "'100 uM' (a bare number is uM).", "'100 uM'")
    s0_column: str | None = option("--s0-column", Text("column name", "'S0 (uM)'"), "Per-curve "
                                   "column holding S0 (long layout).")
    layout_file: str | None = option("--layout", Text("file name", "map.csv"), "Plate map giving "
                                     "each curve's substrate (and enzyme) concentration.")
    epsilon: float | None = _epsilon("Molar absorptivity of the absorbing species.")
    chromophore: str | None = _chromophore()
    pathlength: float | None = _pathlength("Pathlength, e.g. '1 cm' (default 1 cm).")
    species: str = option("--species", OneOf(("product", "substrate"), "substrate"),
                          "Which species absorbs.", "product")
    product_inhibition: bool = option("--product-inhibition", Flag(), "Add competitive product "
                                      "inhibition (Kp).", False)
    selwyn: str | None = option("--selwyn", Text("column name", "'enzyme (nM)'"), "Per-curve "
                                "enzyme amount column: run Selwyn's test.")
    trace: tuple = option("--trace", Many(Text("trace name", "A1")), "Use only this curve "
                          "(repeatable).", ())
    ci: str = option("--ci", OneOf(("asymptotic", "profile"), "profile"), "How intervals are "
                     "computed.", "asymptotic")
    level: float = _level()
    output: OutputOptions = part(OutputOptions)
    s0_unit: str = field(default="uM", metadata={
        "derived": True, "flag": "--s0", "rule": ConcUnit(),
        "help": "Unit Km and Vmax are reported in: the unit --s0 was written in, else uM."})

    def check_together(self) -> None:
        """One epsilon, one source of S0."""
        _check_sheet(self.file, self.reader)
        if self.epsilon is not None and self.chromophore is not None:
            raise UsageError("both --epsilon and --chromophore given", "give only one of them")
        if self.epsilon is None and self.chromophore is None:
            raise UsageError("progress curves need the molar absorptivity of the absorbing "
                             "species", "give --epsilon or --chromophore")
        if self.s0 is not None and self.s0_column is not None:
            raise UsageError("both --s0 and --s0-column given", "give only one of them")

    def __post_init__(self) -> None:
        if isinstance(self.s0, str):        # Km and Vmax are reported in the unit S0 was given in
            unit = self.s0.strip().lstrip("0123456789.,eE+- ").replace("µ", "u")
            object.__setattr__(self, "s0_unit", unit if unit in ("M", "mM", "uM", "nM") else "uM")
        super().__post_init__()

    def epsilon_value(self) -> float:
        """epsilon (L mol^-1 cm^-1) from --epsilon or --chromophore."""
        from .photometry import resolve_epsilon

        return resolve_epsilon(self.epsilon, self.chromophore)


# --------------------------------------------------------------------------- grade and demo


@dataclass(frozen=True)
class GradeOptions(Checked):
    """``rateabs grade FOLDER``: batch-grade a class's runs."""

    folder: str = argument("FOLDER", "The class folder: roster.csv plus one file per student.")
    rubric: str = option("--rubric", Text("file name", "rubric.toml"), "Rubric TOML file.",
                         MISSING)
    jobs: int | None = option("--jobs", Number(1, 4096, integer=True, example="2"),
                              "Worker processes (default: all cores).")
    fmt: str = option("--format", OneOf(FORMATS, "json"), "table for a person, csv, or one json "
                      "document.", "table")
    out: str | None = option("--out", Text("folder", "grades"), "Folder for the gradebook, "
                             "feedback pages and class summary.")
