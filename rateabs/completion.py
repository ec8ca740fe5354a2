"""Reaction completion: conversion now, time to a target conversion, complete or not.

The order is chosen as ``ratelaw`` chooses it (AICc over orders 0, 1 and 2, a linear baseline
drift where the F-test supports it; :func:`rateabs.ratelaws.fit_trace`) unless the user fixes
it. Every order within ΔAICc :data:`~rateabs.ratelaws.EVIDENCE_DELTA` of the best carries
weight: each gets its own forecast, the headline interval spans them all, and the run is called
complete only when it is complete under every one of them. With the drift at ``auto`` each of
those orders is forecast both with and without the drift term (:func:`_forecasts` says why: a
nested drift term always carries weight, and its F-test has little power).

Conversion against the fitted end point is X(t) = 1 - f(t): first order X = 1 - exp(-k t),
t* = -ln(1 - X*)/k; second order X = 1 - 1/(1 + q t) with q = k |A0 - Ainf| (1/s),
t* = X*/(q (1 - X*)). Both depend on one rate parameter alone, for which the model is linear in
every other parameter (A0, Ainf, drift), so its profile-likelihood interval is exact and cheap
(:func:`rateabs.fitting.separable_profile`); t* and X are monotone in it, so their intervals
are that interval mapped (profile intervals are invariant under monotone maps; Bates & Watts
1988).

With the charge (``c0`` with an epsilon and the pathlength, or an expected end absorbance) the
conversion is also measured against the charge, |A(t) - A0| / |ΔA_charge|, and the fitted end
point is checked against it: short of the charge by more than 3 SE and
:data:`CHARGE_TOLERANCE` it is a stall (the reaction stops early: a dead catalyst, a lost
reagent), beyond it a mismatch (epsilon, c0 or pathlength wrong, or a side reaction). A straight
trace (order 0) has an end point only through the charge.

Rule for ``complete``: the lower confidence bound of the conversion at the last reading has
reached the target under every order that carries weight, against the charge as well when it
is given; the fit passes the quality gate (:func:`rateabs.ratelaws.fit_quality`); and the fitted
end point neither stalls short of the charge nor lies below zero absorbance.

A forecast reaching beyond :data:`EXTRAPOLATION_LIMIT` times the observed span is flagged
``extrapolated`` with its multiple; a run below :data:`LOW_CONVERSION` is flagged
``low_conversion``: there the orders are seldom told apart (``benchmarks/completion_coverage.py``
measures how seldom).

A predicted end point is no process-safety assessment: runaway, sampling and mixing hazards
follow the site's own rules.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .distributions import t_two_sided
from .errors import UsageError
from .fitting import NOT_IDENTIFIABLE, FitResult, Param, fd_step, fmt_pm, separable_profile
from .ratelaws import (
    Photometry,
    RateLawResult,
    fit_trace,
    identifiable,
    map_param,
    shown,
    tied_to_charge,
)

CAUTION = ("A predicted end point is no process-safety assessment: runaway, sampling and mixing "
           "hazards follow the site's own rules.")

#: Observed conversion below which the run is flagged ``low_conversion``.
LOW_CONVERSION = 0.5
#: The unit of a conversion: a fraction of the full change (the tables show it in per cent).
FRACTION = "fraction (0-1)"
#: A forecast further than this multiple of the observed span (from the reaction's zero time to
#: the last reading) is flagged ``extrapolated``.
EXTRAPOLATION_LIMIT = 3.0
#: The fitted end point agrees with the charge within 3 SE or this fraction of the charge,
#: whichever is larger (epsilon, c0 and the pathlength carry a few per cent that users seldom
#: state; common practice).
CHARGE_TOLERANCE = 0.05
#: A fitted end absorbance whose upper bound lies below this is impossible (AU).
NEGATIVE_END = -0.01

#: Flag words of a completion result and what each means ("this may be wrong because ...").
FLAGS = {
    "orders_not_told_apart": "more than one order carries weight: a forecast under each, the "
                             "headline interval spans them",
    "low_conversion": f"the run has covered less than {100 * LOW_CONVERSION:g} % of the change; "
                      "orders are seldom told apart there",
    "extrapolated": f"the forecast reaches beyond {EXTRAPOLATION_LIMIT:g} times the observed "
                    "span",
    "misfit": "the rate law does not describe the trace (fit-quality gate)",
    "stall": "the fitted end point falls short of the charge",
    "charge_mismatch": "the fitted end point lies beyond the charge",
    "not_identifiable": "a parameter the forecast needs is not determined by the data",
    "no_end_point": "a straight line (order 0) carries weight and the charge is not given",
    "open_interval": "the data do not bound the rate away from zero: no upper time bound",
    "end_below_zero": "the fitted end absorbance lies below zero, which is impossible",
    "short_run": "the run covers less than one half-life",
    "drift_not_told_apart": "with a baseline drift allowed the data give no forecast: the one "
                            "shown assumes a stable baseline",
    "drift_fitted": "a baseline drift was fitted: an instrument drift, or a reaction the law "
                    "does not quite describe; the forecast leans on the drift staying linear",
    "order_not_determined": "order 0 was kept because orders 1 and 2 could not be fitted (a "
                            "nearly straight trace): the forecast is the straight line's, and a "
                            "slowing first- or second-order reaction would take longer",
    "delayed_start": "the trace stays flat before the reaction starts (an induction period): "
                     "the fit, its conversion and times count from the wrong moment; refit "
                     "with --fit-from",
    "stall_suspected": "without the charge, the shape of the trace says the reaction levels "
                       "off short of its end (a law whose rate constant decays fits far "
                       "better): the end point reached is not completion",
}


@dataclass(frozen=True)
class Charge:
    """The absorbance change the full charge gives: ``delta_A`` = |Δε| b c0, or an expected end
    absorbance ``end_A`` (the change is then |end_A - A0|, with the fitted A0)."""

    delta_A: float | None = None
    end_A: float | None = None
    source: str = ""

    def change(self, a0: float) -> float:
        """|ΔA| of the full charge for a trace starting at ``a0``."""
        return self.delta_A if self.delta_A is not None else abs(self.end_A - a0)


def charge_of(photometry: Photometry | None, end_absorbance: float | None,
              rising: bool = True) -> Charge | None:
    """The charge from c0 with an epsilon (and the pathlength), or from an end absorbance."""
    ph = photometry or Photometry()
    if end_absorbance is not None:
        if ph.c0_M is not None:
            raise UsageError("both an end absorbance and c0 give the charge",
                             "give only one of --end-absorbance and --c0")
        return Charge(end_A=float(end_absorbance), source=f"expected end absorbance "
                      f"{end_absorbance:g} AU")
    if ph.c0_M is None:
        return None
    deps = ph.delta_eps(rising)
    if not deps:
        raise UsageError("c0 gives the charge only with an epsilon",
                         "give --epsilon (or --chromophore, --epsilon-product) with --c0")
    da = deps * ph.pathlength_cm * ph.c0_M
    return Charge(delta_A=da, source=f"c0 {ph.c0_M * 1e6:.4g} uM x |Δε| {deps:.5g} M^-1 cm^-1 "
                  f"x {ph.pathlength_cm:g} cm = {da:.4g} AU")


@dataclass
class Forecast:
    """The forecast under one model (an order, with or without drift)."""

    model: str
    order: str
    weight: float
    rate: Param | None
    conversion: Param | None
    t_target: Param | None
    why: str = ""
    end_vs_charge: Param | None = None
    drift_for_one_se: float | None = None

    def to_dict(self) -> dict:
        """JSON form of one model's forecast."""
        return {"model": self.model, "order": self.order, "aicc_weight": self.weight,
                "drift_moving_it_one_se_A_per_s": self.drift_for_one_se,
                "rate": shown(self.rate) if self.rate else None,
                "conversion": shown(self.conversion) if self.conversion else None,
                "t_target_s": shown(self.t_target) if self.t_target else None,
                "end_over_charge": shown(self.end_vs_charge) if self.end_vs_charge else None,
                "no_forecast_because": self.why or None}


