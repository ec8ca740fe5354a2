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
from dataclasses import dataclass, field, replace
from functools import partial

import numpy as np

from .distributions import t_two_sided
from .errors import AnalysisError, UsageError
from .fitting import (
    NOT_IDENTIFIABLE,
    Comparison,
    FitResult,
    Param,
    compare,
    f_test,
    fd_step,
    fit,
    fmt_p,
    fmt_pm,
)
from .models import (
    DECAYING_FIRST_ORDER,
    LINE,
    RATE_LAWS,
    Model,
    delayed,
    guess_decay,
    mixed2,
    time_origin,
)
from .options import DRIFT_CHOICES, ORDERS
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


#: Beyond this ΔAICc an order has essentially no support (Burnham & Anderson 2002, Model
#: Selection and Multimodel Inference, 2nd edn, section 2.6: Δ > 10 "essentially none"); orders
#: within it carry weight and are shown as not told apart.
EVIDENCE_DELTA = 10.0
#: A linear baseline drift is fitted when the extra-sum-of-squares F-test supports it at this
#: level (the nested-model rule of :func:`rateabs.fitting.compare`).
DRIFT_ALPHA = 0.05
#: Fewest readings for a drift term (four parameters and room for the test).
DRIFT_MIN_READINGS = 12
#: Fit-quality gate: the model does not describe the trace when the runs test of the residual
#: signs gives p below RUNS_ALPHA, or the residual SD exceeds the noise SD of the readings
#: (from their second differences, as in :func:`rateabs.slopes.noise_sigma`) by LACK_OF_FIT
#: times with at least LACK_OF_FIT_MIN_N readings. Their false-alarm rates on correct models are
#: measured in benchmarks/completion_coverage.py.
RUNS_ALPHA = 1e-3
LACK_OF_FIT = 1.5
LACK_OF_FIT_MIN_N = 20


@dataclass
class RateLawResult:
    """One trace's rate-law analysis.

    ``order`` is the rate law's order ("0", "1", "2", "mixed"); ``model`` adds "+drift" when a
    linear baseline drift was fitted with it. ``plausible`` lists the models (one per order,
    with or without drift) whose ΔAICc is within :data:`EVIDENCE_DELTA` of the best: more than
    one means the data do not tell the orders apart. ``quality`` is the fit-quality gate
    (:func:`fit_quality`); ``flags`` are short words, ``notes`` sentences for a person.
    The fit counts time from ``t0`` (s in the file's own times): the file's zero, or the first
    usable reading where that lies far from it (:func:`rateabs.models.time_origin`), or
    ``fit_from`` where the user gave one (the readings before it are not fitted); A0 is the
    absorbance at that origin. ``shape`` is a delayed start or a stall the data show
    (:func:`other_shape`), else None.
    """

    trace: str
    order: str
    fit: FitResult
    k_conc: Param | None
    half_life: Param | None
    c0: Param | None
    comparison: Comparison | None = None
    fits: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    model: str = ""
    plausible: tuple = ()
    quality: dict = field(default_factory=dict)
    drift_test: dict | None = None
    flags: list = field(default_factory=list)
    t0: float = 0.0
    shape: dict | None = None
    fit_from: float | None = None

    @property
    def drift(self) -> Param | None:
        """The fitted baseline drift (AU/s), or None without a drift term."""
        return self.fit.params.get("drift")

    def to_dict(self) -> dict:
        """JSON result with the fixed fields ``trace``, ``order``, ``params``, ``half_life_s``."""
        d = {"trace": self.trace, "order": self.order, "model": self.model or self.order,
             "params": {k: shown(p) for k, p in self.fit.params.items()},
             "half_life_s": shown(self.half_life) if self.half_life else None,
             "k_conc": shown(self.k_conc) if self.k_conc else None,
             "c0_M": self.c0.to_dict() if self.c0 else None,
             "aicc": self.fit.aicc, "n": self.fit.n, "sigma_A": self.fit.sigma,
             "runs_test_p": self.fit.runs_p, "quality": self.quality,
             "orders_not_told_apart": list(self.plausible) if len(self.plausible) > 1 else [],
             "drift_test": self.drift_test, "flags": list(self.flags),
             "time_origin_s": self.t0, "notes": self.notes + list(self.fit.notes),
             "other_shape": self.shape, "fit_from_s": self.fit_from}
        if self.comparison is not None:
            d["evidence"] = self.comparison.to_dict()
        return d


#: Absorbance levels and the drift: measured from an arbitrary zero, so no relative-SE rule.
OFFSETS = ("A0", "Ainf", "drift")


