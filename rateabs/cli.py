"""Command-line interface (thin: parse options into a settings object, call a view).

Each command's options are the fields of its settings class in :mod:`rateabs.options`: names,
rules (type, range, choices, unit; :mod:`rateabs.rules`), defaults and help are read from there,
and every value is checked by the same rule that checks the settings object. A bad option gives
one line on stderr naming the option and exit code 2.

Heavy libraries (numpy, pandas, scipy, matplotlib) are imported inside the commands so
that ``rateabs --help`` stays fast.
"""

from __future__ import annotations

import functools
import sys
import warnings
from dataclasses import MISSING

import click

from . import __version__, rules
from . import options as opts
from .errors import AnalysisError, RateabsError
from .files import notices

NO_ARGS = getattr(click.exceptions, "NoArgsIsHelpError", ())
CAUTION = ("Results are for research and teaching, not for clinical diagnosis; follow local "
           "rules and licensed practice for hazardous work.")


class RuleType(click.ParamType):
    """A click type that checks a value by its option's rule (:mod:`rateabs.rules`): the same
    range, finiteness and integer checks whether the value is typed or passed from Python."""

    def __init__(self, rule: rules.Rule) -> None:
        self.rule = rule
        self.name = rule.describe() or "value"

    def convert(self, value, param, ctx):
        """The checked value; a bad one raises the rule's one-line UsageError. A quantity is
        only checked here and kept as typed: the settings object parses it (and keeps its
        unit where the output follows it)."""
        flag = param.opts[0] if param is not None and param.opts else "value"
        checked = self.rule.check(value, flag)
        return value if isinstance(self.rule, rules.Quantity) else checked

    def get_metavar(self, param, ctx=None) -> str:
        """NUMBER, INTEGER, a choice list or TEXT, for --help."""
        rule = self.rule
        if isinstance(rule, rules.OneOf):
            return "[" + "|".join(map(str, rule.choices)) + "]"
        if isinstance(rule, rules.Number):
            return "INTEGER" if rule.integer else "NUMBER"
        if isinstance(rule, rules.Quantity):
            return "QUANTITY"
        return "TEXT"


class Main(click.Group):
    """The command group; click's own usage errors are printed as one line too."""

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True, **extra):
        """Run the command; any option error is one line on stderr and exit code 2."""
        if not standalone_mode:
            return super().main(args, prog_name, complete_var, standalone_mode, **extra)
        if args is None:                        # a command line from a shell: one command
            from .views.drawing import one_command_process

            one_command_process()
        try:
            rv = super().main(args, prog_name, complete_var, standalone_mode=False, **extra)
        except NO_ARGS as exc:                  # bare `rateabs`: click's help, as usual
            exc.show()
            sys.exit(exc.exit_code)
        except click.ClickException as exc:
            ctx = getattr(exc, "ctx", None)
            hint = f" (see {ctx.command_path} --help)" if ctx is not None else ""
            click.echo(f"rateabs: {exc.format_message().rstrip('.')}{hint}", err=True)
            sys.exit(exc.exit_code)
        except RateabsError as exc:            # an option refused while click parsed it
            if "--debug" in (sys.argv[1:] if args is None else args):
                raise
            click.echo(f"rateabs: {exc.one_line()}", err=True)
            for line in getattr(exc, "also", ()):   # further problems of the same input
                click.echo(f"rateabs: {line}", err=True)
            sys.exit(exc.exit_code)
        except click.exceptions.Abort:
            click.echo("rateabs: interrupted", err=True)
            sys.exit(130)
        sys.exit(rv if isinstance(rv, int) else 0)


