"""Trace flags: each one a written rule and a meaning, "this number may be wrong, and why".

The rules are calibrated on simulated plates with known truth (benchmarks/flag_calibration.py):
a flag should mark the wells whose reported rate is off by more than 5 % and 3 SE, and leave
the others alone. Since the SE counts the curvature and the slowing after a lag that the data
cannot rule out (:mod:`rateabs.slopes.choice`, :func:`rateabs.slopes.curves.fit_curves`), and a
straight window's SE the shortfall the noise may hide even where the window agrees with the
curve by chance (:func:`rateabs.slopes.choice.shortfall_ms`), 66 of the 1920 wells of 20 seeded
plates need a look (most of them under a settling baseline), 59 of them flagged (89 %; goal:
90 %), and 8.8 % of the good wells carry a flag (goal: at most 10 %; most of them very noisy
wells, ``noisy``, whose honest SE now exceeds the noisy limit more often: 153 of the 160 of
seeds 20-59, 111 before). Forty further seeds give 82 % and 8.9 % (20-59) and 78 % and 9.2 %
(60-99); 71 % and 68 % before the shortfall was counted that way.
Those that escape mostly show nothing in their readings: a straight window over a depletion
(S0 near or above Km) or a lag that the noise hides, a settling too slight to be evident. A
flag for every window whose SE is under a third of the curvature the noise could hide reached
91 % on the 20 plates, but flagged over 10 % of the good wells on the further seeds (one
flagged well in ten wrong) and four more wells of the sample plate (the three of known
truth right): it was left out.

With a plate map that gives each well's [S]0 (``calibrate_with_map`` in the benchmark: the
whole ``rates`` analysis, blanks subtracted), a window that used over 10 % of the substrate is
replaced by the curve where that is not evidently shallower, and flagged ``over-10pct`` where
kept with a shortfall beyond twice its SE (:mod:`rateabs.rates`): 92 % of the wells that need a
look flagged on seeds 0-19, 90 % and 86 % on seeds 20-59 and 60-99, with 9.0-9.4 % of the good
wells (88 % and 84 % before the window's SE counted the shortfall the noise may hide)
(tuned on 0-19; a steep window on a flat curve, the third part of ``start``, added from
the misses of seeds 20-59, where it caught two wells read 2.3 and 3.9 times their truth).
The map's substrate also bounds the initial rate from above (``too-fast``,
:func:`rateabs.rates.faster_than_substrate`: depletion keeps at least 1 - f of the rate, so the
slope after the first fifth of the read, over 1 - f, is the most the start can be): it caught
the settling baselines in the reaction's direction that read like depletion to the trace
alone, 14-68 % high. With it, 91.9 / 90.2 / 91.3 % of the wells that need a look are flagged
on seeds 0-19 / 20-59 / 60-99 and 91.6 % on unseen seeds 100-139 (86.5 % without it), with
9.1 / 9.2 / 9.5 / 9.5 % of the good wells.

Tried for the escapes, tuned on seeds 0-39 and checked on unseen ones, none kept (share of the
wells that need a look flagged on seeds 0-39 / 20-59 / 40-99 / 100-139; now 79 / 70 / 67 / 79
%, good wells flagged 7.5-8.0 %): the straight windows that escape (clean, spikes, drift and
lag wells) read like the good ones (a flag on windows whose hidden curvature, the SE of the
window's difference from the curve, exceeds 3 % of the rate would mark 1832 unflagged wells of
seeds 0-39 to catch 26). Reporting such a window raised by the posterior mean of its shortfall
from the initial rate (half-normal prior, scale 10 % of the rate) flagged 87 / 83 / 80 / 86 %
(good wells 6.3-6.7 %, rms z of the good wells 0.95) but read the simulated clean wells 2.2 %
high on average (1.5 % low now) and a straight trace about 2 % high, against the least-squares
line of common practice. An SE from the shortfall's posterior mean square instead (half-Cauchy
prior, 2 %), which covers alike wherever the window stands against the curve (the present SE:
rms z 0.6 where the window is over 1.5 SEs of their difference below the curve, 1.5 where the
two agree within half an SE), flagged 79 / 74 / 72 / 77 % at rms z 0.91 and tripled the SE of
precise straight traces. Weaker evidence for the decaying offset at the start (OFFSET_HINT_Z
2.5, or a trace that moves by its reported rate) caught one more well on seeds 40-99 for six
more good wells flagged. A third tier for the offset (a gain of only 3.84 noise variances, p
= 0.05, with a move over 5 SE) caught 3 more on seeds 20-59 and 3 on 60-99 (89.8 and 86.6 %)
for 1.2 % more of the good wells flagged (one new flag in eight right): left out. (Those
figures are from before the shortfall prior of the window's SE.)

Tried with the shortfall prior, not kept: reporting the curve wherever its SE is below the
window's (prior 0.8) flagged 79 % and 88 % of the wells that need a look on seeds 20-59 (no
map, map; 82 % and 90 % without it), at clean-well rms z 0.96. A larger prior (1.0) reaches 88
% on seeds 20-59 without a map but makes the clean wells' SE too wide (rms z 0.82). The
exponential member does not read Michaelis–Menten depletion low at high S0/Km: over seeds
20-99 its initial slope is on average 0.2-0.7 of its SE high where over 30 % is converted
(4.6 % at S0 over 2 Km and over 50 % converted), within 0.1 SE below.
"""

