"""Plate maps read as a bench enzymologist writes them: units in headers without brackets, a
window whose unit is written once after the range, an exclude cell in words, --protein beside
the map's protein column, sample names that differ only in case. Each truth is worked by hand
beside its check (enzyme unit: 1 U = 1 umol/min, NC-IUB 1979; NADH 6220 M^-1 cm^-1)."""

import numpy as np
import pytest

from rateabs.errors import InputError, UsageError
from rateabs.layout import read_layout
from rateabs.options import RatesOptions
from rateabs.rules import Window
from rateabs.views.rates import compute_rates

NET_SLOPE = -0.050          # A/min after the blank: 0.050 / 6220 / 1 cm = 8.039 uM/min (by hand)
RATE_UM_PER_MIN = 0.050 / 6220 * 1e6


def _plate(folder, seed=1):
    """Nine sample wells at -0.051 A/min and three blanks at -0.001 A/min, 31 reads 10 s apart."""
    rng = np.random.default_rng(seed)
    t = np.arange(31) * 10.0
    slopes = {f"A{i}": (NET_SLOPE - 0.001 if i < 10 else -0.001) for i in range(1, 13)}
    rows = ["Time (s)," + ",".join(slopes)]
    rows += [f"{x:g}," + ",".join(f"{1.0 + s * x / 60 + rng.normal(0, 0.001):.5f}"
                                  for s in slopes.values()) for x in t]
    path = folder / "plate.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def _map(folder, header: str, cells: list[str], name="map.csv"):
    """Samples A1-A9 with one extra column ``header`` (cells per well), blanks A10-A12."""
    lines = [f"well,role,sample,{header}"]
    lines += [f"A{i},sample,L1,{cells[i - 1]}" for i in range(1, 10)]
    lines += [f"A{i},blank,buffer," for i in (10, 11, 12)]
    path = folder / name
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.parametrize("text", ["1.5-5 min", "90-300 s", "90 s-5 min", "1.5min-5min"])
def test_a_window_unit_written_after_the_range_is_that_of_both_ends(text):
    # by hand: 1.5 min = 90 s, 5 min = 300 s (common practice: "1.5-5 min" is one range)
    assert Window().check(text, "--window") == (90.0, 300.0)


def test_a_bare_window_is_still_in_seconds():
    assert Window().check("90-300", "--window") == (90.0, 300.0)


def test_the_maps_window_column_takes_the_unit_after_the_range(tmp_path):
    cells = ["1.5-5 min"] + [""] * 8
    layout = read_layout(str(_map(tmp_path, "window", cells)))
    assert layout.loc["A1", "window"] == (90.0, 300.0)      # by hand: 1.5 min = 90 s


def _run(data, layout, **kw):
    o = RatesOptions.build(file=str(data), layout_file=str(layout), chromophore="NADH",
                           pathlength="1 cm", total_volume="200 uL", sample_volume="20 uL",
                           plots=False, **kw)
    return compute_rates(o).doc


@pytest.mark.parametrize("header", ["protein_ug_per_mL", "protein_ug/mL", "Protein ug/mL",
                                    "protein (ug/mL)"])
def test_a_protein_header_in_ug_per_mL_gives_U_per_mg(tmp_path, header):
    # by hand: 8.039 uM/min x 200/20 = 80.39 uM/min = 0.08039 U/mL (1 U = 1 umol/min);
    # 800 ug/mL = 0.8 mg/mL -> 0.1005 U/mg (it was 1000 times low: 800 read as mg/mL)
    doc = _run(_plate(tmp_path), _map(tmp_path, header, ["800"] * 9))
    truth = RATE_UM_PER_MIN * 200 / 20 / 1000 / 0.8
    for row in doc["results"][:9]:
        assert row["specific_activity_U_per_mg"] == pytest.approx(truth, rel=0.03)


@pytest.mark.parametrize("header", ["enzyme uM", "enzyme_uM", "enzyme (uM)"])
def test_an_enzyme_header_in_uM_gives_the_turnover(tmp_path, header):
    # by hand: 8.039 uM/min / 60 / 0.01 uM = 13.40 per s (it was 1000 times high for
    # "enzyme uM": 0.01 read as nM)
    doc = _run(_plate(tmp_path), _map(tmp_path, f'"{header}"', ["0.01"] * 9))
    for row in doc["results"][:9]:
        assert row["enzyme_nM"] == pytest.approx(10.0)
        assert row["turnover_per_s"] == pytest.approx(RATE_UM_PER_MIN / 60 / 0.01, rel=0.03)


