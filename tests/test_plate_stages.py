"""The plate's stages one at a time: replicate outliers, the blank level, the dilution check,
per-well windows and skipped readings, the map's cells, Z' and the conversion."""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats

from rateabs.cli import main
from rateabs.io import read_traces
from rateabs.layout import read_layout
from rateabs.rates import (
    RateSettings,
    analyse_plate,
    blank_level,
    dilution_trend,
    replicate_outliers,
    z_factor,
)
from rateabs.slopes import find_windows
from rateabs.traces import TraceSet

T = np.arange(0, 601, 20.0)


# --------------------------------------------------------------------------- plate format


def test_a_384_plate_stated_in_the_header_wins_over_a_96_guess_from_the_names(tmp_path):
    # a 384-well plate using rows A-H only: the names alone would guess 96 wells
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "H12": 0.03}, noise=0.0,
                      header=["Plate: 384", ""])
    r = _cli(data, "--well-volume", "50 uL", "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    s = json.loads(r.stdout)["settings"]
    assert s["plate_format"] == 384 and "'Plate: 384'" in s["plate_format_source"]
    assert "A1..H12" in s["plate_format_source"]
    # 50 uL over a typical 384-well bottom of 0.10 cm2 (from memory): 0.5 cm (96-well: 0.156)
    assert s["pathlength_cm"] == pytest.approx(0.5, rel=0.01)
    assert "384-well plate" in s["pathlength_source"]
    table = _cli(data, "--well-volume", "50 uL", "--no-plots")
    assert "# plate: 384-well plate (from the file header line 'Plate: 384'" in table.stdout


def test_a_header_plate_the_names_contradict_is_refused_in_one_line(tmp_path):
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "P24": 0.03}, noise=0.0,
                      header=["Plate type: Generic 96 flat", ""])
    r = _cli(data, "--no-plots")
    assert r.exit_code == 3, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"rateabs: {data}: ")
    assert "'Plate type: Generic 96 flat'" in lines[0] and "--plate 384" in lines[0]
    # the option settles it, and the contradiction is still said
    r = _cli(data, "--plate", "384", "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    assert doc["settings"]["plate_format"] == 384
    assert sum("Generic 96 flat" in w for w in doc["warnings"]) == 1


@pytest.mark.parametrize("line,wells", [("Plate ID: 12", 96), ("Plate: 96", 96),
                                        ("Wells: 384", 384), ("Plate type: 1536-well", 1536)])
def test_what_counts_as_a_stated_plate(tmp_path, line, wells):
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "H12": 0.03}, noise=0.0,
                      header=[line, ""])
    info = read_traces(data).info
    assert info["plate_format"] == wells
    assert (line in info["plate_format_source"]) == (line != "Plate ID: 12")


def _cli(*args):
    return CliRunner().invoke(main, ["rates", *map(str, args)])


def _plate_csv(path, slopes: dict, noise=0.001, seed=0, header=(), first=None):
    """A wide export, one column per well, straight lines of the given slopes (A/min)."""
    rng = np.random.default_rng(seed)
    names = list(slopes)
    rows = list(header) + ["Time (s)," + ",".join(names)]
    for k, t in enumerate(T):
        cells = [f"{0.2 + slopes[n] * t / 60 + rng.normal(0, noise):.5f}" for n in names]
        if first:
            cells = ["OVER" if (names[j] in first and k < 2) else c for j, c in enumerate(cells)]
        rows.append(f"{t:g}," + ",".join(cells))
    path.write_text("\n".join(rows) + "\n")
    return path


# --------------------------------------------------------------------------- outliers


def test_duplicates_that_disagree_are_both_flagged():
    # twelve pairs with 2 % scatter and one pair 40 % apart: neither can be told right
    rng = np.random.default_rng(3)
    means = np.repeat(np.linspace(1, 5, 12), 2)
    x = means * (1 + rng.normal(0, 0.02, means.size))
    x[-1] *= 1.4
    keys = np.repeat(np.arange(12), 2)
    z, out, _, _, how = replicate_outliers(x, np.full(x.size, 0.01), keys)
    assert how.startswith("pooled") and list(np.nonzero(out)[0]) == [22, 23]
    assert min(z[22], z[23]) > 3.5 and np.nanmax(z[:22]) < 3.5