@dataclass
class Completion:
    """Conversion, forecast and verdict for one trace."""

    trace: str
    target: float
    t_now: float
    conversion: Param
    t_target: Param | None
    complete: bool
    rule: str
    end_absorbance: Param
    law: RateLawResult
    forecasts: list = field(default_factory=list)
    basis: str = "fitted end point"
    charge: Charge | None = None
    charge_conversion: Param | None = None
    verdict: str = ""
    why_no_forecast: str = ""
    flags: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    extrapolation: float | None = None
    model: str = ""

    @property
    def k(self) -> Param:
        """The rate constant of the chosen order: for order 1 the forecasts' own k (profile
        interval, widened for an unseen drift where allowed), else the fit's k; the interval
        spans the chosen order's models with and without the drift term."""
        order = self.model.split("+")[0]
        same = [f for f in self.forecasts if f.order == order]

        def k_of(model):
            f = next((f for f in same if f.model == model), None)
            if f is not None and order == "1" and f.rate is not None:
                return f.rate
            return self.law.fits.get(model, self.law.fit).params["k"]

        ks = [k_of(f.model) for f in same if f.model != self.model]
        main = k_of(self.model)
        finite = [p for p in ks if math.isfinite(p.ci_low) and math.isfinite(p.ci_high)]
        return _envelope([main, *finite], main, 1 + len(finite))

    @property
    def k_conc(self) -> Param | None:
        """The rate constant in concentration units (the charge's epsilon and pathlength) with
        the interval of :attr:`k`: the same models' spread, scaled as the chosen fit's k is."""
        kc, kf = self.law.k_conc, self.law.fits.get(self.model, self.law.fit).params["k"]
        if kc is None or self.model != self.law.model:
            return None
        if not (kf.value > 0 and kc.value > 0):
            return kc
        f = kc.value / kf.value
        return map_param(self.k, lambda x: x * f, kc.name, kc.unit)

    @property
    def claim(self) -> str:
        """What the verdict claims: "complete" (against the charge), "end point reached" (the
        trace has stopped changing; without the charge a stall looks the same) or
        "not complete"."""
        if not self.complete:
            return "not complete"
        return "complete" if self.basis == "charge" else "end point reached"

    @property
    def orders(self) -> list:
        """The orders forecast (each with and without the drift term where it was fitted)."""
        return list(dict.fromkeys(f.order for f in self.forecasts))

    def to_dict(self) -> dict:
        """JSON result: ``trace``, ``conversion``, ``target``, ``t_target_s``, ``complete``."""
        no = Param("t_target", math.nan, math.nan, math.nan, math.nan, "no forecast", "s")
        tt = self.t_target or no
        fit = self.law.fits.get(self.model, self.law.fit)
        return {"trace": self.trace, "order": self.model.split("+")[0], "model": self.model,
                "target": self.target, "time_origin_s": self.law.t0, "t_now_s": self.t_now,
                "conversion": shown(self.conversion), "conversion_basis": self.basis,
                "conversion_of_charge": shown(self.charge_conversion)
                if self.charge_conversion else None,
                "t_target_s": shown(tt),
                "no_forecast_because": self.why_no_forecast or None,
                "t_remaining_s": max(tt.value - self.t_now, 0.0) if self.t_target else None,
                "extrapolation_multiple": self.extrapolation,
                "complete": self.complete, "claim": self.claim, "verdict": self.verdict, "rule": self.rule,
                "end_absorbance": shown(self.end_absorbance),
                "charge": self.charge.source if self.charge else None,
                "k": shown(self.k),
                "k_conc": shown(self.k_conc) if self.k_conc is not None else None,
                "drift_A_per_s": shown(fit.params["drift"]) if "drift" in fit.params else None,
                "half_life_s": shown(self.law.half_life) if self.law.half_life else None,
                "forecasts": [f.to_dict() for f in self.forecasts],
                "orders_not_told_apart": self.orders if len(self.orders) > 1 else [],
                "quality": self.law.quality, "flags": list(self.flags),
                "notes": list(self.notes)}


