"""Reaction completion: conversion now, time to a target conversion, complete or not.

The trace is fitted with an integrated rate law (first order unless told otherwise, see
:mod:`rateabs.ratelaws`). Conversion is X(t) = (A(t) - A0) / (Ainf - A0) = 1 - f(t), so for first
order X = 1 - exp(-k t) and the time to a target X* is t* = -ln(1 - X*) / k; for second order
t* = X* / (k |A0 - Ainf| (1 - X*)). Both depend on k alone, a decreasing function, so the
interval of t* is the profile-likelihood interval of k carried through that function (profile
intervals are invariant under monotone maps; Bates & Watts 1988). ``benchmarks/completion_coverage.py``
checks by simulation that the 95 % interval covers the true t* about 95 % of the time.

Rule for ``complete``: the reaction is called complete when the lower confidence bound of the
conversion at the last reading has reached the target.

A predicted end point is no process-safety assessment: runaway, sampling and mixing hazards
follow the site's own rules.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .errors import AnalysisError, UsageError
from .fitting import Param
from .ratelaws import Photometry, RateLawResult, fit_trace, map_param

CAUTION = ("A predicted end point is no process-safety assessment: runaway, sampling and mixing "
           "hazards follow the site's own rules.")


@dataclass
class Completion:
    """Conversion, forecast and verdict for one trace."""

    trace: str
    target: float
    t_now: float
    conversion: Param
    t_target: Param
    complete: bool
    rule: str
    end_absorbance: Param
    law: RateLawResult

    def to_dict(self) -> dict:
        """JSON result: ``trace``, ``conversion``, ``target``, ``t_target_s``, ``complete``."""
        return {"trace": self.trace, "order": self.law.order, "target": self.target,
                "t_now_s": self.t_now, "conversion": self.conversion.to_dict(),
                "t_target_s": self.t_target.to_dict(),
                "t_remaining_s": max(self.t_target.value - self.t_now, 0.0),
                "complete": self.complete, "rule": self.rule,
                "end_absorbance": self.end_absorbance.to_dict(),
                "k": self.law.fit.params["k"].to_dict(),
                "half_life_s": self.law.half_life.to_dict() if self.law.half_life else None,
                "notes": self.law.notes + list(self.law.fit.notes)}


def _times(order: str, k: float, d_a: float, x: float) -> float:
    if k <= 0:
        return float("inf")
    if order == "1":
        return -math.log(1 - x) / k
    return x / (k * d_a * (1 - x))


def _conversion(order: str, k: float, d_a: float, t: float) -> float:
    k = max(k, 0.0)
    if order == "1":
        return 1 - math.exp(-k * t)
    return 1 - 1 / (1 + k * d_a * t)


def assess(t, y, name: str = "trace", *, target: float = 0.99, order: str = "1",
           level: float = 0.95, photometry: Photometry | None = None, fix=None) -> Completion:
    """Fit the trace and forecast the time to ``target`` conversion (a fraction, 0-1)."""
    if not 0 < target < 1:
        raise UsageError(f"target {target:g} must lie between 0 and 1 (as a fraction)",
                         "give --target as a percentage, e.g. 99")
    if order not in ("1", "2", "auto"):
        raise UsageError("completion forecasts need a first- or second-order law",
                         "use --order 1, 2 or auto")
    law = fit_trace(t, y, name, order=order, photometry=photometry, fix=fix, ci="profile",
                    level=level)
    if law.order not in ("1", "2"):
        raise AnalysisError(f"trace {name} follows order {law.order}, which has no end point to "
                            "forecast from the trace alone", "use --order 1 or 2")
    r = law.fit
    k = r.params["k"]
    d_a = abs(r.value("A0") - r.value("Ainf"))
    t_now = float(np.max(t))
    conv = map_param(k, lambda kk: _conversion(law.order, kk, d_a, t_now), "conversion", "")
    t_t = replace(map_param(k, lambda kk: _times(law.order, kk, d_a, target), "t_target", "s",
                            decreasing=True), ci_method=f"{k.ci_method} interval of k mapped")
    complete = bool(conv.ci_low >= target)
    rule = (f"complete when the lower {100 * level:g} % bound of the conversion at the last "
            f"reading ({conv.ci_low:.4f}) reaches the target ({target:g})")
    ainf = r.params["Ainf"]
    return Completion(name, target, t_now, conv, t_t, complete, rule, ainf, law)
