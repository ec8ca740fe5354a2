"""One student's grade from the analysis of their run: the value in the rubric's unit, the
three parts of the score, the verdict on the reported number, every finding and every
assumption the grader made.

Score = 100 x sum(weight x part) / sum(weights), parts:

* ``data``: quality of the data and the fit (relative SE of the value: full marks at 2 % or
  better, none at 20 % or worse; x 0.8 when readings had to be left out; x 0.5 when %T was
  recorded as absorbance);
* ``report``: agreement of the reported number with the student's own data;
* ``reference``: closeness of the student's own value to the class reference.

An agreement part is 1 within ``tolerance_pct`` and falls linearly to 0 at five times it.
"""

from __future__ import annotations

import math

import numpy as np

from ..options import DEFAULT_LINEAR_LIMIT as LINEAR_LIMIT
from .diagnosis import TIME_WORDS, Context, judge
from .roster import Task, reported_reading, rounding
from .rubric import NAMES, Rubric, parse_unit

#: How far (in powers of 60) a bare time column's reading scales each quantity.
TIME_POWER = {"k": -1, "half_life": 1, "v0": -1}


def agreement(value: float, target: float, tol_pct: float) -> float:
    """1 within the tolerance, falling linearly to 0 at five times the tolerance."""
    if not (np.isfinite(value) and np.isfinite(target)) or target == 0:
        return 0.0
    dev = abs(value / target - 1) * 100
    if dev <= tol_pct:
        return 1.0
    return float(max(0.0, 1 - (dev - tol_pct) / (4 * tol_pct)))


def data_quality(rel_se: float, masked: int) -> float:
    """1 at a relative SE of 2 % or better, 0 at 20 % or worse; x 0.8 when readings were masked."""
    if not np.isfinite(rel_se):
        return 0.0
    s = float(np.clip(1 - (rel_se - 0.02) / 0.18, 0, 1))
    return s * (0.8 if masked else 1.0)


def base_row(t: Task, rubric: Rubric) -> dict:
    """The fields every student's row has, graded or not."""
    return {"student": t.student, "index": t.index, "row": t.row, "file": t.file,
            "path": t.path, "reported": t.reported, "reported_text": t.reported_text,
            "unit": rubric.unit, "reference": rubric.reference, "value": None, "value_se": None,
            "score": 0.0, "parts": {}, "status": "not analysed", "slip": None,
            "verdict": None, "diagnosis": [], "assumptions": [], "submitted": t.submitted,
            "late": None, "shared_with": [], "extra": t.extra, "readings": None,
            "figure": None}


def not_analysed(row: dict, why: str, reported_problem: str | None = None) -> dict:
    """The row of a student whose run could not be analysed."""
    row["diagnosis"] = [f"could not be analysed: {why}"] + (
        [reported_problem] if reported_problem else [])
    return row


def assess(t: Task, analysis: dict | None, rubric: Rubric, plots: bool = True) -> dict:
    """One student's grade from their roster row and the analysis of their run."""
    row = base_row(t, rubric)
    if t.problem or analysis is None:
        return not_analysed(row, t.problem or "no analysis", t.reported_problem)
    if not analysis["ok"]:
        return not_analysed(row, analysis["problem"], t.reported_problem)
    q, facts = rubric.quantity, analysis["facts"]
    row["readings"] = analysis["readings"]
    scale, unit_note = unit_scale(rubric, facts)
    base, base_se = analysis["values"][q]
    reading = time_reading(q, facts, base * scale, rubric)
    v, se = base * scale * reading["factor"], abs(base_se * scale * reading["factor"])
    if not (math.isfinite(v) and v > 0):
        return not_analysed(row, f"no positive {NAMES[q]} could be taken from the run",
                            t.reported_problem)
    sigma = se / v if math.isfinite(se) else math.inf
    recorded_pt = bool(facts.get("recorded_pt"))
    parts = {"data": data_quality(sigma, facts.get("masked", 0)) * (0.5 if recorded_pt else 1),
             "report": agreement(t.reported, v, rubric.tolerance_pct)
             if t.reported is not None else 0.0,
             "reference": agreement(v, rubric.reference, rubric.tolerance_pct)}
    w = rubric.weights
    ctx = context(rubric, v, analysis, scale * reading["factor"], reading)
    verdict = report_verdict(t, ctx, rubric, sigma)
    row.update(value=v, value_se=se, status="graded", parts=parts,
               score=round(100 * sum(w[k] * parts[k] for k in parts) / sum(w.values()), 1),
               slip=verdict[0], verdict=verdict[1],
               diagnosis=[verdict[2]] + findings(v, facts, rubric, recorded_pt,
                                                 scale * reading["factor"]),
               assumptions=assumptions(facts, rubric, reading, unit_note)
               + [n for n in [reported_reading(t.reported_text, t.reported, rubric.unit)] if n])
    if plots:
        row["figure"] = figure(analysis["figure"], reading["times"], facts)
    return row