def identifiable(p: Param | None) -> bool:
    """Whether a parameter is determined by the data: a fixed value, or a finite value and SE
    with (for a rate, time or other scale; not for an absorbance level, :data:`OFFSETS`) the SE
    at most 10 times the value, the engine's own limit."""
    if p is None:
        return False
    if p.fixed:
        return True
    if not (math.isfinite(p.value) and math.isfinite(p.se)):
        return False
    return p.name in OFFSETS or not (p.value != 0 and p.se / abs(p.value) > 10)


def shown(p: Param) -> dict:
    """The JSON parameter object, with value, SE and interval null and ``ci_method`` "not
    identifiable" when the data do not determine it (never a bare number without its
    uncertainty); reversed or non-finite bounds become null."""
    d = p.to_dict()
    if not identifiable(p):
        d.update(value=None, se=None, ci_low=None, ci_high=None, ci_method=NOT_IDENTIFIABLE)
    elif d["ci_low"] is not None and d["ci_high"] is not None and d["ci_low"] > d["ci_high"]:
        d.update(ci_low=None, ci_high=None)
    return d


def map_param(p: Param, fn, name: str, unit: str, decreasing: bool = False) -> Param:
    """A parameter through a monotone function; the interval maps exactly, SE by the delta rule.

    A decreasing map of a positive parameter whose interval reaches 0 has an open upper bound;
    the bounds always come out in order."""
    v = fn(p.value)
    h = float(fd_step(p.value, 1e-300))
    with np.errstate(all="ignore"):
        deriv = (fn(p.value + h) - fn(p.value - h)) / (2 * h)
        lo, hi = fn(p.ci_low), fn(p.ci_high)
    if decreasing:
        lo, hi = hi, lo
        if p.ci_low <= 0:           # a positive parameter not bounded away from zero
            hi = float("inf")
    lo, hi = float(lo), float(hi)
    if lo > hi:
        lo, hi = hi, lo
    return Param(name, float(v), float(abs(deriv) * p.se), lo, hi, p.ci_method, unit, p.fixed)


def magnitude(p: Param, name: str, unit: str) -> Param:
    """|p| with its interval: the interval of |x| over [low, high] (from 0 when it spans 0)."""
    lo, hi = sorted((abs(p.ci_low), abs(p.ci_high)))
    if p.ci_low <= 0 <= p.ci_high:
        lo = 0.0
    return Param(name, abs(p.value), p.se, lo, hi, p.ci_method, unit, p.fixed)


def with_drift(model: Model) -> Model:
    """``model`` plus a linear baseline drift, A(t) + drift t (drift in absorbance per second)."""
    base = model.func

    def func(t, *p):
        return base(t, *p[:-1]) + p[-1] * t

    order = {"1": 1, "2": 2}.get(model.name)
    guess = ((lambda t, y: guess_decay(t, y, order, drift=True)) if order
             else (lambda t, y: {**model.guess(t, y), "drift": 0.0}))
    return Model(f"{model.name}+drift", func, model.params + ("drift",), guess, model.lower,
                 model.upper,
                 {**model.units, "drift": "AU/s"}, f"{model.equation} + drift t", model.source,
                 model.offsets + ("drift",))


#: Suffix of an order fitted with its end point held where the charge puts it (``1+charge``).
AT_CHARGE = "+charge"


def known_end(ph: Photometry, end_absorbance: float | None, rising: bool) -> tuple | None:
    """The end point the charge gives: ("change", d), Ainf = A0 + d with d = |Δε| b c0 signed
    the way the trace moves, or ("level", E), Ainf = E for an expected end absorbance; None
    without the charge."""
    if end_absorbance is not None:
        return ("level", float(end_absorbance))
    deps = ph.delta_eps(rising)
    if ph.c0_M is None or not deps:
        return None
    d = deps * ph.pathlength_cm * ph.c0_M
    return ("change", d if rising else -d)


def at_charge(order: str, end: tuple) -> Model:
    """Order 1 or 2 with its end absorbance fixed by the charge (:func:`known_end`): free A0 and
    k only. A trace too straight to show its own end point leaves Ainf and k undetermined
    together; with the end known the curvature left to fit is k's alone."""
    base = RATE_LAWS[order]
    kind, v = end

    def func(t, A0, k):
        return base.func(t, A0, A0 + v if kind == "change" else v, k)

    def guess(t, y):
        from scipy.optimize import minimize_scalar

        slope, a0 = np.polyfit(t, y, 1)
        d = abs(v) if kind == "change" else abs(a0 - v)
        d = d if d > 0 else 1.0
        k0 = max(abs(slope), 1e-12) / (d if order == "1" else d * d)

        def rss(u):
            with np.errstate(all="ignore"):
                r = y - func(t, a0, math.exp(u))
            out = float(r @ r)
            return out if math.isfinite(out) else 1e300

        u0 = math.log(k0)
        u = minimize_scalar(rss, bounds=(u0 - 7, u0 + 7), method="bounded").x
        return {"A0": float(a0), "k": math.exp(u)}

    units = {"A0": "AU", "k": base.units["k"]}
    how = (f"Ainf = A0 {'+' if v >= 0 else '-'} {abs(v):.4g} AU (the charge)"
           if kind == "change" else f"Ainf = {v:g} AU (the expected end absorbance)")
    return Model(f"{order}{AT_CHARGE}", func, ("A0", "k"), guess, {"k": 0.0}, {}, units,
                 f"{base.equation}, {how}", base.source, ("A0",))