# --------------------------------------------------------------------------- one model


def _shape(order: str):
    """f(theta, t), the fraction of the change still to come, for the rate parameter theta."""
    if order == "1":
        return lambda th, t: np.exp(-th * t)
    return lambda th, t: 1.0 / (1.0 + th * t)


def _time_to(order: str, x: float):
    """t*(theta) for target conversion x of the fitted change; infinite at a rate of zero (an
    interval of the rate that reaches 0 leaves the time open above)."""
    if order == "1":
        return lambda th: -math.log(1 - x) / th if th > 0 else math.inf
    return lambda th: x / ((1 - x) * th) if th > 0 else math.inf


def delta_se(r: FitResult, g) -> float:
    """SE of g(values) by the delta method with the fit's covariance (central differences)."""
    if r.cov is None:
        return float("nan")
    vals = r.values()
    grad = []
    for nm in r.free:
        h = float(fd_step(vals[nm], 1e-9))
        up, dn = dict(vals), dict(vals)
        up[nm] += h
        dn[nm] -= h
        grad.append((g(up) - g(dn)) / (2 * h))
    grad = np.array(grad)
    return float(math.sqrt(max(grad @ r.cov @ grad, 0.0)))


def rate_parameter(r: FitResult, order: str, level: float) -> Param:
    """The rate parameter the forecast depends on, with its exact profile interval: k (1/s) for
    order 1, q = k |A0 - Ainf| (1/s, the initial first-order rate) for order 2."""
    theta = rate_parameter_value(r, order)
    name = "k" if order == "1" else "q"
    if r.params["k"].fixed:
        return Param(name, theta, 0.0, theta, theta, "fixed", "1/s", fixed=True)
    shape = _shape(order)
    t, w = r.x, r.weights
    cols = {"A0": lambda f: f, "Ainf": lambda f: 1 - f, "drift": lambda f: t}
    if tied_to_charge(r) and not r.params["Ainf"].fixed:
        # Ainf = A0 + d: A = A0 + d (1 - f), linear in A0 with the charge's part d (1 - f)
        d = r.value("Ainf") - r.value("A0")
        se = delta_se(r, lambda p: p["k"] if order == "1" else p["k"] * abs(d))
        cols = {"A0": lambda f: np.ones_like(f), "Ainf": lambda f: d * (1 - f)}
        free, held = ["A0"], {"Ainf": 1.0}
    else:
        se = delta_se(r, lambda p: p["k"] if order == "1" else
                      p["k"] * abs(p["A0"] - p["Ainf"]))
        free = [nm for nm in cols if nm in r.params and not r.params[nm].fixed]
        held = {nm: r.params[nm].value for nm in cols if nm in r.params and r.params[nm].fixed}
    if not free or not theta > 0:
        return Param(name, theta, se, math.nan, math.nan, NOT_IDENTIFIABLE, "1/s")

    def offset(th):                # the held parameters' part, which moves with the rate
        f = shape(th, t)
        return sum((v * cols[nm](f) for nm, v in held.items()), np.zeros_like(t))

    lo, hi = separable_profile(lambda th: np.column_stack([cols[nm](shape(th, t))
                                                           for nm in free]),
                               r.y, theta, r.dof, level, w, offset=offset)
    return Param(name, theta, se, lo, hi, "profile", "1/s")


