"""The initial-rate estimator's choice and its trace flags (rateabs.slopes), against truths
computed without the package: Michaelis–Menten turnover with substrate depletion and a
hysteretic lag integrated by scipy.integrate.solve_ivp (tests/kinetics_truth.py), seeded."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from kinetics_truth import mm_progress

from rateabs.errors import UsageError
from rateabs.slopes import TRACE_FLAGS, find_windows
from rateabs.traces import TraceSet

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from flag_calibration import calibrate, calibrate_with_map, simulate_plate  # noqa: E402

T = np.arange(0.0, 601.0, 10.0)
SHAPE_FLAGS = {"lag", "misfit", "speeds-up", "start"}


def enzyme_plate(seed, n, depletion, s0_km, v0, noise=0.002, lag=0.0, times=T):
    """``n`` wells from the mechanism (kinetics_truth.mm_progress, solve_ivp): the signal
    change at full conversion is set so that the true initial slope is ``v0`` (A/s)."""
    rng = np.random.default_rng(seed)
    p = [np.broadcast_to(np.asarray(x, float), (n,)) for x in (depletion, s0_km, v0, lag)]
    ys = []
    for dep, r, v, tau in zip(*p, strict=True):
        kappa = 1 / r
        u = (dep - kappa * np.log1p(-dep)) / times[-1]      # V/S0 converting ``dep`` by the end
        full = np.concatenate([[0.0], times]) if times[0] > 0 else times
        x = mm_progress(full, u, kappa, tau)[-times.size:]
        ys.append(0.3 + v / (u / (1 + kappa)) * x + rng.normal(0, noise, times.size))
    names = [f"w{i}" for i in range(n)]
    return TraceSet.from_arrays(names, times, np.array(ys)).grid(), p[2].copy()


def test_depleting_plate_rates_right_and_covered():
    """Truth: solve_ivp on the mechanism (Schnell & Mendoza 1997's integrated equation is its
    solution). 1 % to 80 % conversion, S0 from Km/5 to 5 Km: at least 90 % of wells within
    3 SE or 5 % of the true initial rate, and the SE covers (|z| < 2 for about 95 %)."""
    rng = np.random.default_rng(5)
    n = 96
    dep = np.exp(rng.uniform(np.log(0.01), np.log(0.8), n))
    grid, truth = enzyme_plate(6, n, dep, np.exp(rng.uniform(np.log(0.2), np.log(5), n)),
                               rng.uniform(0.5, 3, n) * 1e-4)
    w = find_windows(grid)
    err = np.abs(w.slope - truth)
    assert np.mean((err < 3 * w.slope_se) | (err < 0.05 * truth)) >= 0.9
    assert np.mean(err < 2 * w.slope_se) >= 0.85
    # the deep-depletion wells too (a short window or the whole curve), and each says which
    deep = dep > 0.5
    assert np.mean(((err < 3 * w.slope_se) | (err < 0.05 * truth))[deep]) >= 0.9
    assert all(c.startswith(m) for c, m in zip(w.choice, w.method, strict=True))


def test_straight_slow_trace_keeps_the_whole_read_and_no_flag():
    """A straight trace at 0.005 A/min with ordinary noise (0.002 A): the window is the whole
    read, the rate within 3 SE of the truth, no flag (common practice: a straight trace's
    slope is the least-squares line through all its readings)."""
    grid, truth = enzyme_plate(21, 40, 1e-4, 1.0, 0.005 / 60)
    w = find_windows(grid)
    assert np.all(w.n == T.size)
    assert np.all(np.abs(w.slope - truth) < 3 * w.slope_se)
    assert w.flags == [[] for _ in range(40)]


@pytest.mark.parametrize("estimator", ["auto", "curve", "window"])
def test_flat_blanks_never_flagged_for_shape(estimator):
    """Flat blanks (no enzyme), ordinary noise: no shape flag under any estimator, and no flag
    at all under the default and the window (their noise is the plate's; common practice).
    Forced onto the whole curve, a flat trace's extrapolated slope is imprecise and may be
    called ``noisy``, which is true."""
    rng = np.random.default_rng(3)
    y = 0.05 + rng.normal(0, 0.002, (96, T.size))
    w = find_windows(TraceSet.from_arrays([f"b{i}" for i in range(96)], T, y).grid(),
                     estimator=estimator)
    assert not any(SHAPE_FLAGS & set(f) for f in w.flags)
    if estimator != "curve":
        assert all(not f for f in w.flags)
    assert np.mean(np.abs(w.slope) < 3 * w.slope_se) > 0.95


def test_no_lag_flag_on_a_straight_cuvette_read_from_10_s():
    """A straight cuvette trace whose first reading is at 10 s (the reaction began at 0): no
    lag is fitted and no lag flag (common practice)."""
    t = np.arange(10.0, 301.0, 10.0)
    grid, truth = enzyme_plate(8, 20, 0.01, 1.0, 2e-4, times=t)
    w = find_windows(grid)
    assert not any("lag" in f for f in w.flags)
    assert np.all(w.lag_s == 0)
    assert np.all(np.abs(w.slope - truth) < 3 * w.slope_se)


def test_a_real_lag_is_flagged():
    """A hysteretic lag (Frieden 1970) of time constant 200 s in a 10 min read: the enzyme is
    95 % active only after the whole read is nearly over, and the rate is flagged ``lag``."""
    grid, _ = enzyme_plate(9, 10, 0.02, 1.0, 2e-4, lag=200.0)
    w = find_windows(grid)
    assert all("lag" in f for f in w.flags)


def test_moderate_lag_rate_right():
    """A lag of 60 s time constant (solve_ivp truth): the rate after the lag is the fully
    active enzyme's initial rate, within 3 SE or 5 %."""
    grid, truth = enzyme_plate(10, 20, 0.02, 1.0, 2e-4, lag=60.0)
    w = find_windows(grid)
    err = np.abs(w.slope - truth)
    assert np.mean(w.lag_s > 0) >= 0.9
    assert np.mean((err < 3 * w.slope_se) | (err < 0.05 * truth)) >= 0.9


def test_a_lag_followed_by_depletion_is_covered_by_its_se():
    """A hysteretic lag of 60-140 s (Frieden 1970) and 15-45 % conversion by the end, S0 from
    Km/5 to Km; truth by solve_ivp (tests/kinetics_truth.py). The straight lag cannot see the
    substrate used before and during its window, and a lag followed by a slowing rate is rarely
    evident over it: every rate is within 3 SE of the truth, because the SE counts the slowing
    the data cannot rule out (two thirds were before, some 4-7 SE low)."""
    rng = np.random.default_rng(31)
    n = 24
    grid, truth = enzyme_plate(32, n, rng.uniform(0.15, 0.45, n), rng.uniform(0.2, 1.0, n),
                               rng.uniform(1, 3, n) * 1e-4, lag=rng.uniform(60, 140, n))
    w = find_windows(grid)
    assert np.all(np.abs(w.slope - truth) < 3 * w.slope_se)
    assert np.mean(w.slope < truth) > 0.8                 # they do read low: depletion


def _settling_plate(seed, n, conversion, rate, noise, settle):
    """Enzyme wells (truth by solve_ivp; conversion by the last reading, S0 from Km/5 to 5 Km,
    initial rate in 1e-4 A/s, log-uniform or uniform over the given ranges) under a baseline
    that settles by ``settle`` (A, either sign) with a 40 s time constant: the plate without
    the settling, the estimates with it, and which wells are off by over 5 % and 3 SE."""
    rng = np.random.default_rng(seed)
    grid, truth = enzyme_plate(seed + 1, n, np.exp(rng.uniform(*np.log(conversion), n)),
                               np.exp(rng.uniform(np.log(0.2), np.log(5), n)),
                               rng.uniform(*rate, n) * 1e-4, noise=noise)
    amp = rng.choice([-1, 1], n) * rng.uniform(*settle, n)
    settled = TraceSet.from_arrays(grid.names, T, grid.values + amp[:, None] * np.exp(-T / 40))
    w = find_windows(settled.grid())
    err = np.abs(w.slope - truth)
    return grid, w, (err > 0.05 * truth) & (err > 3 * w.slope_se)


@pytest.mark.parametrize("seed", [41, 43])
def test_a_settling_baseline_that_moves_the_rate_is_flagged(seed):
    """Enzyme wells (truth by solve_ivp, 5-70 % conversion, S0 from Km/5 to 5 Km) under a
    baseline that settles by 5-20 mA with a 40 s time constant: every well whose rate is off by
    more than 5 % and 3 SE carries a flag (one in seven escaped before the offset check of
    ``start``), and the same wells without the settling carry none."""
    grid, w, look = _settling_plate(seed, 48, (0.05, 0.7), (1, 3), 0.001, (0.005, 0.02))
    assert look.sum() >= 5
    assert all(w.flags[i] for i in np.nonzero(look)[0])
    assert find_windows(grid).flags == [[] for _ in range(48)]


@pytest.mark.parametrize("seed", [71, 81])
def test_a_slight_settling_baseline_that_moves_the_rate_is_flagged_more_often(seed):
    """Enzyme wells (truth by solve_ivp, 1-30 % conversion, S0 from Km/5 to 5 Km, 2 mA noise)
    under a baseline that settles by only 3-10 mA with a 40 s time constant: the settling is
    often too slight to be evident, yet moves the rate by more than 5 % and 3 SE. At least 60 %
    of those wells carry a flag (about half did before a decaying offset that only possibly
    fits better, but moves the rate by over 3 SE, counted for ``start``: 14 of 28 and 12 of 23
    here, then 18 and 17; since the window's SE counts the shortfall the noise may hide,
    rateabs.slopes.choice.shortfall_ms, fewer wells are that far off: 14 of 22 and 15 of 19),
    and the same wells without the settling carry almost none."""
    grid, w, look = _settling_plate(seed, 160, (0.01, 0.3), (0.5, 2), 0.002, (0.003, 0.01))
    flagged = np.array([bool(f) for f in w.flags])
    assert look.sum() >= 15
    assert (look & flagged).sum() >= 0.6 * look.sum()
    assert sum(bool(f) for f in find_windows(grid).flags) <= 0.03 * 160


@pytest.mark.parametrize("seed", [5, 6])
def test_a_steep_start_on_a_slow_trace_is_flagged_not_reported_bare(seed):
    """Slow enzyme wells (truth by solve_ivp, 1-10 % conversion, 0.5-1e-4 A/s) under a
    baseline that settles by 20-30 mA with a 40 s time constant: the settling alone rises or
    falls several times faster than the reaction at the start. Where the straight window reported
    sits on that steep start while the whole curve is flat, the rate is off by far more than
    5 % (two such wells of 80 calibration plates read 2.3 and 3.9 times their truth with no
    flag); each of them carries ``start``."""
    grid, w, look = _settling_plate(seed, 64, (0.01, 0.1), (0.5, 1), 0.002, (0.02, 0.03))
    truth = find_windows(grid).slope                # the same wells without the settling
    steep = (w.method == "window") & np.char.startswith(w.choice, "window: the trace is flat")
    assert steep.sum() >= 2
    assert np.all(np.abs(w.slope[steep] - truth[steep]) > 0.3 * np.abs(truth[steep]))
    assert all("start" in w.flags[i] for i in np.nonzero(steep)[0])


def test_noisy_judged_on_the_readings_noise_not_a_near_zero_rate():
    """``noisy`` marks a trace whose readings are far noisier than the plate's, not a
    near-zero control whose relative SE is large (common practice)."""
    grid, _ = enzyme_plate(12, 24, 0.05, 1.0, np.r_[np.full(20, 2e-4), np.full(4, 1e-6)])
    w = find_windows(grid)
    assert not any("noisy" in f for f in w.flags)
    y = np.array(grid.values)
    y[0] += np.random.default_rng(1).normal(0, 0.03, T.size)        # one very noisy well
    w = find_windows(TraceSet.from_arrays(list(grid.names), T, y).grid())
    assert "noisy" in w.flags[0]
    assert not any("noisy" in f for f in w.flags[1:])


def test_overrides_window_and_curve_still_work():
    """``estimator="window"`` reports the straight window, ``"curve"`` the whole curve, each
    with its own slope and SE; an unknown estimator is a usage error (common practice)."""
    grid, truth = enzyme_plate(13, 12, 0.6, 0.5, 2e-4)
    win = find_windows(grid, estimator="window")
    cur = find_windows(grid, estimator="curve")
    assert set(win.method) == {"window"} and set(cur.method) == {"curve"}
    np.testing.assert_array_equal(win.slope, win.window_slope)
    np.testing.assert_array_equal(cur.slope, cur.curve_slope)
    np.testing.assert_array_equal(cur.slope_se, cur.curve_slope_se)
    # the window override reports the same windows the auto estimator measured
    np.testing.assert_array_equal(win.slope, find_windows(grid).window_slope)
    # 60 % converted: the whole curve is right
    assert np.mean(np.abs(cur.slope - truth) < 3 * cur.slope_se) >= 0.9
    fixed = find_windows(grid, window=(0, 120))
    assert np.all(fixed.t_end <= 120) and set(fixed.method) == {"window"}
    with pytest.raises(UsageError):
        find_windows(grid, estimator="best")


def test_contract_fields_and_flag_meanings():
    """The fields the plate layer reads (PHASE2 contract) are there, one per trace, and every
    flag word has a meaning."""
    grid, _ = enzyme_plate(14, 5, 0.3, 1.0, 2e-4)
    w = find_windows(grid)
    for name in ("slope", "slope_se", "method", "choice", "window_slope", "window_slope_se",
                 "curve_slope", "curve_slope_se", "flags"):
        assert len(getattr(w, name)) == 5
    assert all(set(f) <= set(TRACE_FLAGS) for f in w.flags)
    assert all(isinstance(m, str) and m for m in TRACE_FLAGS.values())


def test_flag_calibration_on_seeded_plates():
    """The calibration benchmark (benchmarks/flag_calibration.py) in small: six seeded plates,
    truth by solve_ivp. Good wells (within 5 % or 3 SE of the truth) are flagged at most 10 %
    of the time (the issue's goal; 7.1 % here, most of them very noisy wells). Of the wells
    that need a look 21 of 28 carry a flag here (20 of 28 before a decaying offset at the start
    that only possibly fits better counted for ``start``; 20 of 33 before the lag's SE and the
    decaying-offset test), short of the goal of 90 %: the bound guards what the flags reach
    now, and the benchmark prints the full figures."""
    plates = [simulate_plate(seed) for seed in range(101, 107)]
    cal = calibrate(plates)
    assert cal.n_bad >= 10
    assert cal.good_flagged <= 0.10
    assert cal.bad_flagged >= 0.74
    # with a plate map that gives each well's [S]0, as a user with a map runs ``rates``: a
    # depleted window the curve does not follow is kept and flagged (21 of 22 flagged here,
    # 7.6 % of the good wells; before, the curve replaced it and read lag wells 12-56 % low)
    cal = calibrate_with_map(plates)
    assert cal.n_bad >= 10
    assert cal.good_flagged <= 0.10
    assert cal.bad_flagged >= 0.90
    # too-fast, the rate the map's substrate says the late readings cannot follow, points at
    # wells that are off: 12 of its 14 here (86 %; 84-91 % over seeds 0-139 in the benchmark)
    count, precision, _ = cal.per_flag["too-fast"]
    assert count >= 5 and precision >= 0.7


def test_a_well_is_estimated_alike_beside_a_well_whose_first_readings_are_masked():
    # The whole-curve grid is tabulated on the columns' times; a neighbour whose first two
    # readings are masked has other times from its first usable reading, and must not shift
    # anyone's estimate (common practice: each trace's answer depends on that trace alone).
    t = np.arange(0.0, 601.0, 20.0)
    rng = np.random.default_rng(0)
    y = 0.2 + 0.03 / 60 * t + rng.normal(0, 0.001, (2, t.size))    # straight, 0.03 A/min
    g = TraceSet.from_arrays(["A1", "A2"], t, y).grid()
    usable = g.usable.copy()
    usable[1, :2] = False
    both = find_windows(type(g)(g.names, g.times, g.values, usable, g.flags))
    alone = find_windows(type(g)(g.names[:1], g.times[:1], g.values[:1], g.usable[:1],
                                 None if g.flags is None else g.flags[:1]))
    assert both.slope[0] == pytest.approx(alone.slope[0], rel=1e-9)
    assert both.t_start[0] == alone.t_start[0] == 0 and both.lag_s[0] == alone.lag_s[0]
    assert both.method[0] == alone.method[0]


def test_a_flat_blank_is_said_to_show_no_change_never_to_speed_up():
    """Flat blanks (no enzyme, 2-3 mA noise, seeded): the straight window is kept, and the
    reason given is that the trace shows no change beyond its noise; the curve fit's reading of
    that noise ("speeds up", "within n SE") is not offered as the reason (the sample plate's
    blank A9 was said to speed up)."""
    rng = np.random.default_rng(9)
    y = 0.3 + rng.normal(0, 0.0025, (48, T.size))
    w = find_windows(TraceSet.from_arrays([f"b{i}" for i in range(48)], T, y).grid())
    assert set(w.method) == {"window"}
    assert all(c.startswith("window: no change beyond the noise") for c in w.choice)
    assert not any("speeds up" in c for c in w.choice)


def test_a_straight_trace_is_not_said_to_speed_up():
    """Straight traces (2e-4 A/s, 2 mA noise, seeded): where the curve fit bends up by chance,
    the reason says the trace is straight within the noise; "the curve speeds up" is kept for
    a speed-up the noise could not make (chi-square gain over 10.83, p = 0.001, as the
    ``speeds-up`` flag). One in five such traces was said to speed up."""
    rng = np.random.default_rng(21)
    y = 0.3 + 2e-4 * T + rng.normal(0, 0.002, (48, T.size))
    w = find_windows(TraceSet.from_arrays([f"s{i}" for i in range(48)], T, y).grid())
    assert not any(c.startswith("window: the curve speeds up") for c in w.choice)
    assert any(c.startswith("window: straight within the noise") for c in w.choice)
    # a lag the noise cannot hide is still said to speed up (solve_ivp truth, 150 s lag)
    grid, _ = enzyme_plate(4, 8, 0.05, 2.0, 2e-4, noise=0.001, lag=150.0)
    w = find_windows(grid)
    assert not any(c.startswith("window: straight within the noise") for c in w.choice)



def test_a_baseline_settling_against_the_reaction_is_no_lag():
    """The calibration plates of seeds 0-19 (benchmarks/flag_calibration.py; truth by
    solve_ivp): a baseline that settles against the reaction makes the first readings move the
    wrong way, which no lag does (a slow start moves the reaction's way, only less). Of the
    settling wells 17 were flagged ``lag``; now at most 10 are (8), their late start called
    ``start``, while the true lags keep theirs (12)."""
    settle, lag = 0, 0
    for seed in range(20):
        p = simulate_plate(seed)
        w = find_windows(p.traces.grid())
        has = np.array(["lag" in f for f in w.flags])
        settle += int(has[p.condition == "settle"].sum())
        lag += int(has[p.condition == "lag"].sum())
    assert settle <= 10 and lag >= 12