def fit_at_charge(order: str, t, y, end: tuple, fix: dict | None = None,
                  ci: str = "asymptotic", level: float = 0.95) -> FitResult:
    """Fit :func:`at_charge` with the shared engine; the result carries Ainf as well (derived:
    A0's value and interval moved by the charge, or the given end absorbance, fixed), and a
    model function of (A0, Ainf, k) that takes Ainf from A0, so every user of a rate-law fit
    reads it as it reads a free one."""
    model = at_charge(order, end)
    r = fit(model, t, y, fix={k: v for k, v in (fix or {}).items() if k in model.params},
            ci=ci, level=level)
    kind, v = end
    a0 = r.params["A0"]
    if kind == "change":
        ainf = Param("Ainf", a0.value + v, a0.se, a0.ci_low + v, a0.ci_high + v,
                     "A0 plus the charge", "AU")
    else:
        ainf = Param("Ainf", v, 0.0, v, v, "given", "AU", fixed=True)
    base = RATE_LAWS[order].func

    def func(t, A0, Ainf, k):
        return base(t, A0, A0 + v if kind == "change" else v, k)

    return replace(r, params={"A0": a0, "Ainf": ainf, "k": r.params["k"]}, func=func)


def tied_to_charge(r: FitResult) -> bool:
    """Whether a fit's end point is held by the charge (:func:`fit_at_charge`)."""
    return r.model.endswith(AT_CHARGE)


def overshoot(t, y, sigma: float) -> tuple[str, float] | None:
    """("rises then falls" or "falls then rises", time of the turn) when the trace passes
    through an interior extreme beyond both of its ends, by more than 6 noise SDs of a moving
    mean and more than a fifth of its excursion; else None. No single integrated rate law
    (a monotone approach to an end value) can describe such a trace."""
    m = max(3, y.size // 15)
    if y.size < 3 * m:
        return None
    sm = np.convolve(y, np.ones(m) / m, mode="valid")
    ts = np.convolve(t, np.ones(m) / m, mode="valid")
    start, end = sm[0], sm[-1]
    limit = 6 * sigma / math.sqrt(m)
    for kind, i in (("rises then falls", int(np.argmax(sm))), ("falls then rises",
                                                               int(np.argmin(sm)))):
        peak = sm[i]
        beyond = min(abs(peak - start), abs(peak - end))
        excursion = max(abs(peak - start), abs(peak - end))
        inside = (peak - max(start, end) > 0) if kind == "rises then falls" else (
            min(start, end) - peak > 0)
        if inside and beyond > limit and beyond > 0.2 * excursion:
            return kind, float(ts[i])
    return None


def _check_trace(t, y, name, expect) -> tuple[bool, float]:
    """Whether the trace rises, and its noise SD; refuses traces no rate law can describe."""
    if t.size < 4:
        raise AnalysisError(f"trace {name} has only {t.size} usable readings",
                            "a rate law needs at least 4 (more is better)")
    g = Grid([name], t[None], y[None], np.ones((1, t.size), bool))
    sigma = float(noise_sigma(g)[0])
    turn = overshoot(t, y, sigma)
    if turn is not None:
        raise AnalysisError(f"trace {name} {turn[0]} (turning near {turn[1] / 60:.3g} min from "
                            "the time origin): no "
                            "single integrated rate law describes it",
                            "fit the part before or after the turn (an intermediate that forms "
                            "and decays needs a consecutive-reaction model)")
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
    return rising, sigma


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
                 {"k": 0.0}, {}, {"A0": "AU", "Ainf": "AU", "k": "L/(mol s)"},
                 "A + B -> P, [A]0 != [B]0", "Atkins, Physical Chemistry", ("A0", "Ainf"))


def fit_quality(r: FitResult, noise: float) -> dict:
    """The fit-quality gate: runs test of the residual signs and the residual SD against the
    readings' own noise SD. ``fits`` is False with the ``reason`` when either fails."""
    ratio = r.sigma / noise if noise > 0 and math.isfinite(r.sigma) else float("nan")
    why = []
    if math.isfinite(r.runs_p) and r.runs_p < RUNS_ALPHA:
        why.append(f"the residuals run in long stretches of one sign (runs test "
                   f"{p_is(r.runs_p)})")
    if r.n >= LACK_OF_FIT_MIN_N and math.isfinite(ratio) and ratio > LACK_OF_FIT:
        why.append(f"the residual SD is {ratio:.2g} times the readings' noise")
    return {"fits": not why, "runs_test_p": r.runs_p, "sigma_over_noise": ratio,
            "noise_A": noise, "reason": "; ".join(why)}


