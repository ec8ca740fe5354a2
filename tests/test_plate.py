"""The plate, end to end on a messy 384-well read whose truth is known (tests/plate_truth.py:
every well integrated with scipy.integrate.solve_ivp): rates, activity per sample, the
dilution-linearity check, outliers, v/[E], and every assumption stated with its source."""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from plate_truth import DILUTIONS, ENZYME_NM, KCAT_PER_S, KM_UM, S0_UM, TRENDING, plate_384
from scipy import stats

from rateabs.cli import main
from rateabs.options import RatesOptions
from rateabs.views.rates import compute_rates

# one worker runs the module, so its module fixtures are made once
pytestmark = pytest.mark.xdist_group("plate-384")

ACTIVITY_ARGS = ["--chromophore", "pnp", "--total-volume", "200 uL", "--sample-volume", "20 uL"]


def _cli(*args):
    return CliRunner().invoke(main, ["rates", *map(str, args)])


@pytest.fixture(scope="module")
def plate(tmp_path_factory):
    return plate_384(tmp_path_factory.mktemp("p384"), seed=7)


@pytest.fixture(scope="module")
def view(plate):
    """One run as a user would ask for it: minutes stated, L05's empty cells filled by
    --dilution, katal asked for."""
    o = RatesOptions.build(file=str(plate.data), layout_file=str(plate.layout),
                           chromophore="pnp", total_volume="200 uL", sample_volume="20 uL",
                           time_unit="min", dilution=10, katal=True)
    return compute_rates(o)


def _results(view):
    return {r["trace"]: r for r in view.doc["results"]}


def test_rates_match_the_solve_ivp_truth(plate, view):
    res = _results(view)
    wells = [w for w, role in plate.roles.items() if role != "blank"]
    near = {w: abs(res[w]["rate_uM_per_min"] - plate.v0[w])
            <= max(3 * res[w]["rate_uM_per_min_se"], 0.05 * plate.v0[w]) for w in wells}
    assert sum(near.values()) >= 0.98 * len(wells)
    assert all(res[w]["flags"] for w, ok in near.items() if not ok)   # the others carry a flag


def test_activity_per_sample_is_the_enzyme_unit_truth(plate, view):
    # enzyme unit (NC-IUB 1979): 1 U = 1 umol/min; v0 = activity x 1000 x Vs/Vt / dilution.
    # The straight windows read a few % low at 1:5 (up to 8 % of S0 used in 10 min).
    act = {r["sample"]: r for r in view.doc["settings"]["activity"]}
    for sample, truth in plate.activity.items():
        assert act[sample]["activity_U_per_mL"] == pytest.approx(truth, rel=0.03), sample
        assert act[sample]["dilutions"] == [float(d) for d in DILUTIONS]
        # 1 U = 16.67 nkat (NC-IUB 1979): 1 umol/min = 1e-6/60 mol/s
        assert act[sample]["activity_nkat_per_mL"] == pytest.approx(
            act[sample]["activity_U_per_mL"] * 1e-6 / 60 * 1e9, rel=1e-9)
    assert act["L01"]["specific_activity_U_per_mg"] == pytest.approx(
        act["L01"]["activity_U_per_mL"] / 1.5, rel=1e-9)                 # 1.5 mg/mL in the map


def test_the_dilution_check_finds_the_trend_and_only_it(plate, view):
    act = {r["sample"]: r for r in view.doc["settings"]["activity"]}
    assert act[TRENDING]["flags"] == ["dilution-trend"]
    assert all(not r["flags"] for s, r in act.items() if s != TRENDING)
    # the statistic is the least-squares line of activity on log2 dilution (scipy linregress)
    res = _results(view)
    wells = [w for w in act[TRENDING]["wells"]]
    x = np.log2([res[w]["dilution"] for w in wells])
    y = np.array([res[w]["activity_U_per_mL"] for w in wells])
    lr = stats.linregress(x, y)
    assert act[TRENDING]["dilution_trend_p"] == pytest.approx(lr.pvalue, rel=1e-9)
    assert act[TRENDING]["dilution_trend_pct"] == pytest.approx(100 * lr.slope / y.mean())
    # truth: activity x 1/(1 + 2/d), about +9 % per two-fold dilution over 1:5..1:40
    truth = np.array([plate.apparent[(TRENDING, d)] for d in DILUTIONS])
    lt = stats.linregress(np.log2(DILUTIONS), truth)
    assert act[TRENDING]["dilution_trend_pct"] == pytest.approx(100 * lt.slope / truth.mean(),
                                                                abs=2.5)