def test_a_substrate_header_in_mM_is_read_in_mM(tmp_path):
    layout = read_layout(str(_map(tmp_path, "substrate mM", ["2"] * 9)))
    assert layout.loc["A1", "substrate_M"] == pytest.approx(2e-3)    # by hand: 2 mM


@pytest.mark.parametrize("word", ["excluded", "omit", "skip"])
def test_an_exclude_cell_in_other_words_is_refused_not_kept(tmp_path, word):
    # "excluded" used to keep the well in every mean, in silence
    with pytest.raises(InputError, match="exclude 'excluded'|exclude 'omit'|exclude 'skip'"):
        read_layout(str(_map(tmp_path, "exclude", [word] + [""] * 8)))


def test_exclude_yes_and_no_are_read(tmp_path):
    cells = ["yes", "X", "TRUE", "no", "n", "0", "", "", ""]
    layout = read_layout(str(_map(tmp_path, "exclude", cells)))
    assert list(layout["exclude"].iloc[:9]) == [True] * 3 + [False] * 6


def test_protein_that_the_map_gives_for_every_well_refuses_the_option(tmp_path):
    # the map's 0.8 mg/mL was used and --protein 2 dropped, without a word
    layout = _map(tmp_path, "protein (ug/mL)", ["800"] * 9)
    with pytest.raises(UsageError, match="--protein 2 mg/mL is not used"):
        _run(_plate(tmp_path), layout, protein="2 mg/mL")


def test_protein_partly_from_the_map_says_which_wells_took_the_option(tmp_path):
    # by hand: 0.08039 U/mL / 0.8 mg/mL = 0.1005 U/mg (map); / 0.4 mg/mL = 0.2010 U/mg (option)
    layout = _map(tmp_path, "protein (ug/mL)", ["800"] * 3 + [""] * 6)
    doc = _run(_plate(tmp_path), layout, protein="0.4 mg/mL")
    act = RATE_UM_PER_MIN * 200 / 20 / 1000
    res = {r["trace"]: r for r in doc["results"]}
    assert res["A1"]["specific_activity_U_per_mg"] == pytest.approx(act / 0.8, rel=0.03)
    assert res["A4"]["specific_activity_U_per_mg"] == pytest.approx(act / 0.4, rel=0.03)
    assert doc["settings"]["protein_wells_by_source"] == {"plate map": 3, "--protein": 6}
    assert any("--protein 0.4 mg/mL fills the 6 well(s)" in w for w in doc["warnings"])


def test_map_protein_and_dilution_without_volumes_are_said_to_be_unused(tmp_path):
    layout = tmp_path / "pd.csv"
    layout.write_text("well,role,protein,dilution\nA1,sample,0.8,10\nA10,blank,,\n")
    o = RatesOptions.build(file=str(_plate(tmp_path)), layout_file=str(layout),
                           chromophore="NADH", plots=False)
    doc = compute_rates(o).doc
    assert "specific_activity_U_per_mg" not in doc["results"][0]
    assert any("protein and dilution column(s) are not used" in w for w in doc["warnings"])


def test_sample_names_that_differ_only_in_case_or_spacing_are_said_to_be_kept_apart(tmp_path):
    names = ["Lysate A", "lysate a", "Lysate  A", "L2", "L2", "L2", "L3", "L3", "L3"]
    layout = tmp_path / "names.csv"
    layout.write_text("well,role,sample\n" + "".join(f"A{i},sample,{n}\n"
                                                     for i, n in enumerate(names, 1))
                      + "A10,blank,l2\nA11,blank,buffer\nA12,blank,buffer\n")
    doc = _run(_plate(tmp_path), layout)
    said = [w for w in doc["warnings"] if "differ only in case or spacing" in w]
    assert len(said) == 1 and "'Lysate A' and 'lysate a' and 'Lysate  A'" in said[0], said