def test_a_well_at_four_and_a_half_z_is_flagged_and_clean_groups_are_not():
    # issue 11: wells that really were wrong (|z| up to 5) carried no flag
    rng = np.random.default_rng(11)
    n_groups, n = 60, 4
    means = np.repeat(rng.uniform(1, 10, n_groups), n)
    se = 0.01 * means
    x = means + rng.normal(0, 1, means.size) * se          # scatter = their own SE only
    keys = np.repeat(np.arange(n_groups), n)
    z, out, *_ = replicate_outliers(x, se, keys)
    assert out.sum() <= 1                                    # P(|z| > 3.5) ~ 5e-4 a well
    x[5] = means[5] + 4.5 * se[5] * np.sqrt(1 + 1 / 3)       # 4.5 z from the mean of 3 others
    z, out, *_ = replicate_outliers(x, se, keys)
    assert out[5] and z[5] == pytest.approx(4.5, abs=1.2)


def test_wells_flagged_for_their_shape_leave_the_plates_scatter_to_the_others():
    # simulated from known parameters: nine triplicates with 1.5 % scatter and SEs; a settling
    # start (+55 %) and a bubble (+30 %, wide SE) sit in two groups and are flagged for their
    # shape; one well is pipetted 40 % heavy. Pooled with the flagged wells the plate's scatter
    # came out near 10 % and the heavy well stood 3.1 z out, unflagged. Since the scatter fit
    # starts from the groups' median, the heavy well is caught even with them pooled.
    rng = np.random.default_rng(8)
    means = np.repeat([2.0, 3.4, 6.0, 8.2, 9.0, 10.0, 12.4, 6.3, 3.1], 3)
    x = means * (1 + rng.normal(0, 0.015, means.size))
    se = 0.015 * means
    x[17] *= 1.4                                             # heavy
    x[26], x[9] = x[26] * 1.55, x[9] * 1.3                   # settling start, bubble
    se[9] *= 7
    doubted = np.zeros(x.size, bool)
    doubted[[9, 26]] = True
    keys = np.repeat(np.arange(9), 3)
    z, out, _, _, how = replicate_outliers(x, se, keys, doubted)
    assert replicate_outliers(x, se, keys)[1][17]
    assert how.startswith("pooled") and out[17] and z[17] > 6
    assert not out[np.setdiff1d(np.arange(27), [17, 26])].any()


def test_without_enough_groups_to_pool_grubbs_decides():
    # published: Grubbs (1969) two-sided 5 % critical value for n = 5 is 1.715 (Table 1)
    x = np.array([10.0, 10.1, 9.9, 10.05, 12.0])
    z, out, _, _, how = replicate_outliers(x, np.full(5, 0.05), np.zeros(5))
    assert "Grubbs (1969) in groups of 5" in how and out[4] and z[4] > 1.715


# --------------------------------------------------------------------------- blanks


def test_the_blank_level_weights_by_precision_and_leaves_a_drifting_blank_out():
    slope = np.array([1e-4, -1e-4, 0.0, 5e-5, 5e-3, 0.02, 0.5])
    se = np.array([8e-5, 8e-5, 8e-5, 8e-5, 2e-3, 8e-5, 0.01])
    is_blank = np.array([True] * 6 + [False])
    b = blank_level(slope, se, is_blank)
    # a poorly determined blank (5e-3 +/- 2e-3) moves the 1/SE^2-weighted mean by < 1e-5;
    # a blank drifting at 0.02 with a precise slope is 250 SE from the others: left out
    assert list(np.nonzero(b["left_out"])[0]) == [5]
    w = 1 / se[:5] ** 2
    assert b["level"] == pytest.approx(np.sum(w * slope[:5]) / np.sum(w))
    assert abs(b["level"]) < 5e-5 and not b["kept"][6]


# --------------------------------------------------------------------------- dilution check