def unit_scale(rubric: Rubric, facts: dict) -> tuple[float, str | None]:
    """Factor from the analysis's values to the rubric's unit, and a note when the rate
    table's own unit was unknown and the rubric's was assumed."""
    q, u = rubric.quantity, rubric.graded_unit
    if q not in ("Km", "Vmax"):
        return u.per_base, None
    given = facts.get("conc_unit") if q == "Km" else facts.get("rate_unit")
    own = parse_unit(q, given) if given else None
    if own is None:
        return 1.0, (f"the rate table names no {'concentration' if q == 'Km' else 'rate'} "
                     f"unit{'' if not given else f' the grader knows ({given!r})'}: its "
                     f"numbers were taken to be in {rubric.unit}, the rubric's unit")
    return u.per_base / own.per_base, None


def time_reading(q: str, facts: dict, value: float, rubric: Rubric) -> dict:
    """How a time column without a unit is read: in the rubric's unit where it gives one (the
    other unit kept as a candidate slip); else as seconds (the reader's assumption) or, when
    that puts the run far from the class reference and minutes put it near, as minutes."""
    power = TIME_POWER.get(q)
    out = {"factor": 1.0, "times": 1.0, "read": None, "other": None}
    if facts.get("time_source") == "rubric" and power is not None:
        # a bare column read in the rubric's unit: the read stands, but a number that the
        # readings give in the other unit is a slip the diagnosis can name (a student who
        # recorded minutes where the class records seconds)
        read = facts.get("time_unit")
        other = {"s": "min", "min": "s"}.get(read)
        if other is not None:
            f = 60.0 ** power if read == "s" else 60.0 ** -power
            return {**out, "read": read, "other": other, "other_factor": f}
    if facts.get("time_source") != "assumed" or power is None:
        return out
    as_min = value * 60.0 ** power
    near = abs(math.log(as_min / rubric.reference)) < abs(math.log(value / rubric.reference)) \
        if value > 0 else False
    if near and agreement(as_min, rubric.reference, rubric.tolerance_pct) > 0:
        return {"factor": 60.0 ** power, "times": 60.0, "read": "min", "other": "s",
                "other_factor": 60.0 ** -power}
    return {**out, "read": "s", "other": "min", "other_factor": 60.0 ** power}


#: The log-ratio spread given to a slip's value that its own fit does not determine (a factor
#: of 2 either way): wide enough for any optimiser's stopping point, narrow beside the factors
#: (60, 2.303, 1000, ...) the other slips are told apart by.
UNDETERMINED_SPREAD = math.log(2.0)


def context(rubric: Rubric, v: float, analysis: dict, scale: float, reading: dict) -> Context:
    """The facts the candidate slips are built from."""
    q = rubric.quantity
    alt = analysis["alt"].get(q)
    other = None
    if reading["other"]:
        other = (v * reading["other_factor"], reading["read"], reading["other"])
    spread = abs(alt[1] / alt[0]) if alt and alt[0] else math.nan
    if alt and not math.isfinite(spread):
        # that fit has no SE: the readings do not determine its value (an exponential over a
        # nearly straight stretch of %T), so any optimiser's answer, the student's included,
        # is as good as the grader's within its order of magnitude
        spread = UNDETERMINED_SPREAD
    elif not math.isfinite(spread):
        value = analysis["values"][q]
        spread = abs(value[1] / value[0]) if value[0] else 0.0
    return Context(q, rubric.graded_unit, v, rubric.epsilon, rubric.pathlength_cm,
                   alt[0] * scale if alt else None, spread,
                   analysis["facts"].get("signal"), other,
                   analysis["facts"].get("direction") == "down")


def report_verdict(t: Task, ctx: Context, rubric: Rubric, sigma: float) -> tuple:
    """(slip, verdict status, the sentence) on the reported number."""
    if t.reported is None:
        return None, "unchecked", f"{t.reported_problem}: your report cannot be checked"
    if t.reported == 0:
        return None, "unchecked", (f"you reported 0 {rubric.unit}: a {NAMES[ctx.quantity]} of "
                                   "zero cannot be checked against your data; report the value "
                                   "your fit gives")
    s = math.hypot(sigma, rounding(t.reported_text))
    v = judge(t.reported, ctx, rubric.tolerance_pct, s)
    return v.slip, v.status, v.finding