def _fit_candidates(t, y, orders, fix, drift, level, a0, b0):
    """Every candidate model fitted with asymptotic intervals: {name: FitResult}, {name: why}."""
    fits, failed = {}, {}
    if drift == "on" and t.size < DRIFT_MIN_READINGS:
        raise AnalysisError(f"a drift term needs at least {DRIFT_MIN_READINGS} readings; this "
                            f"trace has {t.size}", "leave --drift at auto or off")
    for o in orders:
        base = mixed_model(a0 or 0, b0 or 0) if o == "mixed" else RATE_LAWS[o]
        can_drift = o not in ("0", "mixed") and t.size >= DRIFT_MIN_READINGS
        models = [] if drift == "on" and can_drift else [base]
        if drift != "off" and can_drift:
            models.append(with_drift(base))
        for model in models:
            f = {k: v for k, v in (fix or {}).items() if k in model.params}
            try:
                fits[model.name] = fit(model, t, y, fix=f, ci="asymptotic", level=level)
            except AnalysisError as exc:
                failed[model.name] = exc.problem
    return fits, failed


def _with_drift_if_supported(fits: dict, o: str, drift: str) -> tuple[str, dict | None]:
    """The model of order ``o`` to use: with the drift term where the F-test supports it
    (``auto``) or always (``on``); and the drift test."""
    plain, drifted = fits.get(o), fits.get(f"{o}+drift")
    tied = fits.get(o + AT_CHARGE)
    if tied is not None and tied.success and not (plain is not None and plain.success):
        return tied.model, None
    if drifted is None or not drifted.success:
        return o, None
    if plain is None or drift == "on":
        return drifted.model, None
    test = f_test(plain, drifted)
    use = test["p"] < DRIFT_ALPHA and drifted.aicc < plain.aicc
    return (drifted.model if use else o), test


def _choose(name, fits, failed, orders, drift):
    """The chosen model, the comparison (auto), the plausible models and the drift test.

    Orders are compared without the drift term (a drift lets a wrong order mimic the right
    one); the drift is then tested within each order that carries weight."""
    if drift == "on":
        base = {o: fits.get(f"{o}+drift", fits.get(o)) for o in orders}
    else:
        base = {o: fits.get(o) for o in orders}
    for o in orders:                 # an order fitted only with its end held by the charge
        tied = fits.get(o + AT_CHARGE)
        if tied is not None and tied.success and not (base.get(o) is not None
                                                      and base[o].success):
            base[o] = tied
    base = {o: r for o, r in base.items() if r is not None}
    if not base:
        raise AnalysisError(f"no rate law could be fitted to trace {name}",
                            "; ".join(f"order {k}: {v}" for k, v in failed.items()))
    if len(orders) == 1:
        model, test = _with_drift_if_supported(fits, orders[0], drift)
        return model, None, (model,), test
    undefined = [o for o, r in base.items() if not math.isfinite(r.aicc)]
    if undefined:
        raise AnalysisError(
            f"trace {name}: the orders cannot be compared: with {base[undefined[0]].n} readings "
            f"AICc is undefined for order {' and '.join(undefined)} (n - k - 1 <= 0)",
            "measure more readings, fix a parameter (e.g. --fix Ainf=0), or choose --order")
    comp = compare({r.model: r for r in base.values()}, (),
                   {o: w for o, w in failed.items() if "+" not in o
                    and not (o in base and tied_to_charge(base[o]))})
    plausible_orders = [row["model"].split("+")[0] for row in comp.rows
                        if row["delta_aicc"] <= EVIDENCE_DELTA]
    chosen_order = comp.chosen.split("+")[0]
    picks = {o: _with_drift_if_supported(fits, o, drift) for o in plausible_orders}
    if chosen_order not in picks:
        picks[chosen_order] = _with_drift_if_supported(fits, chosen_order, drift)
    chosen, test = picks[chosen_order]
    plausible = tuple(picks[o][0] for o in plausible_orders)
    return chosen, comp, plausible, test


