"""The whole-curve family of initial slopes and its batched fit.

One family of progress curves, each member a special case with a name::

    y(t) = c + v F(t),   F = z(k phi(t), rho) / k    (F = phi(t) in the limit k -> 0)

* ``z`` is the fraction of the signal's full change reached, from the integrated
  Michaelis–Menten equation (Schnell & Mendoza 1997, J. Theor. Biol. 187:207:
  S = Km W[(S0/Km) exp((S0 - V t)/Km)]) written with rho = S0/(Km + S0) and k = V/(Km + S0):
  rho z - (1 - rho) ln(1 - z) = k t. ``rho = 0`` is the exponential approach (substrate far
  below Km, or first-order loss of enzyme at saturating substrate, Selwyn 1965, Biochim.
  Biophys. Acta 105:193); ``rho`` near 1 runs straight until the substrate is nearly gone;
  ``rho < 0`` is the same integrated form with competitive product inhibition
  (t = a P + b ln(S0/(S0 - P)), the integrated rate equation with product inhibition, e.g.
  Cornish-Bowden, Fundamentals of Enzyme Kinetics; from memory).
* ``phi(t) = t - L (1 - exp(-t/L))`` switches the rate on with a first-order lag of time
  constant ``L`` (a hysteretic enzyme, Frieden 1970, J. Biol. Chem. 245:5788; a coupled assay
  whose coupling step is first order, McClure 1969, Biochemistry 8:2782); the final straight
  part extrapolates to the time axis at t = L, the lag time. ``phi = t`` without a lag.
* ``v`` is the initial slope: dy/dt at t = 0 without a lag; with a lag, the slope the fully
  active enzyme has at the initial substrate, the number a lag-phase assay reports.

Members: ``line`` (k = 0), ``exp`` (rho = 0), ``mm`` (rho free), ``lag`` (k = 0, L free) and
``lag-exp`` (rho = 0, k and L free).

The fit is separable: for fixed (k, rho, L) the curve is a straight line in F, so c and v follow
from sums. Every trace is first fitted on a grid of (k, rho, L) at once (three sums of products
over the traces x times array), and the optimum between grid points is found by parabolas
through the best point and its neighbours (the exponential's initial slope within 0.02 SE of
scipy's curve_fit, tests/test_slopes_curves.py); members with two shape parameters are then
polished by Levenberg–Marquardt. The analytic Jacobian there gives the SE of v.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import partial

import numpy as np

from ..fitting import batch_lm
from . import chi2, prepare

#: The members of the family and the parameters each one fits (of c, v, k, rho, L).
MEMBERS = {"line": (0, 1), "exp": (0, 1, 2), "mm": (0, 1, 2, 3), "lag": (0, 1, 4),
           "lag-exp": (0, 1, 2, 4)}

#: Bounds of rho: below -1 the product would inhibit more strongly than any assay worth a rate;
#: above 0.97 the curve is a straight line with a corner, which a window describes better.
RHO_RANGE = (-1.0, 0.97)

_HALLEY_STEPS = 3           # reach rounding for every (k t, rho) in range (tests/test_slopes_curves.py)
_SERIES = 1e-3              # below this |k phi| the Taylor series of F is exact to 1e-9


#: How many numbers the elementwise functions below work on at once: arrays are taken in blocks
#: of rows of about this size, whose temporaries stay in the processor's cache (each number is
#: computed on its own, so blocks change no result).
BLOCK_NUMBERS = 16384


def row_blocks(shape) -> list[slice]:
    """Slices of the leading axis of an array of ``shape`` holding about
    :data:`BLOCK_NUMBERS` numbers each; one slice of everything for a small or 1-D array."""
    if len(shape) < 2 or int(np.prod(shape)) <= 2 * BLOCK_NUMBERS:
        return [slice(None)]
    step = max(1, BLOCK_NUMBERS // int(np.prod(shape[1:])))
    return [slice(i, i + step) for i in range(0, shape[0], step)]


def _rows_of(x, sl: slice, shape):
    """The rows ``sl`` of an argument broadcasting to ``shape`` (unchanged where it has a single
    row or fewer dimensions: it broadcasts over the rows)."""
    x = np.asarray(x, float)
    return x[sl] if x.ndim == len(shape) and x.shape[0] == shape[0] else x


def mm_conversion(theta, rho):
    """z and q = -ln(1 - z) with rho z - (1 - rho) ln(1 - z) = theta, elementwise (theta >= 0
    where rho != 0, see :func:`shape_of`).

    In q the equation reads g(q) = (1 - rho) q + rho (1 - exp(-q)) - theta = 0, with g
    increasing; g is concave for rho > 0 and convex for rho < 0, and a = (theta - rho)/(1 - rho)
    and theta bound the root (from below for rho > 0, from above for rho < 0). Halley's method
    from the bound reaches the rounding of g in three steps for every rho in range.
    """
    theta, rho = np.broadcast_arrays(np.asarray(theta, float), np.asarray(rho, float))
    blocks = row_blocks(theta.shape)
    if len(blocks) > 1:
        z, q = np.empty(theta.shape), np.empty(theta.shape)
        for sl in blocks:
            z[sl], q[sl] = mm_conversion(theta[sl], rho[sl])
        return z, q
    if not np.any(rho):
        return -np.expm1(-theta), theta
    # written in place, each step's operations in the order of the formula:
    # q <- q - 2 g g1 / (2 g1 g1 + g e)
    omr = 1 - rho
    q = theta - rho
    q /= omr
    q = np.where(rho >= 0, np.maximum(theta, q), np.minimum(theta, q))
    em, e, g, g1, h = (np.empty_like(q) for _ in range(5))
    for _ in range(_HALLEY_STEPS):
        np.expm1(np.negative(q, out=em), out=em)       # one transcendental a step: exp(-q) = em + 1
        np.multiply(rho, np.add(em, 1, out=e), out=e)
        np.multiply(omr, q, out=g)
        g -= np.multiply(rho, em, out=h)
        g -= theta                                      # g
        np.add(omr, e, out=g1)                          # g'
        np.multiply(g, e, out=e)
        np.multiply(2, g1, out=h)
        h *= g1
        h += e                                          # 2 g'^2 + g g''
        np.multiply(2, g, out=g)
        g *= g1
        g /= h
        q -= g
    return np.negative(np.expm1(np.negative(q, out=em), out=em), out=em), q


def lag_clock(t, lag):
    """phi = t - L (1 - exp(-t/L)) and d(phi)/dL; phi = t where L = 0."""
    t = np.asarray(t, float)
    lag = np.asarray(lag, float)
    if not np.any(lag):
        return t + 0 * lag, np.zeros(np.broadcast_shapes(t.shape, lag.shape))
    safe = np.where(lag > 0, lag, 1.0)
    with np.errstate(over="ignore"):
        e = np.exp(-t / safe)
    phi = np.where(lag > 0, t + safe * np.expm1(-t / safe), t)
    dphi = np.where(lag > 0, -(1 - e) + t / safe * e, 0.0)
    return phi, dphi


def shape_of(k, rho):
    """rho where k >= 0; 0 where k < 0 (a rate that speeds up has no substrate shape)."""
    return np.where(k < 0, 0.0, rho) if np.any(rho) else rho


def _series(rho):
    """Taylor coefficients of F/phi in theta = k phi: 1 + a theta + b theta^2."""
    return -(1 - rho) / 2, (1 - rho) * (1 - 3 * rho) / 6


def progress(t, c, v, k, rho, lag):
    """The family's curve y = c + v F(t) (module docstring); broadcasts like batch_lm asks."""
    shape = np.broadcast_shapes(*(np.shape(x) for x in (t, c, v, k, rho, lag)))
    blocks = row_blocks(shape)
    if len(blocks) > 1:
        out = np.empty(shape)
        for sl in blocks:
            out[sl] = progress(*(_rows_of(x, sl, shape) for x in (t, c, v, k, rho, lag)))
        return out
    phi, _ = lag_clock(t, lag)
    theta = k * phi
    rho = shape_of(k, rho)
    with np.errstate(all="ignore"):
        z, _ = mm_conversion(theta, rho)
        a, b = _series(rho)
        F = np.where(np.abs(theta) < _SERIES, phi * (1 + a * theta + b * theta * theta),
                     z / np.where(k == 0, 1.0, k))
    return c + v * F