def _guarded(fn):
    """Turn every rateabs error into one line on stderr and its exit code (no traceback).

    Python warnings are kept off stderr (``--debug`` shows them); an analysis error that names
    no file is given the command's input.
    """

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        ctx = click.get_current_context()
        debug = ctx.find_root().params.get("debug", False)
        try:
            with warnings.catch_warnings(), notices(
                    lambda line: click.echo(f"rateabs: {line}", err=True)):
                if not debug:
                    warnings.simplefilter("ignore")
                return fn(*args, **kwargs)
        except RateabsError as exc:
            if isinstance(exc, AnalysisError):
                exc.located(kwargs.get("file") or kwargs.get("folder"))
            if debug:
                raise
            click.echo(f"rateabs: {exc.one_line()}", err=True)
            for line in getattr(exc, "also", ()):   # further problems of the same input
                click.echo(f"rateabs: {line}", err=True)
            sys.exit(exc.exit_code)
        except KeyboardInterrupt as exc:
            click.echo(f"rateabs: interrupted{': ' + str(exc) if str(exc) else ''}", err=True)
            sys.exit(130)
        except (click.exceptions.Exit, click.ClickException, SystemExit):
            raise
        except Exception as exc:  # a bug: say so in one line, keep the traceback for --debug
            if debug:
                raise
            click.echo(f"rateabs: internal error ({type(exc).__name__}: {exc}); "
                       "rerun with --debug and report it", err=True)
            sys.exit(1)

    return wrapper


def _click_param(f):
    """The click argument or option of one settings field."""
    meta = f.metadata
    rule = meta["rule"]
    if "argument" in meta:
        return click.Argument([f.name], metavar=meta["argument"], type=click.Path(),
                              nargs=meta.get("nargs", 1))
    flags = [meta["flag"], f.name]
    default = f.default_factory() if f.default_factory is not MISSING else f.default
    kw = {"help": meta["help"], "hidden": meta.get("hidden", False)}
    if isinstance(rule, (rules.Number, rules.Quantity)):
        kw["help"] += f" Takes {rule.describe()}."
    if isinstance(rule, rules.Flag):
        return click.Option(flags, is_flag=True, default=default,
                            show_default=True, **kw)
    if default is MISSING:
        kw["required"] = True
    elif default is not None and default != () and default != {}:
        kw.update(default=default, show_default=True)
    if isinstance(rule, (rules.Many, rules.Pairs)):
        item = rule.item
        return click.Option(flags, multiple=True, type=RuleType(item), **kw)
    return click.Option(flags, type=RuleType(rule), **kw)


def _with_options(settings_cls):
    """Add the settings class's fields to a command as click parameters."""

    def deco(fn):
        fn.__click_params__ = [_click_param(f) for f in reversed(rules.flat_fields(settings_cls))]
        return fn

    return deco


@click.group(cls=Main, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="rateabs")
@click.option("--debug", is_flag=True, help="Show Python tracebacks and warnings.")
def main(debug: bool) -> None:
    """rateabs: kinetic numbers from absorbance-vs-time data.

    Reads plate-reader and spectrophotometer exports and reports initial rates, activity,
    Michaelis-Menten and inhibition constants, rate laws, completion times and Arrhenius/Eyring
    parameters, each with its uncertainty. Not for clinical diagnosis.
    """


def _emit(fmt: str, doc: dict, table: str, csv_text: str, out, name: str) -> None:
    from .output import to_json
    from .views import write_outputs

    if fmt == "json":
        click.echo(to_json(doc), nl=False)
    elif fmt == "csv":
        click.echo(csv_text, nl=False)
        # the CSV on stdout stays a table; what was assumed and what to watch go to stderr
        for line in table.splitlines():
            if line.startswith("# "):
                click.echo(line, err=True)
        for w in doc.get("warnings", []):
            click.echo(f"warning: {w}", err=True)
    else:
        click.echo(table, nl=False)
        for w in doc.get("warnings", []):
            if w not in table:
                click.echo(f"warning: {w}", err=True)
    write_outputs(doc, csv_text, out, name)


@main.command()
@_with_options(opts.InspectOptions)
@_guarded
def inspect(**values):
    """Show what the reader found in FILE: traces, time unit, signal kind, flags."""
    from .views import run_inspect

    run_inspect(opts.InspectOptions.build(**values), _emit)