def test_dilution_trend_is_scipy_linregress_on_log2_dilution():
    d = np.repeat([5.0, 10, 20, 40], 3)
    act = np.array([1.0, 1.02, 0.98, 1.1, 1.12, 1.09, 1.2, 1.22, 1.19, 1.3, 1.31, 1.29])
    r = dilution_trend(d, act)
    lr = stats.linregress(np.log2(d), act)                   # reference library
    assert r["dilution_trend_p"] == pytest.approx(lr.pvalue, rel=1e-9)
    assert r["dilution_trend_pct"] == pytest.approx(100 * lr.slope / act.mean())
    assert r["flags"] == ["dilution-trend"]
    # the 95 % interval of the trend: slope ± t(0.975, n - 2) SE (scipy linregress, stats.t)
    half = stats.t.ppf(0.975, d.size - 2) * lr.stderr
    assert r["dilution_trend_ci_pct"] == pytest.approx(
        [100 * (lr.slope - half) / act.mean(), 100 * (lr.slope + half) / act.mean()], rel=1e-9)
    flat = dilution_trend(d, np.tile([1.0, 1.02, 0.98], 4))
    assert flat["flags"] == [] and ": flat (no trend beyond ±" in flat["dilution_check"]
    # four scattered wells: not significant, yet far from shown flat (a user audit's case)
    few = dilution_trend(np.array([5.0, 5, 10, 10]), np.array([0.10, 0.13, 0.22, 0.30]))
    assert few["flags"] == [] and "not ruled out" in few["dilution_check"]
    assert "flat" not in few["dilution_check"].split(":")[-1].replace("call it flat", "")
    assert dilution_trend(np.full(4, 5.0), act[:4])["dilution_check"] == (
        "not tested (one dilution)")
    # a real trend under 5 % per two-fold dilution (an audit's +2.6 % [+1.9, +3.4], p = 7e-05)
    # was called flat: it is named as a small trend now, unflagged
    small = dilution_trend(d, np.repeat([1.0, 1.03, 1.06, 1.09], 3) * np.tile([1, 1.002, 0.998], 4))
    assert small["flags"] == [] and small["dilution_trend_p"] < 0.05
    assert ": a small trend, real" in small["dilution_check"]


# --------------------------------------------------------------------------- map and overrides


def test_map_cells_give_windows_skips_dilutions_and_groups(tmp_path):
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "A2": 0.03, "A3": 0.03, "A4": 0.0})
    mp = tmp_path / "map.csv"
    mp.write_text("well,role,sample,dilution,group,window,skip\nA1,sample,X,10,,60-300,\n"
                  "A2,sample,X,,,,120; 140\nA3,sample,X,10,mine,,\nA4,blank,buffer,,,,\n")
    lay = read_layout(str(mp))
    assert lay.loc["A1", "window"] == (60.0, 300.0) and lay.loc["A2", "skip"] == (120.0, 140.0)
    assert np.isnan(lay.loc["A2", "dilution"]) and lay.loc["A2", "group"] == "X"   # no [S], [I] columns
    assert lay.loc["A3", "group"] == "mine"
    r = _cli(data, "--layout", mp, "--epsilon", "6220", "--total-volume", "200 uL",
             "--sample-volume", "20 uL", "--dilution", "5", "--well-window", "A1=0-200",
             "--format", "json", "--no-plots")
    doc = json.loads(r.stdout)
    res = {x["trace"]: x for x in doc["results"]}
    assert (res["A1"]["window_start_s"], res["A1"]["window_end_s"]) == (0, 200)   # option wins
    assert any("--well-window A1=0-200 s beats the plate map's window 60-300 s" in w
               for w in doc["warnings"])
    assert res["A2"]["skipped_s"] == [120.0, 140.0] and res["A2"]["n_points"] == len(T) - 2
    assert (res["A2"]["dilution"], res["A2"]["dilution_source"]) == (5, "--dilution")
    assert (res["A1"]["dilution"], res["A1"]["dilution_source"]) == (10, "plate map")
    assert "A2: reading(s) at 120, 140 s left out (plate map 2)" in doc["settings"]["overrides"]


def test_per_well_windows_are_the_fixed_window_fits():
    # reference library: numpy.polyfit on each well's own window
    rng = np.random.default_rng(2)
    y = np.array([0.1 + s * T / 60 + rng.normal(0, 0.001, T.size) for s in (0.02, 0.03, 0.04)])
    ts = TraceSet.from_arrays(["A1", "A2", "A3"], T, y)
    a = analyse_plate(ts, settings=RateSettings(well_windows=(("A1", (60.0, 300.0)),
                                                              ("A3", (100.0, 400.0)))))
    t = a.table.set_index("trace")
    for w, (lo, hi), i in (("A1", (60, 300), 0), ("A3", (100, 400), 2)):
        sel = (T >= lo) & (T <= hi)
        assert t.loc[w, "slope_A_per_min"] == pytest.approx(
            60 * np.polyfit(T[sel], y[i][sel], 1)[0], rel=1e-9)
        assert t.loc[w, "window_source"] == "--well-window"
    whole = find_windows(ts.select(["A2"]).grid(), curve=True)
    assert t.loc["A2", "slope_A_per_min"] == pytest.approx(60 * whole.slope[0], rel=1e-12)


