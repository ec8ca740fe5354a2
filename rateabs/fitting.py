"""The one fitting engine every analysis uses.

* :func:`fit` fits a :class:`~rateabs.models.Model` with lmfit (bounds, fixed parameters,
  weights) and attaches intervals by covariance (t-based), profile likelihood (Bates & Watts
  1988; computed by lmfit's profile search with the F criterion, equivalent to the profile t
  statistic for one parameter) or bootstrap (seeded; residual or case resampling).
* :func:`batch_lm` is a vectorised Levenberg–Marquardt solver that fits many datasets at once on
  arrays; it serves bootstrap resamples and per-trace fits, and agrees with lmfit (a test).
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
from dataclasses import dataclass, field, replace

import numpy as np
from scipy import stats

from .errors import FitError, UsageError
from .models import Model, unit_of


def param(value, se=None, ci_low=None, ci_high=None, ci_method=None, unit="") -> dict:
    """A fitted parameter as the JSON object of design.md §5."""
    return {"value": _num(value), "se": _num(se), "ci_low": _num(ci_low),
            "ci_high": _num(ci_high), "ci_method": ci_method, "unit": unit}


def _num(x):
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


CI_METHODS = ("asymptotic", "profile", "bootstrap")
WEIGHTINGS = ("none", "relative", "sd")


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
        """The JSON parameter object of design.md §5."""
        return param(self.value, self.se, self.ci_low, self.ci_high,
                     "fixed" if self.fixed else self.ci_method, self.unit)

    def __str__(self) -> str:
        if self.fixed:
            return f"{self.name} = {self.value:.6g} {self.unit} (fixed)"
        return (f"{self.name} = {self.value:.6g} ± {self.se:.3g} {self.unit}  "
                f"[{self.ci_low:.5g}, {self.ci_high:.5g}] ({self.ci_method})").replace("  ", " ")


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
        """JSON-ready summary (parameters as design.md parameter objects)."""
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
    """Weights that multiply residuals: 1, 1/|y| (relative) or 1/SD (given SDs)."""
    y = np.asarray(y, dtype=float)
    if weighting not in WEIGHTINGS:
        raise UsageError(f"unknown weighting {weighting!r}", f"use one of {', '.join(WEIGHTINGS)}")
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


def batch_lm(func, x, y, w, p0, free=None, lower=None, upper=None, max_iter=200,
             xtol=1e-10, ftol=1e-13, want_cov=False, jac=None) -> BatchResult:
    """Fit ``B`` datasets at once by Levenberg–Marquardt on arrays.

    ``func(x, *params)`` broadcasts with parameters of shape (B, 1); ``y`` and ``w`` are (B, n);
    ``x`` broadcasts against them; ``p0`` is (B, p). ``free`` lists the indices of the fitted
    parameters (the rest stay at p0). Bounds are enforced by projection. The Jacobian is by
    central differences, so a model is only a function; a model may pass ``jac(x, *params)``
    returning df/dp with shape (B, n, p) to save the extra evaluations.

    >>> import numpy as np
    >>> t = np.linspace(0, 10, 30); Y = np.stack([3 * np.exp(-0.5 * t), 2 * np.exp(-0.2 * t)])
    >>> r = batch_lm(lambda t, a, k: a * np.exp(-k * t), t, Y, np.ones_like(Y), [[1, 1], [1, 1]])
    >>> np.round(r.params, 6).tolist()
    [[3.0, 0.5], [2.0, 0.2]]
    """
    y = np.atleast_2d(np.asarray(y, dtype=float))
    B, n = y.shape
    w = np.broadcast_to(np.asarray(w, dtype=float), y.shape)
    P = np.array(np.broadcast_to(np.asarray(p0, dtype=float), (B, np.shape(p0)[-1])), dtype=float)
    p = P.shape[1]
    free = list(range(p)) if free is None else list(free)
    k = len(free)
    lo = np.full(p, -np.inf) if lower is None else np.asarray(lower, dtype=float)
    hi = np.full(p, np.inf) if upper is None else np.asarray(upper, dtype=float)
    scale = np.maximum(np.abs(P), 1e-12)

    def resid(PP, rows):
        xx = _take_rows(x, rows, B)
        with np.errstate(all="ignore"):
            f = _eval(func, xx, PP)
        return (y[rows] - f) * w[rows]

    def jacobian(rows):
        Pj = P[rows]
        if jac is not None:
            xx = _take_rows(x, rows, B)
            with np.errstate(all="ignore"):
                Ja = jac(xx, *[Pj[:, j:j + 1] for j in range(p)])
            return Ja[:, :, free] * w[rows][:, :, None]
        Jr = np.empty((rows.size, n, k))
        for c, j in enumerate(free):
            h = 6e-6 * np.maximum(np.abs(Pj[:, j]), 1e-6 * scale[rows, j]) + 1e-10
            up = np.minimum(Pj[:, j] + h, hi[j])
            dn = np.maximum(Pj[:, j] - h, lo[j])
            Pu, Pd = Pj.copy(), Pj.copy()
            Pu[:, j], Pd[:, j] = up, dn
            # residual = (y - f) w, so d(f w)/dp = -d(residual)/dp
            Jr[:, :, c] = -(resid(Pu, rows) - resid(Pd, rows)) / (up - dn)[:, None]
        return Jr

    rows_all = np.arange(B)
    r = resid(P, rows_all)
    S = np.sum(r * r, axis=1)
    S[~np.isfinite(S)] = np.inf
    lam = np.full(B, 1e-3)
    active = np.isfinite(S)
    converged = np.zeros(B, dtype=bool)
    J = np.zeros((B, n, k))
    need_j = np.ones(B, dtype=bool)
    it = 0
    for it in range(1, max_iter + 1):  # noqa: B007 - it is reported
        rows = np.nonzero(active)[0]
        if rows.size == 0:
            break
        jr = rows[need_j[rows]]
        if jr.size:
            J[jr] = jacobian(jr)
            need_j[jr] = False
        Jr = J[rows]
        rr = r[rows]
        JT = Jr.transpose(0, 2, 1)
        A = JT @ Jr                                   # batched BLAS, faster than einsum
        g = (JT @ rr[:, :, None])[:, :, 0]
        d = np.diagonal(A, axis1=1, axis2=2)
        d = np.maximum(d, 1e-12 * np.max(d, axis=1, keepdims=True) + 1e-300)
        M = A + (lam[rows][:, None] * d)[:, :, None] * np.eye(k)[None]
        try:
            delta = np.linalg.solve(M, g[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            delta = np.einsum("bij,bj->bi", np.linalg.pinv(M), g)
        Pn = P[rows].copy()
        Pn[:, free] = np.clip(Pn[:, free] + delta, lo[free], hi[free])
        rn = resid(Pn, rows)
        Sn = np.sum(rn * rn, axis=1)
        Sn[~np.isfinite(Sn)] = np.inf
        better = Sn < S[rows]
        acc = rows[better]
        rej = rows[~better]
        step = np.max(np.abs(Pn[better][:, free] - P[acc][:, free])
                      / np.maximum(np.abs(P[acc][:, free]), 1e-12 * scale[acc][:, free]),
                      axis=1) if acc.size else np.array([])
        gain = (S[acc] - Sn[better]) / np.maximum(S[acc], 1e-300)
        P[acc] = Pn[better]
        r[acc] = rn[better]
        S[acc] = Sn[better]
        lam[acc] = np.maximum(lam[acc] / 10, 1e-12)
        need_j[acc] = True
        lam[rej] *= 10
        done = acc[(gain <= ftol) | (step <= xtol) | (S[acc] == 0)]
        converged[done] = True
        active[done] = False
        stuck = rej[lam[rej] > 1e12]           # no downhill step left: at a minimum
        converged[stuck] = True
        active[stuck] = False
    cov = None
    if want_cov:
        Jf = jacobian(rows_all)
        A = Jf.transpose(0, 2, 1) @ Jf
        n_eff = np.sum(w > 0, axis=1)
        dof = np.maximum(n_eff - k, 1)
        cov = np.linalg.pinv(A) * (S / dof)[:, None, None]
    return BatchResult(P, S, converged & np.isfinite(S), it, cov)


def _take_rows(x, rows, B):
    """x restricted to the given datasets when x carries a dataset axis (shape (..., B, n))."""
    x = np.asarray(x, dtype=float)
    if B > 1 and x.ndim >= 2 and x.shape[-2] == B:
        return x[..., rows, :]
    return x


# --------------------------------------------------------------------------- single fit


def fit(model: Model, x, y, *, weighting: str = "none", sd=None, fix: dict | None = None,
        p0: dict | None = None, bounds: dict | None = None, ci: str = "asymptotic",
        level: float = 0.95, n_boot: int = 2000, resample: str = "residual", seed: int = 0,
        units: dict | None = None) -> FitResult:
    """Fit ``model`` to (x, y) and attach intervals.

    ``fix`` holds parameters kept at a value; ``p0`` overrides the automatic guess; ``bounds``
    maps a name to (low, high). ``ci`` is ``asymptotic`` (covariance, t-based), ``profile``
    (profile likelihood) or ``bootstrap`` (``n_boot`` resamples, ``resample`` = ``residual``
    for designed x or ``case``; seeded). ``units`` maps unit kinds (``x``, ``y``, ``i``) to
    unit strings for the parameters.

    Raises :class:`~rateabs.errors.FitError` when there are fewer points than free parameters;
    other failures return ``success=False`` with the reason.
    """
    import lmfit

    if ci not in CI_METHODS:
        raise UsageError(f"unknown interval method {ci!r}", f"use one of {', '.join(CI_METHODS)}")
    if not 0 < level < 1:
        raise UsageError(f"confidence level {level} must lie between 0 and 1", "e.g. 0.95")
    if resample not in ("residual", "case"):
        raise UsageError(f"unknown resampling {resample!r}", "use residual or case")
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    fix = dict(fix or {})
    unknown = set(fix) - set(model.params)
    if unknown:
        raise UsageError(f"model {model.name} has no parameter {sorted(unknown)[0]!r}",
                         f"its parameters are {', '.join(model.params)}")
    ok = np.isfinite(y) & np.all(np.isfinite(x.reshape(-1, y.size)), axis=0)
    if not ok.all():
        x, y = x[..., ok], y[ok]
        sd = None if sd is None else np.asarray(sd, dtype=float)[ok]
    n = y.size
    free = [p for p in model.params if p not in fix]
    if n <= len(free):
        raise FitError(f"not estimable: {n} points for {len(free)} free parameters of "
                       f"{model.name}", "measure more concentrations or fix a parameter")
    w = make_weights(y, weighting, sd)
    start = model.guess(x, y)
    start.update(p0 or {})
    start.update(fix)
    units = units or {}
    bounds = bounds or {}

    pars = lmfit.Parameters()
    for name in model.params:
        lo, hi = bounds.get(name, (model.lower.get(name, -np.inf), model.upper.get(name, np.inf)))
        v0 = float(start[name])
        if name not in fix:
            v0 = min(max(v0, lo if np.isfinite(lo) else v0), hi if np.isfinite(hi) else v0)
        pars.add(name, value=v0, min=lo, max=hi, vary=name not in fix)

    def residual(ps):
        vals = [ps[nm].value for nm in model.params]
        with np.errstate(all="ignore"):
            r = (y - model.func(x, *vals)) * w
        return np.where(np.isfinite(r), r, 1e150)

    scale_covar = weighting != "sd"
    mini = lmfit.Minimizer(residual, pars, scale_covar=scale_covar, nan_policy="propagate")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = mini.minimize(method="least_squares", max_nfev=4000 * (len(free) + 1),
                            xtol=1e-15, ftol=1e-15, gtol=1e-15)
    values = {nm: res.params[nm].value for nm in model.params}
    fitted = model.func(x, *values.values())
    rw = (y - fitted) * w
    rss = float(np.sum(rw * rw))
    dof = n - len(free)
    sigma = math.sqrt(rss / dof) if dof > 0 else float("nan")
    notes: list[str] = []
    success = bool(res.success) and np.all(np.isfinite(fitted))
    message = str(res.message) if not success else "converged"
    cov = _covariance(model, x, w, values, free, rss / dof if (scale_covar and dof > 0) else 1.0)
    se = {nm: 0.0 for nm in model.params}
    for j, nm in enumerate(free):
        se[nm] = float(np.sqrt(cov[j, j])) if cov is not None else float("nan")
    if cov is None and free:
        notes.append("the covariance matrix could not be estimated: the parameters are not "
                     "identifiable from these data")
        success = False
        message = "not identifiable (singular covariance)"
    for nm in free:
        lo, hi = res.params[nm].min, res.params[nm].max
        v = values[nm]
        if (np.isfinite(lo) and abs(v - lo) <= 1e-9 * max(1.0, abs(lo))) or (
                np.isfinite(hi) and abs(v - hi) <= 1e-9 * max(1.0, abs(hi))):
            notes.append(f"{nm} ended at its bound ({v:.4g}); its interval is not reliable")
        if np.isfinite(se[nm]) and v != 0 and se[nm] / abs(v) > 10:
            notes.append(f"{nm} is poorly determined (SE {se[nm]:.3g} is over 10x its value)")
            success = False
            message = f"not identifiable: {nm} is not determined by these data"

    tq = stats.t.ppf(0.5 + level / 2, dof) if dof > 0 else float("nan")
    lows = {nm: values[nm] - tq * se[nm] for nm in model.params}
    highs = {nm: values[nm] + tq * se[nm] for nm in model.params}
    method = {nm: "asymptotic" for nm in model.params}
    n_ok = None
    if ci == "profile" and free and success:
        prof = _profile(lmfit, mini, res, model, free, level, values)
        for nm, (lo, hi, why) in prof.items():
            if why:
                notes.append(f"profile interval of {nm}: {why}; asymptotic interval shown")
            else:
                lows[nm], highs[nm], method[nm] = lo, hi, "profile"
    elif ci == "bootstrap" and free:
        boot = bootstrap(model, x, y, w, values, free, fitted, n_boot=n_boot, resample=resample,
                         seed=seed, bounds=bounds)
        n_ok = boot.n_ok
        if boot.n_ok < max(20, 0.5 * n_boot):
            notes.append(f"only {boot.n_ok} of {n_boot} bootstrap resamples converged; "
                         "asymptotic intervals shown")
        else:
            for j, nm in enumerate(free):
                est = boot.estimates[:, j]
                lo, hi = np.quantile(est, [0.5 - level / 2, 0.5 + level / 2])
                lows[nm], highs[nm], method[nm] = float(lo), float(hi), f"bootstrap-{resample}"
                se[nm] = float(np.std(est, ddof=1))
            if boot.n_ok < n_boot:
                notes.append(f"{n_boot - boot.n_ok} of {n_boot} bootstrap resamples did not "
                             "converge and were left out")

    params = {}
    for nm in model.params:
        params[nm] = Param(nm, float(values[nm]), float(se[nm]), float(lows[nm]),
                           float(highs[nm]), method[nm], unit_of(model.units.get(nm, "1"), units),
                           fixed=nm in fix)
    k = len(free) + 1   # + the residual variance
    aic, aicc, bic = information_criteria(rss, n, k)
    return FitResult(model=model.name, params=params, n=n, n_free=len(free), rss=rss,
                     sigma=sigma, aic=aic, aicc=aicc, bic=bic, level=level, success=success,
                     message=message, x=x, y=y, weights=w, fitted=fitted, cov=cov,
                     free=tuple(free), runs_p=runs_test(y - fitted), notes=tuple(notes),
                     weighting=weighting, resample=resample if ci == "bootstrap" else None,
                     n_boot_ok=n_ok, func=model.func)


def _covariance(model, x, w, values, free, scale):
    """Covariance of the free parameters, (J'J)^-1 * scale, J by central differences at the
    optimum (more accurate than the solver's own forward-difference Jacobian)."""
    if not free:
        return None
    base = [values[nm] for nm in model.params]
    cols = []
    for nm in free:
        j = model.params.index(nm)
        h = 1e-6 * max(abs(base[j]), 1e-8)
        up, dn = list(base), list(base)
        up[j] += h
        dn[j] -= h
        with np.errstate(all="ignore"):
            cols.append((model.func(x, *up) - model.func(x, *dn)) / (2 * h) * w)
    J = np.column_stack(cols)
    A = J.T @ J
    if not np.all(np.isfinite(A)) or np.linalg.matrix_rank(A) < len(free):
        return None
    cov = np.linalg.inv(A) * scale
    return cov if np.all(np.isfinite(cov)) and np.all(np.diag(cov) >= 0) else None


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


def _profile(lmfit, mini, res, model, free, level, values):
    out = {}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ci = lmfit.conf_interval(mini, res, p_names=list(free), sigmas=[level], maxiter=400)
    except Exception as exc:  # lmfit raises several kinds when a profile cannot close
        return {nm: (None, None, f"the search failed ({type(exc).__name__})") for nm in free}
    for nm in free:
        rows = ci.get(nm, [])
        lo = next((v for p, v in rows if p > 0 and v < values[nm]), None)
        hi = next((v for p, v in reversed(rows) if p > 0 and v > values[nm]), None)
        finite = lo is not None and hi is not None and np.isfinite(lo) and np.isfinite(hi)
        out[nm] = (lo, hi, None if finite else "the profile does not close at this level "
                   "(the data do not bound the parameter)")
    return out


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
    return float(2 * stats.norm.sf(abs(z)))


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
            lines.append(f"{r['model']:<20} {r['k']:>2} {r['aicc']:>9.3f} {r['delta_aicc']:>9.3f} "
                         f"{r['weight']:>7.3f}{'  <- chosen' if r['model'] == self.chosen else ''}")
        for t in self.ftests:
            lines.append(f"F-test {t['simpler']} within {t['general']}: F = {t['F']:.3g} "
                         f"({t['df1']}, {t['df2']} df), p = {fmt_p(t['p'])}")
        for m, why in self.failed.items():
            lines.append(f"{m}: not estimable: {why}")
        lines.append(f"chosen: {self.chosen} ({self.reason})")
        return "\n".join(lines)


def f_test(simple: FitResult, general: FitResult) -> dict:
    """Extra-sum-of-squares F-test of a simpler model nested in a more general one."""
    df1 = general.n_free - simple.n_free
    df2 = general.dof
    if df1 <= 0 or df2 <= 0:
        return {"simpler": simple.model, "general": general.model, "F": float("nan"),
                "df1": df1, "df2": df2, "p": float("nan")}
    F = max((simple.rss - general.rss) / df1, 0.0) / (general.rss / df2) if general.rss > 0 else (
        float("inf"))
    p = float(stats.f.sf(F, df1, df2)) if np.isfinite(F) else 0.0
    return {"simpler": simple.model, "general": general.model, "F": float(F), "df1": df1,
            "df2": df2, "p": p}


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
    best_aicc = min(r.aicc for r in good.values())
    raw = {m: math.exp(-0.5 * (r.aicc - best_aicc)) if np.isfinite(r.aicc) else 0.0
           for m, r in good.items()}
    tot = sum(raw.values()) or 1.0
    rows = sorted(({"model": m, "k": r.n_free, "rss": r.rss, "aicc": r.aicc,
                    "delta_aicc": r.aicc - best_aicc, "weight": raw[m] / tot}
                   for m, r in good.items()), key=lambda d: d["aicc"])
    ftests = [f_test(good[a], good[b]) for a, b in nested if a in good and b in good]
    chosen = rows[0]["model"]
    reason = f"lowest AICc ({rows[0]['aicc']:.2f})"
    for _ in range(len(good)):
        simpler = [t for t in ftests if t["general"] == chosen and t["p"] >= alpha]
        if not simpler:
            break
        t = min(simpler, key=lambda t: good[t["simpler"]].aicc)
        reason = (f"{chosen} had the lowest AICc but its extra parameter is not supported "
                  f"against {t['simpler']} (F-test p = {fmt_p(t['p'])}); the simpler model is kept")
        chosen = t["simpler"]
    return Comparison(rows, ftests, chosen, reason, failed)


def with_param(result: FitResult, p: Param) -> FitResult:
    """A copy of ``result`` with one more (derived) parameter appended."""
    params = dict(result.params)
    params[p.name] = p
    return replace(result, params=params)
