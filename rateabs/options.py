"""Every command's settings as one typed object, checked when it is built.

One frozen dataclass per command (:class:`InspectOptions`, :class:`RatesOptions`,
:class:`SaturationOptions`, :class:`RatelawOptions`, :class:`CompletionOptions`,
:class:`TemperatureOptions`, :class:`ProgressOptions`, :class:`GradeOptions`), made of the
reader options, the output options and one field per command-line option of the command. Each
field names its option, its rule (type, choices or range, unit) and its help; the command line is
built from these fields, so what a command accepts is read here and nowhere else. The analysis
settings of ``rates`` (:class:`RateSettings`) are checked by the same rules (:mod:`rateabs.rules`).

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
from dataclasses import MISSING, dataclass, field
from pathlib import Path

from .batch import is_pattern
from .errors import UsageError
from .rules import (
    Checked,
    ConcUnit,
    Flag,
    Many,
    Number,
    OneOf,
    Pair,
    Pairs,
    Quantity,
    Rule,
    Text,
    Window,
    argument,
    option,
    part,
    refusal,
)

#: Absorbance above which readings are flagged as past the linear range (common practice:
#: most instruments are trusted to about 1.5-2; the instrument's own specification overrides it).
DEFAULT_LINEAR_LIMIT = 2.0

SIGNAL_KINDS = ("absorbance", "transmittance", "percent", "intensity")
TIME_UNIT_CHOICES = ("s", "min", "h")
FORMATS = ("table", "csv", "json")


@dataclass(frozen=True)
class Chromophore(Rule):
    """A chromophore of :data:`rateabs.photometry.CHROMOPHORES` (or a common alias)."""

    example: str = "NADH"

    def describe(self) -> str:
        """What the option takes."""
        return "a chromophore of the table in rateabs.photometry"

    def check(self, value, option: str) -> str:
        """The chromophore's table name."""
        from .photometry import chromophore

        try:
            return chromophore(str(value)).name
        except UsageError as exc:
            raise UsageError(f"{option}: {exc.problem}", exc.fix) from None


# --------------------------------------------------------------------------- shared rules

LEVEL = Number(0, 1, lo_open=True, hi_open=True, example="0.95")
POSITIVE = Number(0, math.inf, lo_open=True)
EPSILON = Quantity("molar absorptivity", "M^-1 cm^-1", POSITIVE,
                   "'6.22 mM^-1 cm^-1'")
PATHLENGTH = Quantity("pathlength", "cm", Number(0, 100, lo_open=True), "'1 cm'")
LINEAR_LIMIT = Number(0, 10, lo_open=True, unit="absorbance, AU", example="2")
NOISY_LIMIT = Number(0, 1, lo_open=True, unit="relative SE of the slope", example="0.1")
MIN_POINTS = Number(3, math.inf, integer=True, unit="readings", example="5")
DILUTION = Number(1, math.inf, unit="fold; 10 for a 1:10 dilution", example="10")
BLANK_MODES = ("auto", "slope", "trace", "none")
DIRECTIONS = ("auto", "up", "down")
SLOPE_SOURCES = ("auto", "window", "curve")
PLATE_FORMATS = (96, 384, 1536)
#: Single-well plot pages: the wells that need a look (at most WELL_PAGE_CAP), all, or none.
WELL_PAGES = ("flagged", "all", "none")
WELL_PAGE_CAP = 24
CALIBRATION = ("auto", "standards", "none")
FIX = Pairs(Pair(Number(example="120"), example="Km=120"))


def _level():
    return option("--level", LEVEL, "Confidence level of every interval.", 0.95)


def _epsilon(help: str = "Molar absorptivity, e.g. '6220 M^-1 cm^-1' (a bare number is "
             "M^-1 cm^-1)."):
    return option("--epsilon", EPSILON, help + " A value under 100 M^-1 cm^-1 is warned of "
                  "(likely mM^-1 cm^-1).")


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


def _sheet():
    return option("--sheet", Text("sheet name", "Sheet1"), "Sheet of an .xlsx workbook (else the "
                  "first with data, named in a warning when there are several).")


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
    sheet: str | None = _sheet()

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