def test_a_window_outside_the_read_is_refused_in_one_line(tmp_path):
    # the read is 0-300 s; a map window 400-600 gave some wells a whole-curve slope and
    # others none, each only flagged few-points
    layout = _map(tmp_path, "window", ["400-600"] + [""] * 8)
    with pytest.raises(UsageError, match="window 400-600 s of well A1 holds fewer than three"):
        _run(_plate(tmp_path), layout)


def test_a_window_in_minutes_inside_the_read_is_used(tmp_path):
    # by hand: 1-4 min = 60-240 s, 19 readings 10 s apart
    doc = _run(_plate(tmp_path), _map(tmp_path, "window", ["1-4 min"] + [""] * 8))
    a1 = doc["results"][0]
    assert (a1["window_start_s"], a1["window_end_s"], a1["n_points"]) == (60.0, 240.0, 19)
    assert a1["rate_uM_per_min"] == pytest.approx(RATE_UM_PER_MIN, rel=0.03)


def test_enzyme_written_as_a_mass_is_said_to_give_no_turnover(tmp_path):
    doc = _run(_plate(tmp_path), _map(tmp_path, "enzyme", ["0.5 ug/mL"] * 9))
    assert doc["results"][0]["enzyme_nM"] is None
    assert any("9 enzyme cell(s)" in w and "no v/[E]" in w for w in doc["warnings"])


def test_a_map_column_that_is_not_read_is_named_in_the_warnings(tmp_path):
    """A protein column headed 'total protein (mg/mL)' is none of the map's columns: U/mg is
    not given, and the run says that column was not read (it said nothing); a 'notes' column
    of free text is said nothing of."""
    doc = _run(_plate(tmp_path), _map(tmp_path, "total protein (mg/mL)", ["0.8"] * 9))
    said = [w for w in doc["warnings"] if "not read" in w]
    assert len(said) == 1 and "'total protein (mg/mL)' (meant as 'protein'? rename it so)" in said[0]
    doc = _run(_plate(tmp_path), _map(tmp_path, "notes", ["thawed twice"] * 9, "m2.csv"))
    assert not [w for w in doc["warnings"] if "not read" in w]


@pytest.mark.parametrize("header,means", [("dilutoin", "dilution"), ("dilution factor", "dilution"),
                                          ("Dilution (x)", "dilution"),
                                          ("substrat_uM", "substrate")])
def test_a_look_alike_of_a_column_that_changes_the_numbers_stops_the_run(tmp_path, header, means):
    # a trial map's 'dilutoin' column was named among the columns not read and the run went on
    # undiluted: a lysate's U/mL came out 8x low with exit 0. Now one line names the column,
    # what it looks like and what to type, and the CLI exits non-zero with no traceback.
    from click.testing import CliRunner

    from rateabs.cli import main

    mp = _map(tmp_path, header, ["8"] * 9)
    with pytest.raises(InputError, match=f"looks like '{means}'"):
        read_layout(str(mp))
    r = CliRunner().invoke(main, ["rates", str(_plate(tmp_path)), "--layout", str(mp),
                                  "--chromophore", "NADH", "--no-plots"])
    assert r.exit_code != 0 and r.exception is None or isinstance(r.exception, SystemExit)
    line = [x for x in r.output.splitlines() if "looks like" in x]
    assert len(line) == 1 and f"rename it '{means}'" in line[0] and "Traceback" not in r.output


def test_a_look_alike_that_is_a_persons_note_is_only_named(tmp_path):
    # 'dilution note' with no dilution column: a note, not a lost dilution, and no advice to
    # rename a note into a column that changes the numbers
    doc = _run(_plate(tmp_path), _map(tmp_path, "dilution note", ["thawed"] * 9))
    said = [w for w in doc["warnings"] if "not read" in w]
    assert "'dilution note' are not read" in said[0] and "rename it so" not in said[0]


