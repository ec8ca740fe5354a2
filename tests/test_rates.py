"""Initial rates: reference-library slopes, seeded simulations, activity by hand, QC, CLI."""

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import optimize, stats

from rateabs.cli import main
from rateabs.rates import RateSettings, analyse_plate, grubbs_outlier, z_factor
from rateabs.simulate import rate_traces
from rateabs.slopes import find_windows
from rateabs.traces import TraceSet

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"


def simulate(kind, n, seed):
    """Ground-truth traces with known slopes (rateabs.simulate, seeded)."""
    return rate_traces(kind, n, seed)


def test_window_slopes_equal_polyfit_and_linregress():
    # reference library: numpy.polyfit and scipy.stats.linregress on the same points
    ts, _ = simulate("depletion", 12, 3)
    g = ts.grid()
    w = find_windows(g)
    for i in range(12):
        sel = slice(w.start[i], w.end[i] + 1)
        t, y = g.times[i][sel], g.values[i][sel]
        assert w.n[i] == t.size
        assert w.window_slope[i] == pytest.approx(np.polyfit(t, y, 1)[0], rel=1e-9)
        lr = stats.linregress(t, y)
        assert w.window_slope_se[i] == pytest.approx(lr.stderr, rel=1e-7)
        assert w.r2[i] == pytest.approx(lr.rvalue ** 2, rel=1e-7)


def test_linear_traces_use_the_whole_read():
    """Small seeded version of benchmarks/window_hit_rates.py."""
    ts, truth = simulate("linear", 100, 11)
    w = find_windows(ts.grid())
    assert np.mean(w.end_reason == 0) >= 0.9
    assert np.mean(np.abs(w.slope - truth) < 3 * w.slope_se) >= 0.95
    assert np.mean(w.lag_s > 0) <= 0.1


def test_lag_phase_found_and_skipped():
    ts, truth = simulate("lag", 100, 12)
    w = find_windows(ts.grid())
    assert np.mean(w.lag_s > 0) >= 0.9
    assert np.median(np.abs(w.slope / truth - 1)) < 0.08


def _lag_plate(path, tau=90.0, seed=5):
    """A1-A4 switching on with a first-order lag of time constant ``tau``, y = 1 - b (t - tau
    (1 - e^(-t/tau))) (Frieden 1970, J. Biol. Chem. 245:5788), A5-A8 straight from the start;
    b = 0.03 A/min, 37 reads 20 s apart, 1 mA seeded noise."""
    rng = np.random.default_rng(seed)
    t = np.arange(37) * 20.0
    lag = 1.0 - 0.03 / 60 * (t - tau * (1 - np.exp(-t / tau)))
    rows = ["Time (s)," + ",".join(f"A{i}" for i in range(1, 9))]
    straight = 1.0 - 0.03 / 60 * t
    rows += [f"{x:g}," + ",".join(f"{(lag if i < 4 else straight)[k] + rng.normal(0, 1e-3):.5f}"
                                  for i in range(8)) for k, x in enumerate(t)]
    path.write_text("\n".join(rows) + "\n")
    return path


def test_a_lag_is_said_where_it_moves_the_window_or_gives_the_rate(tmp_path):
    # the wells with a lag: the header names them with the lag's size, the window cell gives
    # the span the rate came from (the whole trace for a whole-curve rate, a window starting
    # three lag time constants in otherwise) and the lag; the rate is the fully active one
    # (0.03 A/min, as simulated)
    data = _lag_plate(tmp_path / "lag.csv")
    r = _run([str(data), "--no-plots"])
    assert r.exit_code == 0, r.output
    head = [x for x in r.stdout.splitlines() if x.startswith("# lag:")]
    assert len(head) == 1 and "4 well(s) start slowly (A1, A2, A3, A4; lag about" in head[0]
    rows = {x.split()[0]: x for x in r.stdout.splitlines() if x[:1] == "A" and x[1:2].isdigit()}
    doc = json.loads(_run([str(data), "--no-plots", "--format", "json"]).stdout)
    res = {x["trace"]: x for x in doc["results"]}
    assert doc["settings"]["lag"]["wells"] == ["A1", "A2", "A3", "A4"]
    for w in ("A1", "A2", "A3", "A4"):
        assert res[w]["lag_s"] == pytest.approx(90, rel=0.3)
        assert abs(res[w]["slope_A_per_min"]) == pytest.approx(0.03, rel=0.05)
        # the whole curve was fitted to every reading, 0-720 s, 37 of them: not to the
        # straight window after the lag that window_start_s and window_end_s still hold
        assert res[w]["method"] == "curve" and res[w]["window_start_s"] > 0
        assert "0-720 whole trace, lag ~" in rows[w] and " 37 " in rows[w], rows[w]
    assert "lag" not in rows["A5"] and "whole trace" not in rows["A5"]
    forced = _run([str(data), "--no-plots", "--slope-from", "window"])
    cell = [x for x in forced.stdout.splitlines() if x.startswith("A1 ")][0]
    start = float(cell.split(" after lag")[0].split()[-1].split("-")[0])
    assert start >= 3 * 0.7 * 90 and "-720 after lag ~" in cell, cell