def _check_sheet(file: str, reader) -> None:
    """--sheet only for workbooks (``reader``: ReaderOptions, or an options object with its
    own ``sheet``)."""
    if Path(file).is_dir() or is_pattern(file):       # a many-file run: checked file by file
        return
    if reader.sheet is not None and Path(file).suffix.lower() not in (".xlsx", ".xlsm"):
        raise refusal("--sheet", f"applies to .xlsx workbooks only; {file} is not one",
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


# --------------------------------------------------------------------------- many files

JOBS = Number(1, 4096, integer=True, unit="worker processes", example="2")


@dataclass(frozen=True)
class SchedulerAddress(Rule):
    """The address of a running Dask scheduler, ``tcp://HOST:PORT`` (``HOST:PORT`` too)."""

    example: str = "tcp://10.0.0.5:8786"

    def describe(self) -> str:
        """What the option takes."""
        return "a Dask scheduler address tcp://HOST:PORT"

    def check(self, value, option: str) -> str:
        """The address as ``tcp://host:port`` (the rule of :mod:`rateabs.parallel`)."""
        from .parallel import check_scheduler

        return check_scheduler(str(value))


def _jobs():
    return option("--jobs", JOBS, "Worker processes on this machine (default: one per CPU; 1 "
                  "runs the files here, one after another). With one file: the processes that "
                  "draw its pictures (default 2; 1 draws them here).")


def _scheduler():
    return option("--scheduler", SchedulerAddress(), "Run on an existing Dask cluster instead: "
                  "its scheduler's address, e.g. tcp://10.0.0.5:8786 (needs pip install "
                  "\".[cluster]\"; the workers must see the same paths).")


def check_where(jobs: int | None, scheduler: str | None) -> None:
    """Local processes or a cluster, not both."""
    if jobs is not None and scheduler is not None:
        raise UsageError("--jobs and --scheduler were both given", "give --scheduler to run on "
                         "the cluster, or --jobs for local processes")


@dataclass(frozen=True)
class WhereOptions(Checked):
    """Where the files of a many-file run are analysed (local processes or a Dask cluster), and
    how many processes draw the pictures of a one-file run."""

    jobs: int | None = _jobs()
    scheduler: str | None = _scheduler()

    def check_together(self) -> None:
        """Not both."""
        check_where(self.jobs, self.scheduler)


def _more_files():
    return field(default=(), metadata={
        "argument": "[FILE]...", "nargs": -1, "rule": Many(Text("file name")), "flag": "FILE",
        "help": "More exports, folders or quoted glob patterns: one combined table whose rows "
                "each carry their file (rateabs.batch)."})


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
    return option("--katal", Flag(), "Also report activity in nkat/mL (1 U = 16.67 nkat).",
                  False)


def _slope_from():
    return option("--slope-from", OneOf(SLOPE_SOURCES, "auto"), "Which initial slope to "
                  "report: auto (per trace, by evidence: the whole-curve fit where the trace "
                  "bends, else the straight window), or always the window or the curve.", "auto")


def _curve():
    return option("--curve/--no-curve", Flag(), "Also fit each whole trace for its initial slope "
                  "(--no-curve is faster).", True)


def _calibrate():
    return option("--calibrate", OneOf(CALIBRATION, "standards"), "Convert with a standard "
                  "curve from 'standard' wells (auto: when no epsilon is given).", "auto")


def _dilution():
    return option("--dilution", DILUTION, "Dilution factor of the sample, for the wells whose "
                  "dilution the plate map does not give (default 1).")


def _epsilon_se(default=None):
    return option("--epsilon-se", Quantity("molar absorptivity", "M^-1 cm^-1", Number(0, math.inf),
                                           "'100 M^-1 cm^-1'"),
                  "Standard error of epsilon (same unit; with --epsilon or --chromophore).",
                  default)


def _total_volume():
    return option("--total-volume", Quantity("volume", "uL", POSITIVE, "'200 uL'"),
                  "Reaction volume, e.g. '200 uL'.")


def _sample_volume():
    return option("--sample-volume", Quantity("volume", "uL", POSITIVE, "'20 uL'"),
                  "Volume of enzyme sample added, e.g. '20 uL'.")


def _protein():
    return option("--protein", Quantity("mass concentration", "mg/mL", POSITIVE, "'0.8 mg/mL'"),
                  "Protein concentration of the sample, e.g. '0.8 mg/mL' (for U/mg; the plate "
                  "map may give it per well).")


def _noisy_limit():
    return option("--noisy-limit", NOISY_LIMIT, "Flag a well noisy where its rate's SE is over "
                  "this fraction of the larger of its rate and the plate's typical rate and its "
                  "readings are far noisier than the plate's usual (three times its median "
                  "noise), or over ten times this fraction whatever the noise.", 0.10)


def _well_volume():
    return option("--well-volume", Quantity("volume", "uL", POSITIVE, "'200 uL'"),
                  "Liquid volume per well, e.g. '200 uL': pathlength from the plate's well "
                  "geometry.")


def _plate():
    return option("--plate", OneOf(PLATE_FORMATS, "384"), "Plate format (else read from the "
                  "well names); checked against them.")


def _well_window():
    return option("--well-window", Many(Pair(Window(), "A1=60-300")), "One well's own window: "
                  "WELL=START-END or WELL=auto (repeatable; beats the map's window column).", ())


def _skip_well():
    return option("--skip-well", Many(Text("well name", "A1")), "Leave a well out of the "
                  "analysis (repeatable).", ())


def _skip_reading():
    return option("--skip-reading", Many(Pair(Quantity("time", "s", Number(0, math.inf),
                                                        "'120 s'"), "A1=120")),
                  "Leave one reading out: WELL=TIME, e.g. A1=120 (a bare time is s; "
                  "repeatable).", ())


@dataclass(frozen=True)
class RateSettings(Checked):
    """What the ``rates`` analysis uses, in base units (built from :class:`RatesOptions`, or
    directly from Python). Every field is checked as the matching option is. A pathlength,
    plate format or dilution left at None is taken from the file or the plate map, or assumed,
    and the analysis says which (:func:`rateabs.rates.plate_setup`)."""

    epsilon: float | None = _epsilon()
    epsilon_se: float = _epsilon_se(0.0)
    pathlength_cm: float | None = _pathlength()
    well_volume_L: float | None = _well_volume()
    plate: int | None = _plate()
    total_volume_L: float | None = _total_volume()
    sample_volume_L: float | None = _sample_volume()
    protein_mg_per_mL: float | None = _protein()
    dilution: float | None = _dilution()
    window: object = _window()
    min_points: int | None = _min_points()
    blank: str = _blank()
    direction: str = _direction()
    linear_limit: float = _linear_limit()
    noisy_rel_se: float = _noisy_limit()
    katal: bool = _katal()
    slope_from: str = _slope_from()
    curve: bool = _curve()
    calibrate: str = _calibrate()
    well_windows: tuple = _well_window()
    skip_wells: tuple = _skip_well()
    skip_readings: tuple = _skip_reading()

    def check_together(self) -> None:
        """Volumes in pairs, the sample inside the total, one pathlength, a curve for
        --slope-from curve."""
        if (self.total_volume_L is None) != (self.sample_volume_L is None):
            raise UsageError("activity needs both --total-volume and --sample-volume",
                             "give both, e.g. --total-volume '200 uL' --sample-volume '20 uL'")
        if self.total_volume_L is not None and self.sample_volume_L > self.total_volume_L:
            raise UsageError("the sample volume is larger than the total volume",
                             "check --sample-volume and --total-volume")
        if self.pathlength_cm is not None and self.well_volume_L is not None:
            raise UsageError("both --pathlength and --well-volume given", "give only one of them")
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
    epsilon_se: float | None = _epsilon_se()
    chromophore: str | None = _chromophore()
    pathlength: float | None = _pathlength("Optical pathlength, e.g. '1 cm' (default: the "
                                           "file's, else 1 cm).")
    well_volume: float | None = _well_volume()
    plate: int | None = _plate()
    total_volume: float | None = _total_volume()
    sample_volume: float | None = _sample_volume()
    protein: float | None = _protein()
    dilution: float | None = _dilution()
    window: object = _window()
    well_window: tuple = _well_window()
    skip_well: tuple = _skip_well()
    skip_reading: tuple = _skip_reading()
    min_points: int | None = _min_points()
    blank: str = _blank()
    direction: str = _direction()
    linear_limit: float = _linear_limit()
    noisy_limit: float = _noisy_limit()
    katal: bool = _katal()
    calibrate: str = _calibrate()
    curve: bool = _curve()
    slope_from: str = _slope_from()
    well_pages: str = option("--well-pages", OneOf(WELL_PAGES, "all"), "Pages of single-well "
                             "plots: the wells that need a look (at most "
                             f"{WELL_PAGE_CAP}), every well, or none.", "flagged")
    output: OutputOptions = part(OutputOptions)
    more_files: tuple = _more_files()
    where: WhereOptions = part(WhereOptions)

    def check_together(self) -> None:
        """Refuse options that would be ignored; build the analysis settings once to check."""
        _check_sheet(self.file, self.reader)
        if self.epsilon_se is not None and self.epsilon is None and self.chromophore is None:
            raise refusal("--epsilon-se", "needs an epsilon to qualify",
                          "give --epsilon or --chromophore too")
        no_activity = self.total_volume is None and self.sample_volume is None
        for name, flag in (("protein", "--protein"), ("katal", "--katal"),
                           ("dilution", "--dilution")):
            if no_activity and self.given(name):
                raise refusal(flag, "applies to activity, which needs the volumes",
                              "give --total-volume and --sample-volume too")
        if self.min_points is not None and self.window != "auto":
            raise refusal("--min-points", "applies to the automatic window only",
                          "leave it out with a fixed --window")
        if self.well_pages != "flagged" and not self.output.plots:
            raise refusal("--well-pages", "chooses plots, and --no-plots draws none",
                          "leave --well-pages out, or drop --no-plots")
        self.rate_settings()

    def epsilon_value(self) -> float | None:
        """epsilon (L mol^-1 cm^-1) from --epsilon or --chromophore, or None."""
        from .photometry import resolve_epsilon

        return resolve_epsilon(self.epsilon, self.chromophore)

    def rate_settings(self) -> RateSettings:
        """The analysis settings, in base units."""
        return RateSettings(
            epsilon=self.epsilon_value(), epsilon_se=self.epsilon_se or 0.0,
            pathlength_cm=self.pathlength, well_volume_L=self.well_volume, plate=self.plate,
            total_volume_L=self.total_volume, sample_volume_L=self.sample_volume,
            protein_mg_per_mL=self.protein, dilution=self.dilution, window=self.window,
            min_points=self.min_points, blank=self.blank, direction=self.direction,
            linear_limit=self.linear_limit, noisy_rel_se=self.noisy_limit, katal=self.katal,
            slope_from=self.slope_from, curve=self.curve, calibrate=self.calibrate,
            well_windows=self.well_window, skip_wells=self.skip_well,
            skip_readings=self.skip_reading)


# --------------------------------------------------------------------------- saturation

MODELS = ("mm", "hill", "substrate-inhibition", "competitive", "uncompetitive",
          "noncompetitive", "mixed", "ic50", "auto")
CI_METHODS = ("asymptotic", "profile", "bootstrap")
WEIGHTINGS = ("none", "relative", "sd")
CHENG_PRUSOFF_MODES = ("competitive", "uncompetitive", "noncompetitive")
#: Bootstrap defaults: percentile intervals want 1000 or more resamples (Efron & Tibshirani
#: 1993, An Introduction to the Bootstrap, Chapman & Hall; from memory).
DEFAULT_RESAMPLES = 2000
RESAMPLES = Number(100, 1_000_000, integer=True, unit="resamples; 1000 or more for percentile "
                   "intervals", example="2000")


@dataclass(frozen=True)
class SaturationOptions(Checked):
    """``rateabs saturation FILE``: Michaelis–Menten family and inhibition fits."""

    file: str = argument("FILE", "A table of rates vs concentrations (or a rates.csv).")
    sheet: str | None = _sheet()
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
                            "none, 1/|fitted v| (relative; readings where the curve is 0 left "
                            "out) or 1/SD (sd, with --sd).", "none")
    fix: dict = _fix()
    enzyme: float | None = option("--enzyme", Quantity("concentration", "nM", POSITIVE,
                                                       "'1 nM'"),
                                  "Enzyme concentration for kcat, e.g. '1 nM' (a bare number is "
                                  "nM).")
    conc_unit: str | None = option("--conc-unit", ConcUnit(), "Unit the concentrations are "
                                   "in, for a column whose header names none; a header that "
                                   "states another unit refuses it (nothing is converted).")
    rate_unit: str | None = option("--rate-unit", Text("unit", "uM/min"), "Unit the rates are "
                                   "in, e.g. uM/min, for a column whose header names none; a "
                                   "header that states another unit refuses it.")
    inhibitor_unit: str | None = option("--inhibitor-unit", ConcUnit(), "Unit the inhibitor "
                                        "concentrations are in, for a column whose header names "
                                        "none; a header that states another unit refuses it.")
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
    seed: int | None = option("--seed", Number(0, 2**32 - 1, integer=True, example="1"),
                              "Bootstrap seed (with --ci bootstrap; default 0).")
    select: tuple = option("--select", Many(Pair(Text("value", "KbDH1"), "sample=KbDH1")),
                           "Use only rows whose COL equals VALUE (repeatable), e.g. "
                           "sample=KbDH1.", ())
    each: str | None = option("--each", Text("column name", "sample"), "Fit each group of rows "
                              "that share a value of this column on its own, e.g. sample (or "
                              "file, of a many-file rates table): one result per group.")
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """Refuse options the chosen model or interval method would ignore."""
        _check_sheet(self.file, self)
        if self.weighting == "sd" and self.sd is None:
            raise UsageError("--weighting sd needs the column of SDs", "name it with --sd COLUMN")
        if self.sd is not None and self.weighting != "sd":
            raise refusal("--sd", "is used only with --weighting sd", "add --weighting sd")
        if self.ci != "bootstrap":
            for name in ("resamples", "resample", "seed"):
                if getattr(self, name) is not None:
                    raise refusal(f"--{name}", "applies to bootstrap intervals only",
                                  "add --ci bootstrap, or leave it out")
        cp = [n for n in ("mode", "substrate", "km") if getattr(self, n) is not None]
        if cp and self.model != "ic50":
            raise refusal(f"--{cp[0]}", "is used for the Cheng–Prusoff Ki of an IC50 fit only",
                          "add --model ic50, or leave it out")
        if cp and len(cp) < 3:
            raise UsageError("the Cheng–Prusoff Ki needs --mode, --substrate and --km together",
                             "give all three")
        if self.enzyme is not None and self.model == "ic50":
            raise refusal("--enzyme", "gives kcat from Vmax, which an IC50 fit has not",
                          "leave it out with --model ic50")

    def bootstrap(self) -> dict:
        """Resamples, scheme and seed with their defaults (used with --ci bootstrap)."""
        return {"n_boot": self.resamples or DEFAULT_RESAMPLES,
                "resample": self.resample or "residual", "seed": self.seed or 0}


