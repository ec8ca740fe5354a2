"""The estimator's choice between the straight window and the whole curve, and the SE it
reports."""

from __future__ import annotations

import math

import numpy as np

#: The whole curve replaces the straight window when the two initial slopes differ by more
#: than this many SEs of their difference (the window then carries curvature bias) ...
CHOICE_Z = 2.0
#: ... and the curve's initial slope is this many of its SEs away from zero (a flat trace has
#: no curvature to correct, so its window slope stands).
MOVING_Z = 4.0
#: The scale of the window's shortfall from the initial rate before the data are seen, in SEs
#: of the window's difference from the curve (what the noise can hide): a window runs on until
#: its bend is evident, so what it may still miss is of the order of what the noise hides
#: (:func:`shortfall_ms`).
SHORTFALL_PRIOR = 0.8


def choose(estimator: str, win_b, win_se, win_weights, curves, eligible, late=None):
    """Per trace: method ("window", "curve" or "none"), the reported slope and SE, and why.

    ``curves`` is the whole-curve estimate (:class:`rateabs.slopes.curves.Curves`); only the
    ``eligible`` ones may be reported. Under ``auto`` the curve is taken when the window slope
    is CHOICE_Z SEs off its initial slope and the trace moves (MOVING_Z); otherwise the window.
    The window's SE counts the shortfall s >= 0 from the initial rate that it may carry
    (substrate depletion, product inhibition and enzyme loss all slow a reaction down): the
    curve's initial slope minus the window's estimates s with the SE ``sd`` of their difference
    (what the noise can hide), and the SE counts the posterior mean square of s under a
    half-normal prior of scale SHORTFALL_PRIOR sd (:func:`shortfall_ms`): a window runs from the
    first reading on until its bend is evident, so what it may still miss is of the order of
    what the noise hides. The window's SE is sqrt(SE^2 + E[s^2] + spread^2), spread being the
    curve's model uncertainty. The shortfall is thus counted where the window agrees with the
    curve by chance (before, sqrt(SE^2 + d^2 + min(d, sd)^2 + spread^2) counted nothing there:
    the clean wells of benchmarks/flag_calibration.py whose window was within half an SE of the
    curve had rms z 1.6, those over 1.5 SE below it 0.6). SHORTFALL_PRIOR 0.8 was chosen on
    seeds 0-19 (clean-well rms z 0.94, 95.8 % within 2 SE; 0.85 gave 0.91 there and 0.88 on
    seeds 20-59); seeds 20-59 and 60-99 give rms z 0.90 and 0.91, 95.6 and 95.5 % within 2 SE.
    After a lag the window starts late and the prior does not hold (the substrate used before
    the window is out of its view): there the shortfall the curve shows is counted whole, and
    once more up to sd, as before. A flat trace carries no such bias (no product, no
    depletion). Where the curve speeds up and no lag was taken (not ``eligible``), the window
    may lie anywhere between the curve's initial and final slopes: its SE counts the difference
    from the final slope ``late`` (the rate that a lag not yet over may reach, or a depletion
    the noise hid).
    """
    has_w = np.isfinite(win_b)
    v, spread = curves.v, curves.spread
    has_c = np.isfinite(v) & np.isfinite(curves.se)
    d, sd, h, moving = window_against_curve(win_b, win_weights, curves)
    ok_c = has_c & eligible
    if estimator == "window":
        use_c = ~has_w & ok_c
    elif estimator == "curve":
        use_c = ok_c
    else:
        use_c = ok_c & (~has_w | ((h > CHOICE_Z) & moving))
    with np.errstate(invalid="ignore"):
        flows = np.abs(win_b) > MOVING_Z * win_se           # the window itself is not flat
    fast = np.zeros_like(win_b) if late is None else np.where(
        flows & ~eligible & np.isfinite(late), np.abs(np.nan_to_num(late) - win_b), 0.0)
    bend = has_c & flows & (np.nan_to_num(sd) > 0)
    with np.errstate(all="ignore"):
        shat = np.where(bend, -d * np.sign(v) / np.where(bend, sd, 1.0), 0.0)
    short2 = np.where(bend, shortfall_ms(shat, SHORTFALL_PRIOR) * np.nan_to_num(sd) ** 2, 0.0)
    # after a lag the window starts late: the substrate used before it is out of its view, and
    # the prior above (a window from the first reading, run on until its bend is evident) does
    # not hold; the shortfall the curve shows is counted whole, and once more up to sd
    slow = np.where(flows, np.minimum(d * np.sign(v), 0.0), 0.0)
    lagged = np.char.startswith(np.asarray(curves.member).astype(str), "lag")
    short2 = np.where(lagged, slow ** 2 + np.where(has_c & flows, np.minimum(
        np.abs(slow), np.nan_to_num(sd)), 0.0) ** 2, short2)
    win_total = np.sqrt(win_se ** 2 + short2 + fast ** 2
                        + np.where(has_c & flows, spread, 0.0) ** 2)
    use_w = ~use_c & has_w
    method = np.where(use_c, "curve", np.where(use_w, "window", "none"))
    slope = np.where(use_c, v, np.where(use_w, win_b, np.nan))
    se = np.where(use_c, curves.se, np.where(use_w, win_total, np.nan))
    speeds = has_c & ~eligible & flows
    evident = curves.evidently_curved               # a speed-up the noise could not make
    why = _reasons(estimator, method, has_w, ok_c, h, moving, (speeds & evident, speeds & ~evident),
                   np.isfinite(win_se) & ~flows)
    return method, slope, se, why