@pytest.mark.parametrize("args,words", [
    (["--skip-reading", "A1=125"], "no reading at 125 s"),
    (["--skip-well", "Z9"], "--skip-well Z9: no such well"),
    (["--well-window", "Q1=0-100"], "--well-window Q1: no such well"),
])
def test_single_well_options_naming_nothing_are_refused(tmp_path, args, words):
    r = _cli(_plate_csv(tmp_path / "d.csv", {"A1": 0.03, "A2": 0.02}), *args)
    assert r.exit_code == 2 and words in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_single_well_options_take_a_well_however_it_is_written(tmp_path):
    """``a1``, ``A01`` and ``a2`` name the data's A1 and A2 (common practice: instruments write
    A1 and A01 alike), as the plate map's wells already did; they were refused."""
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "A2": 0.02, "A3": 0.01})
    r = _cli(data, "--skip-well", "a1", "--well-window", "A02=0-200", "--skip-reading",
             "a03=120", "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.stderr
    doc = json.loads(r.stdout)
    res = {x["trace"]: x for x in doc["results"]}
    assert "A1" not in res
    assert (res["A2"]["window_start_s"], res["A2"]["window_end_s"]) == (0, 200)
    assert res["A3"]["skipped_s"] == [120.0]


def test_dilution_given_where_the_map_leaves_nothing_to_fill_is_refused(tmp_path):
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "A2": 0.02})
    mp = tmp_path / "map.csv"
    mp.write_text("well,role,dilution\nA1,sample,10\nA2,sample,20\n")
    r = _cli(data, "--layout", mp, "--epsilon", "6220", "--total-volume", "200 uL",
             "--sample-volume", "20 uL", "--dilution", "5")
    assert r.exit_code == 2 and "--dilution 5 is not used" in r.stderr


# --------------------------------------------------------------------------- conversion


def test_nadh_in_a_96_well_well_of_200_ul(tmp_path):
    # NADH epsilon340 = 6220 M^-1 cm^-1 (Horecker & Kornberg 1948); 200 uL over a typical 96-well
    # bottom of 0.32 cm2 (from memory) is 0.625 cm; -0.0622 A/min -> 0.0622/(6220 x 0.625) M/min
    data = _plate_csv(tmp_path / "d.csv", {"A1": -0.0622, "H12": -0.0311}, noise=0.0)
    r = _cli(data, "--chromophore", "NADH", "--well-volume", "200 uL", "--format", "json",
             "--no-plots")
    res = {x["trace"]: x for x in json.loads(r.stdout)["results"]}
    # (readings written to 5 decimals: a few ppm of rounding)
    assert res["A1"]["rate_uM_per_min"] == pytest.approx(0.0622 / (6220 * 0.625) * 1e6, rel=1e-5)
    assert res["H12"]["rate_uM_per_min"] == pytest.approx(8.0, rel=1e-5)


def test_the_file_pathlength_is_used_when_none_is_given(tmp_path):
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.0311, "A2": 0.0311}, noise=0.0,
                      header=["Pathlength: 5 mm", ""])
    r = _cli(data, "--chromophore", "NADH", "--format", "json", "--no-plots")
    doc = json.loads(r.stdout)
    assert doc["settings"]["pathlength_cm"] == 0.5
    assert doc["settings"]["pathlength_source"] == "the file header ('Pathlength: 5 mm')"
    assert doc["results"][0]["rate_uM_per_min"] == pytest.approx(0.0311 / (6220 * 0.5) * 1e6,
                                                                 rel=1e-5)


def _controls_plate(tmp_path, role_a: str, role_b: str) -> tuple[dict, dict]:
    """Six wells at 0.05 A/min (row A) and six at 0.005 (row B) with the given roles; the
    slopes and the rates document."""
    slopes = {f"A{k}": 0.05 for k in range(1, 7)} | {f"B{k}": 0.005 for k in range(1, 7)}
    data = _plate_csv(tmp_path / "d.csv", slopes, noise=0.002, seed=5)
    mp = tmp_path / "m.csv"
    mp.write_text("well,role\n" + "".join(f"{w},{role_a if w[0] == 'A' else role_b}\n"
                                          for w in slopes))
    return slopes, json.loads(_cli(data, "--layout", mp, "--format", "json",
                                   "--no-plots").stdout)