def test_depletion_curvature_found_and_curve_estimate_close():
    ts, truth = simulate("depletion", 100, 13)
    w = find_windows(ts.grid())
    assert np.mean(np.isin(w.end_reason, [2])) >= 0.9
    assert np.median(np.abs(w.curve_slope / truth - 1)) < 0.08
    ok = np.isfinite(w.curve_slope)
    assert np.mean(np.abs(w.curve_slope[ok] - truth[ok]) < 3 * w.curve_slope_se[ok]) >= 0.9


def test_decreasing_signal_gives_positive_rate():
    t = np.arange(0, 301, 10.0)
    y = 0.9 - 0.02 * t / 60 + np.random.default_rng(0).normal(0, 0.001, t.size)
    ts = TraceSet.from_arrays(["A1"], t, [y])
    a = analyse_plate(ts, settings=RateSettings(epsilon=6220, pathlength_cm=1.0))
    r = a.table.iloc[0]
    assert r["slope_A_per_min"] == pytest.approx(-0.02, rel=0.02)
    assert r["rate_uM_per_min"] == pytest.approx(0.02 / 6220 * 1e6, rel=0.02)
    assert a.blank_info["direction"] == "down"


def test_activity_worked_by_hand():
    # enzyme unit (IUB): 1 U = 1 umol/min. Slope 0.0622 A/min, eps 6220, 1 cm -> 10 uM/min;
    # 1 mL reaction -> 10 nmol/min = 0.010 U from 50 uL of sample diluted 1:20
    # -> 0.010 U / 0.050 mL * 20 = 4.0 U/mL; at 2 mg/mL protein -> 2.0 U/mg; 4.0 U = 66.67 nkat
    t = np.arange(0, 181, 10.0)
    ts = TraceSet.from_arrays(["cuv"], t, [0.1 + 0.0622 * t / 60])
    st = RateSettings(epsilon=6220, pathlength_cm=1.0, total_volume_L=1e-3,
                      sample_volume_L=50e-6, dilution=20, protein_mg_per_mL=2.0, katal=True)
    r = analyse_plate(ts, settings=st).table.iloc[0]
    assert r["rate_uM_per_min"] == pytest.approx(10.0, rel=1e-9)
    assert r["activity_U_per_mL"] == pytest.approx(4.0, rel=1e-9)
    assert r["specific_activity_U_per_mg"] == pytest.approx(2.0, rel=1e-9)
    assert r["activity_nkat_per_mL"] == pytest.approx(4.0 * 16.667, rel=1e-4)


def test_epsilon_uncertainty_propagates():
    t = np.arange(0, 301, 10.0)
    y = 0.1 + 0.03 * t / 60 + np.random.default_rng(1).normal(0, 0.001, t.size)
    ts = TraceSet.from_arrays(["x"], t, [y])
    a0 = analyse_plate(ts, settings=RateSettings(epsilon=6220)).table.iloc[0]
    a1 = analyse_plate(ts, settings=RateSettings(epsilon=6220, epsilon_se=311)).table.iloc[0]
    rel0 = a0["rate_uM_per_min_se"] / a0["rate_uM_per_min"]
    rel1 = a1["rate_uM_per_min_se"] / a1["rate_uM_per_min"]
    assert rel1 == pytest.approx(np.hypot(rel0, 0.05), rel=1e-9)


