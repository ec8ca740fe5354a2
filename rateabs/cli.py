"""Command-line interface (thin: parse options, call the analyses, print or write results).

Heavy libraries (numpy, pandas, scipy, lmfit, matplotlib) are imported inside the commands so
that ``rateabs --help`` stays fast.
"""

from __future__ import annotations

import functools
import sys

import click

from . import __version__
from .errors import RateabsError
from .files import notices

FORMATS = click.Choice(["table", "csv", "json"])
CAUTION = ("Results are for research and teaching, not for clinical diagnosis; follow local "
           "rules and licensed practice for hazardous work.")


def _guarded(fn):
    """Turn every rateabs error into one line on stderr and its exit code (no traceback)."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        ctx = click.get_current_context()
        debug = ctx.find_root().params.get("debug", False)
        try:
            with notices(lambda line: click.echo(f"rateabs: {line}", err=True)):
                return fn(*args, **kwargs)
        except RateabsError as exc:
            if debug:
                raise
            click.echo(f"rateabs: {exc.one_line()}", err=True)
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


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="rateabs")
@click.option("--debug", is_flag=True, help="Show Python tracebacks for errors.")
def main(debug: bool) -> None:
    """rateabs: kinetic numbers from absorbance-vs-time data.

    Reads plate-reader and spectrophotometer exports and reports initial rates, activity,
    Michaelis-Menten and inhibition constants, rate laws, completion times and Arrhenius/Eyring
    parameters, each with its uncertainty. Not for clinical diagnosis.
    """


def _reader_options(fn):
    fn = click.option("--sheet", default=None, help="Sheet of an .xlsx workbook.")(fn)
    fn = click.option("--i0", type=float, default=None,
                      help="Reference intensity I0 for raw intensities.")(fn)
    fn = click.option("--signal", type=click.Choice(["absorbance", "transmittance", "percent",
                                                     "intensity"]), default=None,
                      help="What the readings are (detected from the header when not given).")(fn)
    fn = click.option("--time-unit", type=click.Choice(["s", "min", "h"]), default=None,
                      help="Unit of a numeric time column (detected from the header).")(fn)
    return fn


def _output_options(fn):
    """--plots, --format, --out and --report, shared by every analysis command."""
    fn = click.option("--report", type=click.Path(dir_okay=False), default=None,
                      help="Write one self-contained HTML report (plots inline) to this file.")(fn)
    fn = click.option("--out", type=click.Path(file_okay=False), default=None,
                      help="Folder for the JSON, CSV and plots.")(fn)
    fn = click.option("--format", "fmt", type=FORMATS, default="table", show_default=True,
                      help="table for a person, csv, or one json document.")(fn)
    fn = click.option("--plots/--no-plots", default=True, show_default=True,
                      help="Draw plots into --out (and into --report).")(fn)
    return fn


def _emit(fmt: str, doc: dict, table: str, csv_text: str, out, name: str) -> None:
    from .output import to_json
    from .views import write_outputs

    if fmt == "json":
        click.echo(to_json(doc), nl=False)
    elif fmt == "csv":
        click.echo(csv_text, nl=False)
    else:
        click.echo(table, nl=False)
        for w in doc.get("warnings", []):
            if w not in table:
                click.echo(f"warning: {w}", err=True)
    write_outputs(doc, csv_text, out, name)


@main.command()
@click.argument("file", type=click.Path(dir_okay=True))
@_reader_options
@click.option("--linear-limit", type=float, default=None,
              help="Absorbance above which readings are flagged (default 2.0).")
@_output_options
@_guarded
def inspect(file, time_unit, signal, i0, sheet, linear_limit, plots, fmt, out, report):
    """Show what the reader found in FILE: traces, time unit, signal kind, flags."""
    from .views import run_inspect

    run_inspect(dict(file=file, time_unit=time_unit, signal=signal, i0=i0, sheet=sheet,
                     linear_limit=linear_limit, plots=plots, fmt=fmt, out=out, report=report),
                _emit)


def _parse_window(text: str):
    from .errors import UsageError
    from .units import parse_time

    if text == "auto":
        return "auto"
    a, sep, b = text.partition("-") if "-" in text.strip("-") else text.partition(":")
    try:
        if not sep:
            raise ValueError
        return (parse_time(a), parse_time(b))
    except Exception:
        raise UsageError(f"--window {text!r} is neither 'auto' nor START-END",
                         "e.g. --window 30-300 (seconds) or --window '0.5 min-5 min'") from None


@main.command()
@click.argument("file", type=click.Path())
@_reader_options
@click.option("--layout", "layout_file", type=click.Path(), default=None,
              help="Plate map CSV (roles, concentrations, dilutions, groups).")
@click.option("--epsilon", default=None, help="Molar absorptivity, e.g. '6220 M^-1 cm^-1'.")
@click.option("--epsilon-se", default=None, help="Standard error of epsilon (same unit).")
@click.option("--chromophore", default=None, help="Take epsilon from the table: NADH, NADPH, TNB, "
              "p-nitrophenolate.")
@click.option("--pathlength", default=None, help="Optical pathlength, e.g. '1 cm' (default 1 cm).")
@click.option("--well-volume", default=None, help="Liquid volume per well, e.g. '200 uL': "
              "pathlength from the plate's well geometry.")
@click.option("--plate", type=click.Choice(["96", "384"]), default="96", show_default=True,
              help="Plate format for --well-volume.")
@click.option("--total-volume", default=None, help="Reaction volume, e.g. '200 uL'.")
@click.option("--sample-volume", default=None, help="Volume of enzyme sample added, e.g. '20 uL'.")
@click.option("--protein", default=None, help="Protein concentration of the sample, e.g. "
              "'0.8 mg/mL' (for U/mg; the plate map may give it per well).")
@click.option("--dilution", type=float, default=1.0, show_default=True,
              help="Dilution factor of the sample (the plate map may give it per well).")
@click.option("--window", default="auto", show_default=True,
              help="'auto' or a fixed START-END in seconds, e.g. 30-300.")
@click.option("--min-points", type=int, default=None, help="Fewest readings in a window.")
@click.option("--blank", type=click.Choice(["auto", "slope", "trace", "none"]), default="auto",
              show_default=True, help="Subtract the mean blank slope or the time-matched mean "
              "blank trace (auto: slope when the map has blanks).")
@click.option("--direction", type=click.Choice(["auto", "up", "down"]), default="auto",
              show_default=True, help="Whether product formation raises or lowers the signal.")
@click.option("--linear-limit", type=float, default=2.0, show_default=True,
              help="Absorbance above which readings are masked.")
@click.option("--noisy-limit", type=float, default=0.10, show_default=True,
              help="Relative SE of a slope above which it is flagged noisy.")
@click.option("--katal", is_flag=True, help="Also report activity in nkat/mL.")
@click.option("--calibrate", type=click.Choice(["auto", "standards", "none"]), default="auto",
              show_default=True, help="Convert with a standard curve from 'standard' wells "
              "(auto: when no epsilon is given).")
@click.option("--curve/--no-curve", default=True, show_default=True,
              help="Also fit each whole trace for its initial slope (--no-curve is faster).")
@click.option("--slope-from", type=click.Choice(["window", "curve"]), default="window",
              show_default=True, help="Report the straight-window slope, or the initial slope of "
              "the whole-curve fit (better when substrate depletion bends every trace).")
@_output_options
@_guarded
def rates(file, time_unit, signal, i0, sheet, layout_file, epsilon, epsilon_se, chromophore,
          pathlength, well_volume, plate, total_volume, sample_volume, protein, dilution, window,
          min_points, blank, direction, linear_limit, noisy_limit, katal, calibrate, curve,
          slope_from, plots, fmt, out, report):
    """Initial rate of each trace in FILE, converted to concentration and activity."""
    from .views import run_rates

    run_rates(dict(file=file, time_unit=time_unit, signal=signal, i0=i0, sheet=sheet,
                   layout_file=layout_file, epsilon=epsilon, epsilon_se=epsilon_se,
                   chromophore=chromophore, pathlength=pathlength, well_volume=well_volume,
                   plate=int(plate), total_volume=total_volume, sample_volume=sample_volume,
                   protein=protein, dilution=dilution, window=_parse_window(window),
                   min_points=min_points, blank=blank, direction=direction,
                   linear_limit=linear_limit, noisy_limit=noisy_limit, katal=katal,
                   slope_from=slope_from, calibrate=calibrate, curve=curve, plots=plots,
                   fmt=fmt, out=out,
                   report=report),
              _emit)


def _parse_fix(items) -> dict:
    from .errors import UsageError

    out = {}
    for item in items:
        name, sep, val = item.partition("=")
        try:
            if not sep:
                raise ValueError
            out[name.strip()] = float(val)
        except ValueError:
            raise UsageError(f"--fix {item!r} is not NAME=VALUE", "e.g. --fix Km=120") from None
    return out


@main.command()
@click.argument("file", type=click.Path())
@click.option("--conc", default=None, help="Substrate concentration column (detected if not given).")
@click.option("--rate", default=None, help="Rate column (detected if not given).")
@click.option("--inhibitor", default=None, help="Inhibitor concentration column.")
@click.option("--sd", "sd_col", default=None, help="Column of rate SDs (for --weighting sd).")
@click.option("--model", type=click.Choice(["mm", "hill", "substrate-inhibition", "competitive",
                                            "uncompetitive", "noncompetitive", "mixed", "ic50",
                                            "auto"]), default="auto", show_default=True)
@click.option("--ci", type=click.Choice(["asymptotic", "profile", "bootstrap"]),
              default="asymptotic", show_default=True, help="How intervals are computed.")
@click.option("--level", type=float, default=0.95, show_default=True, help="Confidence level.")
@click.option("--weighting", type=click.Choice(["none", "relative", "sd"]), default="none",
              show_default=True)
@click.option("--fix", multiple=True, help="Hold a parameter at a value: NAME=VALUE (repeatable).")
@click.option("--enzyme", default=None, help="Enzyme concentration for kcat, e.g. '1 nM'.")
@click.option("--conc-unit", default=None, help="Unit of the concentrations (else from header).")
@click.option("--rate-unit", default=None, help="Unit of the rates, e.g. uM/min (else header).")
@click.option("--inhibitor-unit", default=None, help="Unit of the inhibitor concentrations.")
@click.option("--mode", type=click.Choice(["competitive", "uncompetitive", "noncompetitive"]),
              default=None, help="Inhibition mode for the Cheng–Prusoff Ki from an IC50.")
@click.option("--substrate", type=float, default=None,
              help="[S] of the IC50 assay (in the Km unit), for Cheng–Prusoff.")
@click.option("--km", type=float, default=None, help="Km for Cheng–Prusoff (same unit as --substrate).")
@click.option("--resamples", type=int, default=2000, show_default=True, help="Bootstrap resamples.")
@click.option("--resample", type=click.Choice(["residual", "case"]), default="residual",
              show_default=True, help="Bootstrap scheme.")
@click.option("--seed", type=int, default=0, show_default=True, help="Bootstrap seed.")
@click.option("--select", multiple=True, metavar="COL=VALUE",
              help="Use only rows whose COL equals VALUE (repeatable), e.g. sample=KbDH1.")
@_output_options
@_guarded
def saturation(file, conc, rate, inhibitor, sd_col, model, ci, level, weighting, fix, enzyme,
               conc_unit, rate_unit, inhibitor_unit, mode, substrate, km, resamples, resample,
               seed, fmt, select, plots, out, report):
    """Michaelis-Menten family and inhibition fits of rate vs concentration in FILE."""
    from .views import run_saturation

    run_saturation(dict(file=file, conc=conc, rate=rate, inhibitor=inhibitor, sd=sd_col,
                        model=model, ci=ci, level=level, weighting=weighting, fix=_parse_fix(fix),
                        enzyme=enzyme, conc_unit=conc_unit, rate_unit=rate_unit,
                        inhibitor_unit=inhibitor_unit, mode=mode, substrate=substrate, km=km,
                        resamples=resamples, resample=resample, seed=seed, select=select,
                        plots=plots, fmt=fmt, out=out, report=report), _emit)


def _law_options(fn):
    fn = click.option("--c0", default=None, help="Initial reactant concentration, e.g. '50 uM'.")(fn)
    fn = click.option("--pathlength", default=None, help="Pathlength, e.g. '1 cm'.")(fn)
    fn = click.option("--epsilon-product", default=None,
                      help="Molar absorptivity of the product when both species absorb.")(fn)
    fn = click.option("--chromophore", default=None, help="Take epsilon from the table.")(fn)
    fn = click.option("--epsilon", default=None,
                      help="Molar absorptivity of the reactant (or the one absorbing species).")(fn)
    fn = click.option("--trace", multiple=True, help="Analyse only this trace (repeatable).")(fn)
    fn = click.option("--fix", multiple=True, help="Hold a parameter: NAME=VALUE, e.g. Ainf=0.05.")(fn)
    fn = click.option("--level", type=float, default=0.95, show_default=True,
                      help="Confidence level.")(fn)
    return fn


@main.command()
@click.argument("file", type=click.Path())
@_reader_options
@_law_options
@click.option("--order", type=click.Choice(["0", "1", "2", "auto", "mixed"]), default="auto",
              show_default=True, help="Rate-law order; mixed: A + B with unequal [A]0, [B]0.")
@click.option("--a0", default=None, help="[A]0 for --order mixed, e.g. '50 uM'.")
@click.option("--b0", default=None, help="[B]0 for --order mixed, e.g. '120 uM'.")
@click.option("--ci", type=click.Choice(["asymptotic", "profile"]), default="profile",
              show_default=True)
@click.option("--expect", type=click.Choice(["any", "decay", "rise"]), default="any",
              show_default=True, help="Refuse traces that move the other way.")
@click.option("--guggenheim", type=float, default=None,
              help="Also apply Guggenheim's method with this interval in s (0: half the run).")
@click.option("--excess", type=click.Path(), default=None,
              help="CSV trace,conc of a pseudo-first-order series: k2 from kobs vs [excess].")
@_output_options
@_guarded
def ratelaw(file, time_unit, signal, i0, sheet, c0, pathlength, epsilon_product, chromophore,
            epsilon, trace, fix, level, order, a0, b0, ci, expect, guggenheim, excess, plots, fmt,
            out, report):
    """Integrated rate-law fits (order, k, half-life) of the traces in FILE."""
    from .views import run_ratelaw

    run_ratelaw(dict(file=file, time_unit=time_unit, signal=signal, i0=i0, sheet=sheet, c0=c0,
                     pathlength=pathlength, epsilon_product=epsilon_product,
                     chromophore=chromophore, epsilon=epsilon, trace=trace, fix=_parse_fix(fix),
                     level=level, order=order, a0=a0, b0=b0, ci=ci, expect=expect,
                     guggenheim=guggenheim, excess=excess, plots=plots, fmt=fmt, out=out,
                     report=report), _emit)


@main.command()
@click.argument("file", type=click.Path())
@_reader_options
@_law_options
@click.option("--target", type=float, default=99.0, show_default=True,
              help="Target conversion in percent.")
@click.option("--order", type=click.Choice(["1", "2", "auto"]), default="1", show_default=True)
@click.option("--follow", type=float, default=None, metavar="SECONDS",
              help="Re-read FILE every SECONDS while the instrument writes it; stop at completion "
              "or Ctrl-C.")
@click.option("--max-updates", type=int, default=None, help="With --follow: stop after N reads.")
@_output_options
@_guarded
def completion(file, time_unit, signal, i0, sheet, c0, pathlength, epsilon_product, chromophore,
               epsilon, trace, fix, level, target, order, follow, max_updates, plots, fmt, out,
               report):
    """Conversion, time to a target conversion, and complete or not, for FILE.

    A predicted end point is no process-safety assessment.
    """
    from .views import follow_completion, run_completion

    o = dict(file=file, time_unit=time_unit, signal=signal, i0=i0, sheet=sheet, c0=c0,
             pathlength=pathlength, epsilon_product=epsilon_product, chromophore=chromophore,
             epsilon=epsilon, trace=trace, fix=_parse_fix(fix), level=level, target=target,
             order=order, plots=plots, fmt=fmt, out=out, report=report)
    if follow is not None:
        follow_completion(o, follow, max_updates, click.echo, _emit)
    else:
        run_completion(o, _emit)


@main.command()
@click.argument("file", type=click.Path())
@click.option("--temp-column", default=None, help="Temperature column (detected if not given).")
@click.option("--k-column", default=None, help="Rate-constant column (detected if not given).")
@click.option("--se-column", default=None, help="Column of SE(k), for weights.")
@click.option("--temp-unit", type=click.Choice(["C", "K"]), default=None,
              help="Unit of the temperatures (else from the header or the values).")
@click.option("--at", multiple=True, help="Predict k at this temperature, e.g. '60 C' (repeatable).")
@click.option("--level", type=float, default=0.95, show_default=True)
@_output_options
@_guarded
def temperature(file, temp_column, k_column, se_column, temp_unit, at, level, plots, fmt, out,
                report):
    """Arrhenius and Eyring analysis of rate constants vs temperature in FILE."""
    from .views import run_temperature

    run_temperature(dict(file=file, temp_column=temp_column, k_column=k_column,
                         se_column=se_column, temp_unit=temp_unit, at=at, level=level,
                         plots=plots, fmt=fmt, out=out, report=report), _emit)


@main.command()
@click.argument("file", type=click.Path())
@_reader_options
@click.option("--s0", default=None, help="Initial substrate concentration of every curve, e.g. "
              "'100 uM' (a bare number is uM).")
@click.option("--s0-column", default=None, help="Per-curve column holding S0 (long layout).")
@click.option("--layout", "layout_file", type=click.Path(), default=None,
              help="Plate map giving each curve's substrate (and enzyme) concentration.")
@click.option("--epsilon", default=None, help="Molar absorptivity of the absorbing species.")
@click.option("--chromophore", default=None, help="Take epsilon from the table.")
@click.option("--pathlength", default=None, help="Pathlength, e.g. '1 cm'.")
@click.option("--species", type=click.Choice(["product", "substrate"]), default="product",
              show_default=True, help="Which species absorbs.")
@click.option("--product-inhibition", is_flag=True, help="Add competitive product inhibition (Kp).")
@click.option("--selwyn", default=None, metavar="COL",
              help="Per-curve enzyme amount column: run Selwyn's test.")
@click.option("--trace", multiple=True, help="Use only this curve (repeatable).")
@click.option("--ci", type=click.Choice(["asymptotic", "profile"]), default="asymptotic",
              show_default=True)
@click.option("--level", type=float, default=0.95, show_default=True)
@_output_options
@_guarded
def progress(file, time_unit, signal, i0, sheet, s0, s0_column, layout_file, epsilon,
             chromophore, pathlength, species, product_inhibition, selwyn, trace, ci, level,
             plots, fmt, out, report):
    """Integrated Michaelis-Menten fit of whole progress curves in FILE (and Selwyn's test)."""
    from .views import run_progress

    run_progress(dict(file=file, time_unit=time_unit, signal=signal, i0=i0, sheet=sheet, s0=s0,
                      s0_column=s0_column, layout_file=layout_file, epsilon=epsilon,
                      chromophore=chromophore, pathlength=pathlength, species=species,
                      product_inhibition=product_inhibition, selwyn=selwyn, trace=trace, ci=ci,
                      level=level, plots=plots, fmt=fmt, out=out, report=report), _emit)


@main.command()
@click.argument("folder", type=click.Path())
@click.option("--rubric", type=click.Path(), required=True, help="Rubric TOML file.")
@click.option("--jobs", type=int, default=None, help="Worker processes (default: all cores).")
@click.option("--format", "fmt", type=FORMATS, default="table", show_default=True)
@click.option("--out", type=click.Path(file_okay=False), default=None,
              help="Folder for the gradebook, feedback pages and class summary.")
@_guarded
def grade(folder, rubric, jobs, fmt, out):
    """Batch-grade a class's runs in FOLDER (roster.csv plus one file per student)."""
    from .grade import read_roster
    from .views import run_grade

    n = len(read_roster(folder))
    with click.progressbar(length=n, label="grading", file=sys.stderr) as bar:
        run_grade(dict(folder=folder, rubric=rubric, jobs=jobs, fmt=fmt, out=out), _emit,
                  progressbar=bar.update)


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