# --------------------------------------------------------------------------- rate laws

ORDERS = ("0", "1", "2", "auto", "mixed")
#: A linear baseline drift with the rate law: auto (fitted where an F-test supports it), on, off.
DRIFT_CHOICES = ("auto", "off", "on")


class Percent(float):
    """A conversion already read as a percentage (so reading it again changes nothing)."""


@dataclass(frozen=True)
class TargetConversion(Rule):
    """A target conversion, one rule for every way of writing it.

    * with a per-cent sign it is a percentage: ``99%``, ``0.5%``;
    * a bare number above 1 is a percentage: ``99``, ``99.5``;
    * a bare number below 1 is a fraction: ``0.99`` is 99 %;
    * a bare ``1`` could be either (1 % or 100 %) and is refused, as are 0 % and 100 % (a first-
      or second-order law reaches 100 % only at infinite time) and anything outside them.

    >>> TargetConversion().check("0.99", "--target"), TargetConversion().check("99%", "--target")
    (99.0, 99.0)
    """

    example: str = "99"

    def describe(self) -> str:
        """What the option takes."""
        return ("a conversion above 0 and below 100 %: '99' or '99%' (per cent), or '0.99' "
                "(a fraction below 1)")

    def check(self, value, option: str) -> Percent:
        """The target in per cent."""
        if isinstance(value, Percent):
            return value
        text = value.strip() if isinstance(value, str) else value
        percent = isinstance(text, str) and text.endswith("%")
        x = Number(example=self.example).read(text[:-1] if percent else text, option)
        if not percent:
            if x == 1:
                raise UsageError(f"{option} 1 could mean 1 % or 100 %",
                                 f"write {option} 1% or, for a fraction, a number below 1 such "
                                 "as 0.99")
            x = x * 100 if x < 1 else x
        if x >= 100:
            raise self._bad(option, value, "is not reached in finite time by a first- or "
                            "second-order law (100 % only at infinite time)")
        if x <= 0:
            raise self._bad(option, value, "is out of range")
        return Percent(x)


