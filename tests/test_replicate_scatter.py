"""The replicate-outlier flag on plates of triplicates whose wells differ by ordinary pipetting.

Truth: each well's initial rate from Michaelis–Menten turnover integrated with
scipy.integrate.solve_ivp (tests/kinetics_truth.py, independent of the package; Schnell &
Mendoza 1997 for the integrated form it reproduces). Each replicate's enzyme differs by 3 %
(simulated pipetting), so a well's own rate is right while it sits a few per cent from its
replicates: that is the plate's ordinary scatter, not an outlier.
"""

from __future__ import annotations

import numpy as np
import pytest
from kinetics_truth import mm_progress

from rateabs.layout import read_layout
from rateabs.options import RateSettings
from rateabs.rates import analyse_plate
from rateabs.traces import TraceSet

TIMES = np.arange(0.0, 601.0, 10.0)
EPSILON = 6220.0        # NADH at 340 nm, M^-1 cm^-1 (Horecker & Kornberg 1948)


def _triplicates(seed: int, off_well: int | None = None):
    """32 samples x 3 wells with 3 % pipetting scatter; ``off_well`` gets 35 % more enzyme
    than its replicates (its rate is still its own, but the sample's mean would be wrong)."""
    rng = np.random.default_rng(seed)
    ys, s0s, keys = [], [], []
    for smp in range(32):
        depletion = np.exp(rng.uniform(np.log(0.01), np.log(0.8)))
        kappa = 1 / np.exp(rng.uniform(np.log(0.2), np.log(5.0)))          # Km / S0
        v0 = rng.uniform(0.05, 3.0) * 1e-4                                   # A/s
        noise = rng.choice([0.001, 0.002, 0.005])
        for _ in range(3):
            f = 1 + rng.normal(0, 0.03)
            if len(ys) == off_well:
                f *= 1.35
            u = f * (depletion - kappa * np.log1p(-depletion)) / TIMES[-1]  # V/S0, 1/s
            scale = v0 * f / (u / (1 + kappa))                               # full change, A
            ys.append(0.2 + scale * mm_progress(TIMES, u, kappa)
                      + rng.normal(0, noise, TIMES.size))
            s0s.append(scale / EPSILON * 1e6)
            keys.append(f"s{smp}")
    names = [f"{chr(65 + i // 12)}{i % 12 + 1}" for i in range(96)]
    return TraceSet.from_arrays(names, TIMES, np.array(ys)), s0s, keys


def _outliers(tmp_path, seed, off_well=None) -> list[str]:
    ts, s0s, keys = _triplicates(seed, off_well)
    rows = ["well,role,sample,substrate (uM)"]
    rows += [f"{n},sample,{k},{s:.6g}" for n, k, s in zip(ts.names, keys, s0s, strict=True)]
    (tmp_path / "map.csv").write_text("\n".join(rows) + "\n")
    table = analyse_plate(ts, read_layout(str(tmp_path / "map.csv")),
                          RateSettings(epsilon=EPSILON, pathlength_cm=1.0)).table
    return [w for w, f in zip(table["trace"], table["flags"], strict=True) if "outlier" in f]


def test_ordinary_pipetting_scatter_of_precise_wells_is_not_called_an_outlier(tmp_path):
    # the plate's replicate scatter was estimated as a median over all wells, less the median
    # of their own SEs: slow wells with wide (conservative) SEs made it 0, and the fast,
    # precise wells' 3 % scatter read as outliers (6 flags on these 8 plates, none of them on
    # a wrong rate). Each well now counts by its own precision.
    flagged = [w for seed in range(100, 108) for w in _outliers(tmp_path, seed)]
    assert len(flagged) <= 1, flagged


def test_a_well_with_a_third_more_enzyme_than_its_replicates_is_still_an_outlier(tmp_path):
    # the fastest sample of seed 100 (precise wells), one replicate pipetted 35 % heavy
    ts, _, keys = _triplicates(100)
    g = ts.grid()
    rates = g.values[:, 5] - g.values[:, 0]                  # change over the first 50 s
    well = int(np.argmax(rates))
    assert ts.names[well] in _outliers(tmp_path, 100, off_well=well)


def test_the_clipped_chi_square_mean_matches_scipy():
    # reference: scipy.stats.chi2; E[min(X, a)] = F3(a) + a (1 - F1(a)) for X ~ chi-square(1)
    from scipy.stats import chi2

    from rateabs.rates import HUBER_MEAN, HUBER_Z2
    assert HUBER_MEAN == pytest.approx(chi2.cdf(HUBER_Z2, 3) + HUBER_Z2 * chi2.sf(HUBER_Z2, 1),
                                       abs=1e-6)