def findings(v: float, facts: dict, rubric: Rubric, recorded_pt: bool,
             scale: float = 1.0) -> list[str]:
    """What else the grader found: %T recorded, far from the reference (with the recording slip
    that explains it, where one does), readings left out, flags of the initial rate.
    ``scale`` takes the analysis's base units to the rubric's."""
    out = []
    if recorded_pt:
        out.append("the readings in your file are percent transmittance (values 10-100) "
                   "recorded under an absorbance header: record absorbance, or convert with "
                   "A = 2 - log10(%T)")
    if agreement(v, rubric.reference, rubric.tolerance_pct) < 1:
        off = 100 * (v / rubric.reference - 1)
        why = recording_slip(v, facts, rubric, scale) or (
            "check the temperature, the concentrations and the blank of your run")
        out.append(f"your own data give {v:.4g} {rubric.unit}, {off:+.0f} % from the class "
                   f"reference {rubric.reference:g}: {why}")
    over = facts.get("past_linear", 0)
    if over:
        out.append(f"{over} reading(s) above A = {LINEAR_LIMIT:g}, past the linear range of a "
                   "photometer, were left out: dilute the sample or use a shorter pathlength so "
                   f"that the absorbance stays below {LINEAR_LIMIT:g}")
    if facts.get("masked", 0) > over:
        out.append(f"{facts['masked'] - over} reading(s) were unusable (missing or marked over "
                   "range by the instrument) and were left out")
    flags = [f for f in facts.get("flags", []) if f not in ("past-linear", "overflow")]
    if flags:
        out.append(f"the initial rate carries the flag(s) {', '.join(flags)} (see the rates "
                   "flags in docs/formats.md)")
    return out


def recording_slip(v: float, facts: dict, rubric: Rubric, scale: float) -> str | None:
    """A slip in recording the run that puts the own value ``v`` far from the class reference
    and near it once undone: a time column in minutes under a header saying seconds (or the
    reverse; a rate is then 60 times off), or transmittance typed as absorbance. Named only
    when the run as read is beyond five tolerances of the reference and undoing the slip
    lands within them (a factor 60 is far beyond any honest spread); transmittance only where
    reading the numbers as T moves the value by 3 times or more and into the tolerance."""
    q, ref, tol = rubric.quantity, rubric.reference, rubric.tolerance_pct
    if agreement(v, ref, tol) > 0:
        return None
    power = TIME_POWER.get(q)
    stated = facts.get("time_source") in ("header", "rubric")
    unit = facts.get("time_unit")
    if power is not None and stated and unit in ("s", "min"):
        other = "min" if unit == "s" else "s"
        # times in `other` read as `unit`: every time is 60^(+-1) off, the value 60^(-+power)
        f = 60.0 ** (-power if unit == "s" else power)
        if agreement(v / f, ref, tol) > 0:
            col = facts.get("time_column") or "time"
            return (f"that is {_ratio(v / ref)} the reference, as if the numbers in your time "
                    f"column {col!r} were {TIME_WORDS[other]} while it says "
                    f"{TIME_WORDS[unit]} (read in {TIME_WORDS[other]} they give "
                    f"{v / f:.4g} {rubric.unit}); check the unit your clock showed and write it "
                    "in the header")
    as_t = facts.get("as_transmittance", {}).get(q)
    t_value = as_t[0] * scale if as_t and math.isfinite(as_t[0]) else math.nan
    # read as T the value must move by a factor of 3 or more (more than any honest spread of a
    # class) and land within the tolerance itself: absorbance that merely lies below 1 is not
    # taken for transmittance by coincidence
    if t_value > 0 and agreement(t_value, ref, tol) == 1 and abs(math.log(t_value / v)) >= \
            math.log(3.0):
        return (f"your readings all lie between 0 and 1 and may be transmittance typed as "
                f"absorbance: read as A = -log10 T they give {t_value:.4g} {rubric.unit}, "
                "within the tolerance of the reference; if your instrument showed T, record "
                "absorbance or convert T to A before fitting")
    return None


def _ratio(r: float) -> str:
    return f"{r:.3g} times" if r >= 1 else f"1/{1 / r:.3g} of"