def test_a_pipetting_outlier_is_flagged_and_left_out_of_the_mean(plate, view):
    res = _results(view)
    w = plate.outlier                                       # 30 % more enzyme than its replicates
    # 30 % off its replicates, whose SEs count the curvature a straight window may hide
    assert "outlier" in res[w]["flags"] and res[w]["replicate_z"] > 4
    act = {r["sample"]: r for r in view.doc["settings"]["activity"]}["L03"]
    assert any(x.startswith(f"{w}: replicate outlier (|z| = ") for x in act["left_out"])
    # every other well left out needs a look (a flag doubts its own rate), reason given
    out = [x.split(":")[0] for x in act["left_out"]]
    assert act["n_used"] == act["n_wells"] - len(out)
    assert all(res[x]["flags"] for x in out) and len(out) <= 4
    kept = [res[x]["activity_U_per_mL"] for x in act["wells"] if x not in out]
    assert act["activity_U_per_mL"] == pytest.approx(np.mean(kept), rel=1e-12)


def test_turnover_is_rate_over_enzyme(view):
    # kcat = Vmax/[E]; at S0 the turnover v/[E] = kcat S0/(Km + S0) (Michaelis–Menten)
    act = {r["sample"]: r for r in view.doc["settings"]["activity"]}["pure KbX"]
    assert act["turnover_per_s"] == pytest.approx(KCAT_PER_S * S0_UM / (KM_UM + S0_UM), rel=0.03)
    res = _results(view)
    w = act["wells"][0]
    assert res[w]["turnover_per_s"] == pytest.approx(
        res[w]["rate_uM_per_min"] * 1e-6 / 60 / (ENZYME_NM * 1e-9), rel=1e-9)


def test_every_assumption_is_stated_with_its_source(plate, view):
    s = view.doc["settings"]
    assert (s["time_unit"], s["time_unit_source"]) == ("min", "option")
    assert s["plate_format"] == 384 and "A1..P24" in s["plate_format_source"]
    assert s["pathlength_cm"] == pytest.approx(plate.pathlength_cm)
    assert "Pathlength: 0.28 cm" in s["pathlength_source"]
    # 352 sample wells, 8 of them (L05 at 1:10) empty in the map; 16 controls; blanks need none
    assert s["dilution"]["wells_by_source"] == {"plate map": 344, "--dilution": 8,
                                                "default (undiluted)": 16}
    assert s["blank"]["wells"] == [f"{chr(65 + r)}1" for r in range(16)]
    assert sum(s["estimator"]["used"].values()) == 384 and s["estimator"]["asked"] == "auto"
    head = [ln for ln in view.table.splitlines() if ln.startswith("# ")]
    for words in ("time unit: min (given by --time-unit)", "plate: 384-well plate",
                  "pathlength: 0.28 cm, the file header", "blanks: A1, B1", "initial slope:",
                  "--dilution 8", "substrate depletion: straight windows that used over 10 % "
                  "of the map's [S]0 are replaced"):
        assert any(words in ln for ln in head), words
    assert s["substrate_depletion"].startswith("straight windows that used over 10 %")
    assert any("--dilution 10 fills the 8 sample well(s)" in w for w in view.doc["warnings"])


def test_a_partly_filled_group_column_keeps_the_default_groups(view):
    reps = {r["group"]: r for r in view.doc["settings"]["replicates"]}
    assert reps["L01 at 1:5"]["n"] == 8                     # the map's own group
    assert reps["L02|S=500uM"]["n"] == 8          # empty cells: sample + [S] (no [I] column)
    assert not any(g[0] in "ABCDEFGHIJKLMNOP" and g[1:].isdigit() for g in reps)


def test_masked_first_readings_move_neither_window_nor_picture(plate, view):
    res = _results(view)
    for w in plate.masked_start:
        assert res[w]["window_start_s"] == 30.0                # the first usable reading
        assert res[w]["masked_readings"] == {"overflow": 2} and "masked-start" in res[w]["flags"]
        assert res[w]["rate_uM_per_min"] == pytest.approx(plate.v0[w], rel=0.03)


