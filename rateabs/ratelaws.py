"""Integrated rate laws fitted directly to absorbance: order, rate constant, half-life.

Zero, first and second order (rate = k[A]^2) as A(t) = Ainf + (A0 - Ainf) f(t), so reactant,
product or both may absorb; with molar absorptivities the rate constant is also given in
concentration units through delta-epsilon = epsilon_product - epsilon_reactant. Mixed second
order A + B with unequal initial concentrations; Guggenheim's method for first-order runs without
an end value (Guggenheim 1926, Phil. Mag. 2:538); a pseudo-first-order series gives the
second-order constant from kobs vs the excess concentration. ``auto`` chooses the order by AICc.

Half-lives: zero order t½ = [A]0 / (2k); first order t½ = ln 2 / k; second order
t½ = 1 / (k [A]0) (any physical chemistry text, e.g. Atkins).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import partial

import numpy as np
from scipy import stats

from .errors import AnalysisError, UsageError
from .fitting import Comparison, FitResult, Param, compare, fd_step, fit
from .models import LINE, RATE_LAWS, Model, guess_decay, mixed2
from .options import ORDERS
from .slopes import noise_sigma
from .traces import Grid

LN2 = math.log(2.0)


@dataclass(frozen=True)
class Photometry:
    """How absorbance maps to concentration: delta-epsilon (L/mol/cm) and pathlength (cm)."""

    epsilon: float | None = None
    epsilon_product: float | None = None
    pathlength_cm: float = 1.0
    c0_M: float | None = None

    def delta_eps(self, rising: bool) -> float | None:
        """|epsilon_P - epsilon_R|; one epsilon alone is the reactant's (decay) or product's."""
        if self.epsilon is None and self.epsilon_product is None:
            return None
        if self.epsilon is not None and self.epsilon_product is not None:
            d = abs(self.epsilon_product - self.epsilon)
            if d == 0:
                raise UsageError("reactant and product have the same epsilon: absorbance does not "
                                 "change with the reaction", "check --epsilon and "
                                 "--epsilon-product")
            return d
        return self.epsilon if self.epsilon is not None else self.epsilon_product


@dataclass
class RateLawResult:
    """One trace's rate-law analysis."""

    trace: str
    order: str
    fit: FitResult
    k_conc: Param | None
    half_life: Param | None
    c0: Param | None
    comparison: Comparison | None = None
    fits: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    def to_dict(self) -> dict:
        """JSON result with the fixed fields ``trace``, ``order``, ``params``, ``half_life_s``."""
        d = {"trace": self.trace, "order": self.order,
             "params": {k: p.to_dict() for k, p in self.fit.params.items()},
             "half_life_s": self.half_life.to_dict() if self.half_life else None,
             "k_conc": self.k_conc.to_dict() if self.k_conc else None,
             "c0_M": self.c0.to_dict() if self.c0 else None,
             "aicc": self.fit.aicc, "n": self.fit.n, "sigma_A": self.fit.sigma,
             "runs_test_p": self.fit.runs_p, "notes": self.notes + list(self.fit.notes)}
        if self.comparison is not None:
            d["evidence"] = self.comparison.to_dict()
        return d


def map_param(p: Param, fn, name: str, unit: str, decreasing: bool = False) -> Param:
    """A parameter through a monotone function; the interval maps exactly, SE by the delta rule."""
    v = fn(p.value)
    h = float(fd_step(p.value, 1e-300))
    deriv = (fn(p.value + h) - fn(p.value - h)) / (2 * h)
    with np.errstate(divide="ignore"):
        lo, hi = fn(p.ci_low), fn(p.ci_high)
    if decreasing:
        lo, hi = hi, lo
        if p.ci_low <= 0:           # a positive parameter not bounded away from zero
            hi = float("inf")
    return Param(name, float(v), float(abs(deriv) * p.se), float(lo), float(hi), p.ci_method, unit,
                 p.fixed)