def test_a_look_alike_beside_the_real_column_is_only_named(tmp_path):
    # 'dilution' is there and read; 'dilution note' beside it is a person's note
    mp = tmp_path / "m.csv"
    mp.write_text("well,role,sample,dilution,dilution note\n" + "".join(
        f"A{i},sample,L1,8,thawed\n" for i in range(1, 10)) + "".join(
        f"A{i},blank,buffer,,\n" for i in (10, 11, 12)))
    doc = _run(_plate(tmp_path), mp)
    said = [w for w in doc["warnings"] if "not read" in w]
    assert "'dilution note' (beside the 'dilution' column, which is read)" in said[0]
    # U/mL = 8.039 uM/min x 200 uL / 20 uL x 8 / 1000 (by hand; 1 U = 1 umol/min)
    act = doc["settings"]["activity"][0]["activity_U_per_mL"]
    assert act == pytest.approx(RATE_UM_PER_MIN * 10 * 8 / 1000, rel=0.03)


def test_wells_whose_dilution_cell_is_empty_are_named(tmp_path):
    # four empty dilution cells take --dilution (here 2): the header names them, the JSON
    # lists every source's wells; U/mL by hand: 8.039 uM/min x 10 x dilution / 1000
    from click.testing import CliRunner

    from rateabs.cli import main

    mp = _map(tmp_path, "dilution", ["8"] * 5 + [""] * 4)
    r = CliRunner().invoke(main, ["rates", str(_plate(tmp_path)), "--layout", str(mp),
                                  "--chromophore", "NADH", "--pathlength", "1 cm",
                                  "--total-volume", "200 uL", "--sample-volume", "20 uL",
                                  "--dilution", "2", "--no-plots"])
    head = [x for x in r.stdout.splitlines() if x.startswith("# activity:")][0]
    assert "plate map 5 wells" in head and "(A6, A7, A8, A9)" in head, head
    doc = _run(_plate(tmp_path), mp, dilution=2)
    wells = doc["settings"]["dilution"]["wells"]
    assert sorted(sum(wells.values(), [])) == sorted(f"A{i}" for i in range(1, 10))
    assert [w for k, v in wells.items() if k != "plate map" for w in v] == ["A6", "A7", "A8",
                                                                            "A9"]


def test_wells_left_undiluted_by_default_are_named_even_where_they_are_most(tmp_path):
    # five empty dilution cells and no --dilution: the five are taken as undiluted (the map's
    # rule), the commonest source here, and still named in the header and listed in the JSON
    from click.testing import CliRunner

    from rateabs.cli import main

    mp = _map(tmp_path, "dilution", ["8"] * 4 + [""] * 5)
    r = CliRunner().invoke(main, ["rates", str(_plate(tmp_path)), "--layout", str(mp),
                                  "--chromophore", "NADH", "--pathlength", "1 cm",
                                  "--total-volume", "200 uL", "--sample-volume", "20 uL",
                                  "--no-plots"])
    head = [x for x in r.stdout.splitlines() if x.startswith("# activity:")][0]
    assert "default (undiluted) 5 wells (A5, A6, A7, A8, A9)" in head, head
    assert "plate map 4 wells (A1, A2, A3, A4)" in head, head
    doc = _run(_plate(tmp_path), mp)
    assert doc["settings"]["dilution"]["wells"]["default (undiluted)"] == [
        "A5", "A6", "A7", "A8", "A9"]


def test_readings_in_milli_absorbance_are_said_in_the_header_and_settings(tmp_path):
    # the same plate written in mAU (1 mAU = 0.001 A, common practice) under names 'A1 (mAU)':
    # the rates are the same, and the rescaling is a header line, not only a warning
    import json

    from click.testing import CliRunner

    from rateabs.cli import main

    src = _plate(tmp_path).read_text().splitlines()
    head = ",".join([src[0].split(",")[0]] + [f"{w} (mAU)" for w in src[0].split(",")[1:]])
    rows = [",".join([r.split(",")[0]] + [f"{1000 * float(x):.2f}" for x in r.split(",")[1:]])
            for r in src[1:]]
    data = tmp_path / "mau.csv"
    data.write_text("\n".join([head, *rows]) + "\n")
    args = ["rates", str(data), "--layout", str(_map(tmp_path, "note", ["-"] * 9)),
            "--chromophore", "NADH", "--pathlength", "1 cm", "--no-plots"]
    r = CliRunner().invoke(main, args)
    line = [x for x in r.stdout.splitlines() if x.startswith("# signal:")][0]
    assert "(mAU)" in line and "divided by 1000" in line
    doc = json.loads(CliRunner().invoke(main, [*args, "--format", "json"]).stdout)
    assert "divided by 1000" in doc["settings"]["signal_in_words"]
    assert doc["settings"]["signal_unit_as_read"] == "mAU"
    assert doc["settings"]["signal_factor_applied"] == 0.001       # 1 mAU = 0.001 A
    rate = [x["rate_uM_per_min"] for x in doc["results"] if x["trace"] == "A1"][0]
    assert rate == pytest.approx(RATE_UM_PER_MIN, rel=0.03)   # by hand: 0.050 A/min / 6220