def _drift():
    return option("--drift", OneOf(DRIFT_CHOICES, "on"), "Linear baseline drift with the rate "
                  "law: auto (fitted where an F-test supports it), on or off.", "auto")


#: --fit-from: a time in the file's own times (before its zero too, where readings lie there).
FIT_FROM = Quantity("time", "s", Number(), "'10 min'")


def _fit_from():
    return option("--fit-from", FIT_FROM, "Fit from this time on (the file's own times; a bare "
                  "number is s), e.g. after an induction period: the readings before it are "
                  "not fitted, and A0, the conversion and every time are counted from it. "
                  "Refused when it leaves too few readings.")


def _photometry_values(o) -> dict:
    """epsilon, epsilon_product, pathlength_cm and c0_M of a rate-law command's settings."""
    from .photometry import resolve_epsilon

    return {"epsilon": resolve_epsilon(o.epsilon, o.chromophore),
            "epsilon_product": o.epsilon_product,
            "pathlength_cm": 1.0 if o.pathlength is None else o.pathlength, "c0_M": o.c0}


def _check_photometry(o) -> None:
    """One epsilon source; a pathlength only with an epsilon."""
    if o.epsilon is not None and o.chromophore is not None:
        raise UsageError("both --epsilon and --chromophore given", "give only one of them")
    has_eps = any(getattr(o, n) is not None for n in ("epsilon", "chromophore",
                                                      "epsilon_product"))
    if o.pathlength is not None and not has_eps:
        raise refusal("--pathlength", "converts absorbance with an epsilon only",
                      "give --epsilon, --epsilon-product or --chromophore too")