from __future__ import annotations

import numpy as np

from .chi2 import tail_below
from .choice import CHOICE_Z, MOVING_Z, window_against_curve
from .curves import CURVED_CHI2, with_start_offset, without_start

#: Trace flags of the initial-rate estimator; each says why the reported number may be wrong.
TRACE_FLAGS = {
    "few-points": "too few usable readings for a dependable rate (fewer than the window's "
                  "minimum, or none in a fixed window); with fewer than three there is none",
    "lag": "a long lag (the enzyme is 95 % active only in the last quarter of the read, or "
           "the last half where the rate also slows): the rate rests on few readings after "
           "it and on the lag model",
    "misfit": "the whole-curve model, or the straight window reported, does not follow the "
              "readings within their noise (a jump, drift or mixing artefact?): the rate may "
              "be off",
    "speeds-up": "the rate speeds up through the read and no lag fits it: the final rate may "
                 "be higher than the one reported",
    "start": "the first readings do not follow the curve of the rest (mixing, a settling "
             "baseline or temperature): the initial slope changes beyond its SE when they are "
             "left out, or when a decaying offset at the start is allowed, fits better and "
             "moves the rate by 5 % and over 1.5 SE (evidently better) or 3 SE (only "
             "possibly better), or the straight window reported rises or falls clearly where "
             "the whole curve is flat (a steep start the rest of the read does not continue)",
    "noisy": "the rate's SE is large against the plate's rates (over the noisy limit times the "
             "larger of the rate and the plate's typical rate) because the readings are far "
             "noisier than the plate's usual (three times its median noise: a bubble, a "
             "precipitate, a lamp fault?), or ten times larger than that whatever the noise",
}

#: A lag is long when its time constant exceeds this fraction of the read (three time
#: constants, 95 % active, then fall in the last quarter of the read).
LONG_LAG = 0.25
#: A lag followed by a slowing rate ("lag-exp") is long from this fraction on: the lag and the
#: slowing trade off against each other, so the initial slope rests on the model.
LONG_LAG_SLOWING = 0.15
#: The reported model misfits when its residuals exceed the noise at this p value (chi-square)
#: and by this factor in variance.
MISFIT_P = 1e-4
MISFIT_RATIO = 1.5
#: The start check leaves out this fraction of the readings (at least 3) and marks a trace whose
#: initial slope then moves by more than START_Z SEs of the change and by 5 % of the slope.
START_SKIP = 0.1
START_Z = 3.0
#: The offset check marks a trace whose initial slope, with a decaying offset at the start that
#: lowers the residual sum of squares by CURVED_CHI2 noise variances (evident), is off the
#: reported rate by more than OFFSET_Z of its SEs and by 5 % ...
OFFSET_Z = 1.5
#: ... or, with an offset that lowers it by only OFFSET_HINT_CHI2 noise variances (chi-square,
#: 2 degrees of freedom for its size and time constant, p = 0.05: suggested, not evident), is
#: off by more than OFFSET_HINT_Z SEs (as far as a rate that needs a look) and by 5 %.
OFFSET_HINT_CHI2 = 5.99
OFFSET_HINT_Z = 3.0
#: The plate's typical rate, for ``noisy``: this quantile of the traces' absolute rates.
TYPICAL_QUANTILE = 0.9
#: A trace is noisy when its noise SD exceeds this many times the plate's median noise SD (the
#: noise of the readings, not the SE relative to a rate that may be near zero) ...
NOISE_EXCESS = 3.0
#: ... or this absolute SD in signal units (absorbance: a plate reader's noise is a few mA,
#: from memory), which also covers a single trace.
NOISE_ABSOLUTE = 0.02
#: Whatever the noise, a rate whose SE exceeds this many times the noisy limit is noisy.
NOISY_HOPELESS = 10.0


