"""Saturation and inhibition kinetics: rate vs substrate (and inhibitor) concentration.

Michaelis–Menten, Hill and substrate-inhibition fits of v vs [S]; competitive, uncompetitive,
noncompetitive and mixed inhibition fitted globally across an inhibitor series; a
four-parameter logistic for IC50 with the Cheng–Prusoff Ki (Cheng & Prusoff 1973, Biochem.
Pharmacol. 22:3099). ``auto`` fits every candidate, ranks them by AICc with F-tests for nested
pairs, and chooses one. kcat = Vmax / [E] and kcat/Km carry propagated uncertainties. The direct
linear plot (Eisenthal & Cornish-Bowden 1974) gives a robust cross-check.

Linearised plots (Lineweaver–Burk, Eadie–Hofstee, Hanes–Woolf) are drawn for inspection only and
never used for the estimates: they distort the error structure.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from .distributions import normal_quantile, t_two_sided
from .errors import FitError, InputError, UsageError
from .fitting import (
    NOT_IDENTIFIABLE,
    Comparison,
    FitResult,
    Param,
    compare,
    fit,
    fmt_pm,
    held_p,
    past_limit_text,
    past_limits,
)
from .io import number_column, pick_column
from .models import (
    INHIBITION_MODELS,
    MM_SPECIFICITY,
    NESTED,
    SATURATION,
    SUBSTRATE_MODELS,
    direct_linear_plot,
)
from .options import MODELS
from .units import concentration_factor, rate_unit_factors, same_unit, unit_from_header

MODEL_CHOICES = MODELS          # the --model choices (rateabs.options)

#: What gives a better interval than an asymptotic one that crosses a parameter's limit.
PROFILE_REMEDY = ("give --ci profile for an interval that keeps to the limit (open where the "
                  "data give no bound)")

_CONC = re.compile(r"^(s|\[s\]|s0|substrate|conc|concentration|x)([\s_(\[]|$)", re.I)
_RATE = re.compile(r"^(v|v0|vi|rate|velocity|activity|initial[\s_]rate|y)([\s_(\[]|$)", re.I)
_INHIB = re.compile(r"^(i|\[i\]|inhibitor|inhib|dose|compound)([\s_(\[]|$)", re.I)
_SD = re.compile(r"^(sd|std|stdev|error|se|sigma)([\s_(\[]|$)|_sd$|_se$", re.I)


@dataclass(frozen=True)
class SaturationData:
    """Rates vs concentrations, with their units and the columns they came from."""

    s: np.ndarray
    v: np.ndarray
    i: np.ndarray | None
    sd: np.ndarray | None
    conc_unit: str
    rate_unit: str
    inhib_unit: str
    columns: dict
    dropped: int = 0          # rows left out: no rate, concentration or inhibitor level


def table_data(df: pd.DataFrame, *, conc=None, rate=None, inhibitor=None, sd=None,
               conc_unit=None, rate_unit=None, inhib_unit=None, need_inhibitor=False) -> SaturationData:
    """Select and check the concentration, rate, inhibitor and SD columns of a table."""
    path = df.attrs.get("source", "table")
    rate_c = pick_column(df, rate, _RATE, "rate", "--rate")
    inhib_c = pick_column(df, inhibitor, _INHIB, "inhibitor", "--inhibitor",
                          required=need_inhibitor)
    conc_c = pick_column(df, conc, _CONC, "conc", "--conc", required=not need_inhibitor)
    sd_c = pick_column(df, sd, _SD, "sd", "--sd") if sd is not None else None
    v = number_column(df, rate_c)
    s = number_column(df, conc_c) if conc_c is not None else None
    i = number_column(df, inhib_c) if inhib_c is not None else None
    if i is not None and inhibitor is None and not need_inhibitor and not np.isfinite(i).any():
        inhib_c, i = None, None               # an empty inhibitor column found by its name
    e = number_column(df, sd_c) if sd_c is not None else None
    keep = np.isfinite(v)
    if s is not None:
        keep &= np.isfinite(s)
    if i is not None:
        keep &= np.isfinite(i)
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    for arr, col in ((s, conc_c), (i, inhib_c)):
        if arr is not None and np.any(arr[keep] < 0):
            k = int(np.argmax((arr < 0) & keep))
            raise InputError(f"negative concentration {arr[k]:g}", "concentrations cannot be "
                             "negative; fix the cell", file=path, row=lines[k], column=col)
    if keep.sum() == 0:
        raise InputError("no rows with both a concentration and a rate", "fill the table",
                         file=path)
    def pick(a):
        return None if a is None else a[keep]

    return SaturationData(
        s=pick(s), v=v[keep], i=pick(i), sd=pick(e),
        conc_unit=column_unit(conc_c, conc_unit, "--conc-unit", path),
        rate_unit=column_unit(rate_c, rate_unit, "--rate-unit", path),
        inhib_unit=column_unit(inhib_c, inhib_unit, "--inhibitor-unit", path),
        columns={"conc": conc_c, "rate": rate_c, "inhibitor": inhib_c, "sd": sd_c},
        dropped=int((~keep).sum()))


def column_unit(column: str | None, given: str | None, flag: str, path: str = "table") -> str:
    """The unit of a column's numbers: the one its header states, else the option's (``given``).

    An option naming another unit than the header is refused, naming both: the numbers are never
    relabelled (a header 'substrate_uM' with --conc-unit mM would report a Km 1000 times off) and
    never converted (the option says what unit the numbers are in, not what to report them in).
    The same unit spelled differently ('uM' and 'µM') is accepted.
    """
    said = unit_from_header(str(column)) if column is not None else ""
    if given and said and not same_unit(given, said):
        raise UsageError(f"{flag} {given} contradicts the column {column!r} of {path}, whose "
                         f"header states {said}",
                         f"leave {flag} out (the header's unit is used), or correct the header "
                         f"if the numbers are in {given}")
    return said or given or ""


@dataclass(frozen=True)
class SaturationAnalysis:
    """All fitted candidates, the comparison that chose one, derived constants and warnings."""

    fits: dict
    comparison: Comparison | None
    chosen: str
    derived: dict
    cross_check: dict
    warnings: list = field(default_factory=list)
    data: SaturationData | None = None
    #: model -> {"Km": lower bound} where Km and Vmax are not identifiable (only Vmax/Km is)
    unresolved: dict = field(default_factory=dict)

    @property
    def best(self) -> FitResult:
        """The chosen fit."""
        return self.fits[self.chosen]

    def report(self) -> str:
        """Chosen fit, derived constants and the evidence, as text."""
        parts = [self.best.report()]
        for p in self.derived.get(self.chosen, {}).values():
            parts.append(f"  {p}")
        if self.comparison is not None:
            parts.append(self.comparison.report())
        return "\n".join(parts)


def _kcat(result: FitResult, enzyme_M: float, rate_unit: str, conc_unit: str, level: float):
    """kcat = Vmax/[E] (1/s) and kcat/Km (M^-1 s^-1) with propagated uncertainty."""
    f = rate_unit_factors(rate_unit)
    if f is None or "Vmax" not in result.params:
        return {}, ("kcat needs the rate in a molar unit per time (e.g. uM/min); rate unit is "
                    f"{rate_unit or 'unknown'}: give --rate-unit")
    cf, tsec = f
    vm = result.params["Vmax"]
    scale = cf / tsec / enzyme_M        # (rate unit) -> 1/s
    kcat = Param("kcat", vm.value * scale, vm.se * scale, vm.ci_low * scale, vm.ci_high * scale,
                 vm.ci_method, "1/s")
    out = {"kcat": kcat}
    km_name = "Km" if "Km" in result.params else None
    if km_name and conc_unit:
        try:
            kf = concentration_factor(conc_unit)
        except UsageError:
            kf = None
        if kf:
            km = result.params[km_name]
            val = kcat.value / (km.value * kf)
            rel2 = (vm.se / vm.value) ** 2 + (km.se / km.value) ** 2
            if result.cov is not None and vm.name in result.free and km_name in result.free:
                iv, ik = result.free.index("Vmax"), result.free.index(km_name)
                rel2 -= 2 * result.cov[iv, ik] / (vm.value * km.value)
            se = abs(val) * math.sqrt(max(rel2, 0.0))
            tq = t_two_sided(level, max(result.dof, 1))
            out["kcat/Km"] = Param("kcat/Km", val, se, val - tq * se, val + tq * se,
                                   "delta-method", "M^-1 s^-1")
    return out, None


def specificity_unit(rate_unit: str, conc_unit: str) -> tuple[float, str]:
    """The factor and unit of Vmax/Km from the rate and concentration units: 1/time where both
    are molar (uM/min over uM: 1/min; mM/min over uM: x 1000), else 'RATE per CONC'."""
    f = rate_unit_factors(rate_unit)
    try:
        kf = concentration_factor(conc_unit) if conc_unit else None
    except UsageError:
        kf = None
    if f is not None and kf:
        return f[0] / kf, f"1/{rate_unit.split('/')[-1].strip()}"
    if rate_unit and conc_unit:
        return 1.0, f"{rate_unit} per {conc_unit}"
    return 1.0, ""


def _specificity(fits: dict, x, data: SaturationData, fix: dict | None, fit_kw: dict
                 ) -> FitResult | None:
    """Michaelis–Menten refitted in Vmax/Km and 1/Km (:data:`MM_SPECIFICITY`, same weighting
    and intervals), started from the fit in Vmax and Km; None without an mm fit or with Vmax or
    Km fixed."""
    r = fits.get("mm")
    if r is None or set(fix or {}) & {"Vmax", "Km"}:
        return None
    km, vm = r.value("Km"), r.value("Vmax")
    start = {"Vmax/Km": vm / km, "1/Km": 1 / km}
    factor, unit = specificity_unit(data.rate_unit, data.conc_unit)
    kw = {k: v for k, v in fit_kw.items() if k not in ("weighting", "units")}
    try:
        spec = fit(MM_SPECIFICITY, x, data.v, weighting=fit_kw["weighting"], sd=data.sd,
                   p0=start, units={**fit_kw["units"], "spec": unit}, **kw)
    except FitError:
        return None
    return spec


def _specificity_params(spec: FitResult, data: SaturationData, enzyme_M) -> dict:
    """Vmax/Km in its unit (:func:`specificity_unit`) and, with the enzyme concentration and
    molar units, kcat/Km in M^-1 s^-1, both scaled from the fitted Vmax/Km."""
    vk = spec.params["Vmax/Km"]

    def scaled(name, f, unit):
        return Param(name, vk.value * f, vk.se * f, vk.ci_low * f, vk.ci_high * f,
                     vk.ci_method, unit)

    factor, unit = specificity_unit(data.rate_unit, data.conc_unit)
    out = {"Vmax/Km": scaled("Vmax/Km", factor, unit)}
    rf = rate_unit_factors(data.rate_unit)
    if enzyme_M is not None and rf is not None and unit.startswith("1/"):
        out["kcat/Km"] = scaled("kcat/Km", factor / rf[1] / enzyme_M, "M^-1 s^-1")
    return out


def _unresolved(spec: FitResult | None, x, data: SaturationData, fit_kw: dict) -> dict | None:
    """{"Km": lower bound} when the rates cannot reject Km infinite (a straight line through
    the origin, v = (Vmax/Km) S: the same model with 1/Km held at 0) by the F-test at the level
    of the intervals, the profile-likelihood criterion at 1/Km = 0 (Bates & Watts 1988); else
    None. The lower bound of Km is 1/(upper bound of 1/Km)."""
    if spec is None or not spec.success:
        return None
    kw = {k: v for k, v in fit_kw.items() if k not in ("weighting", "units", "ci")}
    p = held_p(MM_SPECIFICITY, x, data.v, spec, {"1/Km": 0.0}, weighting=fit_kw["weighting"],
               sd=data.sd, **kw)
    if not p >= 1 - fit_kw["level"]:           # a NaN p (the held fit failed) says nothing
        return None
    hi = spec.params["1/Km"].ci_high
    return {"Km": 1 / hi if np.isfinite(hi) and hi > 0 else math.nan}


def cheng_prusoff(ic50: Param, mode: str, s: float, km: float) -> Param:
    """Ki from IC50 (Cheng & Prusoff 1973): competitive Ki = IC50 / (1 + [S]/Km);
    uncompetitive Ki = IC50 / (1 + Km/[S]); noncompetitive Ki = IC50.

    The IC50's interval is scaled by the same factor ([S] and Km are taken as exact).

    >>> p = Param("IC50", 10.0, 1.0, 8.0, 12.0, "asymptotic", "uM")
    >>> cheng_prusoff(p, "competitive", 100.0, 100.0).value
    5.0
    """
    if s <= 0 or km <= 0:
        raise UsageError("Cheng–Prusoff needs positive [S] and Km", "give --substrate and --km")
    factor = {"competitive": 1 / (1 + s / km), "uncompetitive": 1 / (1 + km / s),
              "noncompetitive": 1.0}.get(mode)
    if factor is None:
        raise UsageError(f"Cheng–Prusoff is defined here for competitive, uncompetitive and "
                         f"noncompetitive modes, not {mode!r}", "give --mode")
    return Param("Ki", ic50.value * factor, ic50.se * factor, ic50.ci_low * factor,
                 ic50.ci_high * factor, ic50.ci_method, ic50.unit)


def _candidates(data: SaturationData, model: str) -> tuple[list, np.ndarray, dict, list]:
    """The models to fit, their x (substrate, or substrate and inhibitor stacked), the units
    of the parameters and any warning about the choice."""
    if model not in MODEL_CHOICES:
        raise UsageError(f"unknown model {model!r}", f"use one of {', '.join(MODEL_CHOICES)}")
    units = {"x": data.conc_unit, "y": data.rate_unit, "i": data.inhib_unit}
    has_i = data.i is not None
    levels = np.unique(data.i) if has_i else np.array([])
    if model == "ic50":
        if not has_i:
            raise UsageError("the ic50 model needs the inhibitor concentrations",
                             "name the column with --inhibitor")
        return ["ic50"], data.i, {**units, "x": data.inhib_unit}, []
    if model == "auto":
        candidates = list(INHIBITION_MODELS if has_i and levels.size >= 2 else SUBSTRATE_MODELS)
    else:
        candidates = [model]
    if candidates[0] in INHIBITION_MODELS:
        if not has_i:
            raise UsageError(f"the {candidates[0]} model needs an inhibitor column",
                             "name it with --inhibitor")
        if levels.size < 2:
            raise FitError("a global inhibition fit needs at least two inhibitor levels "
                           f"(found only {levels.size})", "add rates without and with inhibitor")
        return candidates, np.vstack([data.s, data.i]), units, []
    warn = []
    if has_i and levels.size > 1:
        warn.append("the table has several inhibitor levels but a one-substrate model was "
                    "asked for; all rows are fitted together")
    return candidates, data.s, units, warn


def _check_fix_names(fix: dict | None, candidates) -> None:
    unknown = set(fix or {}) - {p for c in candidates for p in SATURATION[c].params}
    if unknown:
        raise UsageError(f"--fix names {sorted(unknown)[0]!r}, which no candidate model has",
                         "check the parameter name (Vmax, Km, S50, n, Ksi, Ki, Kiu, IC50, v_free, "
                         "v_floor)")


def _fit_candidates(candidates, x, data: SaturationData, fix, fit_kw) -> tuple[dict, dict]:
    """Every candidate fitted (or the reason it could not be)."""
    fits: dict[str, FitResult] = {}
    failed: dict[str, str] = {}
    for name in candidates:
        mdl = SATURATION[name]
        try:
            fits[name] = fit(mdl, x, data.v, weighting=fit_kw["weighting"], sd=data.sd,
                             fix={k: v for k, v in (fix or {}).items() if k in mdl.params},
                             **{k: v for k, v in fit_kw.items() if k != "weighting"})
        except FitError as exc:
            failed[name] = exc.problem
            continue
        if name == "substrate-inhibition" and fits[name].success:
            p = fits[name].params
            s_opt = math.sqrt(p["Km"].value * p["Ksi"].value)
            if s_opt > float(np.max(data.s)):
                fits[name] = replace(fits[name], success=False, message=(
                    f"not supported: the fitted optimum [S] = {s_opt:.3g} lies above the highest "
                    "concentration, so no decline of the rate is observed"))
    if not fits:
        raise FitError("no model could be fitted", "; ".join(f"{k}: {v}" for k, v in failed.items()))
    return fits, failed


def _mixed_alpha(r: FitResult, level: float) -> Param:
    """alpha = Kiu / Ki of the mixed model, its interval on the log scale (delta method)."""
    a = r.params["Kiu"].value / r.params["Ki"].value
    rel = math.hypot(r.params["Kiu"].se / r.params["Kiu"].value,
                     r.params["Ki"].se / r.params["Ki"].value)
    zq = normal_quantile(0.5 + level / 2)
    spread = math.exp(min(zq * rel, 700.0)) if np.isfinite(rel) else float("nan")
    return Param("alpha", a, a * rel, a / spread, a * spread, "delta-method (log scale)", "")


def _derived(fits: dict, chosen: str, data: SaturationData, level: float, enzyme_M, cp: dict,
             spec: FitResult | None = None) -> tuple[dict, list]:
    """kcat and kcat/Km, Vmax/Km of the Michaelis–Menten fit (from ``spec``, the fit in
    Vmax/Km and 1/Km: its own SE and interval), the mixed model's alpha and the
    Cheng–Prusoff Ki, per fit."""
    derived, warn = {}, []
    for name, r in fits.items():
        d = _specificity_params(spec, data, None) if name == "mm" and spec is not None else {}
        if enzyme_M is not None and name != "ic50":
            kc, why = _kcat(r, enzyme_M, data.rate_unit, data.conc_unit, level)
            d.update(kc)
            if why and name == chosen and data.rate_unit:   # no unit at all: said already
                warn.append(why)
            if name == "mm" and spec is not None:     # kcat/Km from the fitted Vmax/Km
                d.update(_specificity_params(spec, data, enzyme_M))
        if name == "mixed":
            d["alpha"] = _mixed_alpha(r, level)
        if name == "ic50" and cp.get("mode") and cp.get("substrate") is not None and (
                cp.get("km") is not None):
            d["Ki"] = cheng_prusoff(r.params["IC50"], cp["mode"], cp["substrate"], cp["km"])
        derived[name] = d
    return derived, warn


def _design_checks(data: SaturationData, best: FitResult, chosen: str) -> tuple[dict, list]:
    """The direct-linear-plot cross-check and warnings about the range of [S] and the residuals.

    The direct linear plot estimates the Km and Vmax of a hyperbola, so it cross-checks the
    Michaelis–Menten fit and the inhibition fits (on the rows at the lowest inhibitor level),
    not a Hill or substrate-inhibition curve, whose medians mean nothing (a Hill set with
    n = 2.5 gave Vmax -0.47 and Km -41 as its 'cross-check')."""
    has_i = data.i is not None
    cross, warn = {}, []
    base = data.i == np.min(data.i) if has_i else np.ones(data.s.size, bool)
    hyperbolic = chosen == "mm" or chosen in INHIBITION_MODELS
    if hyperbolic and np.unique(data.s[base]).size >= 2:
        vm, kmd = direct_linear_plot(data.s[base], data.v[base])
        if vm > 0 and kmd > 0:
            cross = {"method": "direct linear plot medians (Eisenthal & Cornish-Bowden 1974)",
                     "Vmax": vm, "Km": kmd,
                     "subset": "lowest inhibitor level" if has_i else "all"}
        else:
            warn.append(f"the direct linear plot gives Vmax = {vm:.3g}, Km = {kmd:.3g}: its "
                        "medians are not positive, so the rates do not look hyperbolic and the "
                        f"{chosen} fit has no cross-check")
    kname = "Km" if "Km" in best.params else ("S50" if "S50" in best.params else None)
    if kname:
        kval = best.params[kname].value
        smax = float(np.max(data.s))
        smin = float(np.min(data.s[data.s > 0])) if np.any(data.s > 0) else 0.0
        if smax < 2.5 * kval:
            warn.append(f"the highest substrate concentration is only {smax / kval:.2g} x "
                        f"{kname}: Vmax is poorly determined; extend the series to 3 {kname} "
                        "or more")
        if smin > kval:
            warn.append(f"the lowest substrate concentration is above {kname} "
                        f"({smin:g} > {kval:.3g}): {kname} is poorly determined; add lower "
                        "concentrations")
    if np.isfinite(best.runs_p) and best.runs_p < 0.05:
        warn.append(f"{chosen}: residuals are not random (runs test p = {best.runs_p:.2g}); "
                    "the model may not describe these data")
    return cross, warn


def analyse(data: SaturationData, *, model: str = "auto", ci: str = "asymptotic",
            level: float = 0.95, weighting: str = "none", fix: dict | None = None,
            enzyme_M: float | None = None, n_boot: int = 2000, resample: str = "residual",
            seed: int = 0, mode: str | None = None, substrate: float | None = None,
            km: float | None = None) -> SaturationAnalysis:
    """Fit the requested model (or every candidate for ``auto``) and derive constants."""
    candidates, x, units, warn = _candidates(data, model)
    if data.dropped:
        warn = [f"{data.dropped} row(s) without a rate, a concentration or an inhibitor level "
                "were left out"] + warn
    _check_fix_names(fix, candidates)
    warn += _unit_warnings(data, model)
    if np.all(data.v == 0):
        raise FitError("every rate is zero", "check the rate column and the blank subtraction")
    fit_kw = {"weighting": weighting, "ci": ci, "level": level, "n_boot": n_boot,
              "resample": resample, "seed": seed, "units": units}
    fits, failed = _fit_candidates(candidates, x, data, fix, fit_kw)
    spec = _specificity(fits, x, data, fix, fit_kw)
    unresolved = {}
    hit = _unresolved(spec, x, data, fit_kw)
    if hit is not None:
        # the curve is determined (its RSS, its F-tests); only Km and Vmax apart are not
        unresolved["mm"] = hit
        fits["mm"] = replace(fits["mm"], success=True, message="converged; Km and Vmax are not "
                             "identifiable, only Vmax/Km", notes=tuple(
                                 n for n in fits["mm"].notes
                                 if not any(w in n for w in ("Km", "Vmax", "covariance"))))
    comp = compare(fits, NESTED, failed) if len(candidates) > 1 else None
    chosen = comp.chosen if comp is not None else candidates[0]
    if comp is None and not fits[chosen].success:
        warn.append(f"{chosen}: {fits[chosen].message}")
    warn += [f"{chosen}: {note}" for note in fits[chosen].notes]
    if chosen not in unresolved:                  # else Km and Vmax are not shown as numbers
        warn += [f"{chosen}: " + past_limit_text(fits[chosen].params[nm], limit, PROFILE_REMEDY)
                 for nm, limit in past_limits(SATURATION[chosen], fits[chosen]).items()]
    derived, more = _derived(fits, chosen, data, level, enzyme_M,
                             {"mode": mode, "substrate": substrate, "km": km}, spec)
    if chosen == "mm" and spec is not None and "Vmax/Km" in past_limits(MM_SPECIFICITY, spec):
        more.append("mm: " + past_limit_text(derived["mm"]["Vmax/Km"], 0.0, PROFILE_REMEDY))
    cross = {}
    if chosen in unresolved:
        more.append(_first_order_warning(data, unresolved[chosen], derived[chosen]["Vmax/Km"],
                                         level))
    elif model != "ic50":
        cross, checks = _design_checks(data, fits[chosen], chosen)
        more += checks
    return SaturationAnalysis(fits, comp, chosen, derived, cross, warn + more, data, unresolved)


def _unit_warnings(data: SaturationData, model: str) -> list[str]:
    """A column whose unit neither its header nor an option states is said, with what it
    leaves unitless: the numbers are fitted as they stand, but Km, Vmax and the rest carry no
    unit and kcat cannot be formed."""
    cols = data.columns
    out = []
    if data.s is not None and not data.conc_unit and model != "ic50":
        out.append(f"the concentration column {cols.get('conc')!r} states no unit and "
                   "--conc-unit was not given: Km (S50, Ksi) is in the column's own unit, shown "
                   "without one; name it in the header ('substrate (uM)') or give --conc-unit")
    if not data.rate_unit:
        out.append(f"the rate column {cols.get('rate')!r} states no unit and --rate-unit was "
                   "not given: Vmax is in the column's own unit, shown without one, and kcat "
                   "cannot be formed; name it in the header ('rate (uM/min)') or give "
                   "--rate-unit")
    if data.i is not None and not data.inhib_unit:
        out.append(f"the inhibitor column {cols.get('inhibitor')!r} states no unit and "
                   "--inhibitor-unit was not given: Ki (IC50) is in the column's own unit, shown "
                   "without one; name it in the header or give --inhibitor-unit")
    return out


def _first_order_warning(data: SaturationData, hit: dict, vk: Param, level: float) -> str:
    """Why Km and Vmax are not given for rates that rise in proportion to [S]."""
    u = data.conc_unit
    where = (f"at {100 * level:g} % Km lies above {hit['Km']:.3g} {u}".rstrip()
             if np.isfinite(hit["Km"]) else "Km could be any value above the range of [S]")
    return (f"Km and Vmax are not identifiable: the rates rise in proportion to [S] within the "
            f"noise, as they do far below Km (highest [S] {np.max(data.s):.3g} {u}".rstrip()
            + f"; {where}); only Vmax/Km is determined, "
            f"{fmt_pm(vk.value, vk.se, unit=vk.unit)}. To measure Km and Vmax, extend [S] to "
            "Km or above")


def _mask(params: dict, hit: dict) -> None:
    """Km, Vmax and kcat of a fit whose Km is not identifiable: null value, SE and upper bound,
    ci_method :data:`NOT_IDENTIFIABLE`; Km keeps its lower bound."""
    for k in ("Km", "Vmax", "kcat"):
        if k in params:
            low = hit.get(k)
            params[k].update(value=None, se=None, ci_high=None, ci_method=NOT_IDENTIFIABLE,
                             ci_low=low if low is not None and np.isfinite(low) else None)


def results_json(a: SaturationAnalysis) -> list[dict]:
    """One JSON result per fitted model (fields listed in docs/formats.md)."""
    out = []
    rows = {r["model"]: r for r in (a.comparison.rows if a.comparison else [])}
    for name, r in a.fits.items():
        d = r.to_dict()
        d["params"].update({k: p.to_dict() for k, p in a.derived.get(name, {}).items()})
        if name in a.unresolved:
            _mask(d["params"], a.unresolved[name])
        d["chosen"] = name == a.chosen
        d["status"] = ("ok" if name not in a.unresolved else r.message) if r.success else r.message
        d["equation"] = SATURATION[name].equation
        if name in rows:
            d["delta_aicc"] = rows[name]["delta_aicc"]
            d["akaike_weight"] = rows[name]["weight"]
        if name == a.chosen:
            if a.comparison is not None:
                d["evidence"] = a.comparison.to_dict()
            if a.cross_check:
                d["cross_check"] = a.cross_check
        out.append(d)
    if a.comparison:
        for name, why in a.comparison.failed.items():
            if name not in a.fits:
                out.append({"model": name, "params": {}, "aic": None, "aicc": None,
                            "chosen": False, "status": f"not estimable: {why}"})
    return out