def assumptions(facts: dict, rubric: Rubric, reading: dict, unit_note: str | None) -> list[str]:
    """Every assumption the grader made reading and analysing the run, one sentence each."""
    out = [unit_note] if unit_note else []
    if rubric.quantity in ("Km", "Vmax"):
        return out + [f"{facts.get('n_used')} rows of your rate table fitted with "
                      "the Michaelis-Menten equation"]
    out.append(_time_sentence(facts, reading, rubric))
    traces = facts.get("traces", [])
    why = {"only": "the only trace in the file",
           "rubric": "named by the rubric ([runs] trace)",
           "first-not-blank": f"the first of {', '.join(traces)} not named as a blank; the "
                              "rubric can name another ([runs] trace)"}[facts["trace_reason"]]
    out.append(f"trace graded: {facts['trace']!r} ({why})")
    if facts.get("blanks"):
        out.append(f"not subtracted: the blank trace(s) {', '.join(facts['blanks'])} (the "
                   "graded trace is analysed as it was read)")
    sig = facts.get("signal")
    if sig in ("percent", "transmittance"):
        out.append(f"readings converted from {'%T' if sig == 'percent' else 'transmittance'} to "
                   f"absorbance ({'A = 2 - log10(%T)' if sig == 'percent' else 'A = -log10 T'})")
    x = reading["times"]
    if "window" in facts:
        a, b = (w * x for w in facts["window"])
        how = "set by the rubric ([runs] window)" if facts["window_source"] == "rubric" else \
            "chosen automatically by the rates estimator"
        out.append(f"initial-rate window: {a:g}-{b:g} s ({how}; estimate: {facts['method']})")
        if rubric.epsilon:
            out.append(f"rate in concentration by Beer-Lambert with the rubric's epsilon "
                       f"{rubric.epsilon:g} L mol^-1 cm^-1 and pathlength "
                       f"{rubric.pathlength_cm:g} cm")
    else:
        a, b = (w * x for w in facts["span_s"])
        out.append(f"first-order fit A = Ainf + (A0 - Ainf) exp(-k t) over {a:g}-{b:g} s, "
                   f"every usable reading{_origin(facts, x)}")
    out.append(f"{facts['n_used']} readings used, {facts.get('masked', 0)} left out (missing, "
               f"over range, or above A = {LINEAR_LIMIT:g}, the linear limit the grader applies)")
    return out + [f"the reader: {n}" for n in facts.get("reader_notes", [])]


def _origin(facts: dict, times: float) -> str:
    """Where a fit's times are counted from, when not from the file's zero
    (:func:`rateabs.models.time_origin`): the first reading in the file's own times."""
    from ..io.times import file_time_text

    t0 = facts.get("time_origin_s") or 0.0
    if not t0:
        return ""
    unit = "clock" if facts.get("time_source") == "clock" else facts.get("time_unit")
    return (f", t counted from your first reading ({file_time_text(t0 * times, unit)} in your "
            "file)")


def _time_sentence(facts: dict, reading: dict, rubric: Rubric) -> str:
    col, src = facts.get("time_column") or "time", facts.get("time_source")
    if src == "clock":
        return f"time: clock times (h:mm:ss) in column {col!r}"
    if src == "rubric":
        return (f"time: column {col!r} names no unit; read in {TIME_WORDS[rubric.time_unit]} "
                "as the rubric says ([runs] time_unit)")
    if src == "assumed" and reading["read"] == "min":
        return (f"time: column {col!r} names no unit; read in minutes, because in seconds your "
                "data would be 60 times faster than the class reference and in minutes they "
                "are near it (the rubric can state the unit: [runs] time_unit)")
    if src == "assumed":
        return (f"time: column {col!r} names no unit; read in seconds (assumed; the rubric can "
                "state the unit: [runs] time_unit)")
    unit = facts.get("time_unit")
    return f"time: column {col!r} in {TIME_WORDS.get(unit, unit)} (from its header)"


def figure(fig: dict, times: float, facts: dict) -> dict:
    """The figure's data with the time reading applied, and its axis labels."""
    out = dict(fig)
    if fig["kind"] == "time" and times != 1.0:
        for k in ("x", "fit_x", "resid_x"):
            out[k] = [x * times for x in fig[k]]
        if fig.get("window"):
            out["window"] = [x * times for x in fig["window"]]
    if fig["kind"] == "table":
        out["xlabel"] = f"[S] ({facts.get('conc_unit') or 'table units'})"
        out["ylabel"] = f"rate ({facts.get('rate_unit') or 'table units'})"
    else:
        out["ylabel"] = "absorbance (AU)"
        if facts.get("time_origin_s"):
            out["xlabel_note"] = "since your first reading"
    return out

