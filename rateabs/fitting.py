"""The one fitting engine every analysis uses.

* :func:`fit` fits a :class:`~rateabs.models.Model` by scipy's bounded ``least_squares``
  (bounds, fixed parameters, weights) and attaches intervals by covariance (t-based), profile
  likelihood (Bates & Watts 1988; its own search with the F criterion of lmfit's
  ``conf_interval``, equivalent to the profile t statistic for one parameter; a test compares
  the two) or bootstrap (seeded; residual or case resampling).
* :func:`batch_lm` is a vectorised Levenberg–Marquardt solver that fits many datasets at once on
  arrays; it serves bootstrap resamples and per-trace fits, and agrees with scipy (a test).
* :func:`compare` ranks candidate fits by AICc, runs extra-sum-of-squares F-tests for nested
  pairs and marks exactly one result ``chosen``.

>>> from rateabs.models import SATURATION
>>> import numpy as np
>>> s = np.array([1., 2, 5, 10, 20, 50]); v = 10 * s / (5 + s)
>>> r = fit(SATURATION["mm"], s, v)
>>> round(r.params["Km"].value, 6)
5.0
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from .distributions import f_quantile, f_tail, normal_two_sided_p, t_two_sided
from .errors import FitError, UsageError
from .models import Model, unit_of
from .options import CI_METHODS, LEVEL, RESAMPLES, WEIGHTINGS
from .rules import OneOf

#: Relative step of central differences: the cube root of the machine epsilon balances
#: truncation and rounding error (Nocedal & Wright, Numerical Optimization, 2nd ed. 2006,
#: section 8.1).
FD_REL_STEP = float(np.finfo(float).eps ** (1 / 3))

#: Relative step of Richardson-extrapolated central differences (truncation error of order h^4
#: balanced against rounding, eps/h: the fifth root of the machine epsilon).
RICHARDSON_STEP = float(np.finfo(float).eps ** (1 / 5))


def fd_step(x, typical, floor: float = 0.0):
    """Central-difference step for a parameter at ``x``: FD_REL_STEP x max(|x|, typical), plus an
    absolute ``floor``; ``typical`` is the size below which |x| no longer sets the scale."""
    return FD_REL_STEP * np.maximum(np.abs(x), typical) + floor


def param(value, se=None, ci_low=None, ci_high=None, ci_method=None, unit="") -> dict:
    """A fitted parameter as the JSON parameter object (docs/formats.md, "JSON document")."""
    return {"value": finite_or_none(value), "se": finite_or_none(se),
            "ci_low": finite_or_none(ci_low), "ci_high": finite_or_none(ci_high),
            "ci_method": ci_method, "unit": unit}


def finite_or_none(x) -> float | None:
    """``x`` as a float, or None when it is missing, not a number, NaN or infinite."""
    if x is None:
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def fmt_p(p) -> str:
    """A p value for a sentence: two significant digits, '< 1e-16' below double precision."""
    try:
        p = float(p)
    except (TypeError, ValueError):
        return "-"
    if not math.isfinite(p):
        return "-"
    return "< 1e-16" if p < 1e-16 else f"{p:.2g}"


def p_is(p) -> str:
    """'p = 0.82' or 'p < 1e-16' (never 'p = < 1e-16') for a sentence.

    >>> p_is(0.8234), p_is(1e-30)
    ('p = 0.82', 'p < 1e-16')
    """
    s = fmt_p(p)
    return f"p {s}" if s.startswith("<") else f"p = {s}"


def fmt_pm(value, se=None, digits: int = 4, unit: str = "") -> str:
    """A value and its SE for a person, the value rounded to the SE's two significant digits:
    ``12.35 ± 0.46 uM``; ``digits`` significant digits without an SE; '-' when missing.

    Rounding to the uncertainty is common practice (e.g. the JCGM 100:2008 Guide to the
    expression of uncertainty in measurement, 7.2.6: an uncertainty to at most two significant
    digits, the value rounded to match).

    >>> fmt_pm(12.3456, 0.4567, unit="uM")
    '12.35 ± 0.46 uM'
    >>> fmt_pm(0.00080642, 4.7e-06)
    '8.064e-04 ± 4.7e-06'
    >>> fmt_pm(1234.5678, 12.3)
    '1235 ± 12'
    >>> fmt_pm(49.999999999999972, 6.8e-14)            # noise-free data: digits capped
    '50.00000000 ± 6.8e-14'
    >>> fmt_pm(-0.004, 0.1), fmt_pm(-1e-05, 0.01)      # zero at the SE's place: no sign
    ('0.00 ± 0.10', '0.000 ± 0.010')
    >>> fmt_pm(4e-05, 1.6e-04), fmt_pm(0.0, 1e-4)      # within its SE of zero: same places
    ('0.00004 ± 0.00016', '0.00000 ± 0.00010')
    """
    v, e = finite_or_none(value), finite_or_none(se)
    if v is None:
        return "-"
    if e is None or e <= 0:
        return _with_unit(f"{v:.{digits}g}", unit)
    last = math.floor(math.log10(e)) - 1              # place of the SE's second digit
    if abs(v) < 0.5 * 10.0 ** last:                    # rounds to zero there: "0.00", not "-0.00"
        v = 0.0
    lead = math.floor(math.log10(abs(v))) if v else last + 1
    capped = lead - last >= MAX_SIGNIFICANT           # finer than the arithmetic carries
    if capped:
        last = lead - MAX_SIGNIFICANT + 1
    if 1e-3 <= abs(v) < 1e6 or (abs(v) <= e and 1e-6 <= e < 1e6):  # within its SE of 0: fixed
        dec = max(0, -last)
        text = f"{v:.{dec}f} ± " + (f"{e:.1e}" if capped else f"{e:.{dec}f}")
    else:
        text = f"{v:.{max(0, lead - last)}e} ± {e:.1e}"
    return _with_unit(text, unit)


#: Most significant digits a value is shown with, however small its SE: beyond about ten the
#: digits are those of double-precision arithmetic (16 digits, less what a fit loses), not of
#: the data (an exact, noise-free test set gives SEs of 1e-14).
MAX_SIGNIFICANT = 10


def _with_unit(text: str, unit: str) -> str:
    return f"{text} {unit}" if unit else text


def fmt_interval(low, high, digits: int = 4, se=None) -> str:
    """An interval for a person: ``[1.2, 3.4]``; '-' when a bound is missing. With the
    estimate's ``se`` both bounds are rounded where its value is (the SE's second significant
    digit, as :func:`rateabs.output.fmt_pm` shows it), else to ``digits`` significant digits.

    >>> fmt_interval(0.000772, 0.0008729, se=2.5e-05), fmt_interval(5275.9, 5965.2, se=190.0)
    ('[0.000772, 0.000873]', '[5280, 5970]')
    """
    lo, hi = finite_or_none(low), finite_or_none(high)
    if lo is None or hi is None:
        return "-"
    se = finite_or_none(se)
    big = max(abs(lo), abs(hi))
    if se is None or se <= 0 or big == 0:
        return f"[{lo:.{digits}g}, {hi:.{digits}g}]"
    place = math.floor(math.log10(se)) - 1
    if place >= 0:
        return f"[{round(lo, -place):.0f}, {round(hi, -place):.0f}]"
    if 1e-4 <= big < 1e6:
        return f"[{lo:.{-place}f}, {hi:.{-place}f}]"
    n = min(max(math.floor(math.log10(big)) - place + 1, 1), 10)
    return f"[{lo:.{n}g}, {hi:.{n}g}]"


@dataclass(frozen=True)
class Param:
    """One fitted (or fixed) parameter with its uncertainty."""

    name: str
    value: float
    se: float
    ci_low: float
    ci_high: float
    ci_method: str
    unit: str = ""
    fixed: bool = False

    def to_dict(self) -> dict:
        """The JSON parameter object (docs/formats.md)."""
        return param(self.value, self.se, self.ci_low, self.ci_high,
                     "fixed" if self.fixed else self.ci_method, self.unit)

    def __str__(self) -> str:
        if self.fixed:
            return f"{self.name} = {fmt_pm(self.value, None, 6, self.unit)} (fixed)"
        return (f"{self.name} = {fmt_pm(self.value, self.se, 6, self.unit)} "
                f"{fmt_interval(self.ci_low, self.ci_high, 5)} ({self.ci_method})")


@dataclass(frozen=True)
class FitResult:
    """Outcome of one fit: parameters with intervals, goodness of fit, diagnostics, notes."""

    model: str
    params: dict
    n: int
    n_free: int
    rss: float
    sigma: float
    aic: float
    aicc: float
    bic: float
    level: float
    success: bool
    message: str
    x: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    weights: np.ndarray = field(repr=False)
    fitted: np.ndarray = field(repr=False)
    cov: np.ndarray | None = field(repr=False, default=None)
    free: tuple = ()
    runs_p: float = float("nan")
    notes: tuple = ()
    weighting: str = "none"
    resample: str | None = None
    n_boot_ok: int | None = None
    func: object = field(repr=False, default=None)

    @property
    def dof(self) -> int:
        """Residual degrees of freedom, n minus the number of free parameters."""
        return self.n - self.n_free

    @property
    def residuals(self) -> np.ndarray:
        """Observed minus fitted values (unweighted)."""
        return self.y - self.fitted

    def value(self, name: str) -> float:
        """Fitted value of a parameter."""
        return self.params[name].value

    def values(self) -> dict:
        """All parameter values as a dict."""
        return {k: p.value for k, p in self.params.items()}

    def predict(self, x) -> np.ndarray:
        """The fitted model at new x."""
        return self.func(np.asarray(x, dtype=float), *self.values().values())

    def to_dict(self) -> dict:
        """JSON-ready summary (parameters as JSON parameter objects)."""
        return {"model": self.model, "params": {k: p.to_dict() for k, p in self.params.items()},
                "n": self.n, "dof": self.dof, "rss": self.rss, "sigma": self.sigma,
                "aic": self.aic, "aicc": self.aicc, "bic": self.bic, "success": self.success,
                "runs_test_p": self.runs_p, "notes": list(self.notes),
                "weighting": self.weighting}

    def report(self) -> str:
        """A readable report: parameters, intervals and their method, fit statistics, notes."""
        lines = [f"model {self.model}: n = {self.n}, free parameters = {self.n_free}, "
                 f"dof = {self.dof}, weighting = {self.weighting}"]
        lines.append(f"  level of intervals: {100 * self.level:g} %")
        for p in self.params.values():
            lines.append(f"  {p}")
        lines.append(f"  residual SE = {self.sigma:.4g}, RSS = {self.rss:.4g}, "
                     f"AIC = {self.aic:.4g}, AICc = {self.aicc:.4g}, BIC = {self.bic:.4g}")
        if np.isfinite(self.runs_p):
            lines.append(f"  runs test of residual signs: p = {self.runs_p:.3g}")
        if self.resample:
            lines.append(f"  bootstrap: {self.resample} resampling, {self.n_boot_ok} resamples "
                         "converged")
        for n in self.notes:
            lines.append(f"  note: {n}")
        if not self.success:
            lines.append(f"  FIT NOT RELIABLE: {self.message}")
        return "\n".join(lines)


# --------------------------------------------------------------------------- weights


def make_weights(y, weighting: str = "none", sd=None) -> np.ndarray:
    """Weights that multiply residuals: 1, 1/|y| (relative) or 1/SD (given SDs).

    :func:`fit` weighs ``relative`` by the fitted curve instead (:func:`_curve_weights`);
    1/|y| serves callers that weigh by observed values on purpose."""
    y = np.asarray(y, dtype=float)
    OneOf(WEIGHTINGS).check(weighting, "weighting")
    if weighting == "none":
        return np.ones_like(y)
    if weighting == "relative":
        if np.any(y == 0):
            raise FitError("relative weighting needs non-zero values",
                           "use --weighting none, or drop the zero readings")
        return 1.0 / np.abs(y)
    if sd is None:
        raise UsageError("weighting by SD needs a column of SDs", "name it with --sd COLUMN")
    sd = np.asarray(sd, dtype=float)
    if np.any(~np.isfinite(sd)) or np.any(sd <= 0):
        raise FitError("every SD must be a positive number", "fix the SD column")
    return 1.0 / sd


# --------------------------------------------------------------------------- batched solver


@dataclass(frozen=True)
class BatchResult:
    """Outcome of :func:`batch_lm`: parameters (B, p), weighted RSS (B,), converged (B,), and
    with ``want_cov`` the covariance of the free parameters (B, k, k), scaled by RSS/dof."""

    params: np.ndarray
    rss: np.ndarray
    converged: np.ndarray
    n_iter: int
    cov: np.ndarray | None = None


def _eval(func, x, P):
    return func(x, *[P[:, j:j + 1] for j in range(P.shape[1])])


@dataclass(frozen=True)
class _Batch:
    """One batched least-squares problem: the data, the free parameters and their bounds."""

    func: object
    x: np.ndarray
    y: np.ndarray
    w: np.ndarray
    free: list
    lo: np.ndarray
    hi: np.ndarray
    scale: np.ndarray
    jac: object = None
    value_jac: object = None

    def resid(self, P, rows):
        """Weighted residuals (y - f) w of the given datasets at parameters ``P``."""
        xx = _take_rows(self.x, rows, self.y.shape[0])
        with np.errstate(all="ignore"):
            f = _eval(self.func, xx, P)
        return (self.y[rows] - f) * self.w[rows]

    def resid_jac(self, P, rows):
        """The weighted residuals and d(f w)/dp of the free parameters at ``P`` (rows of the
        given datasets) from one call of ``value_jac``; (residuals, None) without it."""
        if self.value_jac is None:
            return self.resid(P, rows), None
        xx = _take_rows(self.x, rows, self.y.shape[0])
        w = self.w[rows]
        with np.errstate(all="ignore"):
            f, Ja = _eval(self.value_jac, xx, P)
        # C order, as the Jacobians stored by _lm_iteration: the batched products that use it
        # then round as they do there
        J = np.empty(Ja.shape[:2] + (len(self.free),))
        np.multiply(Ja[:, :, self.free], w[:, :, None], out=J)
        return (self.y[rows] - f) * w, J

    def jacobian(self, P, rows):
        """d(f w)/dp of the free parameters, (rows, n, k): analytic when given (``jac`` or
        ``value_jac``), else central differences with the step of :func:`fd_step`."""
        Pj = P[rows]
        if self.jac is None and self.value_jac is not None:
            return self.resid_jac(Pj, rows)[1]
        if self.jac is not None:
            xx = _take_rows(self.x, rows, self.y.shape[0])
            with np.errstate(all="ignore"):
                Ja = self.jac(xx, *[Pj[:, j:j + 1] for j in range(Pj.shape[1])])
            return Ja[:, :, self.free] * self.w[rows][:, :, None]
        Jr = np.empty((rows.size, self.y.shape[1], len(self.free)))
        for c, j in enumerate(self.free):
            h = fd_step(Pj[:, j], 1e-6 * self.scale[rows, j], floor=1e-10)
            up = np.minimum(Pj[:, j] + h, self.hi[j])
            dn = np.maximum(Pj[:, j] - h, self.lo[j])
            Pu, Pd = Pj.copy(), Pj.copy()
            Pu[:, j], Pd[:, j] = up, dn
            # residual = (y - f) w, so d(f w)/dp = -d(residual)/dp
            Jr[:, :, c] = -(self.resid(Pu, rows) - self.resid(Pd, rows)) / (up - dn)[:, None]
        return Jr


@dataclass
class _LMState:
    """The iteration state of every dataset in :func:`batch_lm`."""

    P: np.ndarray
    r: np.ndarray
    S: np.ndarray
    lam: np.ndarray
    active: np.ndarray
    converged: np.ndarray
    J: np.ndarray
    need_j: np.ndarray


def _lm_start(prob: _Batch, P: np.ndarray) -> _LMState:
    B, n = prob.y.shape
    r, J = prob.resid_jac(P, np.arange(B))
    S = np.sum(r * r, axis=1)
    S[~np.isfinite(S)] = np.inf
    if J is None:
        return _LMState(P, r, S, np.full(B, 1e-3), np.isfinite(S), np.zeros(B, dtype=bool),
                        np.zeros((B, n, len(prob.free))), np.ones(B, dtype=bool))
    return _LMState(P, r, S, np.full(B, 1e-3), np.isfinite(S), np.zeros(B, dtype=bool), J,
                    np.zeros(B, dtype=bool))


def _lm_delta(state: _LMState, rows, k: int):
    """The damped Gauss–Newton step of each active dataset (Marquardt's diagonal scaling)."""
    Jr, rr = state.J[rows], state.r[rows]
    JT = Jr.transpose(0, 2, 1)
    A = JT @ Jr                                   # batched BLAS, faster than einsum
    g = (JT @ rr[:, :, None])[:, :, 0]
    d = np.diagonal(A, axis1=1, axis2=2)
    d = np.maximum(d, 1e-12 * np.max(d, axis=1, keepdims=True) + 1e-300)
    M = A + (state.lam[rows][:, None] * d)[:, :, None] * np.eye(k)[None]
    try:
        return np.linalg.solve(M, g[:, :, None])[:, :, 0]
    except np.linalg.LinAlgError:
        return np.einsum("bij,bj->bi", np.linalg.pinv(M), g)


def _lm_iteration(prob: _Batch, state: _LMState, rows, xtol: float, ftol: float) -> None:
    """One Levenberg–Marquardt step for the active datasets: accept or damp, mark convergence."""
    free = prob.free
    jr = rows[state.need_j[rows]]
    if jr.size:
        state.J[jr] = prob.jacobian(state.P, jr)
        state.need_j[jr] = False
    Pn = state.P[rows].copy()
    Pn[:, free] = np.clip(Pn[:, free] + _lm_delta(state, rows, len(free)), prob.lo[free],
                          prob.hi[free])
    rn, Jn = prob.resid_jac(Pn, rows)
    Sn = np.sum(rn * rn, axis=1)
    Sn[~np.isfinite(Sn)] = np.inf
    better = Sn < state.S[rows]
    acc, rej = rows[better], rows[~better]
    step = np.max(np.abs(Pn[better][:, free] - state.P[acc][:, free])
                  / np.maximum(np.abs(state.P[acc][:, free]), 1e-12 * prob.scale[acc][:, free]),
                  axis=1) if acc.size else np.array([])
    gain = (state.S[acc] - Sn[better]) / np.maximum(state.S[acc], 1e-300)
    state.P[acc], state.r[acc], state.S[acc] = Pn[better], rn[better], Sn[better]
    state.lam[acc] = np.maximum(state.lam[acc] / 10, 1e-12)
    if Jn is None:
        state.need_j[acc] = True
    else:                           # the Jacobian came with the value at the accepted point
        state.J[acc] = Jn[better]
    state.lam[rej] *= 10
    done = acc[(gain <= ftol) | (step <= xtol) | (state.S[acc] == 0)]
    stuck = rej[state.lam[rej] > 1e12]           # no downhill step left: at a minimum
    for idx in (done, stuck):
        state.converged[idx] = True
        state.active[idx] = False


def _batch_cov(prob: _Batch, state: _LMState) -> np.ndarray:
    """Covariance of the free parameters, (J'J)^-1 RSS/dof per dataset."""
    Jf = prob.jacobian(state.P, np.arange(state.P.shape[0]))
    A = Jf.transpose(0, 2, 1) @ Jf
    dof = np.maximum(np.sum(prob.w > 0, axis=1) - len(prob.free), 1)
    return np.linalg.pinv(A) * (state.S / dof)[:, None, None]


def batch_lm(func, x, y, w, p0, free=None, lower=None, upper=None, max_iter=200,
             xtol=1e-10, ftol=1e-13, want_cov=False, jac=None, value_jac=None) -> BatchResult:
    """Fit ``B`` datasets at once by Levenberg–Marquardt on arrays.

    ``func(x, *params)`` broadcasts with parameters of shape (B, 1); ``y`` and ``w`` are (B, n);
    ``x`` broadcasts against them; ``p0`` is (B, p). ``free`` lists the indices of the fitted
    parameters (the rest stay at p0). Bounds are enforced by projection. The Jacobian is by
    central differences, so a model is only a function; a model may pass ``jac(x, *params)``
    returning df/dp with shape (B, n, p) to save the extra evaluations, or
    ``value_jac(x, *params)`` returning (f, df/dp) where the two share their work (the
    Jacobian of every trial point then comes with its value, kept where the step is taken).

    >>> import numpy as np
    >>> t = np.linspace(0, 10, 30); Y = np.stack([3 * np.exp(-0.5 * t), 2 * np.exp(-0.2 * t)])
    >>> r = batch_lm(lambda t, a, k: a * np.exp(-k * t), t, Y, np.ones_like(Y), [[1, 1], [1, 1]])
    >>> np.round(r.params, 6).tolist()
    [[3.0, 0.5], [2.0, 0.2]]
    """
    y = np.atleast_2d(np.asarray(y, dtype=float))
    B = y.shape[0]
    P = np.array(np.broadcast_to(np.asarray(p0, dtype=float), (B, np.shape(p0)[-1])), dtype=float)
    p = P.shape[1]
    prob = _Batch(func, x, y, np.broadcast_to(np.asarray(w, dtype=float), y.shape),
                  list(range(p)) if free is None else list(free),
                  np.full(p, -np.inf) if lower is None else np.asarray(lower, dtype=float),
                  np.full(p, np.inf) if upper is None else np.asarray(upper, dtype=float),
                  np.maximum(np.abs(P), 1e-12), jac, value_jac)
    state = _lm_start(prob, P)
    it = 0
    for it in range(1, max_iter + 1):  # noqa: B007 - it is reported
        rows = np.nonzero(state.active)[0]
        if rows.size == 0:
            break
        _lm_iteration(prob, state, rows, xtol, ftol)
    cov = _batch_cov(prob, state) if want_cov else None
    return BatchResult(state.P, state.S, state.converged & np.isfinite(state.S), it, cov)


def _take_rows(x, rows, B):
    """x restricted to the given datasets when x carries a dataset axis (shape (..., B, n))."""
    x = np.asarray(x, dtype=float)
    if B > 1 and x.ndim >= 2 and x.shape[-2] == B:
        return x[..., rows, :]
    return x


# --------------------------------------------------------------------------- single fit


def check_fixed(model: Model, fix: dict | None, option: str = "--fix") -> dict:
    """Fixed values by name, each a known parameter of ``model`` within its bounds."""
    fix = dict(fix or {})
    unknown = set(fix) - set(model.params)
    if unknown:
        raise UsageError(f"{option} {sorted(unknown)[0]}: model {model.name} has no such "
                         "parameter", f"its parameters are {', '.join(model.params)}")
    for name, v in fix.items():
        lo, hi = model.lower.get(name, -np.inf), model.upper.get(name, np.inf)
        if not (np.isfinite(v) and lo <= v <= hi):
            rng = " and ".join(t for t in (f"at least {lo:g}" if np.isfinite(lo) else "",
                                           f"at most {hi:g}" if np.isfinite(hi) else "") if t)
            raise UsageError(f"{option} {name}={v:g} is outside the range of {name} in model "
                             f"{model.name}", f"give a value {rng or 'that is finite'}")
    return fix


def _check_fit_args(ci: str, level: float, resample: str, n_boot: int) -> None:
    OneOf(CI_METHODS).check(ci, "ci")
    LEVEL.check(level, "level")
    OneOf(("residual", "case")).check(resample, "resample")
    if ci == "bootstrap":
        RESAMPLES.check(n_boot, "n_boot")


def _usable(x, y, sd):
    """Only the readings with a finite y and finite x."""
    ok = np.isfinite(y) & np.all(np.isfinite(x.reshape(-1, y.size)), axis=0)
    if ok.all():
        return x, y, sd
    return x[..., ok], y[ok], None if sd is None else np.asarray(sd, dtype=float)[ok]


@dataclass(frozen=True)
class _Solved:
    """The solver's optimum: every parameter's value and bounds, and how the search ended."""

    values: dict
    limits: dict
    success: bool
    message: str


def _minimize(model: Model, data: tuple, start: dict, fix: dict, bounds: dict) -> _Solved:
    """Least squares of the weighted residuals over the free parameters, within their bounds
    (scipy's trust-region reflective ``least_squares``; the start moved inside the bounds,
    fixed parameters held). ``data`` is (x, y, w)."""
    from scipy.optimize import least_squares

    names = list(model.params)
    limits = {nm: _limits(model, bounds, nm) for nm in names}
    free = [nm for nm in names if nm not in fix]
    values = {nm: float(start[nm]) for nm in names}
    for nm in free:
        lo, hi = limits[nm]
        values[nm] = min(max(values[nm], lo if np.isfinite(lo) else values[nm]),
                         hi if np.isfinite(hi) else values[nm])
    if not free:
        return _Solved(values, limits, True, "no free parameter")

    residual = _residuals(model, data, values, free)
    lo = np.array([limits[nm][0] for nm in free], dtype=float)
    hi = np.array([limits[nm][1] for nm in free], dtype=float)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        r = least_squares(residual, np.array([values[nm] for nm in free]), bounds=(lo, hi),
                          max_nfev=4000 * (len(free) + 1), xtol=1e-15, ftol=1e-15, gtol=1e-15)
    values.update(zip(free, map(float, r.x), strict=True))
    return _Solved(values, limits, bool(r.success), str(r.message))


def _residuals(model: Model, data: tuple, held: dict, free: list):
    """The weighted residuals as a function of the ``free`` parameters' values, the others at
    ``held``; a residual that is not finite counts as 1e150 (the solver steps away from it)."""
    x, y, w = data
    names = list(model.params)

    def residual(q):
        p = dict(held, **dict(zip(free, q, strict=True)))
        with np.errstate(all="ignore"):
            r = (y - model.func(x, *[p[nm] for nm in names])) * w
        return np.where(np.isfinite(r), r, 1e150)

    return residual


@dataclass
class _Uncertainty:
    """SEs and intervals under construction, with the notes that qualify them."""

    se: dict
    lows: dict
    highs: dict
    method: dict
    notes: list
    success: bool
    message: str
    n_boot_ok: int | None = None


def _asymptotic(model, res, values, free, cov, dof, level, success, message) -> _Uncertainty:
    """t-based intervals from the covariance, and notes on bounds and identifiability."""
    se = {nm: 0.0 for nm in model.params}
    for j, nm in enumerate(free):
        se[nm] = float(np.sqrt(cov[j, j])) if cov is not None else float("nan")
    notes = []
    if cov is None and free:
        notes.append("the covariance matrix could not be estimated: the parameters are not "
                     "identifiable from these data")
        success, message = False, "not identifiable (singular covariance)"
    for nm in free:
        (lo, hi), v = res.limits[nm], values[nm]
        if (np.isfinite(lo) and abs(v - lo) <= 1e-9 * max(1.0, abs(lo))) or (
                np.isfinite(hi) and abs(v - hi) <= 1e-9 * max(1.0, abs(hi))):
            notes.append(f"{nm} ended at its bound ({v:.4g}); its interval is not reliable")
        if nm not in model.offsets and np.isfinite(se[nm]) and v != 0 and se[nm] / abs(v) > 10:
            notes.append(f"{nm} is poorly determined (SE {se[nm]:.3g} is over 10x its value)")
            success, message = False, f"not identifiable: {nm} is not determined by these data"
    tq = t_two_sided(level, dof) if dof > 0 else float("nan")
    return _Uncertainty(se, {nm: values[nm] - tq * se[nm] for nm in model.params},
                        {nm: values[nm] + tq * se[nm] for nm in model.params},
                        {nm: "asymptotic" for nm in model.params}, notes, success, message)


def _profile_into(u: _Uncertainty, found: dict, limits: dict) -> None:
    for nm, (lo, hi, why) in found.items():
        if why:
            u.notes.append(f"profile interval of {nm}: {why}; asymptotic interval shown")
            continue
        u.lows[nm], u.highs[nm], u.method[nm] = lo, hi, "profile"
        for side, end, limit in (("below", lo, limits[nm][0]), ("above", hi, limits[nm][1])):
            if end == limit:
                reach = (f"reaches {nm}'s limit {limit:g}" if np.isfinite(limit) else
                         f"open {side}")
                u.notes.append(f"profile interval of {nm}: {reach} (the data do not bound "
                               f"{nm} {side} at this level)")


def _bootstrap_into(u: _Uncertainty, boot: Bootstrap, free, level: float) -> None:
    n_boot = boot.n_requested
    u.n_boot_ok = boot.n_ok
    if boot.n_ok < max(20, 0.5 * n_boot):
        u.notes.append(f"only {boot.n_ok} of {n_boot} bootstrap resamples converged; "
                       "asymptotic intervals shown")
        return
    for j, nm in enumerate(free):
        est = boot.estimates[:, j]
        lo, hi = np.quantile(est, [0.5 - level / 2, 0.5 + level / 2])
        u.lows[nm], u.highs[nm] = float(lo), float(hi)
        u.method[nm] = f"bootstrap-{boot.resample}"
        u.se[nm] = float(np.std(est, ddof=1))
    if boot.n_ok < n_boot:
        u.notes.append(f"{n_boot - boot.n_ok} of {n_boot} bootstrap resamples did not "
                       "converge and were left out")


def fit(model: Model, x, y, *, weighting: str = "none", sd=None, fix: dict | None = None,
        p0: dict | None = None, bounds: dict | None = None, ci: str = "asymptotic",
        level: float = 0.95, n_boot: int = 2000, resample: str = "residual", seed: int = 0,
        units: dict | None = None, tol: float | None = None) -> FitResult:
    """Fit ``model`` to (x, y) and attach intervals.

    ``fix`` holds parameters kept at a value; ``p0`` overrides the automatic guess; ``bounds``
    maps a name to (low, high). ``ci`` is ``asymptotic`` (covariance, t-based), ``profile``
    (profile likelihood) or ``bootstrap`` (``n_boot`` resamples, ``resample`` = ``residual``
    for designed x or ``case``; seeded). ``units`` maps unit kinds (``x``, ``y``, ``i``) to
    unit strings for the parameters. ``tol`` asks for the parameters to that relative
    precision: the solver's optimum is polished by Gauss–Newton steps until a step moves no
    parameter by more than ``tol`` of its value (:func:`polish`); without it (the common case)
    the solver's own stopping rule holds, about 8 significant digits on a flat valley.

    Raises :class:`~rateabs.errors.FitError` when there are fewer points than free parameters,
    :class:`~rateabs.errors.UsageError` for a fixed value outside a parameter's bounds; other
    failures return ``success=False`` with the reason.
    """
    _check_fit_args(ci, level, resample, n_boot)
    fix = check_fixed(model, fix)
    x, y, sd = _usable(np.asarray(x, dtype=float), np.asarray(y, dtype=float), sd)
    n = y.size
    free = [p for p in model.params if p not in fix]
    if n <= len(free):
        raise FitError(f"not estimable: {n} points for {len(free)} free parameters of "
                       f"{model.name}", "measure more concentrations or fix a parameter")
    start = {**model.guess(x, y), **(p0 or {}), **fix}
    bounds = bounds or {}
    relative_notes: list = []
    if weighting == "relative":
        x, y, w, start, relative_notes = _curve_weights(model, x, y, start, fix, bounds)
        n = y.size
        if n <= len(free):
            raise FitError(f"not estimable: {n} points with a non-zero rate for {len(free)} free "
                           f"parameters of {model.name}", "measure more concentrations")
    else:
        w = make_weights(y, weighting, sd)
    scale_covar = weighting != "sd"
    res = _minimize(model, (x, y, w), start, fix, bounds)
    values = dict(res.values)
    if tol is not None and free:
        values = polish(model, x, y, w, values, free, tol, bounds)
    fitted = model.func(x, *values.values())
    rw = (y - fitted) * w
    rss, dof = float(np.sum(rw * rw)), n - len(free)
    success = bool(res.success) and bool(np.all(np.isfinite(fitted)))
    cov = _covariance(model, x, w, values, free, rss / dof if (scale_covar and dof > 0) else 1.0,
                      richardson=tol is not None)
    u = _asymptotic(model, res, values, free, cov, dof, level, success,
                    "converged" if success else str(res.message))
    if ci == "profile" and free and u.success:
        _profile_into(u, _profile(model, (x, y, w), values, free, level, dof, bounds, u.se),
                      res.limits)
    elif ci == "bootstrap" and free:
        _bootstrap_into(u, bootstrap(model, x, y, w, values, free, fitted, n_boot=n_boot,
                                     resample=resample, seed=seed, bounds=bounds), free, level)
    u.notes[:0] = relative_notes
    params = {nm: Param(nm, float(values[nm]), float(u.se[nm]), float(u.lows[nm]),
                        float(u.highs[nm]), u.method[nm],
                        unit_of(model.units.get(nm, "1"), units or {}), fixed=nm in fix)
              for nm in model.params}
    aic, aicc, bic = information_criteria(rss, n, len(free) + 1)   # + the residual variance
    return FitResult(model=model.name, params=params, n=n, n_free=len(free), rss=rss,
                     sigma=math.sqrt(rss / dof) if dof > 0 else float("nan"), aic=aic,
                     aicc=aicc, bic=bic, level=level, success=u.success, message=u.message,
                     x=x, y=y, weights=w, fitted=fitted, cov=cov, free=tuple(free),
                     runs_p=runs_test(y - fitted), notes=tuple(u.notes), weighting=weighting,
                     resample=resample if ci == "bootstrap" else None, n_boot_ok=u.n_boot_ok,
                     func=model.func)


def _curve_weights(model: Model, x, y, start: dict, fix: dict, bounds: dict,
                   max_rounds: int = 30):
    """Relative weighting by the fitted curve: weights 1/|f(x)|, iterated to a fixed point
    (iteratively reweighted least squares for an error proportional to the mean; Carroll &
    Ruppert 1988, *Transformation and Weighting in Regression*, ch. 2).

    Weights from the observed values, 1/|y|, let a rate near zero by noise (a blank at [S] = 0,
    a low rate that came out slightly negative) outweigh all others many times over. The first
    round is unweighted. Readings where the fitted curve is zero ([S] = 0 under the
    Michaelis–Menten family) have no relative error to weigh by and carry no information on
    the parameters: they are left out, said in a note. Returns x, y, the weights, the start
    for the final fit and the notes."""
    w = np.ones_like(y)
    values = dict(start)
    for _ in range(max_rounds):
        res = _minimize(model, (x, y, w), values, fix, bounds)
        with np.errstate(all="ignore"):
            f = np.abs(model.func(x, *res.values.values()))
        top = float(np.max(f)) if f.size and np.all(np.isfinite(f)) else 0.0
        if top <= 0:
            raise FitError("relative weighting needs a fitted curve that is not zero everywhere",
                           "use --weighting none")
        new = np.where(f > 1e-9 * top, 1.0 / np.where(f > 0, f, 1.0), 0.0)
        moved = max((abs(res.values[k] - values[k]) / max(abs(values[k]), 1e-300)
                     for k in values), default=0.0)
        values, w_old, w = res.values, w, new
        if moved < 1e-9 and np.array_equal(w_old > 0, w > 0):
            break
    keep = w > 0
    notes = []
    if not keep.all():
        notes.append(f"{int((~keep).sum())} reading(s) where the fitted curve is zero (e.g. "
                     "[S] = 0) carry no weight under relative weighting and were left out")
    # scaled to a geometric mean of 1: the weighted RSS is then on the rates' own scale and
    # n ln(RSS/n) is the log-likelihood of y ~ N(f, sigma^2 f^2) (the sum of ln|f| cancels), so
    # AICc and F-tests compare models that each weigh by their own curve
    w = w[keep] / math.exp(float(np.mean(np.log(w[keep]))))
    return x[..., keep], y[keep], w, values, notes


def polish(model: Model, x, y, w, values: dict, free, tol: float, bounds: dict | None = None,
           max_steps: int = 60) -> dict:
    """Gauss–Newton steps from a solver's optimum until no free parameter moves by more than
    ``tol`` of its size (or the RSS stops falling): the last digits a least-squares solver
    leaves on a flat valley, where its relative-RSS stopping rule ends first (NIST StRD
    BoxBOD is such a case). Steps stay inside the parameters' bounds."""
    bounds = bounds or {}
    cur = dict(values)

    def rss_of(vals):
        with np.errstate(all="ignore"):
            r = (y - model.func(x, *vals.values())) * w
        return float(np.sum(r * r)), r

    rss, r = rss_of(cur)
    for _ in range(max_steps):
        J = _jacobian(model, x, w, cur, free, richardson=True)
        step = np.linalg.lstsq(J, r, rcond=None)[0]
        nxt = dict(cur)
        for j, nm in enumerate(free):
            lo, hi = bounds.get(nm, (model.lower.get(nm, -np.inf), model.upper.get(nm, np.inf)))
            nxt[nm] = float(min(max(cur[nm] + step[j], lo), hi))
        rss_n, r_n = rss_of(nxt)
        if not rss_n <= rss * (1 + 1e-12):       # a rise within rounding is no rise
            break
        moved = max(abs(nxt[nm] - cur[nm]) / max(abs(cur[nm]), 1e-300) for nm in free)
        cur, rss, r = nxt, rss_n, r_n
        if moved <= tol:
            break
    return cur


def _jacobian(model, x, w, values, free, richardson: bool = False) -> np.ndarray:
    """d(f w)/dp of the free parameters at ``values`` by central differences (:func:`fd_step`);
    with ``richardson`` the steps h and h/2 are combined, (4 D(h/2) - D(h)) / 3, cancelling the
    h^2 error term (Richardson extrapolation), for fits asked to a tight ``tol``."""
    base = [values[nm] for nm in model.params]

    def central(j, h):
        up, dn = list(base), list(base)
        up[j] += h
        dn[j] -= h
        with np.errstate(all="ignore"):
            return (model.func(x, *up) - model.func(x, *dn)) / (2 * h)

    cols = []
    for nm in free:
        j = model.params.index(nm)
        h = float(fd_step(base[j], 1e-8))
        if richardson:      # error h^4 against rounding eps/h: the step is eps^(1/5), not eps^(1/3)
            h *= RICHARDSON_STEP / FD_REL_STEP
            d = (4 * central(j, h / 2) - central(j, h)) / 3
        else:
            d = central(j, h)
        cols.append(d * w)
    return np.column_stack(cols)


def _covariance(model, x, w, values, free, scale, richardson: bool = False):
    """Covariance of the free parameters, (J'J)^-1 * scale, J by central differences at the
    optimum (more accurate than the solver's own forward-difference Jacobian)."""
    if not free:
        return None
    J = _jacobian(model, x, w, values, free, richardson)
    A = J.T @ J
    if not np.all(np.isfinite(A)) or np.linalg.matrix_rank(A) < len(free):
        return None
    cov = np.linalg.inv(A) * scale
    return cov if np.all(np.isfinite(cov)) and np.all(np.diag(cov) >= 0) else None


def past_limits(model: Model, r: FitResult) -> dict:
    """The free parameters whose asymptotic interval reaches past a finite limit of ``model``
    (a Ki interval from -0.44 for a Ki that is above 0): {name: the limit crossed}.

    A symmetric interval that crosses a limit misstates a parameter the data bound poorly; the
    profile interval (``ci="profile"``) keeps to the limit and is open where the data give no
    bound. Offsets (:attr:`Model.offsets`) are passed by: their zero means nothing."""
    out = {}
    for nm, p in r.params.items():
        if p.fixed or p.ci_method != "asymptotic" or nm in model.offsets:
            continue
        lo, hi = model.lower.get(nm, -np.inf), model.upper.get(nm, np.inf)
        if np.isfinite(lo) and p.ci_low < lo:
            out[nm] = lo
        elif np.isfinite(hi) and p.ci_high > hi:
            out[nm] = hi
    return out


def past_limit_text(p: Param, limit: float, remedy: str) -> str:
    """The warning for :func:`past_limits`: the interval, the limit it crosses, and ``remedy``
    (what gives a better interval); a positivity floor (0 < limit < 1e-6) reads as 0."""
    shown = 0.0 if 0 < limit < 1e-6 else limit
    side = "below" if p.ci_low < limit else "above"
    return (f"the asymptotic interval of {p.name}, "
            f"{fmt_interval(p.ci_low, p.ci_high, se=p.se)} {p.unit}".rstrip()
            + f", reaches {side} {shown:g}, where {p.name} cannot be: the data bound {p.name} "
            f"poorly and a symmetric interval misstates it; {remedy}")


def line_slope(x, y) -> tuple[float, float]:
    """Least-squares slope of y on x and its SE on n - 2 degrees of freedom (as
    ``scipy.stats.linregress``); x must take two values or more.

    >>> line_slope([0, 1, 2, 3], [1, 3, 5, 7])
    (2.0, 0.0)
    """
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    dx = x - x.mean()
    sxx = float(dx @ dx)
    slope = float(dx @ (y - y.mean())) / sxx
    res = y - y.mean() - slope * dx
    dof = max(x.size - 2, 1)
    return slope, math.sqrt(float(res @ res) / dof / sxx)


def information_criteria(rss: float, n: int, k: int) -> tuple[float, float, float]:
    """AIC, AICc and BIC of a least-squares fit with ``k`` estimated quantities (incl. sigma).

    AIC = n ln(RSS/n) + 2k (Akaike 1974); AICc adds 2k(k+1)/(n-k-1) (Hurvich & Tsai 1989,
    Biometrika 76:297); BIC = n ln(RSS/n) + k ln n (Schwarz 1978).
    """
    if rss <= 0:
        rss = 1e-300
    aic = n * math.log(rss / n) + 2 * k
    aicc = aic + (2 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else float("inf"))
    bic = n * math.log(rss / n) + k * math.log(n)
    return aic, aicc, bic


#: How far a profile is followed from the estimate before a side counts as open, in SEs.
PROFILE_REACH_SE = 4096.0


def _profile(model: Model, data: tuple, values: dict, free, level: float, dof: int,
             bounds: dict, se: dict) -> dict:
    """Profile-likelihood interval of each free parameter: the values at which the residual
    sum of squares, the other free parameters refitted, reaches RSS_min (1 + F(level; 1,
    dof) / dof), the profile t statistic squared (Bates & Watts 1988, *Nonlinear Regression
    Analysis and Its Applications*, section 6.1; the criterion of lmfit's ``conf_interval``).
    Each side is bracketed by steps that double from one SE and closed by Brent's method; a
    side that does not close within the parameter's bounds (or :data:`PROFILE_REACH_SE` SEs) is
    open: it runs to the parameter's limit (infinite without one), so that a Ki bounded below
    but not above reads [1.9, inf) rather than the asymptotic [-3.7, 16]. Where neither side
    closes the profile says nothing and the reason is given instead. ``data`` is (x, y, w).
    Returns {name: (low, high, why-not or None)}."""
    from scipy.optimize import brentq

    names = list(model.params)
    best = _weighted_rss(model, data, [values[nm] for nm in names])
    crit = float(f_quantile(level, 1, max(dof, 1)))
    out = {}
    for nm in free:
        refit = _refitter(model, data, values, free, nm, bounds)

        def excess(v, refit=refit):
            return (refit(v) / best - 1) * max(dof, 1) - crit

        lims = _limits(model, bounds, nm)
        try:
            sides = [_profile_side(excess, values[nm], sign, _step(values[nm], se[nm]), lims,
                                   brentq) for sign in (-1, 1)]
        except (ValueError, ArithmeticError) as exc:
            out[nm] = (None, None, f"the search failed ({type(exc).__name__})")
            continue
        lo, hi = sides
        if lo is None and hi is None:
            out[nm] = (None, None, "the profile does not close at this level on either side "
                       "(the data do not bound the parameter)")
            continue
        # one side closes: the other runs to the parameter's limit, or stays open
        out[nm] = (lims[0] if lo is None else lo, lims[1] if hi is None else hi, None)
    return out


def _weighted_rss(model: Model, data: tuple, p) -> float:
    x, y, w = data
    with np.errstate(all="ignore"):
        r = (y - model.func(x, *p)) * w
    return float(r @ r) if np.all(np.isfinite(r)) else math.inf


def _limits(model: Model, bounds: dict, nm: str) -> tuple[float, float]:
    return bounds.get(nm, (model.lower.get(nm, -np.inf), model.upper.get(nm, np.inf)))


def _refitter(model: Model, data: tuple, values: dict, free, nm: str, bounds: dict):
    """RSS with ``nm`` held at a value and the other free parameters refitted (each refit
    starts where the previous one ended)."""
    from scipy.optimize import least_squares

    names = list(model.params)
    others = [p for p in free if p != nm]
    lims = np.array([_limits(model, bounds, p) for p in others], dtype=float).reshape(-1, 2)
    bounded = bool(np.isfinite(lims).any())
    state = {"start": np.array([values[p] for p in others], dtype=float)}

    def refit(v: float) -> float:
        p = dict(values, **{nm: v})
        if not others:
            return _weighted_rss(model, data, [p[n] for n in names])
        start = np.clip(state["start"], lims[:, 0], lims[:, 1])
        r = least_squares(_residuals(model, data, p, others), start,
                          method="trf" if bounded else "lm",
                          bounds=(lims[:, 0], lims[:, 1]) if bounded else (-np.inf, np.inf),
                          xtol=1e-10, ftol=1e-12, gtol=1e-12, max_nfev=400 * (len(others) + 1))
        state["start"] = r.x
        return 2.0 * float(r.cost)

    return refit


def _step(value: float, se: float) -> float:
    """The first step of a profile: one asymptotic SE, or 5 % of the value without one."""
    if np.isfinite(se) and se > 0:
        return float(se)
    return 0.05 * abs(value) if value else 1e-3


def _profile_side(excess, value: float, sign: int, step: float, lims: tuple, brentq):
    """Where ``excess`` crosses zero on one side of ``value`` (None: no crossing in reach),
    to a ten-millionth of a SE (``step``)."""
    inner, k = value, 1.0
    while k <= PROFILE_REACH_SE:
        outer = value + sign * k * step
        edge = lims[0] if sign < 0 else lims[1]
        at_edge = (outer <= edge) if sign < 0 else (outer >= edge)
        if at_edge:
            outer = edge
        if np.isfinite(outer) and excess(outer) > 0:
            a, b = sorted((inner, outer))
            return float(brentq(excess, a, b, xtol=1e-7 * step, rtol=1e-12))
        if at_edge:
            return None
        inner, k = outer, k * 2
    return None


def separable_profile(basis, y, theta_hat: float, dof: int, level: float = 0.95, w=None,
                      span: float = 1e8, offset=None) -> tuple[float, float]:
    """Profile-likelihood interval of the one nonlinear parameter ``theta`` (> 0) of a model
    that is linear in all its other parameters, y = B(theta) c (+ offset(theta)).

    ``basis(theta)`` gives the design matrix B (n x m); ``offset(theta)``, where given, the part
    of the model that no free linear parameter scales (a fixed parameter's term), which moves
    with theta and is taken off y at each theta. At each theta the linear parameters are
    projected out by least squares (variable projection, Golub & Pereyra 1973, SIAM J. Numer.
    Anal. 10:413), so the profile is exact and costs one small least-squares solve per point.
    The interval holds the theta with (RSS(theta)/RSS_min - 1) dof <= F(level; 1, dof), the
    criterion lmfit's ``conf_interval`` uses (the profile t statistic squared; Bates & Watts
    1988). A side that does not close within ``span`` times ``theta_hat`` is open: 0 below,
    infinity above.
    """
    from scipy.optimize import brentq

    y = np.asarray(y, dtype=float)
    w = np.ones_like(y) if w is None else np.asarray(w, dtype=float)

    def rss(theta):
        yt = y if offset is None else y - offset(theta)
        B = basis(theta) * w[:, None]
        c = np.linalg.lstsq(B, yt * w, rcond=None)[0]
        r = yt * w - B @ c
        return float(r @ r)

    best = rss(theta_hat)
    crit = float(f_quantile(level, 1, max(dof, 1)))

    def excess(u):                      # u = ln theta; > 0 outside the interval
        return (rss(math.exp(u)) / best - 1) * max(dof, 1) - crit

    u0 = math.log(theta_hat)
    bounds = []
    for sign in (-1, 1):
        inner, step = u0, 0.05
        while step <= math.log(span):
            outer = u0 + sign * step
            if excess(outer) > 0:
                bounds.append(math.exp(brentq(excess, min(inner, outer), max(inner, outer),
                                              xtol=1e-12, rtol=1e-10)))
                break
            inner, step = outer, step * 2
        else:
            bounds.append(0.0 if sign < 0 else math.inf)
    return bounds[0], bounds[1]


@dataclass(frozen=True)
class Bootstrap:
    """Bootstrap estimates of the free parameters (converged resamples only)."""

    estimates: np.ndarray
    n_ok: int
    n_requested: int
    resample: str


def bootstrap(model: Model, x, y, w, values: dict, free, fitted, *, n_boot=2000,
              resample="residual", seed=0, bounds=None) -> Bootstrap:
    """Refit ``n_boot`` resampled datasets at once with :func:`batch_lm`.

    Residual resampling (x fixed by design) draws weighted residuals, inflated by
    sqrt(n / (n - p)) and centred, onto the fitted curve; case resampling draws (x, y) pairs.
    """
    rng = np.random.default_rng(seed)
    n = y.size
    idx = rng.integers(0, n, size=(n_boot, n))
    if resample == "residual":
        rw = (y - fitted) * w
        rw = (rw - rw.mean()) * math.sqrt(n / max(n - len(free), 1))
        ys = fitted[None, :] + rw[idx] / w[None, :]
        xs, ws = x, w[None, :]
    else:
        ys = y[idx]
        xs = x[..., idx]
        ws = w[idx]
    names = list(model.params)
    p0 = np.array([[values[nm] for nm in names]])
    bounds = bounds or {}
    lo = [bounds.get(nm, (model.lower.get(nm, -np.inf), 0))[0] for nm in names]
    hi = [bounds.get(nm, (0, model.upper.get(nm, np.inf)))[1] for nm in names]
    fi = [names.index(nm) for nm in free]
    r = batch_lm(model.func, xs, ys, ws, np.repeat(p0, n_boot, axis=0), free=fi, lower=lo,
                 upper=hi)
    ok = r.converged & np.all(np.isfinite(r.params), axis=1)
    return Bootstrap(r.params[ok][:, fi], int(ok.sum()), n_boot, resample)


def runs_test(residuals) -> float:
    """Two-sided p of the runs test on residual signs, normal approximation (NaN if too few).

    Wald & Wolfowitz (1940), Ann. Math. Stat. 11:147.
    """
    r = np.asarray(residuals, dtype=float)
    r = r[np.isfinite(r) & (r != 0)]
    n1, n2 = int(np.sum(r > 0)), int(np.sum(r < 0))
    n = n1 + n2
    if n1 == 0 or n2 == 0 or n < 6:
        return float("nan")
    runs = 1 + int(np.sum(np.sign(r[1:]) != np.sign(r[:-1])))
    mu = 2 * n1 * n2 / n + 1
    var = 2 * n1 * n2 * (2 * n1 * n2 - n) / (n * n * (n - 1))
    if var <= 0:
        return float("nan")
    z = (runs - mu) / math.sqrt(var)
    return float(normal_two_sided_p(z))


# --------------------------------------------------------------------------- comparison


@dataclass(frozen=True)
class Comparison:
    """Ranking of candidate fits: AICc table, nested F-tests, the one chosen and why."""

    rows: list
    ftests: list
    chosen: str
    reason: str
    failed: dict

    def to_dict(self) -> dict:
        """JSON-ready evidence."""
        return {"aicc_table": self.rows, "f_tests": self.ftests, "chosen": self.chosen,
                "reason": self.reason, "not_estimable": self.failed}

    def report(self) -> str:
        """The evidence as text."""
        lines = ["model                 k    AICc      dAICc   weight"]
        for r in self.rows:
            nums = (f"{r['aicc']:>9.3f} {r['delta_aicc']:>9.3f} {r['weight']:>7.3f}"
                    if np.isfinite(r["weight"]) else f"{'-':>9} {'-':>9} {'-':>7}")
            lines.append(f"{r['model']:<20} {r['k']:>2} {nums}"
                         f"{'  <- chosen' if r['model'] == self.chosen else ''}")
        for t in self.ftests:
            lines.append(f"F-test {t['simpler']} within {t['general']}: F = {t['F']:.3g} "
                         f"({t['df1']}, {t['df2']} df), {p_is(t['p'])}")
        for m, why in self.failed.items():
            lines.append(f"{m}: not estimable: {why}")
        lines.append(f"chosen: {self.chosen} ({self.reason})")
        return "\n".join(lines)


#: The ``ci_method`` of a constant the data do not determine (its value, SE and missing bound
#: null in the JSON): one word for every command.
NOT_IDENTIFIABLE = "not identifiable"


def held_p(model: Model, x, y, general: FitResult, held: dict, **kw) -> float:
    """p of the F-test of the fit ``general`` against the same ``model`` with the parameters
    ``held`` fixed at the values given (the profile-likelihood criterion at that point, Bates &
    Watts 1988), started from ``general``; NaN where the held fit fails. ``kw`` goes to
    :func:`fit` (weighting, SDs, bounds...)."""
    try:
        simple = fit(model, x, y, p0=general.values(), fix=held, **kw)
    except FitError:
        return math.nan
    return float(f_test(simple, general)["p"])


def f_test(simple: FitResult, general: FitResult) -> dict:
    """Extra-sum-of-squares F-test of a simpler model nested in a more general one."""
    df1 = general.n_free - simple.n_free
    df2 = general.dof
    if df1 <= 0 or df2 <= 0:
        return {"simpler": simple.model, "general": general.model, "F": float("nan"),
                "df1": df1, "df2": df2, "p": float("nan")}
    F = max((simple.rss - general.rss) / df1, 0.0) / (general.rss / df2) if general.rss > 0 else (
        float("inf"))
    p = float(f_tail(F, df1, df2)) if np.isfinite(F) else 0.0
    return {"simpler": simple.model, "general": general.model, "F": float(F), "df1": df1,
            "df2": df2, "p": p}


def _without_aicc(good: dict, ftests: list) -> tuple[list, str, str]:
    """Rows, choice and reason when no candidate has a finite AICc: too few points, n <= k + 1
    for every model (k counting the residual variance; Hurvich & Tsai 1989). Nothing ranks them,
    so the model with the fewest parameters is kept and the reason says so (with the F-tests
    against it, which need only one residual degree of freedom)."""
    rows = [{"model": m, "k": r.n_free, "rss": r.rss, "aicc": r.aicc,
             "delta_aicc": float("nan"), "weight": float("nan")} for m, r in good.items()]
    rows.sort(key=lambda d: d["k"])
    chosen = rows[0]["model"]
    n = good[chosen].n
    tests = "; ".join(f"F-test against {t['general']} {p_is(t['p'])}" for t in ftests
                      if t["simpler"] == chosen and np.isfinite(t["p"]))
    reason = (f"AICc is not defined for any candidate with only {n} points (it needs more than "
              f"k + 1 points for k estimated quantities); not ranked by evidence: the model with "
              f"the fewest parameters is kept" + (f" ({tests})" if tests else "")
              + "; measure more concentrations to compare models")
    return rows, chosen, reason


def compare(results: dict, nested=(), failed: dict | None = None, alpha: float = 0.05) -> Comparison:
    """Rank fits by AICc and choose one.

    The lowest AICc wins, except that a more general model whose extra parameters are not
    supported by the F-test (p >= ``alpha``) against a nested simpler candidate gives way to that
    simpler model. Exactly one model is chosen.
    """
    good = {m: r for m, r in results.items() if r.success}
    failed = dict(failed or {})
    for m, r in results.items():
        if not r.success:
            failed[m] = r.message
    if not good:
        raise FitError("no candidate model could be fitted",
                       "; ".join(f"{m}: {w}" for m, w in failed.items()) or "check the data")
    ftests = [f_test(good[a], good[b]) for a, b in nested if a in good and b in good]
    if not any(np.isfinite(r.aicc) for r in good.values()):
        rows, chosen, reason = _without_aicc(good, ftests)
        return Comparison(rows, ftests, chosen, reason, failed)
    best_aicc = min(r.aicc for r in good.values())
    raw = {m: math.exp(-0.5 * (r.aicc - best_aicc)) if np.isfinite(r.aicc) else 0.0
           for m, r in good.items()}
    tot = sum(raw.values()) or 1.0
    rows = sorted(({"model": m, "k": r.n_free, "rss": r.rss, "aicc": r.aicc,
                    "delta_aicc": r.aicc - best_aicc, "weight": raw[m] / tot}
                   for m, r in good.items()), key=lambda d: d["aicc"])
    chosen = rows[0]["model"]
    reason = f"lowest AICc ({rows[0]['aicc']:.2f})"
    for _ in range(len(good)):
        simpler = [t for t in ftests if t["general"] == chosen and t["p"] >= alpha]
        if not simpler:
            break
        t = min(simpler, key=lambda t: good[t["simpler"]].aicc)
        reason = (f"{chosen} had the lowest AICc but its extra parameter is not supported "
                  f"against {t['simpler']} (F-test {p_is(t['p'])}); the simpler model is kept")
        chosen = t["simpler"]
    return Comparison(rows, ftests, chosen, reason, failed)
