"""A plate whose baseline drifts: the blanks' drift is taken out of the traces before their
slopes are found, so a whole-curve fit never reads the drift as the reaction's bend.

Truth: Michaelis–Menten turnover of a depleting substrate integrated with
scipy.integrate.solve_ivp (tests/kinetics_truth.py, independent of the package; Schnell &
Mendoza 1997 for the integrated form), NADH consumed at ε 6220 M⁻¹cm⁻¹ (Horecker & Kornberg
1948), plus a straight drift shared by every well, blanks included (common practice: the
no-enzyme blanks carry the plate's drift). The blanks' straight-line slopes are checked against
numpy.polyfit.
"""

from __future__ import annotations

import numpy as np
import pytest
from kinetics_truth import mm_progress

from rateabs.layout import read_layout
from rateabs.options import RateSettings
from rateabs.rates import analyse_plate
from rateabs.traces import TraceSet

TIMES = np.arange(0.0, 901.0, 20.0)
EPSILON, PATH = 6220.0, 0.58                     # M^-1 cm^-1, cm
KM, VMAX = 30.0, 2.4                             # uM, uM/min


def _drifting_plate(tmp_path, drift_A_per_min, s0s=(6, 6, 6, 15, 15, 15, 60, 60, 60),
                    n_blanks=4, noise=0.0005, seed=7):
    """NADH consumed (the signal falls) in wells of [S]0 ``s0s`` (uM) and blanks of no enzyme,
    all drifting up by ``drift_A_per_min``; returns the plate, its map and the true rates."""
    rng = np.random.default_rng(seed)
    names, ys, truth, rows = [], [], [], ["well,role,sample,substrate (uM)"]
    for i, s0 in enumerate(list(s0s) + [0] * n_blanks):
        name = f"{'ABCDEFGH'[i // 12]}{i % 12 + 1}"
        used = mm_progress(TIMES, VMAX / 60 / s0, KM / s0) if s0 else np.zeros(TIMES.size)
        nadh = 60.0 - (s0 * used if s0 else 0.0)          # NADH 60 uM, one per substrate
        y = (0.05 + EPSILON * PATH * nadh * 1e-6 + drift_A_per_min * TIMES / 60
             + rng.normal(0, noise, TIMES.size))
        names.append(name)
        ys.append(y)
        truth.append(VMAX * s0 / (KM + s0) if s0 else np.nan)
        rows.append(f"{name},{'sample' if s0 else 'blank'},E,{s0 if s0 else ''}")
    (tmp_path / "map.csv").write_text("\n".join(rows) + "\n")
    ts = TraceSet.from_arrays(names, TIMES, np.array(ys))
    return ts, read_layout(str(tmp_path / "map.csv")), np.array(truth)


def test_a_drift_against_the_signal_does_not_pull_slow_curved_wells_low(tmp_path):
    # the drift (+0.001 A/min) runs against the falling signal and is as large as the slowest
    # wells' rate (0.40 uM/min = 0.0014 A/min). When the blank slope was subtracted from the
    # curves' initial slopes afterwards, the [S]0 = Km/5 wells read 33 % low at -7.7 SE,
    # flagged too-fast for the wrong reason.
    ts, layout, truth = _drifting_plate(tmp_path, 0.001)
    a = analyse_plate(ts, layout, RateSettings(epsilon=EPSILON, pathlength_cm=PATH))
    t = a.table.set_index("trace").loc[ts.names]
    rate, se = t["rate_uM_per_min"].to_numpy(float), t["rate_uM_per_min_se"].to_numpy(float)
    ok = np.isfinite(truth)
    z = (rate[ok] - truth[ok]) / se[ok]
    assert np.all(np.abs(z) < 3), z
    assert np.all(np.abs(rate[ok] / truth[ok] - 1) < 0.15)
    assert not any("too-fast" in f for f in t["flags"][ok])


def test_the_blank_level_is_the_blanks_straight_line_slope(tmp_path):
    # eight evenly drifting blanks: the level is their straight-line slopes' mean (reference:
    # numpy.polyfit), and its SE is that of a straight line, not widened by a curve fit's doubt
    ts, layout, _ = _drifting_plate(tmp_path, 0.002, s0s=(60, 60), n_blanks=8, noise=0.002)
    a = analyse_plate(ts, layout, RateSettings(epsilon=EPSILON, pathlength_cm=PATH))
    g = ts.grid()
    fits = [np.polyfit(TIMES / 60, g.values[i], 1, cov=True) for i in range(2, 10)]
    slopes = np.array([p[0] for p, _ in fits])
    ses = np.sqrt([c[0, 0] for _, c in fits])
    level = np.sum(slopes / ses**2) / np.sum(1 / ses**2)
    assert a.blank_info["slope_A_per_min"] == pytest.approx(level, rel=1e-6)
    assert a.blank_info["slope_A_per_min_se"] == pytest.approx(1 / np.sqrt(np.sum(1 / ses**2)),
                                                          rel=0.5)
    assert a.blank_info["slope_A_per_min"] == pytest.approx(0.002, abs=3 * a.blank_info["slope_A_per_min_se"])


def _blank_plate(tmp_path, blank_slopes, blank_substrate="150"):
    """Four sample wells falling 0.030 A/min (NADH, [S] 150 uM) and blanks at ``blank_slopes``
    (A/min), 0.5 mA noise, read every 15 s for 10 min."""
    t = np.arange(0.0, 601.0, 15.0)
    slopes = [-0.030] * 4 + list(blank_slopes)
    rng = np.random.default_rng(3)
    ys = 1.2 + np.array(slopes)[:, None] * t / 60 + rng.normal(0, 5e-4, (len(slopes), t.size))
    names = [f"A{k + 1}" for k in range(len(slopes))]
    (tmp_path / "m.csv").write_text("well,role,sample,substrate (uM)\n" + "".join(
        f"{n},{'sample' if k < 4 else 'blank'},{'L1' if k < 4 else 'buffer'},"
        f"{150 if k < 4 else blank_substrate}\n" for k, n in enumerate(names)))
    return analyse_plate(TraceSet.from_arrays(names, t, ys), read_layout(str(tmp_path / "m.csv")),
                         RateSettings(epsilon=6220.0, pathlength_cm=1.0))


def test_two_blanks_that_disagree_are_said_to(tmp_path):
    # an audit's two blanks at +0.003 and -0.020 A/min: their mean was subtracted and every
    # rate moved by a third, with no word; two blanks cannot show which is right
    a = _blank_plate(tmp_path, [0.003, -0.020])
    assert any("the two blanks disagree (A5" in w for w in a.warnings)
    a = _blank_plate(tmp_path, [0.0, 0.0])
    assert not any("blanks disagree" in w for w in a.warnings)


def test_blanks_without_the_samples_substrate_are_said_to_be(tmp_path):
    a = _blank_plate(tmp_path, [0.0, 0.0], blank_substrate="0")
    assert any("the blanks hold 0 uM substrate and the samples 150 uM" in w for w in a.warnings)
    a = _blank_plate(tmp_path, [0.0, 0.0])
    assert not any("blanks hold" in w for w in a.warnings)
