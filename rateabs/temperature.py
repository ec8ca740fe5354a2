"""Temperature dependence of rate constants: Arrhenius and Eyring.

Arrhenius: ln k = ln A - Ea / (R T). Eyring (1935, J. Chem. Phys. 3:107):
ln(k/T) = ln(kB/h) + dS/R - dH/(R T), for a
rate constant in 1/s (first order or pseudo-first order; the transmission coefficient is taken
as 1). Both are straight-line fits in the shared engine, weighted by SE(ln k) = SE(k)/k when SEs
are given. Constants R, kB and h come from ``scipy.constants`` (CODATA). At the mean temperature,
dH = Ea - R T.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import constants

from .distributions import t_two_sided
from .errors import AnalysisError, InputError, UsageError
from .fitting import FitResult, Param, fit
from .io import number_column, pick_column
from .models import LINE
from .units import celsius_to_kelvin

R = constants.R
KB = constants.k
H = constants.h

_T = re.compile(r"^(t|temp|temperature|t_k|t_c|theta)([\s_(\[]|$)", re.I)
_K = re.compile(r"^(k|kobs|k_obs|rate[\s_]?constant|k_per_s)([\s_(\[]|$)", re.I)
_KSE = re.compile(r"^(k_se|se|sd|k_sd|sigma|k_per_s_se|err|error)([\s_(\[]|$)", re.I)


@dataclass
class TemperatureAnalysis:
    """Arrhenius and Eyring parameters and the straight-line fits behind them."""

    T: np.ndarray
    k: np.ndarray
    k_se: np.ndarray | None
    arrhenius: FitResult
    eyring: FitResult
    params: dict
    k_unit: str
    warnings: list

    def extrapolation(self, T_K: float) -> dict:
        """Where T lies against the measured range: inside or not, how far beyond it (K) and
        the distance as a multiple of the measured span in 1/T (the Arrhenius line's axis)."""
        lo, hi = float(self.T.min()), float(self.T.max())
        inside = lo <= T_K <= hi
        beyond = 0.0 if inside else (T_K - hi if T_K > hi else T_K - lo)
        edge = hi if T_K > hi else lo
        span = 1 / lo - 1 / hi
        multiple = 0.0 if inside else abs(1 / T_K - 1 / edge) / span
        return {"inside": inside, "beyond_K": beyond, "multiple_of_span": multiple}

    def predict(self, T_K: float, level: float = 0.95) -> Param:
        """k at another temperature with the confidence interval of the Arrhenius line."""
        r = self.arrhenius
        x0 = 1.0 / T_K
        a, b = r.values()["intercept"], r.values()["slope"]
        lnk = a + b * x0
        if r.cov is None:
            raise AnalysisError("the Arrhenius fit has no covariance", "measure more temperatures")
        g = np.array([1.0, x0])
        se = float(math.sqrt(g @ r.cov @ g))
        tq = t_two_sided(level, max(r.dof, 1))
        return Param("k", math.exp(lnk), math.exp(lnk) * se, math.exp(lnk - tq * se),
                     math.exp(lnk + tq * se), "asymptotic (log scale)", self.k_unit)


def read_temperature_table(df: pd.DataFrame, *, temp_col=None, k_col=None, se_col=None,
                           temp_unit=None):
    """Temperatures (K), rate constants and their SEs from a table; T unit from header or values."""
    path = df.attrs.get("source", "table")

    tc = pick_column(df, temp_col, _T, "temperature", "--temp-column")
    kc = pick_column(df, k_col, _K, "k", "--k-column")
    sc = pick_column(df, se_col, _KSE, "se", "--se-column", required=False)
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    T, k = number_column(df, tc), number_column(df, kc)
    se = number_column(df, sc) if sc else None
    for arr, col in ((T, tc), (k, kc)):
        if np.any(~np.isfinite(arr)):
            i = int(np.argmax(~np.isfinite(arr)))
            raise InputError("a cell is empty", "fill it or remove the row", file=path,
                             row=lines[i], column=col)
    unit, source, notes = temperature_unit_of(T, str(tc), temp_unit, path)
    T_K = celsius_to_kelvin(T) if unit == "C" else T
    if np.any(T_K <= 0):
        i = int(np.argmax(T_K <= 0))
        raise InputError(f"temperature {T[i]:g} {unit} is not above absolute zero",
                         "check the temperature unit", file=path, row=lines[i], column=tc)
    if np.any(k <= 0):
        i = int(np.argmax(k <= 0))
        raise InputError(f"rate constant {k[i]:g} is not positive", "ln k needs k > 0",
                         file=path, row=lines[i], column=kc)
    kunit = "1/s"
    m = re.search(r"[(\[]\s*([^)\]]+)\s*[)\]]", str(kc))
    if m:
        kunit = m.group(1)
    elif str(kc).lower().endswith("_per_s"):
        kunit = "1/s"
    unused = [str(c) for c in df.columns if c not in (tc, kc, sc)]
    return T_K, k, se, {"temperature": tc, "k": kc, "se": sc, "temp_unit": unit,
                        "temp_unit_source": source, "not_used": unused, "notes": notes}, kunit


#: Values that only kelvin (all above) or only degrees Celsius (all below) can hold for a
#: reaction in a liquid (common practice): water freezes at 273 K and boils at 100 C.
KELVIN_ABOVE = 200.0
CELSIUS_BELOW = 150.0
NAMES = {"K": "kelvin", "C": "degrees Celsius"}


def temperature_unit_of(T, header: str, given: str | None, path: str = "table"
                        ) -> tuple[str, str, list]:
    """The unit of a temperature column: given, or from the header, or from the values; a
    header whose unit the values contradict (kelvin values under 'T (C)') is refused with the
    fix. ``given`` (--temp-unit) against a header naming the other unit is refused, naming
    both, unless the values bear the option out (then it overrides the header, and a note says
    so). Returns the unit, where it came from and notes."""
    h = header.lower()
    said = ("K" if re.search(r"\(k\)|\[k\]|_k$|kelvin|\bk\b", h) else
            "C" if re.search(r"°|\(c\)|\[c\]|_c$|celsius|\bc\b", h) else None)
    fits = "K" if np.all(T > KELVIN_ABOVE) else "C" if np.all(T < CELSIUS_BELOW) else None
    span = f"{np.min(T):g} to {np.max(T):g}"
    if given is not None:
        if said not in (None, given):
            if fits != given:
                raise UsageError(f"--temp-unit {given} contradicts the column {header!r} of "
                                 f"{path}, whose header states {NAMES[said]} (values {span})",
                                 "leave --temp-unit out (the header's unit is used), or "
                                 "correct the header")
            return given, "--temp-unit", [
                f"--temp-unit {given} overrides the header {header!r}, which names "
                f"{NAMES[said]}: the values ({span}) look like {NAMES[given]}"]
        notes = [] if fits in (None, given) else [
            f"temperatures {span} read in {NAMES[given]} as --temp-unit says, though they look "
            f"like {NAMES[fits]}"]
        return given, "--temp-unit", notes
    if said is not None:
        if fits is not None and fits != said:
            raise InputError(f"the column {header!r} names {NAMES[said]} but its values "
                             f"({span}) look like {NAMES[fits]}",
                             f"give --temp-unit {fits} to read them as {NAMES[fits]} (or "
                             f"--temp-unit {said} if they really are {NAMES[said]})",
                             file=path, column=header)
        return said, "header", []
    if fits is None:
        raise InputError("cannot tell whether the temperatures are in C or K",
                         "put the unit in the header, e.g. 'T (C)', or give --temp-unit",
                         file=path, column=header)
    return fits, "values", [f"the header {header!r} names no unit; temperatures {span} read "
                            f"as {NAMES[fits]}"]


def analyse(T_K, k, k_se=None, *, level: float = 0.95, k_unit: str = "1/s") -> TemperatureAnalysis:
    """Arrhenius (Ea, A) and Eyring (dH, dS) from rate constants at several temperatures."""
    T_K = np.asarray(T_K, float)
    k = np.asarray(k, float)
    if T_K.size < 3 or np.unique(T_K).size < 3:
        raise AnalysisError(f"only {np.unique(T_K).size} distinct temperatures",
                            "measure k at three or more temperatures for intervals")
    x = 1.0 / T_K
    weighting, sd = "none", None
    warnings = []
    if k_se is not None and np.all(np.isfinite(k_se)) and np.all(np.asarray(k_se) > 0):
        weighting, sd = "sd", np.asarray(k_se, float) / k
    arr = fit(LINE, x, np.log(k), weighting=weighting, sd=sd, level=level)
    ey = fit(LINE, x, np.log(k / T_K), weighting=weighting, sd=sd, level=level)
    if weighting == "sd":
        # scatter beyond the stated SEs widens the intervals
        for name in ("arr", "ey"):
            r = arr if name == "arr" else ey
            chi = r.rss / r.dof if r.dof > 0 else 1.0
            if chi > 1:
                y = np.log(k) if name == "arr" else np.log(k / T_K)
                r = fit(LINE, x, y, weighting="sd", sd=sd * math.sqrt(chi), level=level)
                if name == "arr":
                    arr = r
                else:
                    ey = r
    if k_unit != "1/s":
        warnings.append(f"Eyring's dS assumes k in 1/s; k here is in {k_unit}")

    def scaled(p, f, name, unit, offset=0.0, exp=False):
        if exp:
            return Param(name, math.exp(p.value), math.exp(p.value) * p.se, math.exp(p.ci_low),
                         math.exp(p.ci_high), p.ci_method + " (log scale)", unit)
        lo, hi = sorted((f * p.ci_low + offset, f * p.ci_high + offset))
        return Param(name, f * p.value + offset, abs(f) * p.se, lo, hi, p.ci_method, unit)

    s, a = arr.params["slope"], arr.params["intercept"]
    es, ei = ey.params["slope"], ey.params["intercept"]
    params = {
        "Ea": scaled(s, -R / 1000, "Ea", "kJ/mol"),
        "A": scaled(a, 1, "A", k_unit, exp=True),
        "dH": scaled(es, -R / 1000, "dH", "kJ/mol"),
        "dS": scaled(ei, R, "dS", "J/(mol K)", offset=-R * math.log(KB / H)),
    }
    return TemperatureAnalysis(T_K, k, k_se, arr, ey, params, k_unit, warnings)
