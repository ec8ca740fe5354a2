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


def _settling_group(tmp_path, settles):
    """Wells of one sample (same [S]0, 3 % used over the read, S0 = Km/5): well k's baseline
    settles by settles[k] A in the reaction's direction over the first minutes; true rate in
    uM/min (solve_ivp, tests/kinetics_truth.py)."""
    from kinetics_truth import mm_progress

    from rateabs.layout import read_layout
    from rateabs.options import RateSettings
    from rateabs.rates import analyse_plate
    from rateabs.traces import TraceSet

    times, eps, kappa, used = np.arange(0.0, 601.0, 10.0), 6220.0, 5.0, 0.03
    u = (used - kappa * np.log1p(-used)) / times[-1]                  # V/S0, 1/s
    change = 0.1 / used                                               # A for the whole S0
    rng = np.random.default_rng(5)
    ys = [0.1 + change * mm_progress(times, u, kappa) + s * np.exp(-times / 40.0)
          + rng.normal(0, 0.001, times.size) for s in settles]
    names = [f"A{k + 1}" for k in range(len(settles))]
    s0 = change / eps * 1e6
    (tmp_path / "m.csv").write_text("well,role,sample,substrate (uM)\n" + "".join(
        f"{n},sample,L1,{s0:.6g}\n" for n in names))
    a = analyse_plate(TraceSet.from_arrays(names, times, np.array(ys)),
                      read_layout(str(tmp_path / "m.csv")),
                      RateSettings(epsilon=eps, pathlength_cm=1.0, total_volume_L=200e-6,
                                   sample_volume_L=20e-6))
    return a, s0 * u / (1 + kappa) * 60


def test_a_well_that_needs_a_look_is_left_out_of_its_samples_mean_with_the_reason(tmp_path):
    # duplicates (too few for a replicate-outlier test): a baseline settling by 0.02 A in the
    # reaction's direction lifts one well's rate by a fifth and it is flagged; the sample's
    # mean was the two wells' (+10 %) and is now the sound one's, with the reason shown
    a, truth = _settling_group(tmp_path, [0.0, -0.02])
    t = a.table.set_index("trace")
    assert t.loc["A2", "flags"] and t.loc["A2", "rate_uM_per_min"] > 1.1 * truth
    assert "outlier" not in t.loc["A2", "flags"]
    act = a.activity.iloc[0]
    assert act["n_used"] == 1 and act["left_out"][0].startswith("A2: needs a look (")
    assert act["activity_U_per_mL"] == t.loc["A1", "activity_U_per_mL"]
    # U/mL = uM/min x 200 uL / 20 uL / 1000 (1 U = 1 umol/min, NC-IUB 1979)
    assert act["activity_U_per_mL"] == pytest.approx(truth * 1e-3 * 10, rel=0.05)
    rep = a.replicates.iloc[0]
    assert rep["n_used"] == 1 and rep["left_out"] == list(act["left_out"])


def test_when_every_well_needs_a_look_they_are_kept_and_it_is_said(tmp_path):
    a, _ = _settling_group(tmp_path, [-0.03, -0.03, -0.03])
    act = a.activity.iloc[0]
    assert act["n_used"] == 3
    assert all(x.endswith("kept: every well of the group does") for x in act["left_out"])


def test_a_grubbs_outlier_is_named_with_grubbs_g_not_a_z(tmp_path):
    # one group of five (too few groups to pool): Grubbs (1969) decides, and the reason gives
    # his G
    a, _ = _settling_group(tmp_path, [0.0, 0.0, 0.0, 0.0, -0.02])
    assert "Grubbs (1969) in groups of 5" in a.outlier_method
    assert a.activity.iloc[0]["left_out"][0].startswith("A5: replicate outlier (Grubbs G = ")


def test_a_small_group_on_a_plate_too_small_to_pool_is_judged_against_an_assumed_scatter(
        tmp_path):
    # one group of four: Grubbs's test cannot name the odd one of three unless the other two
    # coincide; the z test against an assumed 5 % scatter names the settling well (+20 %)
    a, _ = _settling_group(tmp_path, [0.0, 0.0, 0.0, -0.02])
    assert "assumed 5 % scatter" in a.outlier_method
    assert a.activity.iloc[0]["left_out"][0].startswith("A4: replicate outlier (|z| = ")


def _four_triplicates(heavy: float, bubble: bool):
    """Four samples in triplicate, true slopes 0.020, 0.020, 0.030, 0.025 A/min; A2 pipetted
    ``heavy`` times the enzyme, and with ``bubble`` a spike on A5 (:func:`_replicate_plate`)."""
    return _replicate_plate([0.020, 0.020, 0.030, 0.025], 3, heavy, 4 if bubble else None)


