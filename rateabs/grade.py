"""Batch grading of a class's runs.

Each student's run is analysed with the same engine as every other command, the reported number
is checked against the value from the student's own data and against the class reference, the
likely slip is named with its evidence, and a score from 0 to 100 is built from three parts:

* ``data``: quality of the data and the fit (relative SE of the value: full marks at 2 % or
  better, none at 20 % or worse; x 0.8 when readings had to be masked);
* ``report``: agreement of the reported number with the student's own data;
* ``reference``: closeness of the student's own value to the class reference.

An agreement part is 1 within ``tolerance_pct``, falls linearly to 0 at five times the
tolerance. The score is 100 x sum(weight x part) / sum(weights); default weights 20/50/30.

Batch work goes through the one executor seam, :mod:`rateabs.parallel` (:func:`grade_class`
takes any ``concurrent.futures.Executor``: local processes, a Dask cluster's, or none).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError, RateabsError
from .parallel import check_jobs  # noqa: F401  (the rule lives in parallel)

QUANTITIES = {
    # quantity: (model it needs, base unit, allowed report units -> factor from base)
    "k": ("first-order", "1/s", {"1/s": 1.0, "s^-1": 1.0, "1/min": 60.0, "min^-1": 60.0,
                                 "1/h": 3600.0}),
    "half_life": ("first-order", "s", {"s": 1.0, "min": 1 / 60.0, "h": 1 / 3600.0}),
    "v0": ("initial-rate", "uM/min", {"uM/min": 1.0, "mM/min": 1e-3, "M/min": 1e-6,
                                      "uM/s": 1 / 60.0, "nM/min": 1e3, "A/min": 1.0}),
    "Km": ("michaelis-menten", "input", {}),
    "Vmax": ("michaelis-menten", "input", {}),
}
DEFAULT_WEIGHTS = {"data": 20.0, "report": 50.0, "reference": 30.0}

#: Factors that name a slip: (factor, what went wrong, how to fix it).
SLIPS = [
    (60.0, "a factor of 60: minutes and seconds were mixed up",
     "convert times to the unit asked for (1 min = 60 s) before fitting, and state the unit"),
    (3600.0, "a factor of 3600: hours and seconds were mixed up",
     "convert times to the unit asked for (1 h = 3600 s)"),
    (1000.0, "a factor of 1000: mM and M (or uM and mM) were mixed up",
     "carry concentration units through every step; 1 mM = 1000 uM"),
    (1e6, "a factor of a million: uM and M were mixed up", "1 M = 10^6 uM"),
    (math.log(10), "a factor of 2.303: log10 was used where the natural log belongs",
     "first-order plots use ln(A - Ainf); a log10 slope must be multiplied by 2.303"),
    (10.0, "a factor of 10: the pathlength was taken in mm as cm (or the reverse)",
     "use the pathlength in cm in A = epsilon b c (10 mm = 1 cm)"),
    (2.0, "a factor of 2: the pathlength or a dilution was taken wrongly",
     "check the cuvette pathlength and the dilution factor you applied"),
]


@dataclass(frozen=True)
class Rubric:
    """What is graded and how (read from a TOML file, see docs/formats.md)."""

    quantity: str
    model: str
    unit: str
    reference: float
    tolerance_pct: float
    weights: dict = field(default_factory=lambda: dict(DEFAULT_WEIGHTS))
    title: str = "kinetics assignment"
    epsilon: str | None = None
    pathlength: str | None = None
    conc_unit: str | None = None
    rate_unit: str | None = None

    def to_dict(self) -> dict:
        """Plain dict (sent to worker processes)."""
        return dict(self.__dict__)


def read_rubric(path: str | Path) -> Rubric:
    """Read and check a rubric TOML file."""
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
    a = data.get("assignment", data)
    for key in ("quantity", "unit", "reference", "tolerance_pct"):
        if key not in a:
            raise InputError(f"the rubric has no {key!r}", "see docs/formats.md for the fields",
                             file=str(path))
    q = str(a["quantity"])
    if q not in QUANTITIES:
        raise InputError(f"unknown quantity {q!r}", f"use one of {', '.join(QUANTITIES)}",
                         file=str(path))
    model = str(a.get("model", QUANTITIES[q][0]))
    if model != QUANTITIES[q][0]:
        raise InputError(f"quantity {q} is graded with model {QUANTITIES[q][0]!r}, not {model!r}",
                         f"set model = \"{QUANTITIES[q][0]}\"", file=str(path))
    units = QUANTITIES[q][2]
    if units and a["unit"] not in units:
        raise InputError(f"unit {a['unit']!r} does not fit quantity {q}",
                         f"use one of {', '.join(units)}", file=str(path))
    try:
        ref, tol = float(a["reference"]), float(a["tolerance_pct"])
    except (TypeError, ValueError):
        raise InputError("reference and tolerance_pct must be numbers", "fix the rubric",
                         file=str(path)) from None
    if tol <= 0:
        raise InputError("tolerance_pct must be positive", "e.g. tolerance_pct = 5",
                         file=str(path))
    weights = dict(DEFAULT_WEIGHTS)
    for k, v in data.get("weights", {}).items():
        if k not in weights:
            raise InputError(f"unknown weight {k!r}", "use data, report and reference",
                             file=str(path))
        weights[k] = float(v)
    if sum(weights.values()) <= 0:
        raise InputError("the weights add up to zero", "give at least one positive weight",
                         file=str(path))
    return Rubric(q, model, str(a["unit"]), ref, tol, weights, str(a.get("title", "assignment")),
                  a.get("epsilon"), a.get("pathlength"), a.get("conc_unit"), a.get("rate_unit"))


@dataclass(frozen=True)
class Task:
    """One student's work to grade."""

    student: str
    file: str
    path: str | None
    reported: float | None
    extra: dict
    problem: str | None = None