def test_z_prime_of_the_plate_controls_is_the_published_formula(tmp_path):
    # Zhang, Chung & Oldenburg (1999): Z' = 1 - 3 (sd+ + sd-) / |mean+ - mean-|
    slopes, doc = _controls_plate(tmp_path, "positive", "negative")
    res = {x["trace"]: x["slope_A_per_min"] for x in doc["results"]}
    pos = np.array([res[w] for w in slopes if w[0] == "A"])
    neg = np.array([res[w] for w in slopes if w[0] == "B"])
    hand = 1 - 3 * (pos.std(ddof=1) + neg.std(ddof=1)) / abs(pos.mean() - neg.mean())
    assert doc["settings"]["z_prime"]["value"] == pytest.approx(hand, rel=1e-12)
    assert z_factor(pos, neg) == pytest.approx(hand, rel=1e-12)


def test_masked_first_readings_in_a_small_plate(tmp_path):
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "A2": 0.03}, first=["A2"])
    doc = json.loads(_cli(data, "--format", "json", "--no-plots").stdout)
    res = {x["trace"]: x for x in doc["results"]}
    assert res["A2"]["window_start_s"] == 40 and res["A1"]["window_start_s"] == 0
    assert "masked-start" in res["A2"]["flags"] and "masked-start" not in res["A1"]["flags"]


# --------------------------------------------------------------------------- depletion


SAMPLES = __import__("pathlib").Path(__file__).resolve().parents[1] / "sample_runs"


def _sample_series(estimator):
    """The sample plate's substrate series (columns 1-8) against its truth: the initial rate
    of the rate equation the generator integrates, typed here from Michaelis & Menten (1913)
    with competitive inhibition (Cornish-Bowden, Fundamentals of Enzyme Kinetics, 4th ed.,
    ch. 6) and the second substrate NADH at 200 uM: v0 = V S / (Km (1 + I/Ki) + S) x
    N / (K_N + N), with sample_runs/generate.py's V = 9 uM/min, Km = 120 uM, Ki = 4 uM,
    K_N = 8 uM."""
    from rateabs.io import read_traces

    lay = read_layout(SAMPLES / "plate_kbdh_map.csv")
    st = RateSettings(epsilon=6220.0, well_volume_L=200e-6, slope_from=estimator)
    a = analyse_plate(read_traces(SAMPLES / "plate_kbdh_340nm.csv"), lay, st)
    t = a.table[(a.table["role"] == "sample") & a.table["substrate_uM"].notna()
                & (a.table["sample"] == "KbDH1")]
    s, i = t["substrate_uM"].to_numpy(), t["inhibitor_uM"].fillna(0).to_numpy()
    truth = 9.0 * s / (120.0 * (1 + i / 4.0) + s) * 200 / 208
    z = (t["rate_uM_per_min"].to_numpy() - truth) / t["rate_uM_per_min_se"].to_numpy()
    return t, z, t["rate_uM_per_min"].to_numpy() / truth - 1


def test_depleted_windows_are_replaced_by_the_whole_curve_and_the_rates_are_right():
    t, z, _ = _sample_series("auto")
    assert len(t) == 64
    # the map's substrate shows the wells of low [S] used over 10 % within a straight window
    assert (t["method"] == "curve").sum() >= 20
    # a depleted window stays only where the curve is evidently shallower; flagged where its
    # possible shortfall exceeds twice its SE (A6 here, 1.9 % low)
    assert sum("over-10pct" in f for f in t["flags"]) <= 2
    # rates unbiased and SEs honest: mean z within 4 SE of its own spread (0.5 for 64 wells),
    # at most 3 of 64 beyond 2.5 z (binomial, p(|z| > 2.5) = 1.2 %: 3 or more has p = 4 %)
    assert abs(z.mean()) < 0.5 and np.sum(np.abs(z) > 2.5) <= 3