def _replicate_plate(slopes, size: int, heavy: float = 1.0, bubble: int | None = None,
                     **settings):
    """Samples S1, S2, ... of ``size`` wells each at the true ``slopes`` (A/min), straight
    traces read every 15 s for 10 min with 0.5 mA noise; A2 pipetted ``heavy`` times the
    enzyme, and well number ``bubble`` (0-based) with a 0.25 A spike over three readings (a
    well flagged for its shape)."""
    import tempfile

    from rateabs.layout import read_layout
    from rateabs.options import RateSettings
    from rateabs.rates import analyse_plate
    from rateabs.traces import TraceSet

    t = np.arange(0.0, 601.0, 15.0)
    rng = np.random.default_rng(11)
    slope = np.repeat(slopes, size).astype(float)
    slope[1] *= heavy
    ys = 0.2 + slope[:, None] * t / 60 + rng.normal(0, 5e-4, (slope.size, t.size))
    if bubble is not None:
        ys[bubble] += 0.25 * np.exp(-(((t - 300) / 20) ** 2))
    names = [f"A{k + 1}" for k in range(slope.size)]
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "m.csv"
        path.write_text("well,role,sample\n" + "".join(
            f"{n},sample,S{k // size + 1}\n" for k, n in enumerate(names)))
        lay = read_layout(str(path))
    return analyse_plate(TraceSet.from_arrays(names, t, ys), lay,
                         RateSettings(epsilon=6220.0, pathlength_cm=1.0, **settings))


def test_a_heavy_well_is_an_outlier_when_another_group_has_a_doubted_well():
    # four triplicates, A5 flagged for a bubble: the three deviations of A2's triplicate
    # outweighed the clipped scatter fit (cv 9.6 %), A2 pipetted 40 % heavy stood 3.4 z out,
    # unflagged, and S1's mean came out +13 %. Truth: 0.020 A/min / 6220 M^-1 cm^-1 x 1 cm
    # = 3.215 uM/min (by hand; NADH epsilon, Horecker & Kornberg 1948).
    a = _four_triplicates(1.4, bubble=True)
    t = a.table.set_index("trace")
    assert t.loc["A5", "flags"] and "outlier" not in t.loc["A5", "flags"]
    assert a.outlier_method.startswith("pooled")
    assert [w for w in t.index if "outlier" in t.loc[w, "flags"]] == ["A2"]
    s1 = a.replicates.set_index("sample").loc["S1"]
    assert s1["mean"] == pytest.approx(0.020 / 6220 * 1e6, rel=0.01)


def test_no_outlier_among_four_sound_triplicates_with_a_doubted_well():
    a = _four_triplicates(1.0, bubble=True)
    assert not [f for f in a.table["flags"] if "outlier" in f]


def test_grubbs_does_not_flag_a_well_within_its_own_ses_of_two_that_coincide():
    # Grubbs's G sees only the spread within the group: for n = 3 G cannot exceed
    # (n - 1) / sqrt(n) = 1.1547, and the 5 % critical value is 1.153 (Grubbs 1969 table), so
    # of three wells, two that nearly coincide make the third an outlier at any distance.
    # In a group of five with SEs of 0.01, 1.0016 is 0.16 SE from the others: not an outlier;
    # 1.2 is 20 SE out.
    from rateabs.rates import grubbs_outlier, replicate_outliers

    x = np.array([1.0, 1.00001, 1.0016])
    assert grubbs_outlier(x) == 2
    x5 = np.array([1.0, 1.00001, 1.00002, 1.0, 1.0016])
    assert grubbs_outlier(x5) == 4
    t = replicate_outliers(x5, np.full(5, 0.01), ["a"] * 5)
    assert "Grubbs" in t.method and not t.out.any()
    x5[4] = 1.2
    assert list(replicate_outliers(x5, np.full(5, 0.01), ["a"] * 5).out) == [False] * 4 + [True]


