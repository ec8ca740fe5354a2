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

from .distributions import t_two_sided
from .errors import AnalysisError, UsageError
from .fitting import FitResult, Param, f_test, fit, line_slope, p_is
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
    a = 1 - km / kp
    b = km * (1 + s0 / kp)
    out = np.empty_like(t)
    zero = np.abs(a) < 1e-12
    out[zero] = s0[zero] * np.exp(-vmax[zero] * t[zero] / b[zero])
    pos = (a > 0) & ~zero
    if pos.any():
        out[pos] = (b[pos] / a[pos]) * lambertw_exp(np.log(a[pos] * s0[pos] / b[pos])
                                                    + (a[pos] * s0[pos] - vmax[pos] * t[pos])
                                                    / b[pos])
    neg = (a < 0) & ~zero
    if neg.any():
        arg = (a[neg] * s0[neg] / b[neg]) * np.exp((a[neg] * s0[neg] - vmax[neg] * t[neg])
                                                    / b[neg])
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


def _model(n: int, product_inhibition: bool, decay: bool, per_enzyme: str = "") -> Model:
    names = ["Km", "Vmax"] + (["Kp"] if product_inhibition else []) + (["kd"] if decay else [])
    names += [f"base_{i}" for i in range(n)]

    def func(x, *p):
        km, vm = p[0], p[1]
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
        s = substrate_left(tau, s0, km, vm * e, kp)
        return (s0 - s) + base

    lower = {"Km": 1e-9, "Vmax": 0.0, "Kp": 1e-9, "kd": 0.0}
    units = {"Km": "uM", "Vmax": "uM/s" + (f" {per_enzyme}" if per_enzyme else ""),
             "Kp": "uM", "kd": "1/s"}
    units.update({f"base_{i}": "uM" for i in range(n)})
    return Model("integrated-mm", func, tuple(names), lambda x, y: {}, lower, {}, units,
                 "Km ln(S0/S) + (S0 - S) = Vmax t", "Schnell & Mendoza (1997)")


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
    """The global fit, Selwyn's verdict and the warnings."""

    fit: FitResult
    params: dict
    curves: Curves
    selwyn: dict | None
    warnings: list = field(default_factory=list)
    conversion: np.ndarray | None = None


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
    if not r.success:
        warnings.append(f"integrated Michaelis–Menten fit not reliable: {r.message}")
    km = r.params["Km"]
    vm = r.params["Vmax"]
    conv = np.array([(p[-1] - p[0] + 0.0) / s0 for p, s0 in zip(c.p, c.s0, strict=True)])
    conv = np.clip(conv + np.array([_initial_product(r, i, c) for i in range(n)]) / c.s0, 0, 1)
    if np.max(conv) < 0.3:
        warnings.append(f"the curves reach at most {100 * np.max(conv):.0f} % conversion: too "
                        "little curvature for Km to be identifiable; run the assay longer")
    ratio = c.s0 / km.value
    if np.all(ratio < 0.1):
        warnings.append("every S0 is far below Km (below 0.1 Km): only Vmax/Km is determined")
    if np.all(ratio > 10):
        warnings.append("every S0 is far above Km (above 10 Km): Km is poorly determined")
    scale = 60.0
    unit_v = "uM/min" + (f" {c.per_enzyme()}" if has_e else "")
    params = {"Km": Param("Km", km.value, km.se, km.ci_low, km.ci_high, km.ci_method, "uM"),
              "Vmax": Param("Vmax", vm.value * scale, vm.se * scale, vm.ci_low * scale,
                            vm.ci_high * scale, vm.ci_method, unit_v)}
    if product_inhibition:
        kp = r.params["Kp"]
        params["Kp"] = Param("Kp", kp.value, kp.se, kp.ci_low, kp.ci_high, kp.ci_method, "uM")
    if np.isfinite(r.runs_p) and r.runs_p < 0.01:
        warnings.append(f"the residuals are not random (runs test {p_is(r.runs_p)}): the "
                        "integrated Michaelis–Menten model does not describe these curves well")
    sel = selwyn_test(c, r, product_inhibition, level) if selwyn else None
    if sel is not None and not sel["enzyme_stable"]:
        warnings.append("the enzyme is not stable during the assay (Selwyn's test): Km and Vmax "
                        "from this fit are biased; shorten the assay or stabilise the enzyme")
    return ProgressAnalysis(r, in_unit(params, unit), c, sel, warnings, conv)


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
                alpha: float = 0.05) -> dict:
    """Selwyn's test as a nested comparison: is first-order enzyme inactivation needed?"""
    if c.enzyme is None or np.unique(c.enzyme).size < 2:
        raise UsageError("Selwyn's test needs curves at two or more enzyme amounts",
                         "name the enzyme column with --selwyn COL")
    x, y = _stack(c)
    n = len(c.t)
    model = _model(n, product_inhibition, True, c.per_enzyme())
    g = base.values()
    g["kd"] = 1e-3 / max(float(np.max(x[0])), 1e-9)
    r = fit(model, x, y, p0=g, level=level)
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
               "Km and Vmax are biased")
    tq = t_two_sided(level, max(r.dof, 1))
    return {"enzyme_stable": bool(stable), "reason": why, "f_test": ft,
            "kd": Param("kd", kd.value, kd.se, max(kd.value - tq * kd.se, 0.0),
                        kd.value + tq * kd.se, kd.ci_method, "1/s").to_dict(),
            "activity_lost_fraction": loss, "aicc_stable": base.aicc, "aicc_decay": r.aicc,
            "method": "Selwyn (1965) overlay, tested by a nested fit with first-order "
                      "inactivation"}