def shortfall_ms(shat, tau):
    """The posterior mean square of a shortfall s >= 0 (in units of its estimate's SE) given its
    estimate ``shat`` ~ N(s, 1) and a half-normal prior of scale ``tau``: the posterior is a
    normal of mean shat tau^2 / (1 + tau^2) and variance tau^2 / (1 + tau^2), truncated at 0
    (the moments of a truncated normal, e.g. Johnson, Kotz & Balakrishnan, Continuous
    Univariate Distributions 1, 1994, ch. 13; from memory)."""
    shat = np.asarray(shat, float)
    f = tau * tau / (1 + tau * tau)
    m, sdev = shat * f, math.sqrt(f)
    a = -m / sdev
    lam = _mills(a)
    mean = m + sdev * lam
    var = f * (1 + a * lam - lam * lam)
    return np.maximum(var + mean * mean, 0.0)


_ERFC = np.vectorize(math.erfc, otypes=[float])


def _mills(a):
    """phi(a) / (1 - Phi(a)), the inverse Mills ratio of the standard normal, elementwise (its
    asymptotic series a + 1/a - 2/a^3 + 10/a^5 beyond a = 25, where the tail nears underflow)."""
    a = np.asarray(a, float)
    big = a > 25
    safe = np.where(big, 0.0, a)
    exact = math.sqrt(2 / math.pi) * np.exp(-safe * safe / 2) / _ERFC(safe / math.sqrt(2))
    with np.errstate(all="ignore"):
        return np.where(big, a + 1 / a - 2 / a ** 3 + 10 / a ** 5, exact)


def window_against_curve(win_b, win_weights, curves):
    """The straight window's slope against the curve's initial slope: their difference d (0
    where either is missing), the SE of that difference sd (what the noise can hide), h = |d| /
    sd, and whether the curve's initial slope moves (MOVING_Z SEs from zero)."""
    has = np.isfinite(win_b) & np.isfinite(curves.v) & np.isfinite(curves.se)
    d = np.where(has, win_b - curves.v, 0.0)
    sd = curves.sigma * np.sqrt(np.sum((win_weights - curves.v_weights) ** 2, axis=1))
    with np.errstate(all="ignore"):
        h = np.where(sd > 0, np.abs(d) / sd, 0.0)
        moving = np.abs(curves.v) > MOVING_Z * curves.se
    return d, sd, h, moving


def _reasons(estimator, method, has_w, has_c, h, moving, speeds, still) -> np.ndarray:
    """The choice in words, one short phrase per trace (a window slope within MOVING_Z SEs of
    zero is said to show no change, whatever the curve fit made of its noise; ``speeds``: where
    the curve speeds up evidently, and where only within the noise)."""
    off = np.char.mod("%.1f", np.round(h, 1))
    if estimator != "auto":
        base = np.where(method == "curve", "curve: asked for", "window: asked for")
    else:
        base = np.where(
            method == "curve",
            np.char.add(np.char.add("curve: the window slope is ", off),
                        " SE off the curve's initial slope"),
            np.where(speeds[0], "window: the curve speeds up (its final slope counted in the SE)",
            np.where(speeds[1], "window: straight within the noise (the curve fit bends up "
                                "slightly; its final slope counted in the SE)",
            np.where(still, "window: no change beyond the noise (nothing to correct)",
                     np.where(~has_c, "window: no whole-curve fit",
                     np.where((h > CHOICE_Z) & ~moving,
                              "window: the trace is flat (no curvature to correct)",
                              np.char.add(np.char.add("window: within ", off),
                                          " SE of the curve's initial slope")))))))
    base = np.where((method == "curve") & ~has_w,
                    "curve: too few readings for a straight window", base)
    return np.where(method == "none", "no rate: too few usable readings", base)