def _check_trace(t, y, name, expect):
    if t.size < 4:
        raise AnalysisError(f"trace {name} has only {t.size} usable readings",
                            "a rate law needs at least 4 (more is better)")
    g = Grid([name], t[None], y[None], np.ones((1, t.size), bool))
    sigma = float(noise_sigma(g)[0])
    change = float(np.mean(y[-3:]) - np.mean(y[:3]))
    if abs(change) < 3 * sigma:
        raise AnalysisError(f"trace {name} is flat: its change ({change:+.3g} A) is within the "
                            f"noise ({sigma:.2g} A)", "there is no reaction to fit in this trace")
    rising = change > 0
    if expect == "decay" and rising:
        raise AnalysisError(f"trace {name} rises ({change:+.3g} A) but a decay was expected",
                            "check the trace, or drop --expect decay")
    if expect == "rise" and not rising:
        raise AnalysisError(f"trace {name} falls ({change:+.3g} A) but a rise was expected",
                            "check the trace, or drop --expect rise")
    return rising


def mixed_model(a0: float, b0: float) -> Model:
    """Mixed second-order model for given initial concentrations (mol/L) of A and B."""
    if a0 <= 0 or b0 <= 0:
        raise UsageError("mixed second order needs positive [A]0 and [B]0", "give --a0 and --b0")
    if math.isclose(a0, b0, rel_tol=1e-6):
        raise UsageError("[A]0 equals [B]0: that is plain second order", "use --order 2")

    def guess(t, y):
        g = guess_decay(t, y, 1)
        return {"A0": g["A0"], "Ainf": g["Ainf"], "k": g["k"] / min(a0, b0)}

    return Model("mixed", partial(mixed2, a0=a0, b0=b0), ("A0", "Ainf", "k"), guess,
                 {"k": 0.0}, {}, {"A0": "A", "Ainf": "A", "k": "L/(mol s)"},
                 "A + B -> P, [A]0 != [B]0", "Atkins, Physical Chemistry")


def fit_trace(t, y, name: str = "trace", *, order: str = "auto", photometry: Photometry = None,
              fix: dict | None = None, ci: str = "profile", level: float = 0.95,
              expect: str = "any", a0: float | None = None, b0: float | None = None
              ) -> RateLawResult:
    """Fit one trace's integrated rate law (or every order, for ``auto``)."""
    if order not in ORDERS:
        raise UsageError(f"unknown order {order!r}", f"use one of {', '.join(ORDERS)}")
    ph = photometry or Photometry()
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    rising = _check_trace(t, y, name, expect)
    orders = ["0", "1", "2"] if order == "auto" else [order]
    fits, failed = {}, {}
    for o in orders:
        model = mixed_model(a0 or 0, b0 or 0) if o == "mixed" else RATE_LAWS[o]
        f = {k: v for k, v in (fix or {}).items() if k in model.params}
        try:
            fits[o] = fit(model, t, y, fix=f, ci=ci if order != "auto" else "asymptotic",
                          level=level)
        except AnalysisError as exc:
            failed[o] = exc.problem
    if not fits:
        raise AnalysisError(f"no rate law could be fitted to trace {name}",
                            "; ".join(f"order {k}: {v}" for k, v in failed.items()))
    comp = None
    chosen = orders[0]
    if order == "auto":
        comp = compare(fits, (), failed)
        chosen = comp.chosen
        if ci != "asymptotic":        # intervals of the chosen order by the method asked for
            f = {k: v for k, v in (fix or {}).items() if k in RATE_LAWS[chosen].params}
            fits[chosen] = fit(RATE_LAWS[chosen], t, y, fix=f, ci=ci, level=level)
    r = fits[chosen]
    notes = []
    if not r.success:
        notes.append(f"fit not reliable: {r.message}")
    k = r.params["k"]
    deps = ph.delta_eps(rising)
    b = ph.pathlength_cm
    c0 = None
    if chosen != "0":
        d_a = abs(r.value("A0") - r.value("Ainf"))
        if ph.c0_M is not None:
            c0 = Param("c0", ph.c0_M, 0.0, ph.c0_M, ph.c0_M, "given", "mol/L", fixed=True)
        elif deps:
            se = math.hypot(r.params["A0"].se, r.params["Ainf"].se) / (deps * b)
            tq = stats.t.ppf(0.5 + level / 2, max(r.dof, 1))
            c0 = Param("c0", d_a / (deps * b), se, d_a / (deps * b) - tq * se,
                       d_a / (deps * b) + tq * se, "asymptotic", "mol/L")
    elif ph.c0_M is not None:
        c0 = Param("c0", ph.c0_M, 0.0, ph.c0_M, ph.c0_M, "given", "mol/L", fixed=True)
    k_conc = None
    half = None
    if chosen == "1":
        k_conc = k
        half = map_param(k, lambda x: LN2 / x, "half_life", "s", decreasing=True)
    elif chosen == "2":
        if deps:
            k_conc = map_param(k, lambda x: x * deps * b, "k", "L/(mol s)")
        d_a = abs(r.value("A0") - r.value("Ainf"))
        half = map_param(k, lambda x: 1.0 / (x * d_a), "half_life", "s", decreasing=True)
    elif chosen == "0":
        if deps:
            k_conc = map_param(k, lambda x: abs(x) / (deps * b), "k", "mol/(L s)")
        if c0 is not None and k_conc is not None:
            half = map_param(k_conc, lambda x: c0.value / (2 * x), "half_life", "s",
                              decreasing=True)
        else:
            notes.append("zero-order half-life needs [A]0: give --c0 with --epsilon")
    elif chosen == "mixed":
        k_conc = k
        notes.append("mixed second order has no single half-life")
    if half is not None and not np.isfinite(half.ci_high):
        notes.append("the half-life's upper bound is open: the data do not bound k away from 0")
    if t[-1] - t[0] < (half.value if half else 0):
        notes.append("the run covers less than one half-life: k and Ainf are poorly determined")
    return RateLawResult(name, chosen, r, k_conc, half, c0, comp, fits, notes)