def test_a_map_column_in_mM_is_said_once_to_be_reported_in_uM(tmp_path):
    # 0.12 mM is 120 uM (SI prefixes): the conversion is one header line and one settings
    # entry; a column already in uM needs no word
    from click.testing import CliRunner

    from rateabs.cli import main

    data = _plate(tmp_path)
    mp = _map(tmp_path, "substrate (mM)", ["0.12"] * 9)
    r = CliRunner().invoke(main, ["rates", str(data), "--layout", str(mp), "--chromophore",
                                  "NADH", "--pathlength", "1 cm", "--no-plots"])
    lines = [x for x in r.stdout.splitlines() if x.startswith("# plate map units:")]
    assert lines == ["# plate map units: substrate (mM) read in mM and reported in uM "
                     "(x 1000)"], r.stdout
    doc = _run(data, mp)
    assert doc["settings"]["map_units"] == [{"column": "substrate (mM)", "unit_as_read": "mM",
                                             "reported_in": "uM",
                                             "factor": pytest.approx(1000.0)}]
    assert doc["results"][0]["substrate_uM"] == pytest.approx(120.0)
    plain = _run(data, _map(tmp_path, "substrate_uM", ["120"] * 9, name="um.csv"))
    assert plain["settings"]["map_units"] == []


def test_the_header_names_the_whole_curve_model_behind_curve_rates():
    # the sample plate's curved wells: 'curve' is said to be a whole-curve fit, and which one,
    # in the header and (code and words) in the settings
    import json
    from pathlib import Path

    from click.testing import CliRunner

    from rateabs.cli import main

    runs = Path(__file__).resolve().parents[1] / "sample_runs"
    r = CliRunner().invoke(main, ["rates", str(runs / "plate_kbdh_340nm.csv"), "--layout",
                                  str(runs / "plate_kbdh_map.csv"), "--chromophore", "NADH",
                                  "--no-plots"])
    line = [x for x in r.stdout.splitlines() if x.startswith("# initial slope:")][0]
    assert "curve = initial slope of a whole-curve fit: " in line
    assert any(w in line for w in ("exponential approach", "Michaelis–Menten form", "lag"))
    est = json.loads(CliRunner().invoke(main, ["rates", str(runs / "plate_kbdh_340nm.csv"),
                                               "--layout", str(runs / "plate_kbdh_map.csv"),
                                               "--chromophore", "NADH", "--no-plots",
                                               "--format", "json"]).stdout)["settings"]["estimator"]
    assert set(est["curve_models_in_words"]) == set(est["curve_models"]) != set()
    assert all(w in line for w in est["curve_models_in_words"].values())


def test_unit_conversions_do_not_leave_binary_noise_in_the_json(tmp_path):
    # 200 uL is 0.0002 L and 0.12 mM is 120 uM (SI prefixes): not 0.00019999999999999998
    # and 119.99999999999999 as the floats' last bits wrote them
    from rateabs.output import to_json

    mp = _map(tmp_path, "substrate (mM)", ["0.12"] * 9)
    text = to_json(_run(_plate(tmp_path), mp))
    assert '"total_volume_L": 0.0002,' in text and '"substrate_uM": 120.0' in text
    assert "99999999" not in text and "00000000001" not in text