def fit_trace(t, y, name: str = "trace", *, order: str = "auto", photometry: Photometry = None,
              fix: dict | None = None, ci: str = "profile", level: float = 0.95,
              expect: str = "any", a0: float | None = None, b0: float | None = None,
              drift: str = "off", end_absorbance: float | None = None,
              fit_from: float | None = None) -> RateLawResult:
    """Fit one trace's integrated rate law (or every order, for ``auto``, chosen by AICc).

    ``drift`` adds a linear baseline drift to orders 1 and 2 when the F-test supports it
    (``auto``, the commands' default), always (``on``) or never (``off``, the default here, so
    that callers such as ``grade`` keep the plain laws). Refuses (AnalysisError) a trace that is too
    short, flat, moves against ``expect``, or rises then falls; and an ``auto`` choice the data
    cannot make because AICc is undefined (too few readings). Times are counted from the
    origin :func:`rateabs.models.time_origin` sets (its file time is ``law.t0``), or from
    ``fit_from`` (s, in the file's own times) where given: the readings before it are left out
    and the reaction is taken to start there (an induction period; :func:`start_at`).

    With the charge (``photometry`` with c0 and an epsilon, or ``end_absorbance``) an ``auto``
    choice in which orders 1 and 2 cannot be fitted with a free end point (a trace too straight
    to show it) fits them with the end point the charge gives (:func:`fit_at_charge`), so that
    the orders are compared on the evidence. A chosen law that fails the fit-quality gate, or
    needs a drift term, is checked against a delayed start and a stalling reaction
    (:func:`other_shape`).
    """
    if order not in ORDERS:
        raise UsageError(f"unknown order {order!r}", f"use one of {', '.join(ORDERS)}")
    if drift not in DRIFT_CHOICES:
        raise UsageError(f"unknown drift choice {drift!r}", f"use one of {', '.join(DRIFT_CHOICES)}")
    ph = photometry or Photometry()
    notes = []
    if fit_from is None:
        t, t0 = time_origin(t)
        y = np.asarray(y, float)
    else:
        t, y, t0, said = start_at(t, y, fit_from, name, order)
        notes.append(said)
    rising, noise = _check_trace(t, y, name, expect)
    orders = ["0", "1", "2"] if order == "auto" else [order]
    fits, failed = _fit_candidates(t, y, orders, fix, drift, level, a0, b0)
    end = known_end(ph, end_absorbance, rising)
    tied = _fit_tied_orders(t, y, fits, failed, end, fix, level) if (
        order == "auto" and end is not None) else []
    chosen, comp, plausible, drift_test = _choose(name, fits, failed, orders, drift)
    untested = _untested_orders(comp, chosen)
    if ci != "asymptotic":        # intervals of the chosen model by the method asked for
        if chosen.endswith(AT_CHARGE):
            fits[chosen] = fit_at_charge(chosen.split("+")[0], t, y, end, fix, ci, level)
        else:
            model = _model_named(chosen, a0, b0)
            f = {k: v for k, v in (fix or {}).items() if k in model.params}
            fits[chosen] = fit(model, t, y, fix=f, ci=ci, level=level)
    r = fits[chosen]
    base = chosen.split("+")[0]
    k_conc, half, c0, more = _derived(r, base, ph, rising, level)
    notes += more
    quality = fit_quality(r, noise)
    flags = _flags(r, quality, plausible, notes, t, half)
    notes += _order_notes(tied, untested, end, flags) + _before_zero_note(t)
    law = RateLawResult(name, base, r, k_conc, half, c0, comp, fits, notes, chosen, plausible,
                        quality, drift_test, flags, t0, fit_from=fit_from)
    if base in ("0", "1", "2") and (not quality["fits"] or "drift" in r.params):
        law.shape = other_shape(t, y, law, fit_from is not None)
        _shape_notes(law)
    _explain(law)
    return law


def _order_notes(tied: list, untested: list, end, flags: list) -> list[str]:
    """Notes on orders fitted with the end point the charge gives (``tied``) and on orders
    that could not be fitted at all (``untested``: flagged ``order_not_determined``)."""
    notes = []
    if tied:
        notes.append(f"order{'s' if len(tied) > 1 else ''} {' and '.join(tied)} could not be "
                     "fitted with a free end point (the trace is too nearly straight to show "
                     f"it); the charge gives the end point ({_end_words(end)}), so "
                     f"{'they were' if len(tied) > 1 else 'it was'} fitted with the end held "
                     f"there ({', '.join(o + AT_CHARGE for o in tied)}) and the orders compared "
                     "on the evidence")
    if untested:
        flags.append("order_not_determined")
        notes.append(f"order{'s' if len(untested) > 1 else ''} {' and '.join(untested)} could "
                     "not be fitted (not identifiable): the trace is too nearly straight to "
                     "show its curvature, so order 0 was kept for want of the others, not on "
                     "evidence against them; a first- or second-order reaction early in its "
                     "course looks the same (a longer run, the charge, or --order decides)")
    return notes


def _before_zero_note(t) -> list[str]:
    """A note where readings lie before the file's time zero."""
    before = int(np.sum(t < 0))
    if not before:
        return []
    return [f"{before} reading{'s' if before > 1 else ''} lie{'' if before > 1 else 's'}"
            f" before the file's time zero (from {float(np.min(t)):g} s): "
            "fitted with the rest, but A0, the conversion and every time are counted "
            "from the file's zero, where the reaction is taken to start; if it started "
            "elsewhere, give that time with --fit-from"]