def test_z_prime_hand_worked():
    # Zhang, Chung & Oldenburg (1999): Z' = 1 - 3 (sd+ + sd-) / |mu+ - mu-|
    pos, neg = [10.0, 11.0, 12.0], [1.0, 2.0, 3.0]        # sd 1 each, means 11 and 2
    assert z_factor(pos, neg) == pytest.approx(1 - 3 * 2 / 9)


# published: Grubbs (1969), Technometrics 11:1, Table 1, upper 2.5 % points of T_n = (x_n - mean)/s
# (the two-sided test at alpha = 0.05), as reproduced in Harvey, Analytical Chemistry 2.1,
# Appendix 7 (LibreTexts). Typed from the table, not from any formula.
GRUBBS_TWO_SIDED_05 = {3: 1.155, 4: 1.481, 5: 1.715, 6: 1.887, 8: 2.126, 9: 2.215, 10: 2.290,
                       12: 2.412, 15: 2.549}
# The table gives 3 decimals and its reproductions differ from the exact percentage points by up
# to 0.001; a margin of 0.003 either side keeps the test clear of that rounding, while a wrong
# level (one-sided 5 %, or alpha/n for alpha/2n) moves the critical value by 0.1 or more.
GRUBBS_MARGIN = 0.003


def _sample_with_grubbs_statistic(n: int, g: float) -> np.ndarray:
    """n - 1 evenly spread readings and one high reading placed so that the Grubbs statistic
    G = max |x - mean| / s (sample SD; Grubbs 1969) equals ``g``."""
    base = np.linspace(-1.0, 1.0, n - 1)

    def excess(a):
        x = np.append(base, a)
        return abs(a - x.mean()) / np.std(x, ddof=1) - g

    return np.append(base, optimize.brentq(excess, 1.0, 1e6, xtol=1e-12))


@pytest.mark.parametrize("n,crit", sorted(GRUBBS_TWO_SIDED_05.items()))
def test_grubbs_outlier_against_published_critical_values(n, crit):
    below = _sample_with_grubbs_statistic(n, crit - GRUBBS_MARGIN)
    assert grubbs_outlier(below) is None
    if crit + GRUBBS_MARGIN < (n - 1) / np.sqrt(n):      # G cannot exceed (n - 1)/sqrt(n)
        above = _sample_with_grubbs_statistic(n, crit + GRUBBS_MARGIN)
        assert grubbs_outlier(above) == n - 1
        assert grubbs_outlier(np.roll(above, 1)) == 0      # wherever the reading sits


def test_grubbs_needs_three_readings_and_spread():
    assert grubbs_outlier(np.array([1.0, 5.0])) is None
    assert grubbs_outlier(np.array([2.0, 2.0, 2.0, 2.0])) is None


def _run(args):
    return CliRunner().invoke(main, ["rates", *args])


@pytest.mark.xdist_group("plate-report")        # the run is shared with its tests
def test_sample_plate_end_to_end(sample_plate_run):
    doc = json.loads(sample_plate_run["stdout"])
    out = sample_plate_run["folder"] / "o"
    res = {x["trace"]: x for x in doc["results"]}
    need = {"trace", "slope_A_per_min", "slope_A_per_min_se", "rate_uM_per_min", "window_start_s",
            "window_end_s", "n_points", "r2", "flags", "activity_U_per_mL"}
    assert need <= set(res["A8"])
    # simulated truth (sample_runs/generate.py): near saturation ~ 9 * 1920/2040 uM/min
    assert res["A8"]["rate_uM_per_min"] == pytest.approx(9 * 1920 / 2040, rel=0.12)
    assert "few-points" in res["H12"]["flags"] and res["H12"]["rate_uM_per_min"] is None
    assert doc["settings"]["z_prime"]["value"] > 0.5
    assert doc["settings"]["blank"]["mode"] == "slope"
    for f in ("rates.json", "rates.csv", "rates_replicates.csv", "rates_plate.png",
              "rates_plate_overview.png", "rates_wells_1.png", "rates_replicates.png",
              "rates_activity.csv"):
        assert (out / f).exists(), f


def test_table_output_has_units():
    r = _run([str(SAMPLES / "cuvettes_kbap_405nm_messy.csv"), "--chromophore", "pnp"])
    assert r.exit_code == 0, r.output
    assert "slope (A/min)" in r.stdout and "rate (uM/min)" in r.stdout