def _standards_plate(folder):
    """Six sample wells rising 0.03 A/min and six NADH standards 0-160 uM at 0.05 + c x 6220e-6 A
    (1 cm): the standard curve gives 0.03 / 6220e-6 = 4.823 uM/min (by hand; Horecker &
    Kornberg 1948 for NADH 6220 M^-1 cm^-1)."""
    t = np.arange(0, 601, 15.0)
    conc = [0, 20, 40, 80, 120, 160]
    traces = {f"A{i}": 0.1 + 0.03 * t / 60 for i in range(1, 7)}
    traces |= {f"A{i + 7}": 0.05 + c * 6220e-6 + 0 * t for i, c in enumerate(conc)}
    rows = ["Time (s)," + ",".join(traces)]
    rows += [f"{x:g}," + ",".join(f"{v[k]:.6f}" for v in traces.values()) for k, x in enumerate(t)]
    path = folder / "std_plate.csv"
    path.write_text("\n".join(rows) + "\n")
    return path, conc


@pytest.mark.parametrize("order", ["sd first", "sd after"])
def test_a_header_that_only_starts_like_a_concentration_column_is_not_read_as_one(tmp_path,
                                                                                  order):
    # a map with 'standard deviation' before 'standard (uM)' took the SDs (0.5) as the standard
    # concentrations: rates 44x low with exit 0. Only a header that is the name with a unit (or
    # 'conc') is the concentration column; the other is named as not read.
    plate, conc = _standards_plate(tmp_path)
    head = (["standard deviation", "standard (uM)"] if order == "sd first"
            else ["standard (uM)", "standard deviation"])
    lines = ["well,role,sample," + ",".join(head)]
    lines += [f"A{i},sample,X,," if order == "sd first" else f"A{i},sample,X,,0.5"
              for i in range(1, 7)]
    lines += [f"A{i + 7},standard,NADH,0.5,{c}" if order == "sd first"
              else f"A{i + 7},standard,NADH,{c},0.5" for i, c in enumerate(conc)]
    mp = tmp_path / "map.csv"
    mp.write_text("\n".join(lines) + "\n")
    lay = read_layout(str(mp))
    np.testing.assert_allclose(lay.loc[[f"A{i}" for i in range(7, 13)], "standard_M"],
                               np.array(conc) * 1e-6)
    doc = compute_rates(RatesOptions.build(file=str(plate), layout_file=str(mp),
                                           plots=False)).doc
    rates = [r["rate_uM_per_min"] for r in doc["results"] if r["role"] == "sample"]
    np.testing.assert_allclose(rates, 0.03 / 6220e-6, rtol=0.005)
    said = [w for w in doc["warnings"] if "not read" in w]
    assert len(said) == 1 and "'standard deviation' (beside the 'standard' column" in said[0]


@pytest.mark.parametrize("header,cells", [("inhibitor name", "EDTA"), ("substrate lot", "L24-03"),
                                          ("enzyme name", "KbX"), ("standard deviation", "0.5")])
def test_an_identifier_or_sd_beside_no_concentration_column_is_only_named(tmp_path, header,
                                                                          cells):
    # 'inhibitor name' with no inhibitor column stopped with "cannot read concentration": it is
    # not a concentration column, and a name, lot or SD is a note, not a lost value
    doc = _run(_plate(tmp_path), _map(tmp_path, header, [cells] * 9))
    said = [w for w in doc["warnings"] if "not read" in w]
    assert len(said) == 1 and f"'{header}'" in said[0] and "rename it so" not in said[0]
    np.testing.assert_allclose([r["rate_uM_per_min"] for r in doc["results"]
                                if r["role"] == "sample"], RATE_UM_PER_MIN, rtol=0.03)


@pytest.mark.parametrize("header,cells", [("dilution note", ["4"] * 5 + ["10"] * 4),
                                          ("diln", ["4"] * 9), ("DF", ["2"] * 9),
                                          ("Sample ID", ["L1"] * 9)])
def test_a_look_alike_holding_the_values_of_a_missing_column_stops_the_run(tmp_path, header,
                                                                           cells):
    # 'dilution note' or 'diln' holding 4 and 10 with no dilution column was only named:
    # activities 4x and 10x low with exit 0. Numbers in a note-like column of a column the map
    # lacks, a short form ('diln') and a sample column under another name stop the run.
    mp = _map(tmp_path, header, cells)
    if header == "Sample ID":                       # a map whose sample names are only there
        mp.write_text(mp.read_text().replace("well,role,sample,", "well,role,kind,"))
    with pytest.raises(InputError, match="rename it"):
        read_layout(str(mp))