def trace_marks(prep, curves, win, method, rate, min_points: int, fixed: bool) -> np.ndarray:
    """The flags of every trace that rest on the trace alone: a (traces x 5) bool array, the
    columns in the order of :data:`TRACE_FLAGS` without ``noisy`` (:func:`noisy`); ``rate`` is
    the reported (slope, SE) of every trace."""
    n_use = prep.n_use
    few = (method == "none") | (n_use < min_points) | (fixed & (win.end < 0))
    lag = ((win.lag > LONG_LAG * prep.span) | ((curves.member == "lag-exp") & (
        win.lag > LONG_LAG_SLOWING * prep.span))) & (method != "none")
    misfit = (method != "none") & (_misfit(curves.rss, curves.dof, prep.sigma) | _misfit(
        np.where(method == "curve", curves.rss, win.line.sse),
        np.where(method == "curve", curves.dof, win.line.n - 2), prep.sigma))
    with np.errstate(all="ignore"):
        speeds = ((curves.member == "exp") & (curves.params[:, 2] < 0) & (method != "none")
                  & curves.evidently_curved)
    start = (_start(prep, curves, method) | _offset(prep, curves, method, *rate)
             | _steep_window(curves, win, method))
    against = lag & _starts_against(prep, rate[0])
    lag, start = lag & ~against, start | against
    return np.column_stack([few, lag, misfit, speeds, start]).reshape(-1, 5)


#: The first readings that tell a lag from a start against the reaction (``_starts_against``)
#: and how many SEs their slope must lie against the reported rate.
AGAINST_READINGS = 8
AGAINST_Z = 3.0


def _starts_against(prep, slope) -> np.ndarray:
    """Where the first AGAINST_READINGS usable readings move against the reported rate by more
    than AGAINST_Z SEs (the SE from the trace's noise): no lag does that (a slow start moves
    the reaction's way, only less), a baseline settling against the reaction does. Such a
    well's late start is called ``start``, not ``lag``: on the calibration plates (seeds 0-59)
    36 of the 45 settling wells flagged ``lag`` started against their reaction, none of the 29
    true lags did."""
    n = AGAINST_READINGS
    used = prep.W > 0                               # spikes set aside
    w = (used & (np.cumsum(used, axis=1) <= n)).astype(float)
    k = w.sum(axis=1)
    with np.errstate(all="ignore"):
        tm = (w * prep.Tc).sum(axis=1) / k
        dt = np.where(w > 0, prep.Tc - tm[:, None], 0.0)
        sxx = (dt ** 2).sum(axis=1)
        b = (dt * prep.Yc).sum(axis=1) / sxx
        se = prep.sigma / np.sqrt(sxx)
        return (k >= 4) & np.isfinite(b) & (b * np.sign(slope) < -AGAINST_Z * se)


def noisy(slope, se, sigma, noisy_limit: float) -> np.ndarray:
    """The ``noisy`` flag of every trace, against the plate's typical rate and noise (so it
    needs every trace's slope, SE and noise SD at once)."""
    finite = np.abs(slope[np.isfinite(slope)])
    typical = float(np.quantile(finite, TYPICAL_QUANTILE)) if finite.size else 0.0
    loud = (sigma > NOISE_EXCESS * np.median(sigma)) | (sigma > NOISE_ABSOLUTE) if sigma.size \
        else np.zeros(0, bool)
    scale = noisy_limit * np.maximum(np.abs(slope), typical)
    return np.isfinite(se) & (((se > scale) & loud) | (se > NOISY_HOPELESS * scale))