#: Fewest readings a fit from --fit-from keeps: a rate law's four (given order), six where the
#: orders are compared (AICc needs n > k + 1 with k = 4 for orders 1 and 2).
FIT_FROM_MIN = {"auto": 6}


def start_at(t, y, start: float, name: str, order: str = "auto"):
    """The readings from ``start`` (s, the file's own times) on, with times counted from it:
    (t, y, start, a sentence saying so). Refused (UsageError, naming --fit-from) when
    ``start`` lies before the first reading or leaves too few readings after it."""
    t = np.asarray(t, float)
    y = np.asarray(y, float)
    need = FIT_FROM_MIN.get(order, 4)
    if t.size and start < float(np.min(t)):
        raise UsageError(f"--fit-from {start:g} s lies before the first reading of trace {name} "
                         f"({float(np.min(t)):g} s in the file's times)",
                         "give a time within the run, in the file's own times")
    keep = t >= start
    if int(keep.sum()) < need:
        raise UsageError(f"--fit-from {start:g} s leaves {int(keep.sum())} reading"
                         f"{'' if keep.sum() == 1 else 's'} of trace {name} (the last at "
                         f"{float(np.max(t)):g} s); a rate law needs at least {need}"
                         + (" to compare orders" if order == "auto" else ""),
                         "give an earlier time")
    dropped = int((~keep).sum())
    said = (f"fitted from --fit-from {start:g} s: the reaction is taken to start there; A0, the "
            "conversion and every time are counted from it"
            + (f" ({dropped} earlier reading{'s' if dropped > 1 else ''}, "
               f"{float(np.min(t[~keep])):g} to {float(np.max(t[~keep])):g} s, not fitted)"
               if dropped else ""))
    return t[keep] - start, y[keep], float(start), said


def _end_words(end: tuple) -> str:
    kind, v = end
    return (f"Ainf = A0 {'+' if v >= 0 else '-'} {abs(v):.4g} AU" if kind == "change"
            else f"Ainf = {v:g} AU")


def _fit_tied_orders(t, y, fits, failed, end, fix, level) -> list[str]:
    """Orders 1 and 2 that could not be fitted with a free end point, fitted with the end the
    charge gives (into ``fits``, or their failure into ``failed``); the orders so fitted."""
    if "Ainf" in (fix or {}):
        return []
    done = []
    for o in ("1", "2"):
        plain = fits.get(o)
        if plain is not None and plain.success:
            continue
        try:
            r = fit_at_charge(o, t, y, end, fix, "asymptotic", level)
        except AnalysisError as exc:
            failed[o + AT_CHARGE] = exc.problem
            continue
        fits[r.model] = r
        if r.success:
            done.append(o)
    return done


#: A delayed start or a stall is said when its law beats every plain candidate by more than
#: this ΔAICc (:data:`EVIDENCE_DELTA`: the plain laws then have essentially no support).
SHAPE_DELTA = EVIDENCE_DELTA
#: A stall is said when the upper bound of the fraction of its change the stalling law levels
#: off at lies below this.
STALL_BELOW = 0.95


def other_shape(t, y, law: RateLawResult, started: bool) -> dict | None:
    """A delayed start or a stall, where the data show one: the chosen law fails the quality
    gate or needs a drift term, and a law of that shape fits far better (ΔAICc over
    :data:`SHAPE_DELTA` below every plain candidate fitted).

    * delayed start: the chosen order's law, flat at A0 until a delay td
      (:func:`rateabs.models.delayed`); said when td leaves at least two readings flat before
      it (not when ``started``: --fit-from already set the start);
    * stall: first order with a rate constant that decays at first order
      (:data:`rateabs.models.DECAYING_FIRST_ORDER`), said when the fraction of its change it
      levels off at is below :data:`STALL_BELOW` at the upper bound.

    Returns {"kind", "model", "delta_aicc", "params" (JSON objects), ...} or None."""
    plain = [r for r in law.fits.values() if r.success and math.isfinite(r.aicc)]
    if not plain:
        return None
    best = min(r.aicc for r in plain)
    found = []
    if not started:
        model = delayed(RATE_LAWS[law.order])
        try:
            r = fit(model, t, y, ci="asymptotic", level=law.fit.level)
        except AnalysisError:
            r = None
        td = r.params["td"] if r is not None else None
        if (r is not None and r.success and math.isfinite(r.aicc) and best - r.aicc > SHAPE_DELTA
                and int(np.sum(t < td.value)) >= 2):
            found.append(("delay", r, {"td_s": td}))
    try:
        r = fit(DECAYING_FIRST_ORDER, t, y, ci="asymptotic", level=law.fit.level)
    except AnalysisError:
        r = None
    if r is not None and r.success and math.isfinite(r.aicc) and best - r.aicc > SHAPE_DELTA:
        level = _stall_level(r)
        if level.ci_high < STALL_BELOW:
            found.append(("stall", r, {"levels_off_at": level}))
    if not found:
        return None
    kind, r, extra = min(found, key=lambda f: f[1].aicc)
    return {"kind": kind, "model": r.model, "equation": _SHAPE_EQUATIONS[kind],
            "delta_aicc": best - r.aicc, "quality": fit_quality(r, law.quality["noise_A"]),
            "params": {k: shown(p) for k, p in r.params.items()},
            **{k: shown(p) for k, p in extra.items()}, "_fit": r}