@pytest.mark.parametrize("header,stem", [
    ("substrate", "substrate"), ("Substrate (mM)", "substrate"), ("substrate_uM", "substrate"),
    ("substrate mM", "substrate"), ("Substrate conc (uM)", "substrate"),
    ("inhibitor final concentration [nM]", "inhibitor"), ("protein_ug_per_mL", "protein"),
    ("enzyme (nM)", "enzyme")])
def test_a_quantity_with_its_unit_and_conc_is_its_column(header, stem):
    from rateabs.layout import names_quantity

    assert names_quantity(header, stem)


@pytest.mark.parametrize("header,stem", [
    ("standard deviation", "standard"), ("inhibitor name", "inhibitor"),
    ("substrate lot", "substrate"), ("substrates used (uM)", "substrate"),
    ("enzyme supplier", "enzyme"), ("protein assay", "protein")])
def test_a_header_that_only_starts_with_a_quantity_is_not_its_column(header, stem):
    from rateabs.layout import names_quantity

    assert not names_quantity(header, stem)


def test_unit_conversions_do_not_leave_binary_noise_in_the_csv(tmp_path):
    # 0.07 mM is 70 uM (SI prefixes): the CSV writes 70.0, not 70.00000000000001
    from rateabs.options import RatesOptions

    mp = _map(tmp_path, "substrate (mM)", ["0.07"] * 9)
    o = RatesOptions.build(file=str(_plate(tmp_path)), layout_file=str(mp), chromophore="NADH",
                           pathlength="1 cm", plots=False)
    lines = compute_rates(o).csv.splitlines()
    col = lines[0].split(",").index("substrate_uM")
    assert [row.split(",")[col] for row in lines[1:10]] == ["70.0"] * 9


def test_a_flat_dilution_check_has_no_negative_zero():
    # activity falling by a millionth over an eightfold dilution: a trend of -0.00001 % per
    # two-fold dilution, written +0.0 % (a rounded zero has no sign)
    from rateabs.rates import dilution_trend

    d = np.array([1.0, 2, 4, 8, 1, 2, 4, 8])
    act = np.array([1.0, 1.0, 1.0, 1.0 - 1e-6] * 2)
    text = dilution_trend(d, act)["dilution_check"]
    assert text.startswith("+0.0 % [") and "-0.0" not in text, text


_UNITS = ["M", "mM", "uM", "nM", "pM", "µM", "mg/mL", "ug/mL"]
_STYLES = ["{s} ({u})", "{s} [{u}]", "{s}_{u}", "{s} {u}", "{s} conc ({u})",
           "{s} concentration [{u}]", "{s}"]


@pytest.mark.parametrize("stem", ["substrate", "inhibitor", "standard", "enzyme", "protein"])
def test_every_way_of_writing_a_quantity_with_its_unit_is_its_column(stem):
    # property over the ways a map writes a concentration header (common practice: brackets,
    # underscore or space before the unit): the column is found and its unit read as written
    from hypothesis import given
    from hypothesis import strategies as st

    from rateabs.layout import names_quantity
    from rateabs.units import unit_from_header

    @given(st.sampled_from(_STYLES), st.sampled_from(_UNITS), st.booleans())
    def check(style, unit, upper):
        if stem != "protein" and "/" in unit or style.endswith("_{u}") and "/" in unit:
            return                               # mass units are the protein column's
        header = style.format(s=stem.capitalize() if upper else stem, u=unit)
        assert names_quantity(header, stem), header
        if "{u}" in style:
            assert unit_from_header(header) == unit, header

    @given(st.text(alphabet="abcdefghijklmnopqrstuvwxyz", min_size=2, max_size=10),
           st.sampled_from(_UNITS))
    def other_word(word, unit):
        if word in ("conc", "concentration", "final"):
            return
        assert not names_quantity(f"{stem} {word} ({unit})", stem)

    check()
    other_word()


@pytest.mark.parametrize("header,factor", [("[S] (mM)", 1e-3), ("[S]", 1e-6), ("[S]0 (uM)", 1e-6),
                                           ("S0_mM", 1e-3)])
