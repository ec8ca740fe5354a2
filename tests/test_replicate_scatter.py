"""The replicate-outlier flag on plates of triplicates whose wells differ by ordinary pipetting
(benchmarks/flag_calibration.py simulates them; its full run reports the figures).

Truth: each well's initial rate from Michaelis–Menten turnover integrated with
scipy.integrate.solve_ivp (tests/kinetics_truth.py, independent of the package; Schnell &
Mendoza 1997 for the integrated form it reproduces). Each replicate's enzyme differs by 3 %
(simulated pipetting), so a well's own rate is right while it sits a few per cent from its
replicates: that is the plate's ordinary scatter, not an outlier.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from flag_calibration import simulate_triplicates, triplicate_outliers  # noqa: E402


def _outliers(tmp_path, seed, heavy=None) -> list[str]:
    return triplicate_outliers(*simulate_triplicates(seed, heavy), tmp_path)


def test_ordinary_pipetting_scatter_of_precise_wells_is_not_called_an_outlier(tmp_path):
    # the plate's replicate scatter was estimated as a median over all wells, less the median
    # of their own SEs: slow wells with wide (conservative) SEs made it 0, and the fast,
    # precise wells' 3 % scatter read as outliers (6 flags on these 8 plates, none of them on
    # a wrong rate). Each well now counts by its own precision.
    flagged = [w for seed in range(100, 108) for w in _outliers(tmp_path, seed)]
    assert len(flagged) <= 1, flagged


def test_a_well_with_a_third_more_enzyme_than_its_replicates_is_still_an_outlier(tmp_path):
    # the fastest sample of seed 100 (precise wells), one replicate pipetted 35 % heavy
    ts, _, _ = simulate_triplicates(100)
    g = ts.grid()
    rates = g.values[:, 5] - g.values[:, 0]                  # change over the first 50 s
    well = int(np.argmax(rates))
    assert ts.names[well] in _outliers(tmp_path, 100, heavy=well)


def test_the_clipped_chi_square_mean_matches_scipy():
    # reference: scipy.stats.chi2; E[min(X, a)] = F3(a) + a (1 - F1(a)) for X ~ chi-square(1)
    from scipy.stats import chi2

    from rateabs.rates import HUBER_MEAN, HUBER_Z2
    assert HUBER_MEAN == pytest.approx(chi2.cdf(HUBER_Z2, 3) + HUBER_Z2 * chi2.sf(HUBER_Z2, 1),
                                       abs=1e-6)