def _ratio_to_charge(r: FitResult, charge: Charge) -> Param:
    """|Ainf - A0| / ΔA_charge with its SE and t interval."""
    v = r.values()

    def g(p):
        return abs(p["Ainf"] - p["A0"]) / charge.change(p["A0"])

    val, se = g(v), delta_se(r, g)
    tq = t_two_sided(r.level, max(r.dof, 1))
    return Param("end_over_charge", val, se, val - tq * se, val + tq * se, "asymptotic", "ratio")


def _end_check(ratio: Param) -> str:
    """"agrees", "stall" or "mismatch" for the fitted end over the charge."""
    room = max(3 * ratio.se if math.isfinite(ratio.se) else 0.0, CHARGE_TOLERANCE)
    if ratio.value < 1 - room:
        return "stall"
    if ratio.value > 1 + room:
        return "mismatch"
    return "agrees"


def forecast_curve(r: FitResult, order: str, target: float, t_now: float, level: float,
                   charge: Charge | None, allow_drift: bool = True) -> Forecast:
    """Forecast under one fitted first- or second-order model (with or without drift).

    With ``allow_drift`` and no drift term in the model, the rate's interval is widened for a
    baseline drift the readings cannot show (:func:`drift_shift`)."""
    rate = rate_parameter(r, order, level)
    shift = None
    tied = tied_to_charge(r)
    if allow_drift and not tied and "drift" not in r.params and math.isfinite(rate.ci_low):
        shift = drift_shift(r, order)
        rate = widened(rate, shift, r.dof, level)
    conv = map_param(rate, lambda th: 1 - float(_shape(order)(th, t_now)), "conversion", FRACTION)
    ratio = _ratio_to_charge(r, charge) if charge and not tied else None
    fc = Forecast(r.model, order, 0.0, rate, conv, None, end_vs_charge=ratio)
    if not identifiable(r.params["k"]) or not math.isfinite(rate.ci_low):
        fc.why = "the rate constant is not identifiable from these data"
    elif ratio is not None and _end_check(ratio) == "stall":
        fc.why = (f"the fitted end point is {100 * ratio.value:.0f} % of the charge: "
                  f"{100 * target:g} % of the charge is never reached")
    elif ratio is not None and _end_check(ratio) == "mismatch":
        fc.why = (f"the fitted end point is {100 * ratio.value:.0f} % of the charge, more change "
                  "than the charge can give")
    else:
        time_of = _time_to(order, target)
        fc.t_target = map_param(rate, time_of, "t_target", "s", decreasing=True)
        th = rate.value
        if shift and fc.t_target.value > t_now:                      # still ahead
            moved = abs(time_of(th + shift) - time_of(max(th - shift, th / 2))) / 2
            trial = r.sigma / max(float(np.ptp(r.x)), 1e-300)
            fc.drift_for_one_se = float(trial * fc.t_target.se / moved) if moved > 0 else None
    return fc