def test_the_replicate_picture_crosses_the_wells_left_out_for_a_flag(tmp_path, monkeypatch):
    # A5 (bubble) is left out of S2's mean; the picture drew it as an ordinary dot beside a
    # bar that did not include it. Now it is a cross, and the title says what a cross means.
    import matplotlib.axes

    from rateabs.plots.rates import replicate_plot

    a = _four_triplicates(1.0, bubble=True)
    marks, titles = [], []
    real_scatter = matplotlib.axes.Axes.scatter

    def scatter(self, x, y, *args, **kw):
        marks.append((kw.get("marker", "o"), list(np.atleast_1d(x))))
        return real_scatter(self, x, y, *args, **kw)

    monkeypatch.setattr(matplotlib.axes.Axes, "scatter", scatter)
    import matplotlib.figure

    real_text = matplotlib.figure.Figure.text
    monkeypatch.setattr(matplotlib.figure.Figure, "text",
                        lambda self, x, y, s, *ar, **kw: titles.append(s) or real_text(
                            self, x, y, s, *ar, **kw))
    assert replicate_plot(a, tmp_path / "r.png").exists()
    from rateabs.plots.rates import as_drawing

    a5 = float(a.table.set_index("trace").loc["A5", as_drawing(a).rate_column])
    crosses = [x for m, xs in marks if m == "x" for x in xs]
    dots = [x for m, xs in marks if m == "o" for x in xs]
    assert crosses == [pytest.approx(a5)] and a5 not in dots
    assert any("left out for a flag (x)" in t for t in titles)


# Audit cases (an outside trial of plates simulated with solve_ivp; here straight traces whose
# truth is their slope): 0.020 A/min / 6220 M^-1 cm^-1 x 1 cm = 3.215 uM/min (by hand; NADH,
# Horecker & Kornberg 1948).
TRUTH_S1 = 0.020 / 6220 * 1e6


@pytest.mark.parametrize("groups", [1, 4])
def test_a_heavy_well_beside_a_doubted_well_of_its_own_triplicate_is_left_out(groups):
    # A1 flagged for its shape, A2 40 % heavy: with one group A2 was unflagged (Grubbs cannot
    # name the odd one of three); with four, all three were flagged outliers and the mean kept
    # A2 (+20 %). A2 is now set aside first, and S1's mean is A3's.
    a = _replicate_plate([0.020, 0.030, 0.025, 0.022][:groups], 3, 1.4, bubble=0)
    t = a.table.set_index("trace")
    assert "outlier" in t.loc["A2", "flags"] and t.loc["A2", "replicate_set_aside"]
    s1 = a.replicates.set_index("sample").loc["S1"]
    assert s1["mean"] == pytest.approx(TRUTH_S1, rel=0.01)
    assert any(x.startswith("A2: replicate outlier (|z| = ") for x in s1["left_out"])


@pytest.mark.parametrize("groups", [1, 2])
def test_duplicates_that_disagree_are_flagged_on_a_plate_too_small_to_pool(groups):
    # one or two duplicate pairs, one well 40 % heavy: neither was flagged (Grubbs takes no
    # duplicates) and the mean was 20 % high with no word. Both are flagged now, both kept
    # (neither can be told right), and the sample's activity carries 'wells-disagree'.
    a = _replicate_plate([0.020, 0.030][:groups], 2, 1.4)
    t = a.table.set_index("trace")
    assert "outlier" in t.loc["A1", "flags"] and "outlier" in t.loc["A2", "flags"]
    s1 = a.replicates.set_index("sample").loc["S1"]
    assert s1["n_used"] == 2 and all("cannot be told apart" in x for x in s1["left_out"])
    if groups == 2:
        assert "outlier" not in t.loc["A3", "flags"] and "outlier" not in t.loc["A4", "flags"]


def test_a_sample_whose_kept_wells_disagree_carries_the_activity_flag():
    # the flag, and its own warning: the warnings once said any flagged activity "trends with
    # the dilution", on a plate with one dilution
    from rateabs.rates import ACTIVITY_FLAGS

    a = _replicate_plate([0.020], 2, 1.4, total_volume_L=200e-6, sample_volume_L=20e-6)
    assert a.activity.iloc[0]["flags"] == ["wells-disagree"]
    assert "wells-disagree" in ACTIVITY_FLAGS
    assert any("wells of S1 disagree" in w for w in a.warnings)
    assert not any("trends with the dilution" in w for w in a.warnings)


def test_a_plate_with_controls_of_one_kind_says_why_it_has_no_z_prime(tmp_path):
    # only positives: no Z' and, before, no line saying why
    import tempfile

    from rateabs.layout import read_layout
    from rateabs.options import RateSettings
    from rateabs.rates import analyse_plate
    from rateabs.traces import TraceSet

    t = np.arange(0.0, 601.0, 15.0)
    ys = 0.2 + 0.02 * t / 60 + np.random.default_rng(2).normal(0, 5e-4, (4, t.size))
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "m.csv"
        path.write_text("well,role,sample\n" + "".join(f"A{k},positive,full\n"
                                                       for k in range(1, 5)))
        a = analyse_plate(TraceSet.from_arrays([f"A{k}" for k in range(1, 5)], t, ys),
                          read_layout(str(path)), RateSettings())
    assert a.zprime is None
    assert any("no Z'" in w and "4 positive, 0 negative" in w for w in a.warnings)