def test_fixed_window(tmp_path):
    r = _run([str(SAMPLES / "cuvettes_kbap_405nm_messy.csv"), "--window", "30-180",
              "--format", "json"])
    res = json.loads(r.stdout)["results"]
    assert all(x["window_start_s"] == 30 and x["window_end_s"] == 180 for x in res)


@pytest.mark.parametrize("mapping,args,words", [
    ("well,role\nA1,sample\nZ9,blank\n", [], "names well Z9"),
    ("well,role\nA1,sample\nA1,blank\n", [], "appears twice"),
    ("well,role\nA1,enzyme\n", [], "unknown role"),
    ("well,role\nA1,sample\nA2,sample\n", ["--blank", "slope"], "marks no blank wells"),
    ("well,role,dilution\nA1,sample,ten\n", [], "dilution 'ten'"),
    ("well,kind\nA1,sample\n", [], "no 'role' column"),
])
def test_bad_plate_maps(tmp_path, mapping, args, words):
    data = tmp_path / "d.csv"
    data.write_text("Time (s),A1,A2\n0,0.1,0.1\n10,0.2,0.1\n20,0.3,0.1\n30,0.4,0.1\n40,0.5,0.1\n"
                    "50,0.6,0.1\n")
    m = tmp_path / "map.csv"
    m.write_text(mapping)
    r = _run([str(data), "--layout", str(m), *args])
    assert r.exit_code == 3, r.output
    assert words in r.output and len(r.output.strip().splitlines()) == 1


def test_few_points_well_flagged_and_plate_goes_on(tmp_path):
    data = tmp_path / "d.csv"
    rows = ["Time (s),A1,A2"] + [f"{10 * k},{0.1 + 0.01 * k},{'OVER' if k > 2 else 0.1}"
                                 for k in range(12)]
    data.write_text("\n".join(rows) + "\n")
    r = _run([str(data), "--format", "json"])
    res = {x["trace"]: x for x in json.loads(r.stdout)["results"]}
    assert "few-points" in res["A2"]["flags"] and res["A2"]["slope_A_per_min"] is None
    assert res["A1"]["slope_A_per_min"] == pytest.approx(0.06, rel=1e-6)


@pytest.mark.parametrize("args,words", [
    (["--pathlength", "1 cm", "--well-volume", "200 uL"], "only one"),
    (["--total-volume", "200 uL"], "both --total-volume and --sample-volume"),
    (["--epsilon", "6220", "--chromophore", "NADH"], "only one"),
    (["--window", "300-30"], "not after its start"),
    (["--window", "soon"], "START-END"),
    (["--epsilon", "6220 bananas"], "unknown molar absorptivity unit"),
])
def test_bad_options(args, words):
    r = _run([str(SAMPLES / "cuvettes_kbap_405nm_messy.csv"), *args])
    assert r.exit_code == 2, r.output
    assert words in r.output


def test_standard_curve_calibrates_without_epsilon(tmp_path):
    # standards of the product at 0-100 uM read A = 0.05 + 0.0115 per uM (eps 18400, 0.625 cm)
    t = np.arange(0, 301, 15.0)
    rng = np.random.default_rng(4)
    rows = {"S1": 0.05 + 0.0115 * 0 + 0 * t, "S2": 0.05 + 0.0115 * 25 + 0 * t,
            "S3": 0.05 + 0.0115 * 50 + 0 * t, "S4": 0.05 + 0.0115 * 100 + 0 * t,
            "X1": 0.05 + 0.0115 * 2.0 * t / 60}          # 2 uM/min of product
    data = tmp_path / "d.csv"
    names = list(rows)
    data.write_text("Time (s)," + ",".join(names) + "\n" + "".join(
        f"{tt:g}," + ",".join(f"{rows[n][k] + rng.normal(0, 0.001):.5f}" for n in names) + "\n"
        for k, tt in enumerate(t)))
    mp = tmp_path / "map.csv"
    mp.write_text("well,role,standard_uM\nS1,standard,0\nS2,standard,25\nS3,standard,50\n"
                  "S4,standard,100\nX1,sample,\n")
    r = CliRunner().invoke(main, ["rates", str(data), "--layout", str(mp), "--format", "json"])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    x1 = next(x for x in doc["results"] if x["trace"] == "X1")
    assert x1["rate_uM_per_min"] == pytest.approx(2.0, rel=0.03)
    cal = doc["settings"]["blank"]["calibration"]
    assert cal["slope_A_per_M"] == pytest.approx(0.0115e6, rel=0.01) and cal["n_standards"] == 4
    r = CliRunner().invoke(main, ["rates", str(data), "--layout", str(mp), "--calibrate",
                                  "none"])
    assert "rate (uM/min)" not in r.stdout
    # with an absorptivity given, auto converts with it and says the standards went unused
    # (18400 x 0.625 cm = 11500 per M, the standards' own slope, so the rate is the same)
    r = CliRunner().invoke(main, ["rates", str(data), "--layout", str(mp), "--epsilon", "11500",
                                  "--format", "json"])
    doc = json.loads(r.stdout)
    assert [w for w in doc["warnings"] if "standard wells are not used" in w]
    assert "calibration" not in doc["settings"]["blank"]


