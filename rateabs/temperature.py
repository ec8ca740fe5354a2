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
from scipy import constants, stats

from .errors import AnalysisError, InputError
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
        tq = stats.t.ppf(0.5 + level / 2, max(r.dof, 1))
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
    unit = temp_unit
    if unit is None:
        h = str(tc).lower()
        if re.search(r"\(k\)|\[k\]|_k$|kelvin|\bk\b", h):
            unit = "K"
        elif re.search(r"°|\(c\)|\[c\]|_c$|celsius|\bc\b", h):
            unit = "C"
        elif np.all(T > 200):
            unit = "K"
        elif np.all(T < 150):
            unit = "C"
        else:
            raise InputError("cannot tell whether the temperatures are in C or K",
                             "put the unit in the header, e.g. 'T (C)', or give --temp-unit",
                             file=path, column=tc)
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
    return T_K, k, se, {"temperature": tc, "k": kc, "se": sc, "temp_unit": unit}, kunit


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