def read_roster(folder: str | Path) -> list[Task]:
    """The roster (``roster.csv``: student, file, reported, ...), with every path checked to stay
    inside the folder."""
    from .io import read_table

    folder = Path(folder)
    if not folder.is_dir():
        raise InputError("is not a folder", "give the folder holding roster.csv and the runs",
                         file=str(folder))
    roster = folder / "roster.csv"
    if not roster.is_file():
        raise InputError("no roster.csv in the folder",
                         "add roster.csv with columns student, file, reported", file=str(folder))
    df = read_table(roster)
    cols = {c.strip().lower(): c for c in df.columns}
    for need in ("student", "file", "reported"):
        if need not in cols:
            raise InputError(f"roster.csv has no {need!r} column",
                             "columns student, file, reported are required", file=str(roster))
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    base = folder.resolve()
    tasks, seen = [], set()
    for k, rec in enumerate(df.to_dict("records")):
        student = str(rec[cols["student"]]).strip()
        fname = str(rec[cols["file"]]).strip()
        rep_s = str(rec[cols["reported"]]).strip()
        extra = {c: rec[c] for c in df.columns if c.strip().lower() not in
                 ("student", "file", "reported")}
        if not student:
            raise InputError("a roster row has no student name", "name every student",
                             file=str(roster), row=lines[k], column="student")
        if student in seen:
            raise InputError(f"student {student!r} appears twice", "give each student one row",
                             file=str(roster), row=lines[k], column="student")
        seen.add(student)
        problem, path = None, None
        p = Path(fname)
        if not fname:
            problem = "no file named in the roster"
        elif p.is_absolute() or ".." in p.parts or fname.startswith(("~", "\\")):
            problem = f"the file path {fname!r} leaves the class folder; only names inside it " \
                      "are read"
        else:
            full = (folder / p).resolve()
            if not full.is_relative_to(base):
                problem = f"the file path {fname!r} leads outside the class folder"
            elif not full.is_file():
                problem = f"the file {fname!r} is missing"
            else:
                path = str(full)
        try:
            reported = float(rep_s.replace(",", ".")) if rep_s else None
        except ValueError:
            reported = None
            problem = problem or f"the reported value {rep_s!r} is not a number"
        if reported is None and problem is None:
            problem = "no reported value"
        tasks.append(Task(student, fname, path, reported, extra, problem))
    if not tasks:
        raise InputError("roster.csv lists no students", "add a row per student",
                         file=str(roster))
    return tasks


# --------------------------------------------------------------------------- one student