def progress_jac(t, c, v, k, rho, lag, want=(0, 1, 2, 3, 4)):
    """d y / d(c, v, k, rho, L) of :func:`progress`, shape (B, n, 5); only the columns in
    ``want`` are computed (the others are 0)."""
    shape = np.broadcast_shapes(*(np.shape(x) for x in (t, v, k, rho, lag)))
    blocks = row_blocks(shape)
    if len(blocks) > 1:
        out = np.empty(shape + (5,))
        for sl in blocks:
            out[sl] = progress_jac(*(_rows_of(x, sl, shape) for x in (t, c, v, k, rho, lag)),
                                   want)
        return out
    phi, dphi = lag_clock(t, lag)
    theta = k * phi
    rho = shape_of(k, rho)
    out = np.zeros(shape + (5,))
    out[..., 0] = 1.0
    small = np.broadcast_to(np.abs(theta) < _SERIES, shape)
    with np.errstate(all="ignore"):
        if small.all():             # a straight member (k = 0): the series alone
            _series_jac(out, Ellipsis, want, phi, theta, k, rho, v, dphi)
            return out
        _exact_jac(out, want, phi, dphi, theta, k, rho, v)
        if small.any():
            _series_jac(out, small, want, *(np.broadcast_to(x, shape)[small] for x in (
                phi, theta, k, rho, v, dphi)))
    return out


def _exact_jac(out, want, phi, dphi, theta, k, rho, v) -> None:
    """The columns of :func:`progress_jac` from the closed form of F (every reading; those
    where |k phi| is small are written again from the series)."""
    kk = np.where(k == 0, 1.0, k)
    z, q = mm_conversion(theta, rho)
    d = 1 - rho * z
    z_theta = (1 - z) / d
    out[..., 1] = z / kk
    if 2 in want:
        out[..., 2] = v * ((z_theta * theta - z) / (kk * kk))
    if 3 in want:
        m = (q - z) * (1 - z) / d / kk
        out[..., 3] = v * (np.where(k < 0, 0.0, m) if np.any(k < 0) else m)
    if 4 in want:
        out[..., 4] = v * z_theta * dphi