def drift_shift(r: FitResult, order: str) -> float:
    """How far the rate parameter moves when a baseline drift of one noise SD over the run is
    taken out of the readings (half the difference between the two signs).

    At partial conversion a drift that small cannot be seen in the readings (its F-test has no
    power: the end point takes it up), yet it moves a long forecast; completion widens the
    rate's interval by it, adding it in quadrature, so that the forecast holds for a baseline
    stable to within the noise over the run. The rate is refitted by variable projection."""
    from scipy.optimize import minimize_scalar

    t, w = r.x, r.weights
    shape = _shape(order)
    theta0 = rate_parameter_value(r, order)
    trial = r.sigma / max(float(np.ptp(t)), 1e-300)

    def best_theta(y):
        def rss(u):
            f = shape(math.exp(u), t)
            B = np.column_stack([f, 1 - f]) * w[:, None]
            c = np.linalg.lstsq(B, y * w, rcond=None)[0]
            res = y * w - B @ c
            return float(res @ res)
        u0 = math.log(theta0)
        return math.exp(minimize_scalar(rss, bounds=(u0 - 1, u0 + 1), method="bounded",
                                        options={"xatol": 1e-9}).x)

    return abs(best_theta(r.y - trial * t) - best_theta(r.y + trial * t)) / 2


def widened(rate: Param, shift: float, dof: int, level: float) -> Param:
    """The rate with ``shift`` (an SE-like spread) added in quadrature to its SE and to each
    side of its interval (t quantile of the fit's degrees of freedom); never below zero."""
    if not shift > 0:
        return rate
    tq = float(t_two_sided(level, max(dof, 1)))
    v = rate.value
    lo = v - math.hypot(v - rate.ci_low, tq * shift)
    hi = v + math.hypot(rate.ci_high - v, tq * shift) if math.isfinite(rate.ci_high) else math.inf
    return Param(rate.name, v, math.hypot(rate.se, shift), max(lo, 0.0), hi,
                 f"{rate.ci_method}, widened for a drift within the noise", rate.unit)


def rate_parameter_value(r: FitResult, order: str) -> float:
    """k (order 1) or q = k |A0 - Ainf| (order 2) at the fit."""
    v = r.values()
    return v["k"] if order == "1" else v["k"] * abs(v["A0"] - v["Ainf"])


def forecast_line(r: FitResult, target: float, t_now: float, charge: Charge | None) -> Forecast:
    """Forecast under zero order: only through the charge (a straight line has no end)."""
    k = r.params["k"]
    if charge is None:
        return Forecast(r.model, "0", 0.0, None, None, None,
                        "a straight line has no end point of its own: give the charge "
                        "(--c0 with --epsilon, or --end-absorbance)")
    da = charge.change(r.value("A0"))
    lo, hi = sorted((abs(k.ci_low), abs(k.ci_high)))
    if k.ci_low <= 0 <= k.ci_high:
        lo = 0.0
    rate = Param("k", abs(k.value), k.se, lo, hi, k.ci_method, "AU/s")
    conv = map_param(rate, lambda x: x * t_now / da, "conversion", FRACTION)
    tt = map_param(rate, lambda x: target * da / x, "t_target", "s", decreasing=True)
    return Forecast(r.model, "0", 0.0, rate, conv, tt)


# --------------------------------------------------------------------------- the trace


def assess(t, y, name: str = "trace", *, target: float = 0.99, order: str = "auto",
           level: float = 0.95, photometry: Photometry | None = None, fix=None,
           end_absorbance: float | None = None, drift: str = "auto",
           fit_from: float | None = None) -> Completion:
    """Fit the trace and forecast the time to ``target`` conversion (a fraction, 0-1).

    ``order`` is ``auto`` (chosen by evidence, as ``ratelaw`` does), "0", "1" or "2";
    ``photometry`` with ``c0_M`` and an epsilon, or ``end_absorbance``, gives the charge.
    Times (the last reading, the forecast) are counted from the origin
    :func:`rateabs.models.time_origin` sets, or from ``fit_from`` (s, the file's own times;
    the readings before it are not fitted), ``law.t0`` in the file's own times; the reaction is
    taken to stand at conversion 0 there.
    """
    if not 0 < target < 1:
        raise UsageError(f"target {target:g} must lie between 0 and 1 (as a fraction)",
                         "give --target as a percentage, e.g. 99")
    if order not in ("0", "1", "2", "auto"):
        raise UsageError("completion forecasts need order 0, 1, 2 or auto",
                         "use --order auto, 0, 1 or 2")
    law = fit_trace(t, y, name, order=order, photometry=photometry, fix=fix, ci="asymptotic",
                    level=level, drift=drift, end_absorbance=end_absorbance, fit_from=fit_from)
    t_now = float(np.max(law.fit.x))             # counted from the time origin
    rising = law.fit.value("A0") < law.fit.predict(t_now)
    charge = charge_of(photometry, end_absorbance, bool(rising))
    if charge is not None and "stall_suspected" in law.flags:     # the charge decides
        law.flags.remove("stall_suspected")
        law.notes[:] = [n for n in law.notes if not n.startswith("STALL SUSPECTED")]
    forecasts, notes, flags = _forecasts(law, target, t_now, level, charge, drift)
    if charge is not None:
        forecasts, set_aside = _consistent_with_charge(forecasts, law.model)
        notes += set_aside
    c = _verdict(law, forecasts, target, t_now, charge, level)
    c.notes[:0] = notes
    c.flags = list(dict.fromkeys(c.flags + flags))
    return c


