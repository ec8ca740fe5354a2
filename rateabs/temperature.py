"""Temperature dependence of rate constants: Arrhenius and Eyring.

Arrhenius: ln k = ln A - Ea / (R T). Eyring (1935, J. Chem. Phys. 3:107):
ln(k/T) = ln(kB/h) + dS/R - dH/(R T), for a
rate constant in 1/s (first order or pseudo-first order; the transmission coefficient is taken
as 1), or in M^-1 s^-1 (second order; dS then refers to the standard state 1 mol/L). k is
converted to these from the unit its header states. Both are straight-line fits in the shared
engine, weighted by SE(ln k) = SE(k)/k when SEs are given (every SE above 0, else refused).
Constants R, kB and h come from ``scipy.constants`` (CODATA). At the mean temperature,
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
from .fitting import FitResult, Param, fit, fmt_pm
from .io import number_column, pick_column
from .io.headers import temperature_unit
from .models import LINE, Model
from .units import (
    FAHRENHEIT_RULE,
    TEMPERATURE_NAMES,
    celsius_to_kelvin,
    fahrenheit_to_kelvin,
    rate_constant_order,
    rate_constant_unit,
)

R = constants.R
KB = constants.k
H = constants.h

_T = re.compile(r"^(t|temp|temperature|t_k|t_c|theta|θ)([\s_(\[/]|$)", re.I)
_K = re.compile(r"^(k|kobs|k_obs|rate[\s_]?constant|k_per_s)([\s_(\[/]|$)", re.I)
_KSE = re.compile(r"^(k_se|se|sd|k_sd|sigma|k_per_s_se|err|error)([\s_(\[]|$)", re.I)


@dataclass
class TemperatureAnalysis:
    """Arrhenius and Eyring parameters and the straight-line fits behind them.

    ``params``: Ea (kJ/mol), lnA (the intercept of ln k against 1/T, A in ``k_unit``: its SE
    and interval are the ones the fit gives, symmetric on this scale), A (the same interval
    mapped by exp, asymmetric), dH (kJ/mol) and dS (J/(mol K))."""

    T: np.ndarray
    k: np.ndarray
    k_se: np.ndarray | None
    arrhenius: FitResult
    eyring: FitResult
    params: dict
    k_unit: str
    warnings: list
    checks: dict | None = None

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
    """Temperatures (K), rate constants and their SEs (in 1/s, or M^-1 s^-1 for a second-order
    k) from a table; the T unit from --temp-unit, the header or the values, the k unit from the
    header. Returns T_K, k, se, what was read (columns, units, notes) and the unit of k."""
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
    T_K = to_kelvin(T, unit)
    if np.any(T_K <= 0):
        i = int(np.argmax(T_K <= 0))
        raise InputError(f"temperature {T[i]:g} {unit} is not above absolute zero",
                         "check the temperature unit", file=path, row=lines[i], column=tc)
    if np.any(k <= 0):
        i = int(np.argmax(k <= 0))
        raise InputError(f"rate constant {k[i]:g} is not positive", "ln k needs k > 0",
                         file=path, row=lines[i], column=kc)
    if se is not None:
        bad = bad_se(se)
        if bad.size:
            rows = ", ".join(str(lines[i]) for i in bad)
            raise InputError(f"SE is empty, 0 or negative in row{'s' * (bad.size > 1)} {rows}, "
                             "and a weight 1/SE(ln k)^2 needs every SE above 0",
                             f"fill in the SE of k there, or delete the column {sc!r} for an "
                             "unweighted fit", file=path, column=sc)
    k_read = k_unit_of(str(kc), str(sc) if sc else None, path)
    k = k * k_read["factor"]
    se = None if se is None else se * k_read["se_factor"]
    notes = notes + k_read["notes"]
    unused = [str(c) for c in df.columns if c not in (tc, kc, sc)]
    read = {"temperature": tc, "k": kc, "se": sc, "temp_unit": unit,
            "temp_unit_source": source, "k_unit_read": k_read["read"],
            "k_unit_source": k_read["source"], "k_factor": k_read["factor"],
            "not_used": unused, "notes": notes, "rows": [int(x) for x in lines]}
    return T_K, k, se, read, k_read["unit"]


def bad_se(se) -> np.ndarray:
    """Positions of SEs that cannot weight a point (empty, not finite, 0 or negative)."""
    se = np.asarray(se, float)
    return np.flatnonzero(~(np.isfinite(se) & (se > 0)))


#: The units k is analysed in, by reaction order (Eyring's dS for a second-order k then refers
#: to the standard state 1 mol/L).
K_UNITS = {1: "1/s", 2: "M^-1 s^-1"}
#: A rate-constant header's name, before the unit it may state without brackets ("k per minute",
#: "k_per_s").
_K_NAME = re.compile(r"^\s*(k|kobs|k_obs|rate[\s_]?constant)[\s_,:]*", re.I)


def _stated_unit(header: str, bare: bool) -> str | None:
    """The unit a header states: in brackets, or (``bare``) what follows the name of k when it
    reads as 'per ...' or '1/...'; or, in the quantity-calculus form 'k/s-1' or 'k / (L mol-1
    s-1)' (the quantity divided by its unit, IUPAC Green Book, section 1.3), what follows the
    slash where that is itself a rate-constant unit; None when it states none."""
    qc = re.match(r"^\s*[^\s/(\[]+\s*/\s*\(?\s*(?P<u>[^()]+?)\s*\)?\s*$", header)
    if qc and (rate_constant_unit(qc.group("u")) or rate_constant_order(qc.group("u"))
               is not None):
        return qc.group("u")
    m = re.search(r"[(\[]\s*(.+?)\s*[)\]]\s*$", header)
    if m:
        return m.group(1)
    if bare:
        rest = _K_NAME.sub("", header, count=1).strip()
        if re.match(r"(per\b|per_|1\s*/|/)", rest, re.I):
            return rest
    return None


def k_unit_of(k_header: str, se_header: str | None, path: str = "table") -> dict:
    """The unit of k (and of its SE) from the headers, and the factors that turn them into 1/s
    (first order) or M^-1 s^-1 (second order). A unit that is not a rate-constant unit is
    refused; a header that states none is taken as 1/s, with a note."""
    said = _stated_unit(k_header, bare=True)
    if said is None:
        return {"unit": K_UNITS[1], "read": None, "source": "assumed", "factor": 1.0,
                "se_factor": 1.0, "notes": [
                    f"the header {k_header!r} names no unit of k: taken as 1/s (Ea and dH do "
                    "not depend on it, A and dS do); put it in the header, e.g. 'k (1/min)'"]}
    got = rate_constant_unit(said)
    if got is None:
        other = rate_constant_order(said)
        if other is not None:
            raise InputError(f"the header {k_header!r} names {said!r}, the unit of a "
                             f"{'zero' if other == 0 else 'third'}-order rate constant; "
                             "Arrhenius and Eyring here take first-order k (1/s, 1/min ...) or "
                             "second-order k (M^-1 s^-1, L mol^-1 s^-1 ...)",
                             "give k of a first- or second-order law, in 1/s or M^-1 s^-1",
                             file=path, column=k_header)
        raise InputError(f"the header {k_header!r} names the unit {said!r}, which is not a "
                         "rate-constant unit", "write it as e.g. 'k (1/s)', 'k (1/min)' or "
                         "'k (M^-1 s^-1)'", file=path, column=k_header)
    order, factor = got
    scaled = (f"divided by {1 / factor:.6g}" if factor < 1 else f"multiplied by {factor:.6g}")
    notes = [] if factor == 1.0 else [
        f"k converted from {said!r} (header {k_header!r}) to {K_UNITS[order]}: {scaled}"]
    if order == 2:
        notes.append("k is second order: dS refers to the standard state 1 mol/L")
    se_factor = factor
    se_said = _stated_unit(se_header, bare=False) if se_header else None
    if se_said is not None:
        se_got = rate_constant_unit(se_said)
        if se_got is None or se_got[0] != order:
            raise InputError(f"the SE column {se_header!r} names the unit {se_said!r}, which is "
                             f"not a unit of k ({said})", f"write the SE in the unit of k, "
                             f"e.g. 'se ({said})'", file=path, column=se_header)
        se_factor = se_got[1]
    return {"unit": K_UNITS[order], "read": said, "source": "header", "factor": factor,
            "se_factor": se_factor, "notes": notes}


#: Values that only kelvin (all above) or only degrees Celsius (all below) can hold for a
#: reaction in a liquid (common practice): water freezes at 273 K and boils at 100 C. Values
#: under a Fahrenheit header all above 212 (water boils at 212 F) look like kelvin.
KELVIN_ABOVE = 200.0
CELSIUS_BELOW = 150.0
FAHRENHEIT_UP_TO = 212.0
NAMES = TEMPERATURE_NAMES


def to_kelvin(T, unit: str):
    """Temperatures in ``unit`` (K, C or F) in kelvin."""
    return {"K": lambda t: t, "C": celsius_to_kelvin, "F": fahrenheit_to_kelvin}[unit](T)


def _looks_like(unit: str, T) -> str | None:
    """The unit the values look like instead of ``unit`` (common practice for a liquid: see
    KELVIN_ABOVE), or None where they fit ``unit``."""
    if unit == "K":
        return "C" if np.all(T < CELSIUS_BELOW) else None
    limit = FAHRENHEIT_UP_TO if unit == "F" else KELVIN_ABOVE
    return "K" if np.all(T > limit) else None


def temperature_unit_of(T, header: str, given: str | None, path: str = "table"
                        ) -> tuple[str, str, list]:
    """The unit of a temperature column: given, or from the header, or from the values; a
    header whose unit the values contradict (kelvin values under 'T (C)') is refused with the
    fix. ``given`` (--temp-unit) against a header naming another unit is refused, naming
    both, unless the values show the header is wrong and bear the option out (then it
    overrides the header, and a note says so); the values never tell degrees Celsius from
    Fahrenheit, so these two never override each other. Degrees Fahrenheit are never guessed.
    Returns the unit, where it came from and notes (the Fahrenheit conversion among them)."""
    unit, source, notes = _temperature_unit(T, header, given, path)
    if unit == "F":
        notes.append(f"temperatures read in degrees Fahrenheit and converted to kelvin: "
                     f"{FAHRENHEIT_RULE}")
    return unit, source, notes


def _temperature_unit(T, header: str, given: str | None, path: str) -> tuple[str, str, list]:
    said = temperature_unit(header)
    span = f"{np.min(T):g} to {np.max(T):g}"
    if given is not None:
        if said not in (None, given):
            if _looks_like(said, T) != given:
                raise UsageError(f"--temp-unit {given} contradicts the column {header!r} of "
                                 f"{path}, whose header states {NAMES[said]} (values {span})",
                                 "leave --temp-unit out (the header's unit is used), or "
                                 "correct the header")
            return given, "--temp-unit", [
                f"--temp-unit {given} overrides the header {header!r}, which names "
                f"{NAMES[said]}: the values ({span}) look like {NAMES[given]}"]
        other = _looks_like(given, T)
        notes = [] if other is None else [
            f"temperatures {span} read in {NAMES[given]} as --temp-unit says, though they look "
            f"like {NAMES[other]}"]
        return given, "--temp-unit", notes
    if said is not None:
        other = _looks_like(said, T)
        if other is not None:
            raise InputError(f"the column {header!r} names {NAMES[said]} but its values "
                             f"({span}) look like {NAMES[other]}",
                             f"give --temp-unit {other} to read them as {NAMES[other]} (or "
                             f"--temp-unit {said} if they really are {NAMES[said]})",
                             file=path, column=header)
        return said, "header", []
    fits = "K" if np.all(T > KELVIN_ABOVE) else "C" if np.all(T < CELSIUS_BELOW) else None
    if fits is None:
        raise InputError("cannot tell whether the temperatures are in C or K",
                         "put the unit in the header, e.g. 'T (C)', or give --temp-unit",
                         file=path, column=header)
    return fits, "values", [f"the header {header!r} names no unit; temperatures {span} read "
                            f"as {NAMES[fits]} (give --temp-unit if they are not, e.g. "
                            "--temp-unit F for degrees Fahrenheit)"]


#: A curved Arrhenius plot is said when the extra-sum-of-squares F-test supports a term in
#: (1/T)^2 at this level (a strict level: a warning on a straight plot once in a hundred).
CURVATURE_ALPHA = 0.01
#: One rate constant is said to lie off the line (a warning on a straight plot once in a
#: hundred) when its externally studentized residual exceeds the Bonferroni limit
#: t(1 - OUTLIER_ALPHA / (2 n), n - 3) (Cook & Weisberg 1982, Residuals and Influence in
#: Regression, section 2.2).
OUTLIER_ALPHA = 0.01
#: Temperatures spanning less than this (K) are said to be a narrow range: ln A and dS are
#: then read far beyond the data, at 1/T = 0 (common practice asks for 20-30 K or more).
NARROW_SPAN_K = 20.0


def _quadratic(x, a, b, c):
    """a + b u + c u^2 in u, the standardised 1/T (the F-test does not depend on the scale)."""
    return a + b * x + c * x * x


QUADRATIC = Model("arrhenius+curvature", _quadratic, ("a", "b", "c"),
                  lambda x, y: dict(zip(("c", "b", "a"), np.polyfit(x, y, 2), strict=True)))


def curvature(T_K, k, sd=None, level: float = 0.95) -> dict | None:
    """The F-test of a term in (1/T)^2 in ln k against the straight Arrhenius line (weights as
    the line's), and Ea from the straight lines through the lower and the upper half of the
    temperatures (the ceil(n/2) lowest and highest, at least 3 each), which show how Ea moves
    without a model of the curve; None with fewer than 5 distinct temperatures (the test would
    have no more than one degree of freedom)."""
    from .fitting import f_test

    T_K = np.asarray(T_K, float)
    if np.unique(T_K).size < 5:
        return None
    x = 1.0 / T_K
    u = (x - float(np.mean(x))) / float(np.std(x))
    y = np.log(k)
    weighting = "sd" if sd is not None else "none"
    line = fit(LINE, u, y, weighting=weighting, sd=sd, level=level)
    quad = fit(QUADRATIC, u, y, weighting=weighting, sd=sd, level=level)
    test = f_test(line, quad)
    order = np.argsort(T_K)
    half = max(3, -(-T_K.size // 2))
    ends = {}
    for name, idx in (("lower", order[:half]), ("upper", order[-half:])):
        r = fit(LINE, x[idx], y[idx], weighting=weighting, sd=None if sd is None else sd[idx],
                level=level)
        ends[name] = {"Ea_kJ_per_mol": -R * r.value("slope") / 1000,
                      "se": R * r.params["slope"].se / 1000,
                      "T_K": [float(T_K[idx].min()), float(T_K[idx].max())]}
    return {"F": test["F"], "p": test["p"], "df": [test["df1"], test["df2"]], **ends}


def off_the_line(r: FitResult, alpha: float = OUTLIER_ALPHA) -> dict | None:
    """The point farthest off a straight-line fit by its externally studentized residual,
    where that exceeds the Bonferroni limit: {"index", "t", "limit"}; else None (and None with
    fewer than 4 points: no degree of freedom is left once a point is set aside)."""
    from .distributions import t_quantile

    n = r.n
    if n < 4:
        return None
    X = np.column_stack([np.ones(n), r.x]) * r.weights[:, None]
    e = (r.y - r.fitted) * r.weights
    h = np.einsum("ij,jk,ik->i", X, np.linalg.pinv(X.T @ X), X)
    sse = float(e @ e)
    dof = n - 3
    with np.errstate(all="ignore"):
        t = e * np.sqrt(dof / np.maximum(sse * (1 - h) - e * e, 1e-300))
    i = int(np.argmax(np.abs(t)))
    limit = float(t_quantile(1 - alpha / (2 * n), dof))
    if not abs(t[i]) > limit:
        return None
    return {"index": i, "t": float(t[i]), "limit": limit}


def analyse(T_K, k, k_se=None, *, level: float = 0.95, k_unit: str = "1/s",
            rows=None) -> TemperatureAnalysis:
    """Arrhenius (Ea, A) and Eyring (dH, dS) from rate constants at several temperatures.

    The Arrhenius line is checked (``checks``, with a warning for each finding): one rate
    constant far off it (:func:`off_the_line`), a curved plot (:func:`curvature`) and a narrow
    temperature range (:data:`NARROW_SPAN_K`). ``rows`` are the points' rows in the file, for
    the warnings."""
    T_K = np.asarray(T_K, float)
    k = np.asarray(k, float)
    if T_K.size < 3 or np.unique(T_K).size < 3:
        raise AnalysisError(f"only {np.unique(T_K).size} distinct temperatures",
                            "measure k at three or more temperatures for intervals")
    x = 1.0 / T_K
    weighting, sd = "none", None
    warnings = []
    if k_se is not None:
        bad = bad_se(k_se)
        if bad.size:
            raise AnalysisError(f"SE of k is empty, 0 or negative at point(s) "
                                f"{', '.join(str(i + 1) for i in bad)}",
                                "give every SE above 0, or none for an unweighted fit")
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
    if k_unit not in K_UNITS.values():
        warnings.append(f"Eyring's dS assumes k in 1/s (or M^-1 s^-1); k here is in {k_unit}")

    def scaled(p, f, name, unit, offset=0.0, exp=False):
        if exp:
            return Param(name, math.exp(p.value), math.exp(p.value) * p.se, math.exp(p.ci_low),
                         math.exp(p.ci_high), p.ci_method + " (log scale)", unit)
        lo, hi = sorted((f * p.ci_low + offset, f * p.ci_high + offset))
        return Param(name, f * p.value + offset, abs(f) * p.se, lo, hi, p.ci_method, unit)

    checks = _check_line(T_K, k, arr, sd, level, rows, warnings)
    s, a = arr.params["slope"], arr.params["intercept"]
    es, ei = ey.params["slope"], ey.params["intercept"]
    params = {
        "Ea": scaled(s, -R / 1000, "Ea", "kJ/mol"),
        "lnA": Param("lnA", a.value, a.se, a.ci_low, a.ci_high, a.ci_method,
                     f"ln of A in {k_unit}"),
        "A": scaled(a, 1, "A", k_unit, exp=True),
        "dH": scaled(es, -R / 1000, "dH", "kJ/mol"),
        "dS": scaled(ei, R, "dS", "J/(mol K)", offset=-R * math.log(KB / H)),
    }
    return TemperatureAnalysis(T_K, k, k_se, arr, ey, params, k_unit, warnings, checks)


def _celsius_span(end: dict) -> str:
    """'0-40 C' for a stretch of temperatures given in K."""
    lo, hi = end["T_K"]
    return f"{lo - 273.15:.0f}-{hi - 273.15:.0f} C"


def _check_line(T_K, k, arr: FitResult, sd, level, rows, warnings: list) -> dict:
    """The Arrhenius line's checks and their warnings (:func:`analyse`)."""
    from .fitting import p_is

    rows = list(rows) if rows is not None else [i + 1 for i in range(T_K.size)]
    where = "row" if rows != [i + 1 for i in range(T_K.size)] else "point"
    checks = {"span_K": float(T_K.max() - T_K.min()), "outlier": None, "curvature": None}
    ea = -R * arr.value("slope") / 1000
    out = off_the_line(arr)
    if out is not None:
        i = out["index"]
        keep = np.arange(T_K.size) != i
        rest = fit(LINE, 1 / T_K[keep], np.log(k[keep]), weighting=arr.weighting,
                   sd=None if sd is None else sd[keep], level=level)
        ea_rest = -R * rest.params["slope"].value / 1000
        ratio = math.exp(arr.y[i] - float(rest.predict(np.array([arr.x[i]]))[0]))
        checks["outlier"] = {**out, "row": rows[i], "T_K": float(T_K[i]),
                             "k_over_line": ratio, "Ea_without_kJ_per_mol": ea_rest}
        warnings.append(
            f"{where} {rows[i]} ({T_K[i] - 273.15:.1f} C) lies off the Arrhenius line: its k is "
            f"{ratio:.2g} times the line through the others (studentized residual "
            f"{out['t']:.1f}, Bonferroni "
            f"limit {out['limit']:.1f}); without it Ea = "
            f"{fmt_pm(ea_rest, rest.params['slope'].se * R / 1000)} kJ/mol against "
            f"{ea:.4g} with it. Check that run; it is kept in the fit above")
    cv = curvature(T_K, k, sd, level)
    if cv is not None:
        checks["curvature"] = cv
        if math.isfinite(cv["p"]) and cv["p"] < CURVATURE_ALPHA:
            lo, hi = cv["lower"], cv["upper"]
            warnings.append(
                f"the Arrhenius plot is curved (F-test of a (1/T)^2 term: {p_is(cv['p'])}): Ea "
                f"is {fmt_pm(lo['Ea_kJ_per_mol'], lo['se'])} kJ/mol over {_celsius_span(lo)} and "
                f"{fmt_pm(hi['Ea_kJ_per_mol'], hi['se'])} over {_celsius_span(hi)}, so one Ea "
                "and A "
                f"({ea:.3g} kJ/mol over all) describe neither end: two paths, a change of "
                "mechanism or of the rate-limiting step, or a heat capacity of activation (or "
                "one point off the line)")
    if checks["span_K"] < NARROW_SPAN_K:
        x = 1 / T_K
        far = float(np.mean(x) / (x.max() - x.min()))
        warnings.append(
            f"the temperatures span only {checks['span_K']:.3g} K: Ea rests on a short stretch "
            f"of 1/T, and ln A and dS are read at 1/T = 0, {far:.3g} times that stretch beyond "
            f"the data (their intervals say how little that fixes them); common practice asks "
            f"for {NARROW_SPAN_K:g}-30 K or more")
    return checks