_SHAPE_EQUATIONS = {"delay": "A = A0 until td, then the law in t - td",
                    "stall": DECAYING_FIRST_ORDER.equation}


def _stall_level(r: FitResult) -> Param:
    """The fraction of its change a stalling law levels off at, 1 - exp(-k/kd), with its
    delta-method SE and t interval."""
    from .completion import delta_se

    def g(p):
        return -math.expm1(-p["k"] / p["kd"]) if p["kd"] > 0 else 1.0

    v = g(r.values())
    se = delta_se(r, g)
    tq = t_two_sided(r.level, max(r.dof, 1))
    return Param("levels_off_at", v, se, max(v - tq * se, 0.0), min(v + tq * se, 1.0),
                 "asymptotic", "fraction of its change")


def _shape_notes(law: RateLawResult) -> None:
    """The flag and the note of a delayed start or a stall (:func:`other_shape`)."""
    sh = law.shape
    if sh is None:
        return
    r = sh.pop("_fit")
    k = r.params["k"]
    if sh["kind"] == "delay":
        td = r.params["td"]
        law.flags.append("delayed_start")
        law.notes.append(
            f"DELAYED START: the trace stays flat until about {td.value:.0f} s "
            f"[{td.ci_low:.0f}, {td.ci_high:.0f}] (an induction period, or a late start) and "
            f"then follows order {law.order}: the delayed law fits far better (ΔAICc "
            f"{sh['delta_aicc']:.0f}; k = {fmt_pm(k.value, k.se, unit=k.unit)}). The fit "
            f"above counts from {law.t0:g} s, so its k, conversion and times are not the "
            f"reaction's: refit with --fit-from {_round_time(td.value)} s to count from the "
            "start")
    else:
        lv = sh["levels_off_at"]
        law.flags.append("stall_suspected")
        drift = law.drift
        why = (f" (the drift of {fmt_pm(drift.value * 6e4, drift.se * 6e4)} mAU/min fitted with "
               f"order {law.order} most likely stands for that difference, not for the "
               "baseline)" if drift is not None else "")
        law.notes.append(
            f"STALL SUSPECTED: the trace does not approach its end as order {law.order} "
            f"does{why}: a first-order law whose rate constant decays (a dying catalyst or "
            f"enzyme) fits far better (ΔAICc {sh['delta_aicc']:.0f}) and levels off at "
            f"{100 * lv['value']:.0f} % [{100 * lv['ci_low']:.0f}, {100 * lv['ci_high']:.0f}] "
            "of the change it set out on. The end point reached is then not the reaction's "
            "end: give the charge (--c0 with --epsilon, or --end-absorbance) to test it")


def _round_time(x: float) -> str:
    """A time in s to two significant figures for an option a person types."""
    return f"{float(f'{x:.2g}'):g}" if x >= 10 else f"{x:.1f}"


def _untested_orders(comp: Comparison | None, chosen: str) -> list[str]:
    """The curved orders (1, 2) that could not be fitted when the straight line (order 0) was
    chosen by AICc: order 0 is their limit of no curvature, so their failure is no evidence
    for it (a first-order run at 5 % conversion is as straight as a zero-order one)."""
    if comp is None or chosen.split("+")[0] != "0":
        return []
    return [o for o in ("1", "2") if o in comp.failed]


def _model_named(name: str, a0, b0) -> Model:
    base_name, _, extra = name.partition("+")
    base = mixed_model(a0 or 0, b0 or 0) if base_name == "mixed" else RATE_LAWS[base_name]
    return with_drift(base) if extra else base