def test_no_curve_option(tmp_path):
    r = _run([str(SAMPLES / "cuvettes_kbap_405nm_messy.csv"), "--no-curve", "--format", "json"])
    assert r.exit_code == 0
    res = json.loads(r.stdout)["results"]
    assert all(x["curve_slope_A_per_min"] is None for x in res)
    assert all(x["slope_A_per_min"] is not None for x in res)
    r = _run([str(SAMPLES / "cuvettes_kbap_405nm_messy.csv"), "--no-curve", "--slope-from",
              "curve"])
    assert r.exit_code == 2 and "--no-curve" in r.output


def _plate_file(tmp_path, slopes, drift=0.0, noise=0.0005, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(0, 301, 10.0)
    names = list(slopes)
    data = tmp_path / "p.csv"
    data.write_text("Time (s)," + ",".join(names) + "\n" + "".join(
        f"{tt:g}," + ",".join(f"{0.2 + (slopes[n] + drift) * tt / 60 + rng.normal(0, noise):.5f}"
                              for n in names) + "\n" for tt in t))
    return data


@pytest.mark.parametrize("mode", ["trace", "slope"])
def test_blank_subtraction_removes_drift(tmp_path, mode):
    data = _plate_file(tmp_path, {"A1": 0.0, "A2": 0.0, "B1": 0.05, "B2": 0.03}, drift=0.01)
    mp = tmp_path / "m.csv"
    mp.write_text("well,role\nA1,blank\nA2,blank\nB1,sample\nB2,sample\n")
    r = _run([str(data), "--layout", str(mp), "--blank", mode, "--format", "json"])
    res = {x["trace"]: x for x in json.loads(r.stdout)["results"]}
    assert res["B1"]["slope_A_per_min"] == pytest.approx(0.05, abs=0.002)
    assert res["B2"]["slope_A_per_min"] == pytest.approx(0.03, abs=0.002)
    # the drift is the plate's: said once, not a flag on every blank
    assert not res["A1"]["flags"] and not res["A2"]["flags"]
    assert any(w.startswith("the blanks drift by 0.01") for w in json.loads(r.stdout)["warnings"])


def test_reversed_well_and_replicate_outlier(tmp_path):
    slopes = {"A1": 0.05, "A2": 0.05, "A3": 0.05, "A4": 0.05, "A5": 0.08, "A6": -0.05}
    data = _plate_file(tmp_path, slopes, noise=0.0002, seed=1)
    mp = tmp_path / "m.csv"
    mp.write_text("well,role,group\n" + "".join(f"{w},sample,{'g' if w != 'A6' else 'h'}\n"
                                                for w in slopes))
    r = _run([str(data), "--layout", str(mp), "--format", "json"])
    res = {x["trace"]: x for x in json.loads(r.stdout)["results"]}
    assert "reversed" in res["A6"]["flags"]
    assert "outlier" in res["A5"]["flags"] and "outlier" not in res["A1"]["flags"]
    r = _run([str(data), "--direction", "down", "--format", "json"])
    res = {x["trace"]: x for x in json.loads(r.stdout)["results"]}
    assert "reversed" in res["A1"]["flags"] and "reversed" not in res["A6"]["flags"]
