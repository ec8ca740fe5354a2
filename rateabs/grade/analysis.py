"""One student's run analysed, as plain data: the graded values in base units with their SE,
how the run was read (every assumption), the readings' fingerprint and the figure's data.

:func:`analyse_run` runs in worker processes and depends only on the file and the analysis
settings (:func:`analysis_settings`), never on the scoring settings (reference, tolerance,
weights, unit, deadline), so that its result can be kept and reused when only the scoring
changes (:mod:`rateabs.grade.cache`). The analyses are the package's own: the first-order fit of
``ratelaw``, the initial rate of ``rates`` (:func:`rateabs.rates.analyse_plate`, the same
estimator as the ``rates`` command) and the Michaelis–Menten fit of ``saturation``.
"""

from __future__ import annotations

import hashlib
import math
import re

import numpy as np

from ..errors import AnalysisError, RateabsError

#: ln 2, from the definition of the natural logarithm (first-order half-life ln 2 / k).
LN2 = math.log(2.0)
#: Trace names that mark a blank or reference rather than a sample (common practice wording).
BLANK_NAME = re.compile(r"blank|blk|\bref\b|reference|background|buffer", re.IGNORECASE)


def analysis_settings(rubric) -> dict:
    """What the analysis of a run depends on (a small dict sent to workers and part of the
    cache key): the model family and how the runs are read and analysed."""
    return {"family": rubric.model, "trace": rubric.trace, "time_unit": rubric.time_unit,
            "window": list(rubric.window) if isinstance(rubric.window, tuple) else rubric.window,
            "epsilon": rubric.epsilon, "pathlength_cm": rubric.pathlength_cm,
            "conc_unit": rubric.conc_unit, "rate_unit": rubric.rate_unit}


def analyse_run(path: str, settings: dict) -> dict:
    """The analysis of one run (in a worker): ``{"ok", "values", "alt", "facts", "figure",
    "readings"}``, or ``{"ok": False, "problem"}`` when the run cannot be analysed.

    ``values`` maps each quantity the model gives to ``[value, se]`` in base units (k 1/s,
    half_life s, v0 uM/min with epsilon or A/min, Km and Vmax in the table's units); ``alt``
    the same from the recorded numbers when a transmittance signal was converted (what a
    student who skipped the conversion would get).
    """
    family = settings["family"]
    try:
        if family == "first-order":
            out = first_order(path, settings)
        elif family == "initial-rate":
            out = initial_rate(path, settings)
        else:
            out = michaelis_menten(path, settings)
    except RateabsError as exc:
        return {"ok": False, "problem": f"{exc.problem}; {exc.fix}".rstrip("; ")}
    return {"ok": True, **out}


# --------------------------------------------------------------------------- reading


def read_run(path: str, settings: dict):
    """The run's traces (re-read where the rubric or the readings call for it) and the facts of
    how it was read: time column, unit and its source, signal, trace chosen."""
    from ..io import read_traces
    from ..options import DEFAULT_LINEAR_LIMIT

    ts = read_traces(path)
    first = ts.info
    again = {}
    if first.get("looks_like") == "percent":     # %T recorded under an absorbance header
        again["signal"] = "percent"
    if settings["time_unit"] and first.get("time_unit_source") == "assumed":
        again["time_unit"] = settings["time_unit"]
    if again:
        ts = read_traces(path, **again)
    info = ts.info
    facts = {"time_column": info.get("time_column"), "time_unit": info.get("time_unit"),
             "time_source": "rubric" if "time_unit" in again else info.get("time_unit_source"),
             "time_looks_like": first.get("time_looks_like"),
             "signal": info.get("signal_kind"), "signal_source": info.get("signal_source"),
             "recorded_pt": "signal" in again,
             "reader_notes": [w for w in info.get("warnings", [])
                              if not w.startswith("the time column")]}
    facts.update(choose_trace(ts.names, settings["trace"]))
    return ts.mask_above(DEFAULT_LINEAR_LIMIT), facts


def choose_trace(names: list[str], wanted: str | None) -> dict:
    """The trace to grade: the rubric's, the only one, or the first not named as a blank."""
    shown = names[:12] + (["..."] if len(names) > 12 else [])
    if wanted is not None:
        hit = [n for n in names if n == wanted] or [n for n in names
                                                     if n.lower() == wanted.lower()]
        if not hit:
            raise AnalysisError(f"the file has no trace named {wanted!r} (the rubric's [runs] "
                                f"trace); its traces are {', '.join(shown)}",
                                "rename the column, or ask the instructor")
        return {"trace": hit[0], "trace_reason": "rubric", "traces": shown}
    if len(names) == 1:
        return {"trace": names[0], "trace_reason": "only", "traces": shown}
    samples = [n for n in names if not BLANK_NAME.search(n)]
    return {"trace": (samples or names)[0], "trace_reason": "first-not-blank", "traces": shown,
            "blanks": [n for n in names if BLANK_NAME.search(n)][:12]}