def _own_value(path: str, rubric: dict) -> dict:
    """The graded quantity from the student's own data, in the rubric's unit, and its SE."""
    q = rubric["quantity"]
    factor = QUANTITIES[q][2].get(rubric["unit"], 1.0)
    if q in ("k", "half_life"):
        from .io import read_traces
        from .options import DEFAULT_LINEAR_LIMIT
        from .ratelaws import fit_trace

        ts = read_traces(path)
        looks_pt = ts.info.get("looks_like") == "percent"
        if looks_pt:          # %T recorded under an absorbance header: grade the real kinetics
            ts = read_traces(path, signal="percent")
        ts = ts.mask_above(DEFAULT_LINEAR_LIMIT)
        g = ts.grid()
        ok = g.usable[0]
        t, y = g.times[0][ok], g.values[0][ok]
        law = fit_trace(t, y, g.names[0], order="1", ci="asymptotic")
        k = law.fit.params["k"]
        if q == "k":
            val, se = k.value * factor, k.se * factor
        else:
            val, se = law.half_life.value * factor, law.half_life.se * factor
        raw = "percent" if looks_pt else ts.info.get("signal_kind")
        return {"value": val, "se": se, "t": t, "y": y, "fitted": law.fit.fitted,
                "masked": int((~ok).sum()), "recorded_pt": looks_pt, "kind": raw}
    if q == "v0":
        from .io import read_traces
        from .rates import RateSettings, analyse_plate
        from .units import parse_epsilon, parse_pathlength

        ts = read_traces(path)
        eps = parse_epsilon(rubric["epsilon"]) if rubric.get("epsilon") else None
        b = parse_pathlength(rubric["pathlength"]) if rubric.get("pathlength") else 1.0
        a = analyse_plate(ts, settings=RateSettings(epsilon=eps, pathlength_cm=b))
        row = a.table.iloc[0]
        col = "rate_uM_per_min" if eps else "slope_A_per_min"
        g = a.traces.grid()
        ok = g.usable[0]
        w = a.windows
        fitted = w.intercept[0] + w.slope[0] * g.times[0][ok]
        return {"value": float(row[col]) * factor, "se": float(row[col + "_se"]) * factor,
                "t": g.times[0][ok], "y": g.values[0][ok], "fitted": fitted,
                "masked": int((~ok).sum()), "recorded_pt": False,
                "kind": ts.info.get("signal_kind")}
    # Km / Vmax from a rates table
    from .io import read_table
    from .saturation import analyse, table_data

    d = table_data(read_table(path), conc_unit=rubric.get("conc_unit"),
                   rate_unit=rubric.get("rate_unit"))
    a = analyse(d, model="mm")
    p = a.best.params[q]
    order = np.argsort(d.s)
    return {"value": p.value, "se": p.se, "t": d.s[order], "y": d.v[order],
            "fitted": a.best.fitted[order], "masked": 0, "recorded_pt": False, "kind": "table"}


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


def diagnose(reported: float, own: dict, rubric: dict) -> list[str]:
    """Plain sentences naming the likely slip, with the evidence."""
    v = own["value"]
    tol = rubric["tolerance_pct"] / 100
    q = rubric["quantity"]
    unit = rubric["unit"]
    out = []
    if own.get("recorded_pt"):
        out.append("the readings in your file look like percent transmittance (values 10-100) "
                   "recorded as absorbance: record absorbance, or convert with A = 2 - log10(%T)")
    if not np.isfinite(v) or v == 0:
        return out + ["no value could be taken from your data, so the report cannot be checked"]
    ratio = reported / v
    if abs(ratio - 1) <= tol:
        return out + [f"your reported {q} agrees with your own data ({_g(reported)} vs "
                      f"{_g(v)} {unit}): no slip found"]
    if abs(ratio + 1) <= tol:
        return out + [f"the sign is wrong: you reported {_g(reported)}, your data give {_g(v)} "
                      f"{unit}; a rate constant is positive, and a falling signal still gives a "
                      "positive rate"]
    if q == "k":
        tau, half = 1 / v, math.log(2) / v
        for cand, what in ((half, "the half-life (ln 2 / k)"), (half / 60, "the half-life in min"),
                           (tau, "the time constant 1/k"), (tau / 60, "the time constant in min")):
            if abs(reported / cand - 1) <= tol:
                return out + [f"you reported {what} instead of the rate constant: "
                              f"{_g(reported)} matches {_g(cand)}, while k = {_g(v)} {unit}; "
                              "k = ln 2 / half-life"]
    if q == "half_life":
        k = math.log(2) / v
        if abs(reported / k - 1) <= tol:
            return out + [f"you reported the rate constant ({_g(reported)}) instead of the "
                          f"half-life ({_g(v)} {unit}); half-life = ln 2 / k"]
    for f, what, fix in SLIPS:
        for direction, r in ((1, ratio), (-1, 1 / ratio)):
            if abs(r / f - 1) <= max(tol, 0.02):
                bigger = "larger" if direction == 1 else "smaller"
                return out + [f"{what}: your reported value is {_g(f)} times {bigger} than your "
                              f"own data give ({_g(reported)} vs {_g(v)} {unit}); {fix}"]
    for (f1, w1, _), (f2, w2, _) in ((a, b) for i, a in enumerate(SLIPS) for b in SLIPS[i + 1:]):
        for combo, label in ((f1 * f2, f"{_g(f1)} x {_g(f2)}"), (f1 / f2, f"{_g(f1)} / {_g(f2)}")):
            for r in (ratio, 1 / ratio):
                if abs(r / combo - 1) <= max(tol, 0.02):
                    return out + [f"two slips together (a factor of {label} = {_g(combo)}):"
                                  f"{w1.split(':')[1]}, and{w2.split(':')[1]}; reported "
                                  f"{_g(reported)}, own data {_g(v)} {unit}"]
    if own.get("kind") in ("percent", "transmittance"):
        return out + [f"your readings are {'%T' if own['kind'] == 'percent' else 'transmittance'}"
                      f" and your value ({_g(reported)}) is far from what they give once converted "
                      f"to absorbance ({_g(v)} {unit}, ratio {ratio:.3g}): the transmittance "
                      "numbers were most likely analysed as if they were absorbance; convert with "
                      "A = -log10(T) first"]
    return out + [f"your reported value ({_g(reported)}) differs from your own data "
                  f"({_g(v)} {unit}, ratio {ratio:.3g}) and no single slip explains it: "
                  "recheck the fit and the arithmetic"]