def _series_jac(out, small, want, phi, theta, k, rho, v, dphi) -> None:
    """The columns of :func:`progress_jac` where |k phi| is below :data:`_SERIES` (``small``, a
    mask or ``...`` for all), from the Taylor series of F (the arguments are the values
    there)."""
    a, b = _series(rho)
    out[small, 1] = phi * (1 + a * theta + b * theta * theta)
    if 2 in want:
        out[small, 2] = v * (a * phi * phi + 2 * b * k * phi ** 3)
    if 3 in want:
        out[small, 3] = v * np.where(k < 0, 0.0, phi * (theta / 2 + (6 * rho - 4) / 6 * theta
                                                         * theta))
    if 4 in want:
        out[small, 4] = v * (1 + 2 * a * theta + 3 * b * theta * theta) * dphi


def progress_value_jac(t, c, v, k, rho, lag, want=(0, 1, 2, 3, 4)):
    """:func:`progress` and :func:`progress_jac` from one evaluation (the curve is c + v times
    the Jacobian's column of v): (y, dy/dp), for :func:`rateabs.fitting.batch_lm`."""
    J = progress_jac(t, c, v, k, rho, lag, want)
    return c + v * J[..., 1], J


# --------------------------------------------------------------------------- the grid

#: The grid each member is searched on: k x span (inner axis), and rho or L / span (outer axis).
_KAPPA = np.geomspace(0.02, 20.0, 40)
_LAGS = np.geomspace(0.01, 0.5, 24)
GRID = {
    "exp": (np.concatenate([-np.array([1.5, 1.0, 0.6, 0.35, 0.2, 0.1, 0.05]), [0.0], _KAPPA]),
            "rho", np.zeros(1)),
    "mm": (_KAPPA, "rho", np.array([-1.0, -0.6, -0.3, 0.2, 0.4, 0.55, 0.67, 0.77, 0.85, 0.91,
                                    0.95, 0.97])),
    "lag": (np.zeros(1), "lag", _LAGS),
    "lag-exp": (np.concatenate([[0.0], _KAPPA[:28]]), "lag", _LAGS[::2]),
}


def _parabola_min(x, r):
    """Vertex of the parabola through the lowest point of each row of ``r`` (on the grid ``x``,
    increasing) and its two neighbours, within them; the lowest point itself at an edge or
    where the three do not curve upwards. Returns (x at the vertex, r there)."""
    rows = np.arange(r.shape[0])
    i = np.argmin(r, axis=1)
    if x.size < 3:
        return x[i], r[rows, i]
    j = np.clip(i, 1, x.size - 2)
    x0, x1, x2 = x[j - 1], x[j], x[j + 1]
    y0, y1, y2 = r[rows, j - 1], r[rows, j], r[rows, j + 1]
    with np.errstate(all="ignore"):
        d01 = (y1 - y0) / (x1 - x0)
        c2 = ((y2 - y1) / (x2 - x1) - d01) / (x2 - x0)
        xv = np.clip((x0 + x1) / 2 - d01 / (2 * c2), x0, x2)
        yv = y0 + d01 * (xv - x0) + c2 * (xv - x0) * (xv - x1)
    ok = (i == j) & np.isfinite(yv) & (c2 > 0)
    return np.where(ok, xv, x[i]), np.where(ok, np.minimum(yv, y1), r[rows, i])