def _conc(flag: str, help: str, example: str = "'50 uM'"):
    return option(flag, Quantity("concentration", "uM", POSITIVE, example), help)


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
    drift: str = _drift()
    fit_from: float | None = _fit_from()
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """Mixed order needs both concentrations; nothing given is left unused."""
        _check_sheet(self.file, self.reader)
        _check_photometry(self)
        mixed = [n for n in ("a0", "b0") if getattr(self, n) is not None]
        if self.order == "mixed" and len(mixed) < 2:
            raise UsageError("--order mixed needs --a0 and --b0", "e.g. --a0 '50 uM' --b0 "
                             "'120 uM'")
        if mixed and self.order != "mixed":
            raise refusal(f"--{mixed[0]}", "is used with --order mixed only",
                          "add --order mixed, or leave it out")
        if self.drift == "on" and self.order in ("0", "mixed"):
            raise refusal("--drift on", f"applies to orders 1 and 2; order {self.order} has no "
                          "drift term (a drift is inseparable from a zero-order slope)",
                          "leave --drift out")

    def photometry_values(self) -> dict:
        """epsilon, epsilon_product, pathlength_cm and c0_M for :class:`rateabs.ratelaws.Photometry`."""
        return _photometry_values(self)


@dataclass(frozen=True)
class CompletionOptions(Checked):
    """``rateabs completion FILE``: conversion, time to a target, complete or not."""

    file: str = argument("FILE", "The export of the reaction's trace(s).")
    reader: ReaderOptions = part(ReaderOptions)
    level: float = _level()
    fix: dict = _fix("Ainf=0.05")
    trace: tuple = _traces()
    target: float = option("--target", TargetConversion(), "Target conversion: '99' or '99%' "
                           "is per cent, a bare number below 1 ('0.99') a fraction; a bare 1 "
                           "is refused as ambiguous.", Percent(99.0))
    order: str = option("--order", OneOf(("0", "1", "2", "auto"), "2"), "Rate-law order of the "
                        "forecast (auto: chosen by evidence, as ratelaw does).", "auto")
    drift: str = _drift()
    follow: float | None = option("--follow", Quantity("time", "s", Number(0, math.inf,
                                                                           lo_open=True),
                                                       "30"),
                                  "Re-read FILE every SECONDS while the instrument writes it; "
                                  "stop at completion or Ctrl-C.")
    max_updates: int | None = option("--max-updates", Number(1, math.inf, integer=True,
                                                             example="60"),
                                     "With --follow: stop after N reads.")
    c0: float | None = _conc("--c0", "The charge: initial reactant concentration, e.g. '50 uM' "
                             "(a bare number is uM; with an epsilon). Conversion is then measured "
                             "against it and a stall is told from completion.")
    epsilon: float | None = _epsilon("Molar absorptivity of the reactant (or of the one "
                                     "absorbing species): with --c0 the charge; alone, k in "
                                     "concentration units.")
    epsilon_product: float | None = option("--epsilon-product", EPSILON, "Molar absorptivity of "
                                           "the product when both species absorb.")
    chromophore: str | None = _chromophore()
    pathlength: float | None = _pathlength("Pathlength, e.g. '1 cm' (default 1 cm; with an "
                                           "epsilon).")
    end_absorbance: float | None = option("--end-absorbance", Number(
        -1, 10, unit="absorbance, AU", example="0.06"), "The charge as the absorbance expected "
        "at full conversion (instead of --c0 with an epsilon).")
    fit_from: float | None = _fit_from()
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """--max-updates only with --follow; the charge from one source, c0 with an epsilon."""
        _check_sheet(self.file, self.reader)
        _check_photometry(self)
        if self.max_updates is not None and self.follow is None:
            raise refusal("--max-updates", "limits --follow only", "add --follow SECONDS")
        has_eps = any(getattr(self, n) is not None for n in ("epsilon", "chromophore",
                                                             "epsilon_product"))
        if self.c0 is not None and not has_eps:
            raise refusal("--c0", "gives the charge as an absorbance change only with an epsilon",
                          "give --epsilon (or --chromophore) too, or --end-absorbance instead")
        if self.c0 is not None and self.end_absorbance is not None:
            raise UsageError("both --c0 and --end-absorbance give the charge",
                             "give only one of them")
        if self.drift == "on" and self.order == "0":
            raise refusal("--drift on", "applies to orders 1 and 2; a drift is inseparable "
                          "from a zero-order slope", "leave --drift out")

    def photometry_values(self) -> dict:
        """epsilon, epsilon_product, pathlength_cm and c0_M for :class:`rateabs.ratelaws.Photometry`."""
        return _photometry_values(self)