def test_a_forced_window_keeps_its_depletion_flag():
    t, z, rel = _sample_series("window")
    flagged = t["flags"].map(lambda f: "over-10pct" in f)
    # flagged where the window's possible shortfall (about half the substrate it used) exceeds
    # twice its SE: 17 of the 64 here, every well off the truth by over 5 % and 3 SE among them
    # (10 before the window's SE counted its shortfall by the posterior of
    # rateabs.slopes.choice.shortfall_ms, which left two wells 3.6 and 3.7 SE low; none now)
    assert flagged.sum() >= 8 and set(t.loc[flagged, "method"]) == {"window"}
    off = ((np.abs(z) > 3) & (np.abs(rel) > 0.05))
    assert flagged.to_numpy()[off].all()
    # the straight windows read low (depletion), and their SE says they may (the curvature the
    # whole curve cannot rule out is counted in it): low on average, yet mostly within 3 SE
    assert rel[flagged.to_numpy()].mean() < -0.03 and z.mean() < -0.3
    assert np.mean(np.abs(z) < 3) >= 0.9


@pytest.mark.parametrize("header,value", [
    ("substrate_mM", "0.25"), ("substrate (mM)", "0.25"), ("Substrate [mM]", "0.25"),
    ("substrate (uM)", "250"), ("Substrate (µM)", "250"), ("substrate_M", "0.00025"),
    ("substrate", "250"), ("substrate", "0.25 mM")])
def test_the_unit_in_a_map_header_is_read_as_written(tmp_path, header, value):
    # 250 uM = 0.25 mM = 2.5e-4 M (SI prefixes); a bare number is uM, as docs/formats.md says.
    # The unit was read after the headers were lower-cased: mM became "mm" (refused) or
    # "substrate_mM" fell back to uM, a factor of 1000 with no word
    mp = tmp_path / "m.csv"
    mp.write_text(f"well,role,{header},enzyme (uM),protein (ug/mL)\nA1,sample,{value},0.002,500\n",
                  encoding="utf-8")
    lay = read_layout(mp)
    assert lay.loc["A1", "substrate_M"] == pytest.approx(2.5e-4, rel=1e-12)
    assert lay.loc["A1", "enzyme_M"] == pytest.approx(2e-9, rel=1e-12)
    assert lay.loc["A1", "protein_mg_per_mL"] == pytest.approx(0.5, rel=1e-12)


def test_a_map_dilution_below_one_is_refused(tmp_path):
    mp = tmp_path / "m.csv"
    mp.write_text("well,role,dilution\nA1,sample,0.5\n")
    with pytest.raises(Exception, match="below 1"):
        read_layout(mp)


def test_swapped_controls_are_not_called_excellent(tmp_path):
    # common practice: the positive (full-signal) control changes more than the negative one;
    # a map with the two roles swapped gave "Z' = 0.93 (excellent)" without a word
    _, doc = _controls_plate(tmp_path, "negative", "positive")
    assert doc["settings"]["z_prime"]["verdict"].startswith("controls reversed")
    assert any("swapped" in w for w in doc["warnings"])


def test_map_well_names_with_zero_padding_are_the_data_wells(tmp_path):
    # A01 and A1 name one well (common practice: exports and maps pad column numbers or not)
    data = _plate_csv(tmp_path / "d.csv", {"A1": 0.03, "A2": 0.01, "B1": 0.0})
    mp = tmp_path / "m.csv"
    mp.write_text("well,role\nA01,sample\nA02,sample\nB01,blank\n")
    doc = json.loads(_cli(data, "--layout", mp, "--format", "json", "--no-plots").stdout)
    roles = {r["trace"]: r["role"] for r in doc["results"]}
    assert roles == {"A1": "sample", "A2": "sample", "B1": "blank"}
    assert any("matched to the data's" in w for w in doc["warnings"])
    mp.write_text("well,role\nA01,sample\nC07,sample\n")         # a well the data lack
    assert _cli(data, "--layout", mp, "--no-plots").exit_code == 3


@pytest.mark.parametrize("f", [0.05, 0.1, 0.2, 0.4])
def test_the_depletion_shortfall_is_that_of_a_first_order_decay(f):
    """A least-squares line (numpy.polyfit) through a noise-free first-order decay that used a
    fraction f of its substrate falls short of the initial rate by what depletion_shortfall
    says, from the substrate the line itself accounts for (rate x window against [S]0)."""
    from rateabs.rates import depletion_shortfall

    k = -np.log1p(-f)                      # per window length: 1 - exp(-k) = f
    t = np.linspace(0.0, 1.0, 61)
    b = np.polyfit(t, -np.expm1(-k * t), 1)[0]
    assert float(depletion_shortfall(b)) == pytest.approx(1 - b / k, rel=0.03)