def grid_rss(times, Y, W, k, rho, lag) -> np.ndarray:
    """Weighted RSS of the best straight line of Y in F(t; k, rho, L), for every trace (rows of
    ``Y``, ``W``) and every grid point (the arrays ``k``, ``rho``, ``lag``): shape (N, G).

    ``times`` (n,) are representative times of the columns: F is tabulated per grid point (in
    chunks of at most ``prepare.CHUNK_READINGS`` numbers) and the sums come from products (:func:`_dot`).
    """
    times = np.asarray(times, float)[None, :]
    sw = W.sum(axis=1)[:, None]
    wy = W * Y
    sy = wy.sum(axis=1)[:, None]
    syy = (wy * Y).sum(axis=1)[:, None]
    Wd, which = distinct_rows(W)
    step = max(1, prepare.CHUNK_READINGS // max(times.shape[1], 1))
    out = np.empty((Y.shape[0], np.size(k)))
    for g0 in range(0, np.size(k), step):
        part = slice(g0, g0 + step)
        F = progress(times, 0.0, 1.0, k[part, None], rho[part, None], lag[part, None])
        F[~np.isfinite(F)] = 0.0
        sf, sfy = _dot(Wd, F)[which], _dot(wy, F)
        F *= F
        sff = _dot(Wd, F)[which]
        with np.errstate(all="ignore"):
            var_f = sff - sf * sf / sw
            cov = sfy - sf * sy / sw
            rss = syy - sy * sy / sw - cov * cov / var_f
        out[:, part] = np.where(np.isfinite(rss) & (var_f > 1e-12 * np.maximum(sff, 1e-300)),
                                rss, np.inf)
    return out


def _dot(A, B) -> np.ndarray:
    """A @ B.T summed in an order that depends on neither matrix's number of rows (a BLAS
    product may round differently as they change), so that traces and grid points taken in
    chunks give the numbers the whole plate gives."""
    return np.einsum("ij,gj->ig", A, B)


def distinct_rows(W) -> tuple[np.ndarray, np.ndarray]:
    """The distinct rows of ``W`` and, for every row, the index of its own among them.

    Traces whose weights are the same row (on a plate nearly all: every reading used) share the
    sums that involve only the weights and the grid, so those are formed once per distinct row;
    :func:`_dot` rounds each product on its own, so the numbers are those of every row.
    """
    W = np.ascontiguousarray(W, dtype=float)
    if W.ndim != 2 or 0 in W.shape:
        return W, np.arange(W.shape[0])
    keys = W.view(np.dtype((np.void, W.itemsize * W.shape[1]))).ravel()
    _, first, which = np.unique(keys, return_index=True, return_inverse=True)
    return W[first], which.ravel()


#: A trace whose used readings lie further than this share of the span from the columns'
#: representative times (its first readings masked, its own clock) gets a grid of its own.
TIME_TOLERANCE = 0.005


def _clock_groups(times, T, W, span: float) -> list[tuple[np.ndarray, np.ndarray]]:
    """The traces by clock: (rows, times) pairs, the traces whose used readings lie within
    :data:`TIME_TOLERANCE` of the columns' ``times`` first (with those), then the others
    grouped by their own times (a trace whose first readings are masked)."""
    own = np.where(W > 0, T, np.nan)
    off = np.nanmax(np.abs(own - np.asarray(times)[None, :]), axis=1,
                    initial=0.0) > TIME_TOLERANCE * span
    groups = [(np.nonzero(~off)[0], times)] if (~off).any() else []
    if off.any():
        rows = np.nonzero(off)[0]
        clocks, which = np.unique(np.round(np.where(W[off] > 0, T[off], -1.0), 9), axis=0,
                                  return_inverse=True)
        groups += [(rows[which.ravel() == c], np.nan_to_num(T[rows[which.ravel() == c][0]]))
                   for c in range(clocks.shape[0])]
    return groups


def grid_optimum(member: str, times, Y, W, span: float, T=None) -> tuple[np.ndarray, np.ndarray]:
    """(k, rho, L) of every trace for ``member`` from the grid, and the RSS there.

    Along one axis (``exp``: k; ``lag``: L) the optimum comes from a parabola through the best
    point and its neighbours; a member with two axes starts the polish (:func:`fit_member`)
    from its best grid point. ``T`` (the traces' own times, like ``Y``) gives the traces whose
    times differ from ``times`` a tabulation of their own, one per distinct clock.
    """
    if T is not None:
        groups = _clock_groups(times, T, W, span)
        if len(groups) > 1 or (groups and groups[0][1] is not times):
            shape, best = np.zeros((Y.shape[0], 3)), np.zeros(Y.shape[0])
            for rows, t in groups:
                shape[rows], best[rows] = grid_optimum(member, t, Y[rows], W[rows], span)
            return shape, best
    kappa, outer_name, outer = GRID[member]
    kk, oo = np.meshgrid(kappa, outer, indexing="xy")               # (n_outer, n_kappa)
    rho = oo if outer_name == "rho" else np.zeros_like(oo)
    lag = oo * span if outer_name == "lag" else np.zeros_like(oo)
    rss = grid_rss(times, Y, W, kk.ravel() / span, rho.ravel(), lag.ravel())
    zero = np.zeros(Y.shape[0])
    if outer.size == 1:
        kap, best = _parabola_min(kappa, rss)
        return np.column_stack([kap / span, zero, zero]), best
    if kappa.size == 1:
        o, best = _parabola_min(outer, rss)
        return np.column_stack([zero, o * (outer_name == "rho"), o * span * (
            outer_name == "lag")]), best
    i = np.argmin(rss, axis=1)
    shape = np.column_stack([kk.ravel()[i] / span, rho.ravel()[i], lag.ravel()[i]])
    return shape, rss[np.arange(Y.shape[0]), i]


# --------------------------------------------------------------------------- one member


@dataclass(frozen=True)
class MemberFit:
    """One member fitted to some traces.

    ``rows`` index the traces; ``params`` (R, 5) are c, v, k, rho, L; ``rss`` the weighted RSS
    and ``dof`` its degrees of freedom; ``v_weights`` (R, n) turn the readings into v (to first
    order v is their dot product with the readings, so covariances with other estimates
    follow); ``fitted`` (R, n) the curve at the readings.
    """

    member: str
    rows: np.ndarray
    params: np.ndarray
    rss: np.ndarray
    dof: np.ndarray
    v_weights: np.ndarray
    fitted: np.ndarray


def _line_in_f(F, Y, W):
    """c and v of the least-squares line Y = c + v F per row (weights W)."""
    sw = W.sum(axis=1)
    with np.errstate(all="ignore"):
        fm = (W * F).sum(axis=1) / sw
        ym = (W * Y).sum(axis=1) / sw
        v = (W * (F - fm[:, None]) * (Y - ym[:, None])).sum(axis=1) / (
            W * (F - fm[:, None]) ** 2).sum(axis=1)
    return ym - v * fm, v


def straight_rss(T, Y, W) -> np.ndarray:
    """The weighted RSS of each row's least-squares straight line: the ``line`` member's
    (:func:`fit_member`), whose curve is F = t, by the same sums, without its Jacobian."""
    c, v = _line_in_f(T, Y, W)
    resid = (Y - (c[:, None] + v[:, None] * T)) * W
    return np.sum(resid * resid, axis=1)


def _polish(member, T, Y, W, start, span):
    """Levenberg–Marquardt from ``start`` (R, 5), within the family's bounds."""
    lo = np.array([-np.inf, -np.inf, 0.0, RHO_RANGE[0], 0.0])
    hi = np.array([np.inf, np.inf, 25.0 / span, RHO_RANGE[1], 0.5 * span])
    free = MEMBERS[member]
    r = batch_lm(progress, T, Y, W, start, free=list(free), lower=lo, upper=hi, max_iter=15,
                 xtol=1e-6, ftol=1e-7, value_jac=partial(progress_value_jac, want=free))
    better = np.isfinite(r.rss) & np.all(np.isfinite(r.params), axis=1)
    return np.where(better[:, None], r.params, start)


def fit_member(member: str, rows, T, Y, W, times, span: float, start=None) -> MemberFit:
    """Fit ``member`` to the traces ``rows`` of T, Y, W (times from each trace's first reading,
    readings relative to it, weights 0 or 1, ``times`` representative of the columns): from
    the grid (:func:`grid_optimum`) or the shapes ``start`` (R, 3: k, rho, L), polished where
    the member has two shape parameters; c and v by least squares at the shape found, and v's
    weights from the Jacobian there."""
    rows = np.asarray(rows, dtype=int)
    T, Y, W = T[rows], Y[rows], W[rows]
    R = rows.size
    one = np.ones((R, 1))
    if member == "line":
        shape = np.zeros((R, 3))
    elif start is not None:
        shape = np.asarray(start, float)
    else:
        shape, _ = grid_optimum(member, times, Y, W, span, T)
    if len(MEMBERS[member]) == 4 and R:
        F = progress(T, 0.0, 1.0, *(shape[:, j:j + 1] for j in range(3)))
        start = np.column_stack([*_line_in_f(F, Y, W), shape])
        shape = _polish(member, T, Y, W, start, span)[:, 2:]
    J = progress_jac(T, 0 * one, one, *(shape[:, j:j + 1] for j in range(3)),
                     want=MEMBERS[member])
    F = J[:, :, 1]
    c, v = _line_in_f(F, Y, W)
    fitted = c[:, None] + v[:, None] * F
    free = list(MEMBERS[member])
    Jf = J[:, :, free] * W[:, :, None]
    Jf[:, :, 2:] *= v[:, None, None]
    JT = Jf.transpose(0, 2, 1)
    with np.errstate(all="ignore"):
        Ainv = np.linalg.pinv(JT @ Jf)
    v_weights = (Ainv @ JT)[:, 1, :] * W
    resid = (Y - fitted) * W
    dof = np.sum(W > 0, axis=1) - len(free)
    return MemberFit(member, rows, np.column_stack([c, v, shape]),
                     np.sum(resid * resid, axis=1), dof, v_weights, fitted)


# --------------------------------------------------------------------------- the family's choice

#: A lag is taken when the straight lag lowers the exponential's residual sum of squares by
#: this many noise variances (about one straight trace in 300 by chance, tests) ...
LAG_CHI2 = 6.0
#: ... and a lag followed by a slowing rate is polished where its grid point comes within
#: this many noise variances of what it needs.
LAG_SCREEN = 4.0
#: A shape is evident when it lowers the simpler shape's residual sum of squares by this many
#: noise variances (chi-square, 1 degree of freedom, p = 0.001).
CURVED_CHI2 = 10.83
#: The Michaelis–Menten shape is polished where the exponential converts this much by the end
#: (from the grid's best shape where that already beats the exponential, else from
#: :data:`MM_START_RHO`). (A trace with S0 well above Km runs nearly straight until late: the
#: exponential may then convert little yet start a few per cent high or low; the SE counts the
#: Michaelis–Menten shape's spread where it was tried, and a straight window's SE the
#: curvature the noise may hide, rateabs.slopes.choice. From 0.2 it was missed where the
#: exponential converted 17 % of its own amplitude on a trace that used 60 % of [S]0 = 5 Km:
#: 2 % high at mean z +5 with 0.5 mA noise. Below 0.4 it was once polished only where a grid
#: shape beat the exponential, and a trace at [S]0 = 5 Km, 65 % used, read 3.9 % high at z 6.)
MM_FROM = 0.1


@dataclass(frozen=True)
class Curves:
    """The whole-curve estimate of every trace.

    ``member``: the member used ("exp", "mm", "lag", "lag-exp", or "" where too few
    readings); ``params`` (N, 5: c, v, k, rho, L); weighted ``rss`` and ``dof``; v's reading
    weights (N, M); the curve at the readings (N, M); ``line_rss``: the straight line's RSS over
    the same readings; ``sigma``: the noise SD the SEs use (the larger of the trace's noise and
    the fit's residual SD); ``spread``: where a richer member was fitted but not evident, the
    difference of its initial slope from the reported one, and the SE of that difference where
    the reported member is straight after a lag (a model uncertainty the SE counts,
    :func:`_richer`).
    """

    member: np.ndarray
    params: np.ndarray
    rss: np.ndarray
    dof: np.ndarray
    v_weights: np.ndarray
    fitted: np.ndarray
    line_rss: np.ndarray
    sigma: np.ndarray
    spread: np.ndarray

    @property
    def v(self) -> np.ndarray:
        """The initial slope of every trace (NaN where none)."""
        return self.params[:, 1]

    @property
    def se(self) -> np.ndarray:
        """The SE of :attr:`v`: the noise and the model uncertainty (:attr:`spread`)."""
        return np.hypot(self.sigma * np.sqrt(np.sum(self.v_weights ** 2, axis=1)),
                        self.spread)

    @property
    def evidently_curved(self) -> np.ndarray:
        """Where the curve fits better than the straight line by more than the noise could
        make it (RSS lower by :data:`CURVED_CHI2` noise variances)."""
        with np.errstate(invalid="ignore"):
            return (self.line_rss - self.rss) > CURVED_CHI2 * self.sigma ** 2


def _store(out: dict, fit: MemberFit, spread=0.0) -> None:
    for key, value in (("member", fit.member), ("params", fit.params), ("rss", fit.rss),
                       ("dof", fit.dof), ("v_weights", fit.v_weights), ("fitted", fit.fitted),
                       ("spread", spread)):
        out[key][fit.rows] = value


def _subset(fit: MemberFit, keep) -> MemberFit:
    return MemberFit(fit.member, fit.rows[keep], fit.params[keep], fit.rss[keep], fit.dof[keep],
                     fit.v_weights[keep], fit.fitted[keep])


def _richer(simple: MemberFit, rich: MemberFit, sel, sigma2, force=False):
    """Whether the richer fit (of the traces ``sel`` of the simpler one) is evident
    (:data:`CURVED_CHI2`, against the larger of the noise and the richer fit's residual
    variance) or forced, and the simpler one's spread where it is not: the two initial slopes'
    difference, and where the simpler member is straight (``lag``) its SE in quadrature."""
    s2 = np.maximum(sigma2, rich.rss / np.maximum(rich.dof, 1))
    evident = force | ((simple.rss[sel] - rich.rss) > CURVED_CHI2 * s2)
    evident &= np.all(np.isfinite(rich.params), axis=1)
    diff = simple.params[sel, 1] - rich.params[:, 1]
    if 2 in MEMBERS[simple.member]:
        return evident, np.where(evident, 0.0, np.abs(diff))
    # a straight simpler member (after a lag): whether the rate slows at all is what the data
    # cannot show, and the initial slope may be off by their difference and by as much again as
    # the noise hides, the SE of that difference, whose variance is the difference of the two
    # variances (the simpler fit being the efficient one under its own model; Hausman 1978,
    # Econometrica 46:1251, from memory)
    hidden = s2 * (np.sum(rich.v_weights ** 2, axis=1) - np.sum(simple.v_weights[sel] ** 2,
                                                                  axis=1))
    return evident, np.where(evident, 0.0, np.hypot(diff, np.sqrt(np.maximum(hidden, 0.0))))


def _lags(prep, out: dict, exp: MemberFit, line_rss, sigma2) -> np.ndarray:
    """Store the lag members where a lag is taken; return those rows.

    A lag is taken when the straight lag (``lag``) beats the exponential by :data:`LAG_CHI2`
    noise variances, or fits at least as well where the rate evidently speeds up (a rate that
    speeds up is taken as a lag not yet over, whose final rate is the one to report, never as
    the start of an ever faster curve). A lag followed by a slowing rate (``lag-exp``) must be
    evident over the straight lag (and over the exponential by both margins where the straight
    lag was not taken).
    """
    rows = exp.rows
    lag = fit_member("lag", rows, prep.Tc, prep.Yc, prep.W, prep.times, prep.span)
    s2 = np.maximum(sigma2[rows], np.minimum(lag.rss, exp.rss) / np.maximum(lag.dof, 1))
    speeds = (exp.params[:, 2] < 0) & ((line_rss[rows] - exp.rss) > CURVED_CHI2 * np.maximum(
        sigma2[rows], exp.rss / np.maximum(exp.dof, 1)))
    gain = exp.rss - lag.rss
    take = ((gain > LAG_CHI2 * s2) | (speeds & (gain >= 0))) & (lag.params[:, 4] > 0)
    # a lag followed by a slowing rate: looked for where a lag is taken, or where neither the
    # exponential nor the straight lag follows the readings within their noise
    misfit = np.minimum(exp.rss, lag.rss) > chi2.quantile(0.99, np.maximum(exp.dof, 1)) * (
        sigma2[rows])
    look = take | misfit
    try_le = look.copy()
    start = np.array(lag.params[:, 2:])
    if look.any():
        shape, grid_le = grid_optimum("lag-exp", prep.times, prep.Yc[rows[look]],
                                      prep.W[rows[look]], prep.span, prep.Tc[rows[look]])
        try_le[look] = take[look] | ((exp.rss[look] - grid_le) > (
            LAG_CHI2 + CURVED_CHI2 - LAG_SCREEN) * s2[look])
        start[look] = np.where((grid_le < lag.rss[look])[:, None], shape, start[look])
    spread = np.zeros(rows.size)
    if try_le.any():
        sel = np.nonzero(try_le)[0]
        le = fit_member("lag-exp", rows[sel], prep.Tc, prep.Yc, prep.W, prep.times, prep.span,
                        start[sel])
        evident, spread[sel] = _richer(lag, le, sel, sigma2[rows[sel]])
        evident &= (le.params[:, 2] > 0) & (le.params[:, 4] > 0) & (
            take[sel] | ((exp.rss[sel] - le.rss) > (LAG_CHI2 + CURVED_CHI2) * s2[sel]))
        take[sel[evident]] = False
        _store(out, _subset(le, evident))
    _store(out, _subset(lag, take), spread[take])
    return np.nonzero(np.isin(out["member"], ["lag", "lag-exp"]))[0]


def _mm(prep, out: dict, exp: MemberFit, sigma2, exclude) -> None:
    """Store the Michaelis–Menten member where it is evident over the exponential (tried from
    MM_FROM on), and the exponential's spread where it was tried but not evident."""
    k = exp.params[:, 2]
    dur = prep.Tc[exp.rows].max(axis=1)
    conv = np.where(k > 0, -np.expm1(-k * dur), 0.0)
    sel = np.nonzero((conv >= MM_FROM) & ~np.isin(exp.rows, exclude))[0]
    if not sel.size:
        return
    # polished where some grid shape already does better than the exponential, or where the
    # exponential converts so much that its initial slope may be off by 1 % or more
    shape, grid_mm = grid_optimum("mm", prep.times, prep.Yc[exp.rows[sel]],
                                  prep.W[exp.rows[sel]], prep.span, prep.Tc[exp.rows[sel]])
    better = grid_mm < exp.rss[sel]
    start = np.where(better[:, None], shape, _high_rho_start(exp.params[sel, 2:]))
    mm = fit_member("mm", exp.rows[sel], prep.Tc, prep.Yc, prep.W, prep.times, prep.span, start)
    evident, spread = _richer(exp, mm, sel, sigma2[exp.rows[sel]])
    out["spread"][exp.rows[sel]] = spread
    _store(out, _subset(mm, evident))


#: Where no grid shape beats the exponential, the Michaelis–Menten shape is polished from this
#: rho (substrate well above Km) with the exponential's initial curvature, (1 - rho) k^2 =
#: k_exp^2: from the exponential itself the polish stays near rho = 0 (an audit's trace at
#: [S]0 = 5 Km, 65 % used, polished to rho 0.46 from there and to 0.72 from here, with a lower
#: residual sum of squares; the exponential read it 3.9 % high, at z 6 with no spread).
MM_START_RHO = 0.8


def _high_rho_start(exp_shape: np.ndarray) -> np.ndarray:
    """Shapes (k, rho, L) for the Michaelis–Menten polish from the exponential's (k, 0, L)."""
    out = np.array(exp_shape, float)
    out[:, 0] = out[:, 0] / math.sqrt(1 - MM_START_RHO)
    out[:, 1] = MM_START_RHO
    return out


def fit_curves(prep, min_readings: int = 5, rich: bool = True) -> Curves:
    """The family's member for every trace with ``min_readings`` usable readings: the
    exponential, a lag where one is taken (:func:`_lags`), or the Michaelis–Menten shape where
    the reaction goes far enough (:func:`_mm`); the exponential alone without ``rich``."""
    N, M = prep.Yc.shape
    rows = np.nonzero(prep.W.sum(axis=1) >= min_readings)[0]
    out = {"member": np.full(N, "", dtype=object), "params": np.full((N, 5), np.nan),
           "rss": np.full(N, np.nan), "dof": np.zeros(N, dtype=int),
           "v_weights": np.zeros((N, M)), "fitted": np.zeros((N, M)), "spread": np.zeros(N)}
    line_rss = np.full(N, np.nan)
    if rows.size:
        line_rss[rows] = straight_rss(prep.Tc[rows], prep.Yc[rows], prep.W[rows])
        exp = fit_member("exp", rows, prep.Tc, prep.Yc, prep.W, prep.times, prep.span)
        _store(out, exp)
        sigma2 = prep.sigma ** 2
        if rich:
            lagged = _lags(prep, out, exp, line_rss, sigma2)
            _mm(prep, out, exp, sigma2, lagged)
    sigma = np.maximum(prep.sigma, np.sqrt(np.nan_to_num(out["rss"] / np.maximum(out["dof"],
                                                                                  1))))
    return Curves(out["member"].astype(str), out["params"], out["rss"], out["dof"],
                  out["v_weights"], out["fitted"], line_rss, sigma, out["spread"])


def merge(curves: Curves, sub: Curves, rows) -> Curves:
    """``curves`` with the traces ``rows`` replaced by ``sub`` (fitted to those traces)."""
    parts = {}
    for name in Curves.__dataclass_fields__:
        whole = np.array(getattr(curves, name), copy=True)
        whole[rows] = getattr(sub, name)
        parts[name] = whole
    return Curves(**parts)


def slope_at(params, t) -> np.ndarray:
    """dy/dt of each trace's curve (rows of ``params``: c, v, k, rho, L) at its time ``t``."""
    c, v, k, rho, lag = (params[:, j] for j in range(5))
    phi, _ = lag_clock(t, lag)
    rho = shape_of(k, rho)
    z, _ = mm_conversion(k * phi, rho)
    with np.errstate(all="ignore"):
        on = np.where(lag > 0, -np.expm1(-t / np.where(lag > 0, lag, 1.0)), 1.0)
    return v * (1 - z) / (1 - rho * z) * on


def without_start(prep, curves: Curves, skip: int) -> tuple[np.ndarray, np.ndarray]:
    """The initial slope (still at the first reading's time) and its SE of every trace's
    member ("exp" or "mm"; NaN for the others) fitted again without its first ``skip`` used
    readings: a check that the start of the read follows the same curve as the rest."""
    N = prep.W.shape[0]
    v, se = np.full(N, np.nan), np.full(N, np.nan)
    W = prep.W * (np.cumsum(prep.W, axis=1) > skip)
    for member in ("exp", "mm"):
        rows = np.nonzero((curves.member == member) & (W.sum(axis=1) >= 5 + skip))[0]
        if not rows.size:
            continue
        start = curves.params[rows, 2:] if member == "mm" else None
        fit = fit_member(member, rows, prep.Tc, prep.Yc, W, prep.times, prep.span, start)
        v[rows] = fit.params[:, 1]
        se[rows] = curves.sigma[rows] * np.sqrt(np.sum(fit.v_weights ** 2, axis=1))
    return v, se


#: The decaying offsets :func:`with_start_offset` tries: time constants from 2 % to 16 % of
#: the read (a baseline that settles, mixing, a temperature step; over by the first half).
OFFSET_TAUS = np.geomspace(0.02, 0.16, 4)


def with_start_offset(prep, rows) -> tuple[np.ndarray, np.ndarray]:
    """The exponential member with a decaying offset at the start,
    y = c + v F(t; k) + a exp(-t / tau), fitted to the traces ``rows`` on the grid of k (the
    exponential's) and tau (:data:`OFFSET_TAUS` x span): the weighted RSS and the initial slope
    v at the best grid point of every trace (inf and NaN elsewhere). A check that the start of
    the read follows the curve of the rest; c, v and a are linear, so each grid point is three
    sums of products away (:func:`grid_rss`, with two columns)."""
    N = prep.W.shape[0]
    rss, v = np.full(N, np.inf), np.full(N, np.nan)
    rows = np.asarray(rows, dtype=int)
    if not rows.size:
        return rss, v
    kappa = GRID["exp"][0] / prep.span
    taus = OFFSET_TAUS * prep.span
    for sub, t in _clock_groups(prep.times, prep.Tc[rows], prep.W[rows], prep.span):
        r = rows[sub]
        rss[r], v[r] = _offset_grid(np.asarray(t, float), prep.Yc[r], prep.W[r], kappa, taus)
    return rss, v


def _offset_grid(t, Y, W, kappa, taus) -> tuple[np.ndarray, np.ndarray]:
    """:func:`with_start_offset` for traces sharing the times ``t``: the normal equations of
    (v, a) about the weighted means, solved at every (k, tau) at once."""
    F = progress(t[None, :], 0.0, 1.0, kappa[:, None], 0.0, 0.0)          # (K, n)
    F[~np.isfinite(F)] = 0.0
    g = np.exp(-t[None, :] / taus[:, None])                                  # (G, n)
    wy = W * Y
    sw, sy = W.sum(axis=1), wy.sum(axis=1)
    Wd, which = distinct_rows(W)
    with np.errstate(all="ignore"):
        ym = (sy / sw)[:, None, None]
        wf, wg = _dot(Wd, F)[which], _dot(Wd, g)[which]
        sf, sg = wf[:, :, None], wg[:, None, :]
        vf = (_dot(Wd, F * F)[which] - wf ** 2 / sw[:, None])[:, :, None]
        vg = (_dot(Wd, g * g)[which] - wg ** 2 / sw[:, None])[:, None, :]
        cfg = np.einsum("rn,kn,gn->rkg", Wd, F, g)[which] - sf * sg / sw[:, None, None]
        cfy = _dot(wy, F)[:, :, None] - sf * ym
        cgy = _dot(wy, g)[:, None, :] - sg * ym
        det = vf * vg - cfg * cfg
        b = (cfy * vg - cgy * cfg) / det
        a = (cgy * vf - cfy * cfg) / det
        res = ((wy * Y).sum(axis=1) - sy * sy / sw)[:, None, None] - b * cfy - a * cgy
    res = np.where(np.isfinite(res) & (det > 1e-9 * vf * vg), res, np.inf).reshape(len(Y), -1)
    best = np.argmin(res, axis=1)
    i = np.arange(len(Y))
    return res[i, best], np.where(np.isfinite(res[i, best]), b.reshape(len(Y), -1)[i, best],
                                  np.nan)

