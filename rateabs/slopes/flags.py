"""Trace flags: each one a written rule and a meaning, "this number may be wrong, and why".

The rules are calibrated on simulated plates with known truth (benchmarks/flag_calibration.py):
a flag should mark the wells whose reported rate is off by more than 5 % and 3 SE, and leave
the others alone.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from .curves import CURVED_CHI2

#: Trace flags of the initial-rate estimator; each says why the reported number may be wrong.
TRACE_FLAGS = {
    "few-points": "too few usable readings for a dependable rate (fewer than the window's "
                  "minimum, or none in a fixed window); with fewer than three there is none",
    "lag": "a long lag (the enzyme is 95 % active only in the last quarter of the read): the "
           "rate rests on few readings after it and on the lag model",
    "misfit": "neither a straight line nor the whole-curve model follows the readings within "
              "their noise (a jump, drift or mixing artefact?): the rate may be off",
    "speeds-up": "the rate speeds up through the read and no lag fits it: the final rate may "
                 "be higher than the one reported",
    "noisy": "the readings are far noisier than the plate's usual (over three times its median "
             "noise) and the rate's SE is large against the plate's rates (over the noisy limit "
             "times the larger of the rate and the plate's typical rate): a bubble, a "
             "precipitate or a lamp fault?",
}

#: A lag is long when its time constant exceeds this fraction of the read (three time
#: constants, 95 % active, then fall in the last quarter of the read).
LONG_LAG = 0.25
#: The reported model misfits when its residuals exceed the noise at this p value (chi-square)
#: and by this factor in variance.
MISFIT_P = 1e-4
MISFIT_RATIO = 1.5
#: The plate's typical rate, for ``noisy``: this quantile of the traces' absolute rates.
TYPICAL_QUANTILE = 0.9
#: A trace is noisy when its noise SD exceeds this many times the plate's median noise SD (the
#: noise of the readings, not the SE relative to a rate that may be near zero) ...
NOISE_EXCESS = 3.0
#: ... or this absolute SD in signal units (absorbance: an ordinary reader stays well below it,
#: common practice), which also covers a single trace.
NOISE_ABSOLUTE = 0.02


def trace_flags(prep, curves, win, method, slope, se, min_points: int, noisy_limit: float,
                fixed: bool) -> list[list[str]]:
    """The flags of every trace, in the order of :data:`TRACE_FLAGS`."""
    n_use = prep.n_use
    few = (method == "none") | (n_use < min_points) | (fixed & (win.end < 0))
    lag = (win.lag > LONG_LAG * prep.span) & (method != "none")
    misfit = (method != "none") & (_misfit(curves.rss, curves.dof, prep.sigma) | _misfit(
        np.where(method == "curve", curves.rss, win.line.sse),
        np.where(method == "curve", curves.dof, win.line.n - 2), prep.sigma))
    with np.errstate(all="ignore"):
        speeds = ((curves.member == "exp") & (curves.params[:, 2] < 0) & (method != "none")
                  & ((curves.line_rss - curves.rss) > CURVED_CHI2 * curves.sigma ** 2))
    finite = np.abs(slope[np.isfinite(slope)])
    typical = float(np.quantile(finite, TYPICAL_QUANTILE)) if finite.size else 0.0
    sigma = prep.sigma
    loud = (sigma > NOISE_EXCESS * np.median(sigma)) | (sigma > NOISE_ABSOLUTE) if sigma.size \
        else np.zeros(0, bool)
    noisy = loud & np.isfinite(se) & (se > noisy_limit * np.maximum(np.abs(slope), typical))
    marks = np.column_stack([few, lag, misfit, speeds, noisy])
    words = list(TRACE_FLAGS)
    return [[words[j] for j in np.flatnonzero(row)] for row in marks]


def _misfit(rss, dof, sigma) -> np.ndarray:
    """Residuals beyond the noise: chi-square p below MISFIT_P and variance over MISFIT_RATIO
    times the noise variance."""
    with np.errstate(all="ignore"):
        ratio = rss / np.maximum(dof, 1) / sigma ** 2
        p = stats.chi2.sf(rss / sigma ** 2, np.maximum(dof, 1))
    return (dof > 0) & np.isfinite(rss) & (p < MISFIT_P) & (ratio > MISFIT_RATIO)