def trace_readings(ts, facts: dict) -> tuple[np.ndarray, np.ndarray]:
    """The chosen trace's usable times and values; the readings' fingerprint and the number of
    readings left out go into ``facts``."""
    from ..traces import FLAG_CODE

    g = ts.grid()
    i = g.names.index(facts["trace"])
    present = np.isfinite(g.times[i])
    ok = g.usable[i]
    facts["readings"] = fingerprint(g.times[i][present], g.values[i][present])
    facts["masked"] = int((present & ~ok).sum())
    facts["past_linear"] = int((present & ~ok & (np.asarray(g.flags[i]) ==
                                                 FLAG_CODE["past-linear"])).sum())
    facts["n_used"] = int(ok.sum())
    return np.asarray(g.times[i][ok], float), np.asarray(g.values[i][ok], float)


def fingerprint(*arrays) -> str:
    """A short digest of readings, equal for the same numbers under any file name or layout."""
    h = hashlib.sha256()
    for a in arrays:
        h.update(np.ascontiguousarray(a, dtype="<f8").tobytes())
    return h.hexdigest()[:20]


def recorded(absorbance: np.ndarray, kind: str) -> np.ndarray:
    """The numbers as recorded before conversion to absorbance: %T = 100 x 10^-A, T = 10^-A
    (IUPAC, "absorbance": A = -log10 T)."""
    t = np.power(10.0, -absorbance)
    return 100 * t if kind == "percent" else t


def _pair(p) -> list:
    return [float(p.value), float(p.se)] if p is not None else [math.nan, math.nan]


def _lists(d: dict) -> dict:
    return {k: (np.asarray(v, float).tolist() if isinstance(v, np.ndarray) else v)
            for k, v in d.items()}


# --------------------------------------------------------------------------- the models


def fit_first_order(t: np.ndarray, y: np.ndarray, name: str) -> tuple[list, list, np.ndarray]:
    """([k, se], [half-life, se], fitted) of the first-order law A = Ainf + (A0 - Ainf)
    exp(-k t): the model and guess of ``ratelaw``, solved by the engine's array solver
    (:func:`rateabs.fitting.batch_lm`, the same least-squares optimum as ``ratelaw``'s fit at a
    seventh of its cost); where that does not converge, ``ratelaw``'s own fit decides."""
    from ..fitting import batch_lm
    from ..models import RATE_LAWS
    from ..ratelaws import fit_trace

    m = RATE_LAWS["1"]
    guess = m.guess(t, y)
    r = batch_lm(m.func, t, y[None, :], np.ones((1, t.size)), [[guess[p] for p in m.params]],
                 lower=[m.lower.get(p, -np.inf) for p in m.params], want_cov=True)
    k = float(r.params[0, 2])
    se = float(np.sqrt(r.cov[0, 2, 2])) if r.cov is not None else math.nan
    if r.converged[0] and k > 0 and math.isfinite(se) and se > 0:
        fitted = m.func(t, *r.params[0])
        return [k, se], [LN2 / k, LN2 * se / k ** 2], np.asarray(fitted, float)
    law = fit_trace(t, y, name, order="1", ci="asymptotic")
    return _pair(law.fit.params["k"]), _pair(law.half_life), np.asarray(law.fit.fitted, float)


def first_order(path: str, settings: dict) -> dict:
    """k and the half-life from the first-order fit of the chosen trace, in times counted
    from the origin ``ratelaw`` uses (:func:`rateabs.models.time_origin`: a run whose clock
    starts at 14:00:00 is fitted from its first reading; its origin goes into the facts)."""
    from ..models import time_origin

    ts, facts = read_run(path, settings)
    t, y = trace_readings(ts, facts)
    t, t0 = time_origin(t)
    k, half, fitted = fit_first_order(t, y, facts["trace"])
    alt = {}
    if facts["signal"] in ("percent", "transmittance"):
        try:
            k_raw, half_raw, _ = fit_first_order(t, recorded(y, facts["signal"]), facts["trace"])
            alt = {"k": k_raw, "half_life": half_raw}
        except RateabsError:
            alt = {}
    if facts["signal"] == "absorbance" and y.size and np.all((y > 0) & (y <= 1)):
        # numbers between 0 and 1 may be transmittance typed as absorbance: what they give
        # read as A = -log10 T (IUPAC, "absorbance"), for the grader to compare with the class
        try:
            k_t, half_t, _ = fit_first_order(t, -np.log10(y), facts["trace"])
            facts["as_transmittance"] = {"k": k_t, "half_life": half_t}
        except RateabsError:
            pass
    facts.update(span_s=[float(t[0]), float(t[-1])], time_origin_s=t0, fit="first-order")
    figure = _lists({"x": t, "y": y, "fit_x": t, "fit_y": fitted, "resid_x": t,
                     "resid": y - fitted, "window": None, "kind": "time"})
    return {"values": {"k": k, "half_life": half}, "alt": alt, "facts": facts,
            "figure": figure, "readings": facts.pop("readings")}