def _forecasts(law: RateLawResult, target: float, t_now: float, level: float,
               charge: Charge | None, drift: str) -> tuple[list, list, list]:
    """A forecast under every model that carries weight, with its AICc weight; and the notes
    and flags about the drift.

    With ``drift`` at ``auto`` each order that carries weight is forecast both without and
    with the drift term, whatever the F-test chose: a drift term is one nested parameter, so
    its ΔAICc can never exceed about 2 (AICc charges 2 per parameter) and it always lies
    within :data:`~rateabs.ratelaws.EVIDENCE_DELTA`; it carries weight by the same rule as an
    order. The headline interval then spans both, as it spans orders. Where the drift model
    cannot forecast (not identifiable, typically at low conversion, where a drift and the
    reaction look alike) the forecast assumes a stable baseline and is flagged
    ``drift_not_told_apart``."""
    order_weight = {row["model"].split("+")[0]: row["weight"] for row in
                    law.comparison.rows} if law.comparison else {law.model.split("+")[0]: 1.0}
    forecasts, notes, flags = [], [], []
    for m in law.plausible:
        o = m.split("+")[0]
        pair = [law.fits[m]] + ([law.fits[x] for x in (o, f"{o}+drift") if x != m
                                 and x in law.fits and law.fits[x].success]
                                if drift == "auto" and o != "0"
                                and not tied_to_charge(law.fits[m]) else [])
        rel = _relative_weights(pair)
        made = {}
        for r in sorted(pair, key=lambda r: "drift" not in r.params):   # the drift model first
            if o == "0":
                fc = forecast_line(r, target, t_now, charge)
            else:
                covered = any("drift" in law.fits[x].params for x in made)
                fc = forecast_curve(r, o, target, t_now, level, charge,
                                    drift == "auto" and not covered)
            fc.weight = float(order_weight.get(o, 1.0)) * rel[r.model]
            if r.model != m and "drift" in r.params and not _rate_known(fc, r):
                flags.append("drift_not_told_apart")
                notes.append(f"with a baseline drift allowed, order {o} gives no forecast "
                             f"({fc.why}): the forecast assumes a baseline stable within the "
                             "noise over the run; a drift and the reaction are not told apart")
                continue
            made[r.model] = fc
        forecasts += [made[r.model] for r in pair if r.model in made]     # the pick first
    return forecasts, notes, flags


def _rate_known(fc: Forecast, r: FitResult) -> bool:
    """Whether the data determine the rate parameter a forecast rests on."""
    return (identifiable(r.params["k"]) and fc.rate is not None
            and math.isfinite(fc.rate.ci_low))


def _relative_weights(fits: list) -> dict:
    """AICc weights of fits of one order (with and without the drift term), summing to 1."""
    best = min(r.aicc for r in fits)
    raw = {r.model: math.exp(-0.5 * (r.aicc - best)) if math.isfinite(r.aicc) else 0.0
           for r in fits}
    total = sum(raw.values()) or 1.0
    return {m: w / total for m, w in raw.items()}


def _consistent_with_charge(forecasts: list, chosen: str) -> tuple[list, list]:
    """With the charge, the models whose end point disagrees with it are set aside when another
    model that carries weight agrees (the charge is evidence too); the chosen model stays first
    among what is left."""
    def agrees(f):
        return f.end_vs_charge is None or _end_check(f.end_vs_charge) == "agrees"

    keep = [f for f in forecasts if agrees(f)]
    if not keep or len(keep) == len(forecasts):
        return forecasts, []
    dropped = [f for f in forecasts if not agrees(f)]
    notes = [f"order {f.model} set aside: its fitted end point is "
             f"{100 * f.end_vs_charge.value:.0f} % of the charge" for f in dropped]
    return keep, notes


def _headline(forecasts: list, chosen: str) -> tuple[Param | None, Param | None, str]:
    """The headline time and conversion: the chosen model's values with intervals spanning
    every model that carries weight; no time when any of them has no forecast."""
    main = next(f for f in forecasts if f.model == chosen)
    missing = [f for f in forecasts if f.t_target is None]
    conv = None
    if all(f.conversion is not None for f in forecasts):
        conv = _envelope([f.conversion for f in forecasts], main.conversion, len(forecasts))
    if missing:
        why = "; ".join(f"order {f.model}: {f.why}" for f in missing)
        return None, conv, why
    tt = _envelope([f.t_target for f in forecasts], main.t_target, len(forecasts))
    return tt, conv, ""