def test_a_substrate_column_headed_by_its_symbol_is_read(tmp_path, header, factor):
    # '[S] (mM)' (common practice for the substrate concentration) was not read: the wells'
    # substrate levels were lost and the default groups merged them. Bare numbers are uM.
    lay = read_layout(str(_map(tmp_path, header, ["0.5"] * 9)))
    np.testing.assert_allclose(lay["substrate_M"].iloc[:9], 0.5 * factor)
    assert not [n for n in lay.attrs["notes"] if "not read" in n]


def test_an_inhibitor_symbol_is_not_the_substrate():
    from rateabs.layout import names_quantity

    assert names_quantity("[I] (nM)", "inhibitor") and not names_quantity("[I] (nM)", "substrate")
    assert names_quantity("[E]0 (nM)", "enzyme") and not names_quantity("[S]", "enzyme")


def test_sample_volumes_that_differ_between_wells_stop_the_run(tmp_path):
    # a map's 'sample volume (uL)' of 10 and 20 was only named as not read: every activity used
    # the one --sample-volume, so the 10 uL wells' U/mL came out half what they are
    with pytest.raises(InputError, match="different volumes"):
        read_layout(str(_map(tmp_path, "sample volume (uL)", ["10"] * 4 + ["20"] * 5)))
    lay = read_layout(str(_map(tmp_path, "sample volume (uL)", ["20"] * 9, "same.csv")))
    assert any("'sample volume (uL)'" in n for n in lay.attrs["notes"])   # named, as before


def test_a_window_set_in_the_map_is_the_number_even_where_the_map_says_it_depleted(tmp_path):
    # an audit's map window 60-600 (set to skip a settling start) on wells that used over 10 %
    # of the map's [S]0 was reported as the whole curve's initial slope, fitted to 0-600, under
    # a header naming the window. The set window is the number now (over-10pct where it may
    # read low).
    mp = tmp_path / "m.csv"
    mp.write_text("well,role,sample,substrate (uM),window\n" + "".join(
        f"A{i},sample,L1,100,{'60-300' if i <= 4 else ''}\n" for i in range(1, 10)) + "".join(
        f"A{i},blank,buffer,,\n" for i in (10, 11, 12)))
    doc = _run(_plate(tmp_path), mp)
    res = {r["trace"]: r for r in doc["results"]}
    for w in ("A1", "A2", "A3", "A4"):
        assert res[w]["method"] == "window" and res[w]["window_source"] == "plate map"
        assert (res[w]["window_start_s"], res[w]["window_end_s"]) == (60.0, 300.0)
        assert res[w]["rate_uM_per_min"] == pytest.approx(RATE_UM_PER_MIN, rel=0.03)


@pytest.mark.parametrize("bent", [False, True])
def test_a_standard_curve_that_bends_is_said_to(tmp_path, bent):
    # standards 0-300 uM whose absorbance flattens at the top (a / (1 + a / 2), a detector
    # past its linear range, the top one 48 % low): one straight line put an audit's rates
    # 24 % high with no word
    t = np.arange(0, 601, 15.0)
    conc = [0, 50, 100, 150, 200, 300]
    a_std = [c * 6220e-6 for c in conc]
    a_std = [a / (1 + a / 2) if bent else a for a in a_std]
    traces = {f"A{i}": 0.1 + 0.03 * t / 60 for i in range(1, 4)}
    traces |= {f"A{i + 4}": 0.05 + a + 0 * t for i, a in enumerate(a_std)}
    rows = ["Time (s)," + ",".join(traces)]
    rows += [f"{x:g}," + ",".join(f"{v[k]:.6f}" for v in traces.values()) for k, x in enumerate(t)]
    (tmp_path / "p.csv").write_text("\n".join(rows) + "\n")
    (tmp_path / "m.csv").write_text("well,role,sample,standard (uM)\n" + "".join(
        f"A{i},sample,X,\n" for i in range(1, 4)) + "".join(
        f"A{i + 4},standard,NADH,{c}\n" for i, c in enumerate(conc)))
    doc = compute_rates(RatesOptions.build(file=str(tmp_path / "p.csv"),
                                           layout_file=str(tmp_path / "m.csv"),
                                           plots=False)).doc
    said = [w for w in doc["warnings"] if "standard curve bends" in w]
    assert bool(said) == bent, doc["warnings"]