@main.command()
@_with_options(opts.RatesOptions)
@_guarded
def rates(**values):
    """Initial rate of each trace in FILE, converted to concentration and activity.

    Several files, a folder or a quoted glob pattern give one combined table whose rows carry
    their file, run on --jobs local processes or on a Dask cluster (--scheduler); exit code 5
    when some files failed (their rows say why, the rest are written).
    """
    from .views import run_rates
    from .views.batch import one_file, plan_plates, run_plates

    o = opts.RatesOptions.build(**values)
    single = one_file(o)
    if single is not None:
        run_rates(single, _emit)
        return 0
    done = run_plates(plan_plates(o), click.echo, progress=lambda n: click.progressbar(
        length=n, label="plates", file=sys.stderr))
    if done.failed:
        click.echo(f"rateabs: {done.summary()}", err=True)
    return done.exit_code


@main.command()
@_with_options(opts.SaturationOptions)
@_guarded
def saturation(**values):
    """Michaelis-Menten family and inhibition fits of rate vs concentration in FILE.

    With --each COLUMN every group of rows (each sample, each plate...) is fitted on its own;
    exit code 5 when some groups could not be fitted (their results say why).
    """
    from .errors import SOME_FAILED
    from .views import run_saturation

    doc = run_saturation(opts.SaturationOptions.build(**values), _emit).doc
    failed = doc["settings"].get("failed")
    if failed:
        click.echo(f"rateabs: {failed} of {doc['settings']['groups']} group(s) could not be "
                   "fitted (their results say why); the others were written", err=True)
        return SOME_FAILED
    return 0


@main.command()
@_with_options(opts.RatelawOptions)
@_guarded
def ratelaw(**values):
    """Integrated rate-law fits (order, k, half-life) of the traces in FILE."""
    from .views import run_ratelaw

    run_ratelaw(opts.RatelawOptions.build(**values), _emit)


@main.command()
@_with_options(opts.CompletionOptions)
@_guarded
def completion(**values):
    """Conversion, time to a target conversion, and complete or not, for FILE.

    A predicted end point is no process-safety assessment.
    """
    from .views import follow_completion, run_completion

    o = opts.CompletionOptions.build(**values)
    if o.follow is not None:
        follow_completion(o, click.echo, _emit, progress=lambda line: click.echo(line, err=True))
    else:
        run_completion(o, _emit)


@main.command()
@_with_options(opts.TemperatureOptions)
@_guarded
def temperature(**values):
    """Arrhenius and Eyring analysis of rate constants vs temperature in FILE."""
    from .views import run_temperature

    run_temperature(opts.TemperatureOptions.build(**values), _emit)


@main.command()
@_with_options(opts.ProgressOptions)
@_guarded
def progress(**values):
    """Integrated Michaelis-Menten fit of whole progress curves in FILE (and Selwyn's test)."""
    from .views import run_progress

    run_progress(opts.ProgressOptions.build(**values), _emit)


@main.command()
@_with_options(opts.GradeOptions)
@_guarded
def grade(**values):
    """Batch-grade a class's runs in FOLDER (roster.csv plus one file per student)."""
    from .grade import read_roster, read_rubric
    from .views import run_grade

    o = opts.GradeOptions.build(**values)
    read_rubric(o.rubric)                   # a bad rubric is refused before anything starts
    n = len(read_roster(o.folder))
    with click.progressbar(length=n, label="grading", file=sys.stderr) as bar:
        run_grade(o, _emit, progressbar=bar.update)


@main.command()
@click.option("--out", type=click.Path(file_okay=False), default="rateabs-demo",
              show_default=True, help="Folder for the demo's results, plots and summary.")
@_guarded
def demo(out):
    """Run the whole job on the embedded sample runs and write results, plots and a summary."""
    from .demo import run_demo

    summary = run_demo(out, echo=click.echo)
    click.echo(summary)
    click.echo(CAUTION)


if __name__ == "__main__":  # pragma: no cover
    main()