def guggenheim(t, y, delta: float | None = None, level: float = 0.95) -> dict:
    """First-order k without an end value (Guggenheim 1926).

    ln|A(t) - A(t + delta)| = const - k t for readings paired a constant interval ``delta`` apart
    (default: half the run, which common practice asks to be two or three half-lives). Readings are
    paired by interpolating the trace at t + delta.
    """
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    span = t[-1] - t[0]
    delta = span / 2 if delta is None else float(delta)
    if not 0 < delta < span:
        raise UsageError(f"the Guggenheim interval {delta:g} s must lie inside the run",
                         f"choose it between 0 and {span:g} s")
    sel = t + delta <= t[-1]
    ts = t[sel]
    d = np.abs(y[sel] - np.interp(ts + delta, t, y))
    ok = d > 0
    if ok.sum() < 3:
        raise AnalysisError("too few readings for Guggenheim's method",
                            "use a shorter interval or a longer run")
    r = fit(LINE, ts[ok], np.log(d[ok]), level=level)
    slope = r.params["slope"]
    k = Param("k", -slope.value, slope.se, -slope.ci_high, -slope.ci_low, slope.ci_method, "1/s")
    return {"method": "Guggenheim (1926)", "delta_s": delta, "k": k, "n_pairs": int(ok.sum()),
            "half_life": map_param(k, lambda x: LN2 / x, "half_life", "s", decreasing=True),
            "fit": r}


def pseudo_first_order(kobs: list[Param], conc_M, level: float = 0.95) -> dict:
    """Second-order constant from kobs = k2 [B] + k0 across a pseudo-first-order series.

    Weighted least squares with weights 1/SE(kobs); the intercept k0 (first-order background or a
    reverse reaction) is reported with its interval.
    """
    x = np.asarray(conc_M, float)
    y = np.array([p.value for p in kobs])
    sd = np.array([p.se for p in kobs])
    if np.unique(x).size < 2:
        raise AnalysisError("a pseudo-first-order series needs at least two excess concentrations",
                            "add runs at other concentrations")
    weighting = "sd" if np.all(np.isfinite(sd)) and np.all(sd > 0) and x.size > 2 else "none"
    r = fit(LINE, x, y, weighting=weighting, sd=sd if weighting == "sd" else None, level=level)
    if weighting == "sd" and r.dof > 0:
        # scatter beyond the stated SEs widens the intervals (scale by the reduced chi-square)
        chi = r.rss / r.dof
        if chi > 1:
            r = fit(LINE, x, y, weighting="sd", sd=sd * math.sqrt(chi), level=level)
    k2, k0 = r.params["slope"], r.params["intercept"]
    return {"k2": Param("k2", k2.value, k2.se, k2.ci_low, k2.ci_high, k2.ci_method, "L/(mol s)"),
            "k0": Param("k0", k0.value, k0.se, k0.ci_low, k0.ci_high, k0.ci_method, "1/s"),
            "fit": r, "weighting": weighting}