def flag_words(marks) -> list[list[str]]:
    """The names of the flags set in each row of ``marks`` (columns as :data:`TRACE_FLAGS`)."""
    words = list(TRACE_FLAGS)
    return [[words[j] for j in np.flatnonzero(row)] for row in marks]


def _misfit(rss, dof, sigma) -> np.ndarray:
    """Residuals beyond the noise: chi-square p below MISFIT_P and variance over MISFIT_RATIO
    times the noise variance."""
    with np.errstate(all="ignore"):
        ratio = rss / np.maximum(dof, 1) / sigma ** 2
        beyond = tail_below(rss / sigma ** 2, np.maximum(dof, 1), MISFIT_P)
    return (dof > 0) & np.isfinite(rss) & beyond & (ratio > MISFIT_RATIO)


def _start(prep, curves, method) -> np.ndarray:
    """The ``start`` rule: the whole curve's initial slope moves when the first START_SKIP of
    the readings are left out, by more than START_Z SEs of the change (the SE of an estimate
    from fewer readings minus that from all, in quadrature) and by 5 % of the slope, where the
    trace moves (its initial slope MOVING_Z SEs from zero)."""
    skip = max(3, int(round(START_SKIP * prep.W.shape[1])))
    v_late, se_late = without_start(prep, curves, skip)
    v = curves.v
    with np.errstate(all="ignore"):
        sd = np.sqrt(np.maximum(se_late ** 2 - (curves.sigma * np.sqrt(np.sum(
            curves.v_weights ** 2, axis=1))) ** 2, 0.0))
        d = np.abs(v_late - v)
        moves = np.abs(v) > MOVING_Z * curves.se            # a flat trace has no shape
        return ((method != "none") & moves & np.isfinite(d) & (d > START_Z * sd)
                & (d > 0.05 * np.abs(v)))


def _steep_window(curves, win, method) -> np.ndarray:
    """The ``start`` rule's third part: the straight window reported moves (its slope MOVING_Z
    of its SEs from zero) and is CHOICE_Z SEs off the whole curve's initial slope, while that
    curve, with no lag, does not move: a steep stretch at the start (a settling baseline, a
    mixing artefact) that the rest of the read does not continue. On the calibration plates such
    windows read 35 % to four times the true rate."""
    _, _, h, moving = window_against_curve(win.line.b, win.weights, curves)
    with np.errstate(invalid="ignore"):
        flows = np.abs(win.line.b) > MOVING_Z * win.line.se
    return ((method == "window") & flows & (h > CHOICE_Z) & ~moving
            & ~np.char.startswith(curves.member.astype(str), "lag"))


def _offset(prep, curves, method, slope, se) -> np.ndarray:
    """The ``start`` rule's second part: where the whole curve is the exponential or the
    Michaelis–Menten shape and the trace moves, the exponential with a decaying offset at the
    start (:func:`rateabs.slopes.curves.with_start_offset`) lowers the residual sum of squares
    by CURVED_CHI2 noise variances and its initial slope is off the reported one by more than
    OFFSET_Z SEs and 5 %, or lowers it by OFFSET_HINT_CHI2 and is off by more than
    OFFSET_HINT_Z SEs and 5 %: the start of the read bends in a way the curve of the rest does
    not, and the rate depends on which is believed (the weaker the evidence for the bend, the
    larger the change it must make)."""
    with np.errstate(all="ignore"):
        moves = np.abs(curves.v) > MOVING_Z * curves.se
    rows = np.nonzero((method != "none") & moves & np.isin(curves.member, ("exp", "mm")))[0]
    rss, v = with_start_offset(prep, rows)
    with np.errstate(all="ignore"):
        d = np.abs(v - slope)
        gain = (curves.rss - rss) / curves.sigma ** 2
        return (np.isfinite(d) & (d > 0.05 * np.abs(slope))
                & (((gain > CURVED_CHI2) & (d > OFFSET_Z * se))
                   | ((gain > OFFSET_HINT_CHI2) & (d > OFFSET_HINT_Z * se))))