def _g(x: float) -> str:
    return f"{x:.4g}"


def grade_one(task: Task, rubric: dict, plots: bool = True) -> dict:
    """Grade one student (runs in a worker process): value, parts, score, diagnosis, and with
    ``plots`` the data of the student's figure (drawn by the views layer)."""
    base = {"student": task.student, "file": task.file, "reported": task.reported,
            "reference": rubric["reference"], "unit": rubric["unit"], "extra": task.extra}
    if task.problem:
        return {**base, "value": None, "score": 0.0, "parts": {}, "status": "not analysed",
                "diagnosis": [f"could not be analysed: {task.problem}"], "figure": None}
    try:
        own = _own_value(task.path, rubric)
    except RateabsError as exc:
        return {**base, "value": None, "score": 0.0, "parts": {}, "status": "not analysed",
                "diagnosis": [f"could not be analysed: {exc.problem}; {exc.fix}".rstrip("; ")],
                "figure": None}
    v, se = own["value"], own["se"]
    rel = abs(se / v) if v else float("inf")
    tol = rubric["tolerance_pct"]
    parts = {"data": data_quality(rel, own["masked"]) * (0.5 if own.get("recorded_pt") else 1),
             "report": agreement(task.reported, v, tol),
             "reference": agreement(v, rubric["reference"], tol)}
    w = rubric["weights"]
    score = 100 * sum(w[k] * parts[k] for k in parts) / sum(w.values())
    diag = diagnose(task.reported, own, rubric)
    if parts["reference"] < 1:
        off = 100 * (v / rubric["reference"] - 1)
        diag.append(f"your own data give {_g(v)} {rubric['unit']}, {off:+.0f} % "
                    f"from the class reference {_g(rubric['reference'])}: check the temperature, "
                    "the concentrations and the blank of your run")
    if own["masked"]:
        diag.append(f"{own['masked']} reading(s) were unusable (over range or missing) and were "
                    "left out")
    figure = {"x": own["t"], "y": own["y"], "fitted": own["fitted"],
              "table": own.get("kind") == "table",
              "title": f"{task.student}: {rubric['quantity']} = {own['value']:.4g} "
                       f"{rubric['unit']}"} if plots else None
    return {**base, "value": v, "value_se": se, "score": round(score, 1), "parts": parts,
            "status": "graded", "diagnosis": diag, "figure": figure}


# --------------------------------------------------------------------------- the class


def grade_class(folder, rubric: Rubric, executor=None, progress=None, plots: bool = True) -> list:
    """Grade every student of the roster; results in roster order.

    ``executor`` is any ``concurrent.futures.Executor`` (``parallel.open_executor`` gives local
    processes or a Dask cluster's); without one the work runs here, in order. Workers receive
    each run's path, never its bytes. ``progress`` is called once per finished student; a
    student whose worker failed gets a "not analysed" row, the class goes on.
    """
    from functools import partial

    from .parallel import run

    tasks = read_roster(folder)
    rd = rubric.to_dict()
    return [done.value if done.ok else _worker_failed(tasks[done.index], rd, done.error)
            for done in run(partial(grade_one, rubric=rd, plots=plots), tasks, executor,
                            progress)]


def _worker_failed(t: Task, rd: dict, exc: BaseException) -> dict:
    """The row of a student whose grading crashed (on a worker, or here)."""
    return {"student": t.student, "file": t.file, "reported": t.reported,
            "reference": rd["reference"], "unit": rd["unit"], "extra": t.extra, "value": None,
            "score": 0.0, "parts": {}, "status": "not analysed",
            "diagnosis": [f"could not be analysed: grading this run failed ({type(exc).__name__})"],
            "png": None}