def _derived(r: FitResult, order: str, ph: Photometry, rising: bool, level: float):
    """Rate constant in concentration units, half-life and [A]0 where the photometry allows."""
    notes = []
    k = r.params["k"]
    deps = ph.delta_eps(rising)
    b = ph.pathlength_cm
    c0 = None
    if ph.c0_M is not None:
        c0 = Param("c0", ph.c0_M, 0.0, ph.c0_M, ph.c0_M, "given", "mol/L", fixed=True)
    elif order != "0" and deps:
        d_a = abs(r.value("A0") - r.value("Ainf"))
        se = math.hypot(r.params["A0"].se, r.params["Ainf"].se) / (deps * b)
        tq = t_two_sided(level, max(r.dof, 1))
        c0 = Param("c0", d_a / (deps * b), se, max(d_a / (deps * b) - tq * se, 0.0),
                   d_a / (deps * b) + tq * se, "asymptotic", "mol/L")
    k_conc = half = None
    if order == "1":
        k_conc = k
        half = map_param(k, lambda x: LN2 / x, "half_life", "s", decreasing=True)
    elif order == "2":
        if deps:
            k_conc = map_param(k, lambda x: x * deps * b, "k", "L/(mol s)")
        d_a = abs(r.value("A0") - r.value("Ainf"))
        half = map_param(k, lambda x: 1.0 / (x * d_a), "half_life", "s", decreasing=True)
    elif order == "0":
        if deps:
            k_conc = magnitude(map_param(k, lambda x: x / (deps * b), "k", "mol/(L s)"), "k",
                               "mol/(L s)")
        if c0 is not None and k_conc is not None:
            half = map_param(k_conc, lambda x: c0.value / (2 * x), "half_life", "s",
                             decreasing=True)
        else:
            notes.append("zero-order half-life needs [A]0: give --c0 with --epsilon")
    elif order == "mixed":
        k_conc = k
        notes.append("mixed second order has no single half-life")
    return k_conc, half, c0, notes


def _flags(r: FitResult, quality: dict, plausible, notes: list, t, half) -> list:
    """Flag words of a rate-law result, each explained by a note (see :data:`FLAGS`)."""
    flags = []
    if not r.success:
        flags.append("not_identifiable")
        notes.append(f"fit not reliable: {r.message}")
    elif not all(identifiable(p) for p in r.params.values()):
        flags.append("not_identifiable")
        notes.append("a parameter is not determined by these data (its SE is not finite or "
                     "over 10 times its value)")
    if not quality["fits"]:
        flags.append("misfit")
        notes.append(f"the rate law does not describe the trace: {quality['reason']}")
    if len(plausible) > 1:
        flags.append("orders_not_told_apart")
        notes.append(f"the data do not tell apart {', '.join(plausible)} (each within ΔAICc "
                     f"{EVIDENCE_DELTA:g} of the best); the order is uncertain")
    if half is not None and not np.isfinite(half.ci_high):
        notes.append("the half-life's upper bound is open: the data do not bound k away from 0")
    if "drift" in r.params:
        flags.append("drift_fitted")
    if half is not None and t[-1] - t[0] < half.value:
        flags.append("short_run")
        notes.append("the run covers less than one half-life: k and Ainf are poorly determined")
    return flags


def _explain(law: RateLawResult) -> None:
    """A note on the drift term when one was fitted."""
    if law.drift is not None:
        d = law.drift
        test = f"; F-test against no drift: {p_is(law.drift_test['p'])}" if law.drift_test else ""
        law.notes.append(f"a linear baseline drift of {fmt_pm(d.value * 6e4, d.se * 6e4)} "
                         f"mAU/min was fitted with the rate law{test}")


def p_is(p: float) -> str:
    """'p = 0.003' or 'p < 1e-16' for a sentence."""
    text = fmt_p(p)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


#: Flag words of ``ratelaw`` results and what each means.
FLAGS = {
    "not_identifiable": "a parameter is not determined by the data; it is shown as not "
                        "identifiable, not as a number",
    "misfit": "the rate law does not describe the trace (runs test or residual SD against the "
              "noise)",
    "orders_not_told_apart": f"more than one order lies within ΔAICc {EVIDENCE_DELTA:g} of the "
                             "best",
    "short_run": "the run covers less than one half-life",
    "drift_fitted": "a linear baseline drift was fitted with the rate law",
    "order_not_determined": "order 0 was kept because orders 1 and 2 could not be fitted (a "
                            "nearly straight trace), not on evidence against them",
    "delayed_start": "the trace stays flat before the reaction starts (an induction period): "
                     "a delayed law fits far better; refit with --fit-from",
    "stall_suspected": "the trace levels off faster than the law allows: a law whose rate "
                       "constant decays (a reaction that stops short) fits far better",
}


def guggenheim(t, y, delta: float | None = None, level: float = 0.95) -> dict:
    """First-order k without an end value (Guggenheim 1926).

    ln|A(t) - A(t + delta)| = const - k t for readings paired a constant interval ``delta`` apart
    (default: half the run, which common practice asks to be two or three half-lives). Readings are
    paired by interpolating the trace at t + delta.
    """
    t, _ = time_origin(t)
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