# --------------------------------------------------------------------------- temperature


@dataclass(frozen=True)
class TemperatureOptions(Checked):
    """``rateabs temperature FILE``: Arrhenius and Eyring from k vs T."""

    file: str = argument("FILE", "A table of rate constants vs temperature.")
    sheet: str | None = _sheet()
    temp_column: str | None = option("--temp-column", Text("column name", "'T (C)'"),
                                     "Temperature column (detected if not given).")
    k_column: str | None = option("--k-column", Text("column name", "k_per_s"), "Rate-constant "
                                  "column (detected if not given).")
    se_column: str | None = option("--se-column", Text("column name", "k_se"), "Column of SE(k), "
                                   "in the unit of k, for weights 1/SE(ln k)^2 (detected if not "
                                   "given); an empty, 0 or negative SE is refused with its "
                                   "rows: delete the column for an unweighted fit.")
    temp_unit: str | None = option("--temp-unit", OneOf(("C", "K", "F"), "C"), "Unit of the "
                                   "temperatures (else from the header, which may name C, K or "
                                   "F, or the values; degrees Fahrenheit are converted to "
                                   "kelvin); against a header naming another unit it is "
                                   "refused, unless the values show the header is wrong.")
    at: tuple = option("--at", Many(Quantity("temperature", "C", Number(0, math.inf, lo_open=True),
                                             "'60 C'", "above absolute zero")),
                       "Predict k at this temperature, e.g. '60 C', '333.15 K' or '140 F' "
                       "(repeatable; a bare number is C).", ())
    level: float = _level()
    output: OutputOptions = part(OutputOptions)

    def check_together(self) -> None:
        """--sheet only for workbooks."""
        _check_sheet(self.file, self)


# --------------------------------------------------------------------------- progress


@dataclass(frozen=True)
class ProgressOptions(Checked):
    """``rateabs progress FILE``: integrated Michaelis–Menten fit of whole progress curves."""

    file: str = argument("FILE", "The export of the progress curves.")
    reader: ReaderOptions = part(ReaderOptions)
    s0: float | None = _conc("--s0", "Initial substrate concentration of every curve, e.g. "
                             "'100 uM' (a bare number is uM); refused where the plate map or a "
                             "per-curve S0 column of the file gives S0.", "'100 uM'")
    s0_column: str | None = option("--s0-column", Text("column name", "'S0 (uM)'"), "Per-curve "
                                   "column holding S0 (long layout); refused where the plate map "
                                   "gives each curve's substrate.")
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
    scheduler: str | None = _scheduler()
    fmt: str = option("--format", OneOf(FORMATS, "json"), "table for a person, csv, or one json "
                      "document.", "table")
    out: str | None = option("--out", Text("folder", "grades"), "Folder for the gradebook, "
                             "feedback pages and class summary.")

    def check_together(self) -> None:
        """Local processes or a cluster, not both."""
        check_where(self.jobs, self.scheduler)