def _envelope(params: list, main: Param, n: int) -> Param:
    """``main`` with the interval spanning every parameter's interval and the largest of their
    SEs (the headline is no surer than the least sure model that carries weight)."""
    if n == 1:
        return main
    lo = min(p.ci_low for p in params)
    hi = max(p.ci_high for p in params)
    ses = [p.se for p in params if math.isfinite(p.se)]
    return Param(main.name, main.value, max(ses) if ses else main.se, lo, hi,
                 f"envelope of {n} models' {main.ci_method} intervals", main.unit)


def _charge_conversion(r: FitResult, charge: Charge, t_now: float) -> Param:
    """|A(t_now) - A0| / ΔA_charge from the chosen fit at the last reading, with its interval:
    the change the readings show, a fitted drift included (a drift term may stand for an
    instrument's drift or for a shape the law misses; the readings are what was seen)."""

    def g(p):
        a_now = float(r.func(np.array([t_now]), *p.values())[0])
        return abs(a_now - p["A0"]) / charge.change(p["A0"])

    val, se = g(r.values()), delta_se(r, g)
    tq = t_two_sided(r.level, max(r.dof, 1))
    return Param("conversion", val, se, val - tq * se, val + tq * se, "asymptotic", FRACTION)


def _end_absorbance(r: FitResult, charge: Charge | None) -> Param:
    """The predicted end absorbance: Ainf (drift excluded), or A0 plus the charge for order 0."""
    if "Ainf" in r.params:
        return r.params["Ainf"]
    a0 = r.params["A0"]
    if charge is None:
        return Param("Ainf", math.nan, math.nan, math.nan, math.nan, "no end point", "AU")
    sign = 1.0 if r.value("k") > 0 else -1.0
    end = a0.value + sign * charge.change(a0.value)
    return Param("Ainf", end, a0.se, end - (a0.value - a0.ci_low), end + (a0.ci_high - a0.value),
                 "A0's interval plus the charge", "AU")


def _verdict(law, forecasts, target, t_now, charge, level) -> Completion:
    """Headline numbers, flags and the complete / not complete call."""
    chosen = law.model if any(f.model == law.model for f in forecasts) else forecasts[0].model
    r = law.fits[chosen]
    tt, conv, why = _headline(forecasts, chosen)
    flags = [f for f in law.flags if f in FLAGS]
    notes = list(law.notes) + list(law.fit.notes)
    c_conv = _charge_conversion(r, charge, t_now) if charge and conv is not None else None
    basis_conv = c_conv or conv
    if conv is None:
        conv = Param("conversion", math.nan, math.nan, math.nan, math.nan, "no end point",
                     FRACTION)
    end = _end_absorbance(r, charge)
    _charge_flags(next(f for f in forecasts if f.model == chosen), r, flags, notes, charge)
    if any(f.order == "0" and f.t_target is None for f in forecasts):
        flags.append("no_end_point")
    if any(f.t_target is None and "not identifiable" in f.why for f in forecasts) and (
            "not_identifiable" not in flags):
        flags.append("not_identifiable")
    if tt is not None and not math.isfinite(tt.ci_high):
        flags.append("open_interval")
    if "order_not_determined" in flags and tt is not None:
        notes.append(f"the time to {100 * target:g} % is the straight line's (order 0): under "
                     "order 1 or 2 the rate slows as the reactant is used and the target comes "
                     "later, so read it as an earliest time, not a forecast")
    extrapolation = tt.value / t_now if tt is not None and t_now > 0 else None
    if extrapolation is not None and extrapolation > EXTRAPOLATION_LIMIT:
        flags.append("extrapolated")
        notes.append(f"the forecast reaches {extrapolation:.1f} times the observed span "
                     f"({t_now / 60:.3g} min): it assumes the rate law holds that far")
    seen = conv if math.isfinite(conv.value) else basis_conv
    if seen is not None and math.isfinite(seen.value) and seen.value < LOW_CONVERSION:
        flags.append("low_conversion")
        band = (f" [{100 * seen.ci_low:.0f}, {100 * seen.ci_high:.0f}] %"
                if math.isfinite(seen.ci_low) and math.isfinite(seen.ci_high) else "")
        covered = (f"{100 * seen.value:.0f} %{band} of its change" if identifiable(seen) else
                   "an undetermined part of its change (the data do not fix the end point)")
        notes.append(f"the run has covered {covered}: below "
                     f"{100 * LOW_CONVERSION:g} % orders 1 and 2 are seldom told apart and the "
                     "end point is poorly known")
    if math.isfinite(end.ci_high) and end.ci_high < NEGATIVE_END:
        flags.append("end_below_zero")
        notes.append(f"the fitted end absorbance {fmt_pm(end.value, end.se)} AU lies below zero, "
                     "which no absorbance can: the forecast is not physical")
    if charge is None:
        notes.append("conversion is measured against the fitted end point: without the charge "
                     "(--c0 with --epsilon, or --end-absorbance) a stall looks like completion")
    main = next(f for f in forecasts if f.model == chosen)
    if main.drift_for_one_se is not None:
        d = main.drift_for_one_se * 60e3
        notes.append(f"the forecast allows for a baseline stable to within the noise over the "
                     f"run; a drift of {d:.2g} mAU/min ({d * t_now / 60:.2g} mAU over the run) "
                     "would move it by its own SE")
    complete, verdict = _call(forecasts, flags, law.quality, target, c_conv)
    rule = (f"complete when the lower {100 * level:g} % bound of the conversion at the last "
            f"reading reaches the target ({target:g}) under every order that carries weight"
            + (", against the charge too," if charge else ",")
            + " the fit passes the quality gate and the end point is neither short of the charge "
              "nor below zero")
    return Completion(law.trace, target, t_now, basis_conv or conv, tt, complete, rule, end, law,
                      forecasts, "charge" if c_conv else "fitted end point", charge, c_conv,
                      verdict, why, list(dict.fromkeys(flags)), notes, extrapolation, chosen)