def test_minutes_in_a_bare_time_column_of_a_plate_are_refused_as_seconds(plate):
    # 384 wells stepping by a fraction of a second cannot be seconds (common practice: a plate
    # reader takes seconds to read a plate once). Read as seconds with a warning, every rate
    # came out 60x high with exit 0; now one line says what to type.
    r = _cli(plate.data, "--layout", plate.layout, *ACTIVITY_ARGS, "--dilution", "10",
             "--no-plots")
    assert r.exit_code == 3 and "Traceback" not in r.output
    line = r.stderr.strip()
    assert len(line.splitlines()) == 1 and "look like minutes" in line
    assert "--time-unit min" in line and "--time-unit s" in line
    r = _cli(plate.data, "--layout", plate.layout, *ACTIVITY_ARGS, "--dilution", "10",
             "--no-plots", "--time-unit", "s")                   # the user may insist
    assert r.exit_code == 0 and "# time unit: s (given by --time-unit)" in r.stdout


def test_the_stated_plate_must_fit_the_well_names(plate):
    r = _cli(plate.data, "--plate", "96", "--time-unit", "min")
    assert r.exit_code == 2
    line = r.stderr.strip()
    assert "--plate 96" in line and "384-well" in line and len(line.splitlines()) == 1


def test_a_384_well_file_with_a_well_volume_uses_384_well_geometry(plate):
    r = _cli(plate.data, "--time-unit", "min", "--chromophore", "pnp", "--well-volume", "30 uL",
             "--format", "json", "--no-plots")
    s = json.loads(r.stdout)["settings"]
    # 30 uL over a typical 384-well bottom of 0.10 cm2 (from memory): 0.3 cm
    assert s["pathlength_cm"] == pytest.approx(0.030 / 0.10)
    assert "384-well plate" in s["pathlength_source"]
    assert any("the file header says 'Pathlength: 0.28 cm'" in w and "0.3 cm" in w
               for w in json.loads(r.stdout)["warnings"])


def test_an_option_beats_the_file_pathlength_and_says_so(plate, view):
    r = _cli(plate.data, "--layout", plate.layout, *ACTIVITY_ARGS, "--time-unit", "min",
             "--dilution", "10", "--pathlength", "0.56 cm", "--format", "json", "--no-plots")
    doc = json.loads(r.stdout)
    assert doc["settings"]["pathlength_cm"] == 0.56
    assert any("0.56 cm" in w and "Pathlength: 0.28 cm" in w for w in doc["warnings"])
    a, b = _results(view)["A3"], {x["trace"]: x for x in doc["results"]}["A3"]
    assert b["rate_uM_per_min"] == pytest.approx(a["rate_uM_per_min"] * 0.28 / 0.56, rel=1e-9)


def test_without_a_substrate_the_depletion_judgement_is_said_to_rest_on_the_bend(tmp_path):
    """No map: nothing to weigh a window's substrate use against, and the output says so (in
    the table's header and the JSON settings) instead of leaving it to be guessed."""
    import json

    from click.testing import CliRunner

    from rateabs.cli import main
    from rateabs.io import sample_path

    plate = str(sample_path("plate_kbdh_340nm.csv"))
    r = CliRunner().invoke(main, ["rates", plate, "--no-plots"])
    assert r.exit_code == 0, r.output
    assert "# substrate depletion: judged from the trace's bend alone" in r.output
    r = CliRunner().invoke(main, ["rates", plate, "--no-plots", "--format", "json",
                                  "--slope-from", "window"])
    assert json.loads(r.output)["settings"]["substrate_depletion"].startswith("not weighed")


def _straight_plate(folder, s0_cell: str, s0_header: str = "substrate"):
    """Ten wells making product at 2 uM/min for 10 min (20 uM; absorbance from
    A = epsilon b c, NADH-free chromophore 18000 M^-1 cm^-1, 1 cm), two of them blanks; the
    map's substrate written as ``s0_cell`` under ``s0_header``."""
    t = np.arange(0, 10.01, 0.5)
    rng = np.random.default_rng(5)
    names = [f"A{i}" for i in range(1, 11)]
    cols = {n: 0.05 + (0 if i < 2 else 18000 * 2e-6 * t) + rng.normal(0, 0.001, t.size)
            for i, n in enumerate(names)}
    data = folder / "straight.csv"
    data.write_text("Time [min]," + ",".join(names) + "\n" + "".join(
        f"{x:g}," + ",".join(f"{cols[n][k]:.5f}" for n in names) + "\n"
        for k, x in enumerate(t)))
    lay = folder / "map.csv"
    lay.write_text(f"well,role,sample,{s0_header}\n" + "".join(
        f"{n},{'blank' if i < 2 else 'sample'},{'buffer' if i < 2 else 'EnzQ'},"
        f"{'' if i < 2 else s0_cell}\n" for i, n in enumerate(names)))
    return data, lay