def initial_rate(path: str, settings: dict) -> dict:
    """v0 of the chosen trace from :func:`rateabs.rates.analyse_plate` (the ``rates`` estimator):
    uM/min with the rubric's epsilon, A/min without; the rate is positive for a falling signal."""
    from ..options import RateSettings
    from ..rates import analyse_plate

    ts, facts = read_run(path, settings)
    t, y = trace_readings(ts, facts)
    win = tuple(settings["window"]) if isinstance(settings["window"], list) else "auto"
    st = RateSettings(epsilon=settings["epsilon"], pathlength_cm=settings["pathlength_cm"],
                      window=win)
    a = analyse_plate(ts.select([facts["trace"]]), settings=st)
    row = a.table.iloc[0]
    slope, slope_se = float(row["slope_A_per_min"]), float(row["slope_A_per_min_se"])
    if not math.isfinite(slope):
        raise AnalysisError("no initial rate could be taken from the run "
                            f"({', '.join(row['flags']) or 'no straight stretch'})",
                            "check the readings")
    falling = a.blank_info.get("direction") == "down"
    if settings["epsilon"]:
        value = [float(row["rate_uM_per_min"]), float(row["rate_uM_per_min_se"])]
    else:
        value = [-slope if falling else slope, slope_se]
    t0, t1 = float(row["window_start_s"]), float(row["window_end_s"])
    inside = (t >= t0) & (t <= t1)
    per_s = slope / 60.0
    b = float(np.mean(y[inside] - per_s * t[inside])) if inside.any() else float(y[0])
    alt = {}
    if facts["signal"] in ("percent", "transmittance") and inside.sum() >= 3:
        raw = np.polyfit(t[inside], recorded(y[inside], facts["signal"]), 1)[0] * 60
        scale = 1e6 / (settings["epsilon"] * settings["pathlength_cm"]) if settings["epsilon"] \
            else 1.0
        alt = {"v0": [abs(raw) * scale, abs(raw) * scale * value[1] / value[0]
                      if value[0] else math.nan]}
    facts.update(window=[t0, t1], window_source="rubric" if win != "auto" else "auto",
                 method=str(row["method"]), flags=list(row["flags"]),
                 direction="down" if falling else "up", slope_A_per_min=slope)
    figure = _lists({"x": t, "y": y, "fit_x": np.array([t0, t1]),
                     "fit_y": b + per_s * np.array([t0, t1]), "resid_x": t[inside],
                     "resid": y[inside] - (b + per_s * t[inside]), "window": [t0, t1],
                     "kind": "time"})
    return {"values": {"v0": value}, "alt": alt, "facts": facts, "figure": figure,
            "readings": facts.pop("readings")}


def michaelis_menten(path: str, settings: dict) -> dict:
    """Km and Vmax from the Michaelis–Menten fit of the student's rate table (``saturation``)."""
    from ..io import read_table
    from ..saturation import analyse, table_data

    d = table_data(read_table(path), conc_unit=settings["conc_unit"],
                   rate_unit=settings["rate_unit"])
    a = analyse(d, model="mm")
    order = np.argsort(d.s)
    s, v = np.asarray(d.s, float)[order], np.asarray(d.v, float)[order]
    fitted = np.asarray(a.best.fitted, float)[order]
    facts = {"conc_unit": d.conc_unit or None, "rate_unit": d.rate_unit or None,
             "n_used": int(s.size), "masked": 0, "fit": "michaelis-menten"}
    figure = _lists({"x": s, "y": v, "fit_x": s, "fit_y": fitted, "resid_x": s,
                     "resid": v - fitted, "window": None, "kind": "table"})
    return {"values": {"Km": _pair(a.best.params["Km"]), "Vmax": _pair(a.best.params["Vmax"])},
            "alt": {}, "facts": facts, "figure": figure, "readings": fingerprint(s, v)}