def _charge_flags(main: Forecast, r: FitResult, flags, notes, charge) -> None:
    """Stall or mismatch of the chosen model's end point against the charge, both numbers."""
    if charge is None:
        return
    ratio = main.end_vs_charge
    if ratio is None:
        if main.conversion is not None and main.conversion.ci_low > 1 + CHARGE_TOLERANCE:
            flags.append("charge_mismatch")
            notes.append(f"the change so far is {100 * main.conversion.value:.0f} % of the "
                         "charge: check epsilon, c0 and the pathlength")
        return
    fitted = abs(r.value("Ainf") - r.value("A0"))
    state = _end_check(ratio)
    both = (f"fitted change {fitted:.4g} AU, charge {charge.change(r.value('A0')):.4g} AU "
            f"({charge.source})")
    if state == "stall":
        flags.append("stall")
        notes.append(f"STALL: the fitted end point is {100 * ratio.value:.0f} % "
                     f"[{100 * ratio.ci_low:.0f}, {100 * ratio.ci_high:.0f}] % of the charge; "
                     f"{both}. The reaction stops short (dead catalyst, lost reagent?), or "
                     "epsilon, c0 or the pathlength is wrong")
    elif state == "mismatch":
        flags.append("charge_mismatch")
        notes.append(f"the fitted end point is {100 * ratio.value:.0f} % of the charge; {both}: "
                     "check epsilon, c0 and the pathlength, or a side reaction")


def _call(forecasts, flags, quality: dict, target, c_conv) -> tuple[bool, str]:
    """The complete / not complete call and the verdict in words."""
    blockers = [f for f in ("delayed_start", "stall_suspected", "misfit", "stall",
                            "charge_mismatch", "end_below_zero", "not_identifiable",
                            "no_end_point") if f in flags]
    if blockers:
        reasons = {"misfit": "the rate law does not fit the trace",
                   "delayed_start": "the reaction starts late (an induction period): refit "
                                    "with --fit-from",
                   "stall_suspected": "the trace levels off as a stalled reaction does, short "
                                      "of its end; without the charge (--c0 with --epsilon, or "
                                      "--end-absorbance) completion is not shown",
                   "stall": "the reaction stalls short of the charge",
                   "charge_mismatch": "the change does not match the charge",
                   "end_below_zero": "the end point is not physical",
                   "not_identifiable": "the data do not determine the rate",
                   "no_end_point": "the trace shows no end point yet"}
        if "misfit" in blockers and quality["reason"]:
            reasons["misfit"] += f" ({quality['reason']})"
        return False, "NOT COMPLETE: " + "; ".join(reasons[b] for b in blockers)
    lows = [f.conversion.ci_low for f in forecasts if f.conversion is not None]
    if c_conv is not None:
        lows.append(c_conv.ci_low)
    if lows and min(lows) >= target:
        return True, ("COMPLETE" if c_conv is not None else "END POINT REACHED, COMPLETION NOT "
                      "SHOWN: the trace has stopped changing, but without the charge (--c0 with "
                      "--epsilon, or --end-absorbance) a stalled reaction looks the same")
    return False, "NOT YET COMPLETE"