def test_a_substrate_below_the_product_formed_is_doubted_out_loud(tmp_path):
    """20 uM of product cannot come from 0.5 uM of substrate (a map written in mM without its
    unit, read as uM): the run says so, and does not judge the windows' depletion against it.
    Written in mM with its unit, the same plate raises nothing (common practice: one product
    per substrate in an initial-rate assay)."""
    import json

    from click.testing import CliRunner

    from rateabs.cli import main

    data, lay = _straight_plate(tmp_path, "0.5")
    args = ["rates", str(data), "--layout", str(lay), "--epsilon", "18000", "--pathlength",
            "1 cm", "--no-plots", "--format", "json"]
    doc = json.loads(CliRunner().invoke(main, args).output)
    said = [w for w in doc["warnings"] if "formed more product" in w]
    assert len(said) == 1 and "8 sample well(s)" in said[0] and "from 0.5 uM" in said[0]
    made = float(said[0].split(": ", 2)[1].split(" uM")[0].rsplit(" ", 1)[-1])
    # between the medians of the first and last three readings (0.5 and 9.5 min): 9 min x 2
    assert made == pytest.approx(18.0, rel=0.05)
    rates = [r["rate_uM_per_min"] for r in doc["results"] if r["role"] == "sample"]
    assert np.allclose(rates, 2.0, rtol=0.03)
    assert not any("over-10pct" in r["flags"] for r in doc["results"])
    data, lay = _straight_plate(tmp_path, "0.5", "substrate (mM)")
    doc = json.loads(CliRunner().invoke(main, args).output)
    assert not any("formed more product" in w for w in doc["warnings"])


def test_a_partly_filled_plate_is_taken_as_96_wells_and_says_so(tmp_path):
    """Wells A1..B3 alone would fill a 6-well plate, which has no 200 uL well geometry (the
    run was refused); a kinetic read named like that is part of a 96-well plate (common
    practice), and the output says the format is the smallest of 96/384/1536 holding the
    names. The pathlength is then 200 uL over a 96-well bottom, 0.625 cm (the package's
    doctest figure for the typical 96-well geometry, from memory)."""
    wells = ["A1", "A2", "A3", "B1", "B2", "B3"]
    rows = ["time (s)," + ",".join(wells)] + [
        f"{t}," + ",".join(f"{0.1 + 1e-4 * (i + 1) * t:.5f}" for i in range(6))
        for t in range(0, 301, 30)]
    p = tmp_path / "part.csv"
    p.write_text("\n".join(rows) + "\n")
    r = _cli(p, "--well-volume", "200 uL", "--format", "json")
    assert r.exit_code == 0, r.output
    s = json.loads(r.output)["settings"]
    assert s["plate_format"] == 96
    assert "smallest of 96/384/1536" in s["plate_format_source"]
    assert s["pathlength_cm"] == pytest.approx(0.625, rel=1e-3)


@pytest.mark.parametrize("step_min", [1 / 3, 1.0])
def test_a_plate_in_minutes_with_20_s_or_1_min_reads_is_refused_as_seconds(tmp_path, step_min):
    # an audit's 15-well plate in minutes (0, 0.3333, ... and 0, 1, 2, ...) under a bare 'Time'
    # header was read as seconds with only a general warning: every rate 60x high, exit 0
    t = np.arange(0, 10.001, step_min)
    rows = ["Time," + ",".join(f"A{k}" for k in range(1, 16))]
    rows += [f"{x:.4f}," + ",".join(f"{1 - 0.01 * k * x:.5f}" for k in range(1, 16)) for x in t]
    data = tmp_path / "plate_min.csv"
    data.write_text("\n".join(rows) + "\n")
    r = _cli(data, "--no-plots")
    assert r.exit_code == 3 and "look like minutes" in r.stderr and "Traceback" not in r.output
    r = _cli(data, "--no-plots", "--time-unit", "min", "--format", "json")
    slopes = [x["slope_A_per_min"] for x in json.loads(r.stdout)["results"]]
    np.testing.assert_allclose(slopes, [-0.01 * k for k in range(1, 16)], rtol=1e-4)
