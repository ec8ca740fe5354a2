"""The estimator's choice between the straight window and the whole curve, and the SE it
reports."""

from __future__ import annotations

import numpy as np

from .curves import CURVED_CHI2

#: The whole curve replaces the straight window when the two initial slopes differ by more
#: than this many SEs of their difference (the window then carries curvature bias) ...
CHOICE_Z = 2.0
#: ... and the curve's initial slope is this many of its SEs away from zero (a flat trace has
#: no curvature to correct, so its window slope stands).
MOVING_Z = 4.0


def choose(estimator: str, win_b, win_se, win_weights, curves, eligible, late=None):
    """Per trace: method ("window", "curve" or "none"), the reported slope and SE, and why.

    ``curves`` is the whole-curve estimate (:class:`rateabs.slopes.curves.Curves`); only the
    ``eligible`` ones may be reported. Under ``auto`` the curve is taken when the window slope
    is CHOICE_Z SEs off its initial slope and the trace moves (MOVING_Z); otherwise the window.
    A window slope shallower than the curve's initial slope by d may carry that much curvature
    bias (substrate depletion, product inhibition and enzyme loss all slow a reaction down), and
    the curve fit may have missed as much again, up to the SE of d (``sd``, what the noise can
    hide), so the window's SE is sqrt(SE^2 + d^2 + min(d, sd)^2 + spread^2), spread being the
    curve's model uncertainty (d counted only where the window is the shallower). Calibrated on
    benchmarks/flag_calibration.py: on its clean wells the reported SE then covers the error
    (rms z 1.04, 93.8 % within 2 SE); counting the whole sd instead made it 1.5 times too wide
    (rms z 0.68). A flat trace carries no such bias (no product, no depletion). Where the
    curve speeds up and no lag was taken (not ``eligible``), the window may lie anywhere
    between the curve's initial and final slopes:
    its SE counts the difference from the final slope ``late`` (the rate that a lag not yet over
    may reach, or a depletion the noise hid).
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
    use_w = ~use_c & has_w
    method = np.where(use_c, "curve", np.where(use_w, "window", "none"))
    slope = np.where(use_c, v, np.where(use_w, win_b, np.nan))
    with np.errstate(invalid="ignore"):
        flows = np.abs(win_b) > MOVING_Z * win_se           # the window itself is not flat
    slow = np.where(flows, np.minimum(d * np.sign(v), 0.0), 0.0)
    fast = np.zeros_like(slow) if late is None else np.where(
        flows & ~eligible & np.isfinite(late), np.abs(np.nan_to_num(late) - win_b), 0.0)
    # the shortfall once more, up to what the noise could hide from the curve fit (sd)
    hidden = np.where(has_c & flows, np.minimum(np.abs(slow), np.nan_to_num(sd)), 0.0)
    win_total = np.sqrt(win_se ** 2 + slow ** 2 + fast ** 2 + hidden ** 2
                        + np.where(has_c & flows, spread, 0.0) ** 2)
    se = np.where(use_c, curves.se, np.where(use_w, win_total, np.nan))
    speeds = has_c & ~eligible & flows
    with np.errstate(invalid="ignore"):             # a speed-up the noise could not make
        evident = (curves.line_rss - curves.rss) > CURVED_CHI2 * curves.sigma ** 2
    why = _reasons(estimator, method, has_w, ok_c, h, moving, (speeds & evident, speeds & ~evident),
                   np.isfinite(win_se) & ~flows)
    return method, slope, se, why


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
