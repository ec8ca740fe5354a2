"""Whole progress curves: the integrated Michaelis–Menten equation and Selwyn's test.

The integrated rate equation Km ln(S0/S) + (S0 - S) = Vmax t has the closed form
S(t) = Km W((S0/Km) exp((S0 - Vmax t)/Km)) with W the Lambert W function (Schnell & Mendoza 1997,
J. Theor. Biol. 187:207). With competitive product inhibition (Kp), a (S0 - S) + b ln(S0/S) =
Vmax t with a = 1 - Km/Kp, b = Km (1 + S0/Kp), so S = (b/a) W((a S0/b) exp((a S0 - Vmax t)/b))
(principal branch for either sign of a).

Curves are fitted globally: Km and Vmax shared, a free baseline per curve. With enzyme amounts per
curve the rate scales with the amount (Vmax per unit of enzyme). Selwyn's test (Selwyn 1965,
Biochim. Biophys. Acta 105:193): product plotted against enzyme x time superimposes for a stable
enzyme; here the test is a nested model comparison, adding first-order enzyme inactivation
(activity e^(-kd t), so time becomes (1 - e^(-kd t))/kd) and asking whether kd > 0 is needed.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

import numpy as np
from scipy import special

from .errors import AnalysisError, UsageError
from .fitting import (
    NOT_IDENTIFIABLE,
    FitResult,
    Param,
    f_test,
    fit,
    fmt_pm,
    held_p,
    line_slope,
    p_is,
    past_limit_text,
    past_limits,
)
from .models import Model, time_origin
from .units import concentration_factor


def lambertw_exp(z):
    """W(exp(z)) for real z, without overflow for large z (Newton on w + ln w = z)."""
    z = np.asarray(z, dtype=float)
    out = np.empty_like(z)
    small = z < 500
    with np.errstate(over="ignore"):
        out[small] = special.lambertw(np.exp(z[small])).real
    big = ~small
    if big.any():
        w = z[big] - np.log(z[big])
        for _ in range(8):
            w = w - (w + np.log(w) - z[big]) / (1 + 1 / w)
        out[big] = w
    return out


def substrate_left(t, s0, km, vmax, kp=None):
    """[S](t) of the integrated Michaelis–Menten equation (optionally with product inhibition)."""
    t, s0, km, vmax = np.broadcast_arrays(*(np.asarray(v, float) for v in (t, s0, km, vmax)))
    if kp is None:
        return km * lambertw_exp(np.log(s0 / km) + (s0 - vmax * t) / km)
    kp = np.broadcast_to(np.asarray(kp, float), t.shape)
    return _substrate_ab(t, s0, 1 - km / kp, km * (1 + s0 / kp), vmax)


def substrate_left_specificity(t, s0, k, inv_km, kp=None):
    """[S](t) of the integrated Michaelis–Menten equation written with the specificity constant
    k = Vmax/Km and 1/Km: ln(S0/S) + (S0 - S)/Km = k t (the equation of
    :func:`substrate_left` divided by Km). 1/Km = 0 is the first-order limit S0 exp(-k t), so the
    form holds where S0 is far below Km and Km itself runs off; with product inhibition
    (1/Km - 1/Kp)(S0 - S) + (1 + S0/Kp) ln(S0/S) = k t."""
    t, s0, k, inv_km = np.broadcast_arrays(*(np.asarray(v, float) for v in (t, s0, k, inv_km)))
    if kp is None:
        return _substrate_ab(t, s0, inv_km, np.ones_like(t), k)
    kp = np.broadcast_to(np.asarray(kp, float), t.shape)
    return _substrate_ab(t, s0, inv_km - 1 / kp, 1 + s0 / kp, k)


def _substrate_ab(t, s0, a, b, v):
    """S solving a (S0 - S) + b ln(S0/S) = v t: S = (b/a) W((a S0/b) exp((a S0 - v t)/b)),
    principal branch for either sign of a; S0 exp(-v t/b) where a S0/b vanishes."""
    out = np.empty_like(t)
    with np.errstate(all="ignore"):
        z = a * s0 / b
    zero = np.abs(z) < 1e-12
    out[zero] = s0[zero] * np.exp(-v[zero] * t[zero] / b[zero])
    pos = (z > 0) & ~zero
    if pos.any():
        out[pos] = (b[pos] / a[pos]) * lambertw_exp(np.log(z[pos])
                                                    + (a[pos] * s0[pos] - v[pos] * t[pos])
                                                    / b[pos])
    neg = (z < 0) & ~zero
    if neg.any():
        arg = z[neg] * np.exp((a[neg] * s0[neg] - v[neg] * t[neg]) / b[neg])
        out[neg] = (b[neg] / a[neg]) * special.lambertw(arg).real
    return out


@dataclass
class Curves:
    """Progress curves as concentration of product formed (µM) vs time (s)."""

    names: list
    t: list            # arrays, s
    p: list            # arrays, µM of product (plus an unknown baseline)
    s0: np.ndarray     # µM
    enzyme: np.ndarray | None = None
    species: str = "product"       # which species absorbs (how p was made from absorbance)
    t0: np.ndarray | None = None   # s: each curve's time origin in the file's own times
    enzyme_unit: str = ""          # unit of the enzyme amounts (e.g. nM), '' when not stated

    def per_enzyme(self) -> str:
        """How a rate per enzyme amount is labelled: 'per nM', or 'per enzyme amount' when the
        amounts carry no unit (never 'per enzyme unit': 1 U is 1 umol/min)."""
        return f"per {self.enzyme_unit}" if self.enzyme_unit else "per enzyme amount"


def curves_from_absorbance(names, times, absorbance, s0_uM, enzyme=None, *, epsilon: float,
                           pathlength_cm: float = 1.0, species: str = "product",
                           enzyme_unit: str = "") -> Curves:
    """Progress curves from absorbance traces by Beer–Lambert, c = A / (epsilon b).

    The product formed (µM, plus a baseline the fit takes care of) is +A/(epsilon b) when the
    product absorbs and -A/(epsilon b) when the substrate absorbs (its absorbance falls as
    product forms). ``epsilon`` in L mol^-1 cm^-1, ``pathlength_cm`` in cm, ``s0_uM`` per curve.
    Each curve's times are counted from its origin (:func:`rateabs.models.time_origin`: the
    file's zero, or the first usable reading where that lies more than the curve's span after
    it); S0 is the substrate at that origin.
    """
    if species not in ("product", "substrate"):
        raise UsageError(f"unknown absorbing species {species!r}", "use product or substrate")
    scale = (1.0 if species == "product" else -1.0) * 1e6 / (epsilon * pathlength_cm)
    shifted = [time_origin(t) for t in times]
    return Curves(list(names), [t for t, _ in shifted],
                  [scale * np.asarray(a, float) for a in absorbance],
                  np.asarray(s0_uM, float), None if enzyme is None else np.asarray(enzyme, float),
                  species, np.array([t0 for _, t0 in shifted]), enzyme_unit)


def in_unit(params: dict, unit: str) -> dict:
    """Parameters in µM (Km, Vmax, Kp) expressed in another concentration ``unit``: values,
    SEs, interval bounds and the unit strings."""
    if unit == "uM":
        return dict(params)
    f = 1e-6 / concentration_factor(unit)           # uM -> unit
    return {k: replace(p, value=p.value * f, se=p.se * f, ci_low=p.ci_low * f,
                       ci_high=p.ci_high * f, unit=re.sub(r"^uM", unit, p.unit))
            if "uM" in p.unit else p for k, p in params.items()}


def _stack(c: Curves):
    t = np.concatenate(c.t)
    idx = np.concatenate([np.full(len(tt), i) for i, tt in enumerate(c.t)])
    s0 = c.s0[idx]
    e = (c.enzyme[idx] if c.enzyme is not None else np.ones_like(t))
    return np.vstack([t, idx, s0, e]), np.concatenate(c.p)


def _model(n: int, product_inhibition: bool, decay: bool, per_enzyme: str = "",
           specificity: bool = False) -> Model:
    """The global model: Km and Vmax (or, with ``specificity``, Vmax/Km and 1/Km: the same
    curves, written so that the first-order limit 1/Km = 0 is a value and not a run-off), an
    optional Kp and kd, and one baseline per curve."""
    first = ["Vmax/Km", "1/Km"] if specificity else ["Km", "Vmax"]
    names = first + (["Kp"] if product_inhibition else []) + (["kd"] if decay else [])
    names += [f"base_{i}" for i in range(n)]

    def func(x, *p):
        j = 2
        kp = None
        if product_inhibition:
            kp = p[j]
            j += 1
        kd = 0.0
        if decay:
            kd = p[j]
            j += 1
        t, idx, s0, e = x[0], x[1].astype(int), x[2], x[3]
        b = [np.asarray(v, float) for v in p[j:]]
        # scalars (one fit) or (B, 1) columns (batched fits): pick each reading's baseline
        base = np.array(b)[idx] if b[0].ndim == 0 else np.concatenate(b, axis=-1)[..., idx]
        kdt = np.asarray(kd) * t
        with np.errstate(all="ignore"):
            tau = np.where(np.abs(kdt) < 1e-9, t, -np.expm1(-kdt) / np.where(kd == 0, 1, kd))
        if specificity:
            s = substrate_left_specificity(tau, s0, p[0] * e, p[1], kp)
        else:
            s = substrate_left(tau, s0, p[0], p[1] * e, kp)
        return (s0 - s) + base

    per = f" {per_enzyme}" if per_enzyme else ""
    lower = {"Km": 1e-9, "Vmax": 0.0, "Vmax/Km": 0.0, "1/Km": 0.0, "Kp": 1e-9, "kd": 0.0}
    units = {"Km": "uM", "Vmax": "uM/s" + per, "Vmax/Km": "1/s" + per, "1/Km": "1/uM",
             "Kp": "uM", "kd": "1/s"}
    units.update({f"base_{i}": "uM" for i in range(n)})
    equation = ("ln(S0/S) + (S0 - S)/Km = (Vmax/Km) t" if specificity else
                "Km ln(S0/S) + (S0 - S) = Vmax t")
    return Model("integrated-mm", func, tuple(names), lambda x, y: {}, lower, {}, units,
                 equation, "Schnell & Mendoza (1997)", offsets=("1/Km",) if specificity else ())


def _guess(c: Curves, product_inhibition: bool, decay: bool):
    v0 = []
    for t, p, e in zip(c.t, c.p, c.enzyme if c.enzyme is not None else np.ones(len(c.t)),
                       strict=True):
        k = max(3, len(t) // 5)
        v0.append(np.polyfit(t[:k], p[:k], 1)[0] / e)
    vmax = max(float(np.max(v0)) * 1.5, 1e-12)
    km = float(np.median(c.s0))
    g = {"Km": km, "Vmax": vmax}
    if product_inhibition:
        g["Kp"] = 5 * km
    if decay:
        g["kd"] = 1e-2 / max(float(np.max(np.concatenate(c.t))), 1e-9)
    for i, p in enumerate(c.p):
        g[f"base_{i}"] = float(p[0])
    return g


def check_direction(c: Curves) -> None:
    """Refuse curves whose product falls: the absorbing species was given the wrong way round.

    Each curve's straight-line slope of product against time, with its SE (least squares,
    as ``scipy.stats.linregress``); a curve whose product falls by more than 3 SE contradicts
    the stated species. When most curves do, the absorbing species is the other one.
    """
    falls = []
    for name, t, p in zip(c.names, c.t, c.p, strict=True):
        if len(t) < 3 or np.ptp(t) <= 0:
            continue
        b, se = line_slope(t, p)
        if b < 0 and abs(b) > 3 * se:
            falls.append(name)
    if not falls:
        return
    other = "substrate" if c.species == "product" else "product"
    signal = "falls" if c.species == "product" else "rises"
    shown = ", ".join(falls[:5]) + (" ..." if len(falls) > 5 else "")
    if len(falls) * 2 >= len(c.names):
        raise UsageError(f"--species {c.species}, but the signal {signal} in {len(falls)} of "
                         f"{len(c.names)} curves ({shown}): the {other} is the absorbing "
                         "species here", f"give --species {other}")
    raise AnalysisError(f"the signal {signal} in curve(s) {shown}, against the other curves "
                        f"and --species {c.species}", "leave those curves out with --trace, "
                        "or check them")


@dataclass
class ProgressAnalysis:
    """The global fit, Selwyn's verdict, the constants corrected for enzyme inactivation where
    the enzyme is not stable, and the warnings."""

    fit: FitResult
    params: dict
    curves: Curves
    selwyn: dict | None
    warnings: list = field(default_factory=list)
    conversion: np.ndarray | None = None
    decay_fit: FitResult | None = None     # the fit with first-order inactivation (Selwyn)
    corrected: dict | None = None          # its constants, when the enzyme is not stable


def analyse(c: Curves, *, product_inhibition: bool = False, ci: str = "asymptotic",
            level: float = 0.95, selwyn: bool = False, unit: str = "uM") -> ProgressAnalysis:
    """Global integrated Michaelis–Menten fit (and Selwyn's test when enzyme amounts vary).

    Km, Vmax (and Kp) are reported in the concentration ``unit`` (the fit works in µM)."""
    if len(c.t) == 0:
        raise AnalysisError("no progress curves to fit", "give a file with curves")
    for name, t, s0 in zip(c.names, c.t, c.s0, strict=True):
        if not np.isfinite(s0) or s0 <= 0:
            raise UsageError(f"curve {name} has no initial substrate concentration",
                             "give --s0 VALUE, --s0-column COL or a plate map with a substrate "
                             "column")
        if len(t) < 5:
            raise AnalysisError(f"curve {name} has only {len(t)} usable readings",
                                "a progress curve needs at least 5")
    for name, p in zip(c.names, c.p, strict=True):
        if np.ptp(p) <= 0 or abs(p[-1] - p[0]) < 1e-9:
            raise AnalysisError(f"curve {name} is flat: no product is formed",
                                "check the curve, the epsilon and the pathlength")
    check_direction(c)
    if sum(len(t) for t in c.t) < 8 or (len(c.t) == 1 and len(c.t[0]) < 12):
        raise AnalysisError("a single short curve cannot separate Km from Vmax",
                            "record longer or more curves (several S0)")
    x, y = _stack(c)
    n = len(c.t)
    has_e = c.enzyme is not None
    model = _model(n, product_inhibition, False, c.per_enzyme() if has_e else "")
    g = _guess(c, product_inhibition, False)
    r = fit(model, x, y, p0=g, ci=ci, level=level)
    warnings = []
    conv = np.array([(p[-1] - p[0] + 0.0) / s0 for p, s0 in zip(c.p, c.s0, strict=True)])
    conv = np.clip(conv + np.array([_initial_product(r, i, c) for i in range(n)]) / c.s0, 0, 1)
    if np.max(conv) < 0.3:
        warnings.append(f"the curves reach at most {100 * np.max(conv):.0f} % conversion: too "
                        "little curvature for Km to be identifiable; run the assay longer")
    spec = specificity_fit(c, r, product_inhibition, ci=ci, level=level)
    params = _constants(r, spec, c, level, km_infinite_p(c, spec, product_inhibition))
    if params["Km"].ci_method == NOT_IDENTIFIABLE:      # says why the fit in Km fails
        warnings.insert(0, _first_order_warning(params, c, level, unit))
    elif not r.success:
        warnings.insert(0, f"integrated Michaelis–Menten fit not reliable: {r.message}")
    elif np.all(c.s0 < 0.1 * params["Km"].value):
        warnings.append("every S0 is far below Km (below 0.1 Km): Km and Vmax rest on the "
                        "slight curvature of nearly first-order curves; Vmax/Km is the "
                        "better determined constant")
    elif np.all(c.s0 > 10 * params["Km"].value):
        warnings.append("every S0 is far above Km (above 10 Km): Km is poorly determined")
    if product_inhibition:
        kp = r.params["Kp"]
        params["Kp"] = Param("Kp", kp.value, kp.se, kp.ci_low, kp.ci_high, kp.ci_method, "uM")
    sel, decay, corrected = None, None, None
    if selwyn:
        sel, decay = selwyn_test(c, r, product_inhibition, level, ci=ci)
    if sel is not None and not sel["enzyme_stable"]:
        corrected = corrected_constants(c, decay, product_inhibition, ci=ci, level=level,
                                        unit=unit)
    if np.isfinite(r.runs_p) and r.runs_p < RUNS_ALPHA:
        warnings.append(_runs_warning(r, decay if corrected else None, product_inhibition,
                                      sel is not None))
    if corrected:
        warnings.append(_unstable_warning(corrected))
    shown = in_unit(params, unit)
    warnings += _limit_warnings(model, r, shown)
    warnings += _limit_warnings(_model(n, product_inhibition, False, c.per_enzyme() if has_e
                                       else "", specificity=True), spec, shown)
    if corrected:
        warnings += _limit_warnings(_model(n, product_inhibition, True, c.per_enzyme()), decay,
                                    corrected, "corrected for inactivation: ")
    return ProgressAnalysis(r, shown, c, sel, warnings, conv, decay, corrected)


#: What gives a better interval than an asymptotic one that crosses a parameter's limit.
PROFILE_REMEDY = ("give --ci profile for an interval that keeps to the limit (open where the "
                  "data give no bound)")


def _limit_warnings(model: Model, r: FitResult, shown: dict, label: str = "") -> list[str]:
    """An asymptotic interval of Km, Vmax, Kp or kd reaching below 0, said with the interval
    as the table shows it (its unit) and what to do (:func:`rateabs.fitting.past_limits`)."""
    return [label + past_limit_text(shown[nm], limit, PROFILE_REMEDY)
            for nm, limit in past_limits(model, r).items()
            if nm in shown and shown[nm].ci_method == "asymptotic"]


#: Below this p of the runs test the residuals of a fit count as not random.
RUNS_ALPHA = 0.01


def _runs_warning(r: FitResult, decay: FitResult | None, product_inhibition: bool,
                  selwyn_run: bool) -> str:
    """Residuals in runs: the likely causes, each with the option that tests it (the options
    already given, and a cause Selwyn's test has ruled out, are not named again)."""
    head = (f"the residuals are not random (runs test {p_is(r.runs_p)}): the integrated "
            "Michaelis–Menten model"
            + (" with product inhibition" if product_inhibition else "")
            + " does not describe these curves well")
    causes = []
    if decay is not None:
        left = (f"its residuals are random (runs test {p_is(decay.runs_p)})"
                if not (np.isfinite(decay.runs_p) and decay.runs_p < RUNS_ALPHA) else
                f"its residuals are not random either (runs test {p_is(decay.runs_p)})")
        causes.append("loss of enzyme activity, which Selwyn's test found: the fit corrected "
                      f"for it is reported and {left}")
    if not product_inhibition:
        causes.append("inhibition by the product, which slows the curves more than substrate "
                      "depletion does: test it with --product-inhibition (fits a competitive "
                      "product-inhibition constant Kp)")
    if not selwyn_run:
        causes.append("loss of enzyme activity during the assay: test it with --selwyn COL "
                      "(Selwyn's test, on curves at two or more enzyme amounts given in column "
                      "COL)")
    causes.append("a wrong S0, molar absorptivity or pathlength, a drifting baseline or "
                  "readings past the linear range of the instrument: check those")
    return head + "; likely causes: " + "; ".join(
        f"({k}) {cause}" for k, cause in enumerate(causes, start=1))


def _unstable_warning(corrected: dict) -> str:
    """The enzyme decays: which constants are biased and which are corrected."""
    def said(name):
        p = corrected[name]
        if p.ci_method == NOT_IDENTIFIABLE:
            return f"{name} not identifiable"
        return f"{name} = {fmt_pm(p.value, p.se, unit=p.unit)}"

    return ("the enzyme is not stable during the assay (Selwyn's test): Km and Vmax of the fit "
            "that assumes a stable enzyme are biased; corrected for first-order inactivation "
            f"(at time zero): {said('Km')}, {said('Vmax')}, enzyme half-life "
            f"{fmt_pm(corrected['enzyme half-life'].value, corrected['enzyme half-life'].se)} "
            "min. A shorter assay or a stabilised enzyme avoids the correction")


def specificity_fit(c: Curves, base: FitResult, product_inhibition: bool, decay: bool = False, *,
                    ci: str = "asymptotic", level: float = 0.95) -> FitResult:
    """The global fit written in Vmax/Km and 1/Km (:func:`substrate_left_specificity`), started
    from ``base`` (the fit in Km and Vmax, with or without inactivation ``decay``).

    The same curves as ``base`` where Km is finite, so the same optimum; where S0 lies far
    below Km the Km-Vmax fit runs off along a ridge (Km and Vmax grow together, their ratio
    fixed), while here 1/Km settles at or near 0 and Vmax/Km keeps a finite SE and interval.
    """
    x, y = _stack(c)
    has_e = c.enzyme is not None
    model = _model(len(c.t), product_inhibition, decay, c.per_enzyme() if has_e else "",
                   specificity=True)
    g = base.values()
    km, vm = g.pop("Km"), g.pop("Vmax")
    starts = [{"Vmax/Km": vm / km, "1/Km": 1 / km, **g}]
    if not base.success:                    # the run-off start and the first-order limit
        starts.append({**starts[0], "1/Km": 0.0})
    fits = [fit(model, x, y, p0=p0, ci=ci, level=level) for p0 in starts]
    return min(fits, key=lambda f: f.rss)


def km_infinite_p(c: Curves, spec: FitResult, product_inhibition: bool, decay: bool = False
                  ) -> float:
    """p of the F-test of Km infinite (1/Km = 0: first-order loss of S, the same model with 1/Km
    held at 0) against the fit ``spec`` in Vmax/Km and 1/Km: the profile-likelihood criterion
    at 1/Km = 0 (Bates & Watts 1988), exact where the linearised interval of 1/Km is not. NaN
    when it cannot be computed."""
    x, y = _stack(c)
    model = _model(len(c.t), product_inhibition, decay,
                   c.per_enzyme() if c.enzyme is not None else "", specificity=True)
    return held_p(model, x, y, spec, {"1/Km": 0.0})


def _constants(r: FitResult, spec: FitResult, c: Curves, level: float, p_infinite: float,
               scale: float = 60.0) -> dict:
    """Km, Vmax, Vmax/Km (per min) and, with enzyme amounts in a molar unit, kcat and kcat/Km,
    from the fit ``r`` in Km and Vmax and the same fit in Vmax/Km and 1/Km (``spec``).

    Km counts as determined unless the curves cannot reject Km infinite (first-order loss of S)
    at the ``level``: ``p_infinite`` (:func:`km_infinite_p`) at or above 1 - level. Then Km and
    Vmax are not identifiable (null values, ci_method :data:`NOT_IDENTIFIABLE`) and Km keeps
    the lower bound 1/(upper bound of 1/Km). Vmax/Km is a fitted parameter of ``spec``, so its
    SE and interval (asymptotic or profile) are the engine's own, not a delta-method
    propagation through a ridge."""
    has_e = c.enzyme is not None
    per = f" {c.per_enzyme()}" if has_e else ""
    km, vm = r.params["Km"], r.params["Vmax"]
    vk, inv = spec.params["Vmax/Km"], spec.params["1/Km"]
    known = not p_infinite >= 1 - level             # a NaN p says nothing: Km stands
    if known:
        out = {"Km": Param("Km", km.value, km.se, km.ci_low, km.ci_high, km.ci_method, "uM"),
               "Vmax": Param("Vmax", vm.value * scale, vm.se * scale, vm.ci_low * scale,
                             vm.ci_high * scale, vm.ci_method, f"uM/min{per}")}
    else:
        low = 1 / inv.ci_high if np.isfinite(inv.ci_high) and inv.ci_high > 0 else math.nan
        out = {"Km": Param("Km", math.nan, math.nan, low, math.inf, NOT_IDENTIFIABLE, "uM"),
               "Vmax": Param("Vmax", math.nan, math.nan, math.nan, math.nan, NOT_IDENTIFIABLE,
                             f"uM/min{per}")}
    out["Vmax/Km"] = Param("Vmax/Km", vk.value * scale, vk.se * scale, vk.ci_low * scale,
                           vk.ci_high * scale, vk.ci_method, f"1/min{per}")
    try:
        e_molar = concentration_factor(c.enzyme_unit) if has_e and c.enzyme_unit else None
    except UsageError:
        e_molar = None
    if e_molar:
        if known:
            f = 1e-6 / e_molar                         # uM/s per (enzyme unit) -> 1/s
            out["kcat"] = Param("kcat", vm.value * f, vm.se * f, vm.ci_low * f, vm.ci_high * f,
                                vm.ci_method, "1/s")
        f = 1 / e_molar                                # 1/s per (enzyme unit) -> 1/(M s)
        out["kcat/Km"] = Param("kcat/Km", vk.value * f, vk.se * f, vk.ci_low * f,
                               vk.ci_high * f, vk.ci_method, "M^-1 s^-1")
    return out


def _first_order_warning(params: dict, c: Curves, level: float, unit: str) -> str:
    """Why Km and Vmax are not given, what is, and what would measure them."""
    f = 1e-6 / concentration_factor(unit)            # uM -> unit
    low = params["Km"].ci_low
    where = (f"at {100 * level:g} % Km lies above {low * f:.3g} {unit}"
             if np.isfinite(low) else "Km could be any value above the S0 range")
    vk = params["Vmax/Km"]
    return (f"Km and Vmax are not identifiable: the curves cannot be told from first-order loss "
            f"of the substrate, as when S0 is far below Km (S0 up to {np.max(c.s0) * f:.3g} "
            f"{unit}; {where}); only Vmax/Km is determined, "
            f"{fmt_pm(vk.value, vk.se, unit=vk.unit)}. To measure Km and Vmax, start curves at "
            "S0 up to Km or above")


def _initial_product(r: FitResult, i: int, c: Curves) -> float:
    """Product already formed at the first reading, by the fitted curve (reading not at t = 0)."""
    t0 = c.t[i][0]
    if t0 <= 0:
        return 0.0
    km, vm = r.value("Km"), r.value("Vmax")
    e = c.enzyme[i] if c.enzyme is not None else 1.0
    kp = r.params["Kp"].value if "Kp" in r.params else None
    return float(c.s0[i] - substrate_left(np.array([t0]), c.s0[i], km, vm * e, kp)[0])


def selwyn_test(c: Curves, base: FitResult, product_inhibition: bool, level: float = 0.95,
                alpha: float = 0.05, ci: str = "asymptotic") -> tuple[dict, FitResult]:
    """Selwyn's test as a nested comparison: is first-order enzyme inactivation needed?

    Returns the verdict (JSON-ready) and the fit with inactivation (Km and Vmax at time zero,
    kd), intervals by ``ci``."""
    if c.enzyme is None or np.unique(c.enzyme).size < 2:
        raise UsageError("Selwyn's test needs curves at two or more enzyme amounts",
                         "name the enzyme column with --selwyn COL")
    x, y = _stack(c)
    n = len(c.t)
    model = _model(n, product_inhibition, True, c.per_enzyme())
    g = base.values()
    g["kd"] = 1e-3 / max(float(np.max(x[0])), 1e-9)
    r = fit(model, x, y, p0=g, level=level, ci=ci)
    ft = f_test(base, r)
    kd = r.params["kd"]
    t_end = float(np.max(x[0]))
    loss = 1 - math.exp(-kd.value * t_end)
    significant = np.isfinite(ft["p"]) and ft["p"] < alpha
    stable = not (significant and loss > 0.05)
    if stable:
        why = (f"the curves superimpose on enzyme x time: adding enzyme inactivation does not "
               f"improve the fit (F-test {p_is(ft['p'])}); the enzyme is stable over the "
               f"{t_end / 60:.0f} min assay")
    else:
        half = math.log(2) / kd.value if kd.value > 0 else float("inf")
        why = (f"the curves do not superimpose on enzyme x time: the enzyme loses about "
               f"{100 * loss:.0f} % of its activity during the assay (inactivation half-life "
               f"{half / 60:.1f} min, F-test {p_is(ft['p'])}); initial rates and progress-curve "
               "Km and Vmax that assume a stable enzyme are biased")
    return ({"enzyme_stable": bool(stable), "reason": why, "f_test": ft,
             "kd": _kd_param(kd).to_dict(),
             "activity_lost_fraction": loss, "aicc_stable": base.aicc, "aicc_decay": r.aicc,
             "method": "Selwyn (1965) overlay, tested by a nested fit with first-order "
                       "inactivation"}, r)


def _kd_param(kd: Param) -> Param:
    """kd (1/s) with its interval kept at or above 0 (a rate of loss cannot be negative)."""
    return Param("kd", kd.value, kd.se, max(kd.ci_low, 0.0), kd.ci_high, kd.ci_method, "1/s")


def corrected_constants(c: Curves, decay: FitResult, product_inhibition: bool, *,
                        ci: str = "asymptotic", level: float = 0.95, unit: str = "uM") -> dict:
    """Km, Vmax (at time zero: the enzyme's initial activity), Vmax/Km, kcat and kcat/Km (with
    molar enzyme amounts), Kp, kd and the enzyme's half-life ln 2 / kd (min; its interval kd's
    mapped, open above when kd's reaches 0), from the fit with first-order inactivation."""
    spec = specificity_fit(c, decay, product_inhibition, decay=True, ci=ci, level=level)
    out = _constants(decay, spec, c, level,
                     km_infinite_p(c, spec, product_inhibition, decay=True))
    if product_inhibition:
        kp = decay.params["Kp"]
        out["Kp"] = Param("Kp", kp.value, kp.se, kp.ci_low, kp.ci_high, kp.ci_method, "uM")
    kd = _kd_param(decay.params["kd"])
    out["kd"] = kd
    ln2 = math.log(2) / 60                                       # -> min
    out["enzyme half-life"] = Param(
        "enzyme half-life", ln2 / kd.value if kd.value > 0 else math.inf,
        ln2 * kd.se / kd.value ** 2 if kd.value > 0 else math.nan,
        ln2 / kd.ci_high if kd.ci_high > 0 else math.inf,
        ln2 / kd.ci_low if kd.ci_low > 0 else math.inf, kd.ci_method, "min")
    return in_unit(out, unit)
