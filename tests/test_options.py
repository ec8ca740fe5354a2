"""Every command's options, end to end with click's test runner.

A bad value is refused with exit code 2 and one line on stderr that names the option; every
option a command accepts either changes what the command reports or is refused with a reason
(a coverage test walks the settings classes, so a new option needs a case here).
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from rateabs import options as opts
from rateabs import rules
from rateabs.cli import main
from rateabs.errors import UsageError
from rateabs.rates import plate_setup
from rateabs.traces import TraceSet

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"
CUV = SAMPLES / "cuvettes_kbap_405nm_messy.csv"
PLATE = SAMPLES / "plate_kbdh_340nm.csv"
MAP = SAMPLES / "plate_kbdh_map.csv"
SAT = SAMPLES / "inhibition_kbdh_rates.csv"
PROBE = SAMPLES / "process_kestrel_red_probe.csv"
RUNS = SAMPLES / "pseudo_first_order_runs.csv"
EXCESS = SAMPLES / "pseudo_first_order_excess.csv"
TEMP = SAMPLES / "temperature_kestrel_red.csv"
PROG = SAMPLES / "progress_kbap_405nm.csv"
TUBES = SAMPLES / "tubes_tnb_412nm_counts.tsv"
CLASS = SAMPLES / "class_kestrel_red"


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def doc(*args) -> dict:
    r = run(*args, "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


# --------------------------------------------------------------------------- bad values

PROG_ARGS = [PROG, "--s0-column", "S0 (uM)", "--chromophore", "pnp"]
BAD = [
    # issue 17's list: crashes and silent acceptance
    (["saturation", SAT, "--ci", "bootstrap", "--resamples", "-5"], "--resamples"),
    (["saturation", SAT, "--ci", "bootstrap", "--resamples", "0"], "--resamples"),
    (["saturation", SAT, "--enzyme", "0 nM"], "--enzyme"),
    (["ratelaw", PROBE, "--fix", "k=-1"], "--fix"),
    (["ratelaw", PROBE, "--fix", "kk=1"], "--fix"),
    (["completion", PROBE, "--fix", "k=-1"], "--fix"),
    (["saturation", SAT, "--fix", "Km=-3"], "--fix"),
    (["saturation", SAT, "--fix", "Km=abc"], "--fix"),
    (["rates", CUV, "--linear-limit", "-1"], "--linear-limit"),
    (["inspect", CUV, "--linear-limit", "-1"], "--linear-limit"),
    (["rates", CUV, "--noisy-limit", "nan"], "--noisy-limit"),
    (["rates", CUV, "--noisy-limit", "inf"], "--noisy-limit"),
    (["rates", CUV, "--min-points", "0"], "--min-points"),
    (["rates", CUV, "--min-points", "1"], "--min-points"),
    (["rates", CUV, "--min-points", "2"], "--min-points"),
    (["rates", CUV, "--min-points", "5.5"], "--min-points"),
    (["ratelaw", PROBE, "--c0", "0 uM"], "--c0"),
    (["rates", CUV, "--well-volume", "5 mL", "--epsilon", "18000"], "--well-volume"),
    (["rates", CUV, "--well-volume", "150 uL", "--plate", "384"], "--well-volume"),
    # ranges, finiteness and choices of the other numeric options
    (["saturation", SAT, "--level", "1"], "--level"),
    (["ratelaw", PROBE, "--level", "nan"], "--level"),
    (["rates", CUV, "--dilution", "0"], "--dilution"),
    (["rates", CUV, "--window", "300-30"], "--window"),
    (["rates", CUV, "--direction", "Up"], "--direction"),
    (["rates", CUV, "--blank", "both"], "--blank"),
    (["rates", CUV, "--plate", "48"], "--plate"),
    (["rates", CUV, "--epsilon", "-6220"], "--epsilon"),
    (["rates", CUV, "--epsilon", "18000", "--epsilon-se", "-5"], "--epsilon-se"),
    (["rates", CUV, "--epsilon", "18000", "--pathlength", "0 cm"], "--pathlength"),
    (["rates", CUV, "--chromophore", "NADX"], "--chromophore"),
    (["rates", CUV, "--total-volume", "0 uL", "--sample-volume", "20 uL"], "--total-volume"),
    (["inspect", TUBES, "--i0", "-1"], "--i0"),
    (["inspect", TUBES, "--time-unit", "fortnight"], "--time-unit"),
    (["inspect", CUV, "--format", "xml"], "--format"),
    (["saturation", SAT, "--ci", "bootstrap", "--seed", "-1"], "--seed"),
    (["saturation", SAT, "--model", "ic50", "--substrate", "0", "--km", "5", "--mode",
      "competitive"], "--substrate"),
    (["saturation", SAT, "--conc-unit", "mg/mL"], "--conc-unit"),
    (["ratelaw", PROBE, "--guggenheim", "-1"], "--guggenheim"),
    (["ratelaw", PROBE, "--order", "3"], "--order"),
    (["completion", PROBE, "--target", "100"], "--target"),
    (["completion", PROBE, "--target", "100%"], "--target"),
    (["completion", PROBE, "--target", "1"], "--target"),
    (["completion", PROBE, "--target", "0"], "--target"),
    (["completion", PROBE, "--target", "-5%"], "--target"),
    (["completion", PROBE, "--end-absorbance", "nan"], "--end-absorbance"),
    (["completion", PROBE, "--drift", "maybe"], "--drift"),
    (["completion", PROBE, "--c0", "0 uM", "--epsilon", "1e4"], "--c0"),
    (["completion", PROBE, "--target", "nan"], "--target"),
    (["completion", PROBE, "--follow", "0", "--max-updates", "1"], "--follow"),
    (["completion", PROBE, "--follow", "1", "--max-updates", "0"], "--max-updates"),
    (["temperature", TEMP, "--at", "-300 C"], "--at"),
    (["temperature", TEMP, "--level", "0"], "--level"),
    (["progress", *PROG_ARGS, "--level", "2"], "--level"),
    (["grade", CLASS, "--rubric", CLASS / "rubric.toml", "--jobs", "0"], "--jobs"),
    (["grade", CLASS, "--rubric", CLASS / "rubric.toml", "--jobs", "1.5"], "--jobs"),
    (["grade", CLASS, "--rubric", CLASS / "rubric.toml", "--scheduler", "10.0.0.5"],
     "--scheduler"),
    (["rates", CUV, PLATE, "--jobs", "0"], "--jobs"),
    (["rates", CUV, PLATE, "--scheduler", "http://10.0.0.5:8786"], "--scheduler"),
    (["rates", CUV, "--jobs", "2"], "--jobs"),
    (["saturation", SAT, "--each", "plate"], "--each"),
    # accepted and then ignored before: now refused with the reason
    (["rates", CUV, "--plate", "96"], "--plate"),     # the names K1..K6 need a 384-well plate
    (["rates", CUV, "--katal"], "--katal"),
    (["rates", CUV, "--protein", "0.8 mg/mL"], "--protein"),
    (["rates", CUV, "--dilution", "10"], "--dilution"),
    (["rates", CUV, "--epsilon-se", "100"], "--epsilon-se"),
    (["rates", CUV, "--window", "0-300", "--min-points", "5"], "--min-points"),
    (["rates", CUV, "--time-unit", "s"], "--time-unit"),    # mm:ss clock: s says neither
    (["rates", CUV, "--i0", "1000"], "--i0"),
    (["rates", CUV, "--sheet", "Sheet1"], "--sheet"),
    (["saturation", SAT, "--resamples", "500"], "--resamples"),
    (["saturation", SAT, "--seed", "3"], "--seed"),
    (["saturation", SAT, "--resample", "case"], "--resample"),
    (["saturation", SAT, "--km", "120"], "--km"),
    (["saturation", SAT, "--model", "ic50", "--km", "120"], "--mode"),
    (["saturation", SAT, "--model", "ic50", "--enzyme", "1 nM"], "--enzyme"),
    (["saturation", SAT, "--sd", "rate_uM_per_min"], "--sd"),
    (["saturation", SAT, "--weighting", "sd"], "--weighting"),
    (["ratelaw", PROBE, "--a0", "50 uM"], "--a0"),
    (["ratelaw", PROBE, "--order", "mixed", "--a0", "50 uM"], "--b0"),
    (["ratelaw", PROBE, "--pathlength", "0.5 cm"], "--pathlength"),
    (["completion", PROBE, "--max-updates", "3"], "--max-updates"),
    (["completion", PROBE, "--c0", "50 uM"], "--c0"),
    (["completion", PROBE, "--pathlength", "1 cm"], "--pathlength"),
    (["completion", PROBE, "--c0", "100 uM", "--epsilon", "1e4", "--end-absorbance", "0.06"],
     "--end-absorbance"),
    (["completion", PROBE, "--epsilon", "1e4", "--chromophore", "NADH"], "--chromophore"),
    (["completion", PROBE, "--order", "0", "--drift", "on"], "--drift"),
    (["ratelaw", PROBE, "--order", "mixed", "--a0", "50 uM", "--b0", "90 uM", "--drift", "on"],
     "--drift"),
    (["progress", PROG, "--s0-column", "S0 (uM)"], "--epsilon"),
    (["progress", *PROG_ARGS, "--s0", "100 uM"], "--s0"),
    (["progress", *PROG_ARGS, "--epsilon", "18000"], "--epsilon"),
    # click's own usage errors are one line as well
    (["rates", CUV, "--no-such-option"], "--no-such-option"),
    (["saturation", SAT, "--model"], "--model"),
    (["grade", CLASS], "--rubric"),
]


@pytest.mark.parametrize("args,flag", BAD, ids=[" ".join(map(str, a[2:])) + f" [{a[0]}]"
                                                for a, _ in BAD])
def test_a_bad_option_is_one_line_naming_it_and_exit_2(args, flag):
    r = run(*args)
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1, r.stderr
    assert lines[0].startswith("rateabs: ") and flag in lines[0], lines[0]
    assert "Traceback" not in r.output and "internal error" not in r.output


def test_an_error_says_what_to_type_instead():
    r = run("rates", CUV, "--noisy-limit", "nan")
    assert r.stderr.strip() == ("rateabs: --noisy-limit nan is not a finite number; give a number "
                                "above 0 and at most 1 (relative SE of the slope), e.g. "
                                "--noisy-limit 0.1")
    r = run("rates", PLATE, "--well-volume", "5 mL", "--epsilon", "18000")
    # typical capacity of a 96-well well, about 0.36 mL (from memory)
    assert "360 uL" in r.stderr and "96-well" in r.stderr


def test_the_noisy_limit_help_says_the_rule_the_flag_follows():
    # rateabs/slopes/flags.py: noisy where SE > limit x max(|rate|, typical) and the noise is
    # over NOISE_EXCESS (3) times the plate's median, or SE > NOISY_HOPELESS (10) x that
    from dataclasses import fields

    from rateabs.slopes import flags

    help_text = {f.metadata.get("flag"): f.metadata.get("help")
                 for f in fields(opts.RatesOptions)}["--noisy-limit"]
    assert help_text in " ".join(run("rates", "--help").stdout.split())
    assert flags.NOISE_EXCESS == 3 and flags.NOISY_HOPELESS == 10
    for words in ("larger of its rate and the plate's typical rate", "three times its median "
                  "noise", "ten times this fraction whatever the noise"):
        assert words in help_text, words
    doc = (Path(__file__).resolve().parents[1] / "docs" / "formats.md").read_text()
    bullet = [x for x in doc.splitlines() if x.startswith("* `noisy`")][0]
    assert "larger of the rate and the plate's typical rate" in bullet
    assert "three times its median noise" in bullet and "ten times" in bullet


def test_the_settings_objects_check_with_the_same_rules():
    with pytest.raises(UsageError, match="--direction 'Up' is not one of auto, up, down"):
        opts.RateSettings(direction="Up")
    with pytest.raises(UsageError, match="--blank 'Slope' is not one of"):
        opts.RateSettings(blank="Slope")
    with pytest.raises(UsageError, match="--noisy-limit nan is not a finite number"):
        opts.RateSettings(noisy_rel_se=float("nan"))
    with pytest.raises(UsageError, match="--min-points 2 is out of range"):
        opts.RatesOptions("x.csv", min_points=2)
    with pytest.raises(UsageError, match="--resamples 5 is out of range"):
        opts.SaturationOptions("x.csv", ci="bootstrap", resamples=5)


def test_quantities_are_parsed_once_into_base_units():
    o = opts.RatesOptions("x.csv", epsilon="6.22 mM^-1 cm^-1", well_volume="200 uL",
                          total_volume="0.2 mL", sample_volume="20 uL", protein="800 ug/mL")
    assert o.epsilon == pytest.approx(6220)            # L mol^-1 cm^-1
    assert o.total_volume == pytest.approx(2e-4) and o.sample_volume == pytest.approx(2e-5)
    assert o.protein == pytest.approx(0.8)              # mg/mL
    st = o.rate_settings()
    assert st.well_volume_L == pytest.approx(2e-4) and st.pathlength_cm is None
    # b = V / A with a 96-well bottom of 0.32 cm2 (typical, from memory): 0.2 cm3 / 0.32 cm2,
    # for wells named A1..H12 (the plate format the names show)
    plate = TraceSet.from_arrays(["A1", "H12"], [0.0, 60.0], [[0.1, 0.2], [0.1, 0.2]])
    assert plate_setup(plate, None, st).pathlength_cm == pytest.approx(0.2 / 0.32)
    assert opts.TemperatureOptions("t.csv", at=["25 C", "300 K"]).at == pytest.approx(
        (298.15, 300.0))                                 # 0 C = 273.15 K (SI Brochure)
    assert opts.RatelawOptions("r.csv", guggenheim="5 min").guggenheim == 300.0
    assert opts.SaturationOptions("s.csv", enzyme="2").enzyme == pytest.approx(2e-9)  # bare: nM


def test_the_numeric_rule_refuses_what_is_not_a_finite_number_in_range():
    rule = rules.Number(0, 1, lo_open=True)
    for bad in ("nan", "inf", "-inf", "abc", "", True, None, "1.5", 0):
        with pytest.raises(UsageError):
            rule.check(bad, "--x")
    assert rule.check("1e-3", "--x") == 1e-3 and rule.check(1, "--x") == 1.0
    whole = rules.Number(3, math.inf, integer=True)
    assert whole.check("7", "--n") == 7 and isinstance(whole.check(7.0, "--n"), int)
    with pytest.raises(UsageError, match="not a whole number"):
        whole.check("7.5", "--n")


# --------------------------------------------------------------------------- options are used


def _rates(*extra, file=CUV):
    return {r["trace"]: r for r in doc("rates", file, *extra)["results"]}


def _params(d):
    """The parameters of the chosen model (or of the first result)."""
    return next((x for x in d["results"] if x.get("chosen")), d["results"][0])["params"]


@pytest.fixture(scope="module")
def tables(tmp_path_factory):
    """Small tables made from a known truth (Michaelis–Menten, Vmax 10 and 20 uM/min,
    Km 50 uM; k of two runs at three temperatures) to show that column options are used."""
    d = tmp_path_factory.mktemp("tables")
    s = np.array([5, 10, 20, 50, 100, 200, 400, 800.0])
    rng = np.random.default_rng(7)
    v = 10 * s / (50 + s) * (1 + 0.02 * rng.standard_normal(s.size))
    lines = ["sample,S (uM),S_mM,v (uM/min),v_fast,sd"]
    for name, f in (("A", 1), ("B", 3)):
        lines += [f"{name},{a:g},{a / 1000:g},{f * b:.5g},{2 * f * b:.5g},{0.02 * f * b:.4g}"
                  for a, b in zip(s, v, strict=True)]
    (d / "sat.csv").write_text("\n".join(lines) + "\n")
    sat = SAT.read_text().replace("inhibitor_uM", "KB17 conc")
    (d / "inhib.csv").write_text(sat)
    (d / "temp.csv").write_text("T (C),k (1/s),k_se,k_alt (1/s),k_se_alt\n"
                                "15,3.12e-4,7.8e-6,6.2e-4,1.0e-5\n25,8.0e-4,2.0e-5,1.6e-3,4e-5\n"
                                "35,1.9e-3,5.0e-5,3.9e-3,9e-5\n40,2.9e-3,8.0e-5,5.7e-3,2e-4\n")
    return d


def test_reader_options_are_used(tmp_path):
    base = doc("inspect", PROBE)["results"][0]
    assert doc("inspect", PROBE, "--time-unit", "s")["results"][0]["t_end_s"] == pytest.approx(
        base["t_end_s"] / 60)
    assert doc("inspect", PROBE, "--signal", "percent")["results"][0]["A_first"] != pytest.approx(
        base["A_first"])
    tubes = doc("inspect", TUBES)["results"][0]["A_last"]
    assert doc("inspect", TUBES, "--i0", "1e7")["results"][0]["A_last"] != pytest.approx(tubes)
    # the same reader options through a command that reads with read_for
    k = _params(doc("ratelaw", PROBE, "--order", "1", "--ci", "asymptotic"))["k"]["value"]
    k_s = _params(doc("ratelaw", PROBE, "--order", "1", "--ci", "asymptotic", "--time-unit",
                      "s"))["k"]["value"]
    assert k_s == pytest.approx(60 * k, rel=1e-6)      # minutes read as seconds: k x 60
    # two-part clock times (the messy cuvettes write mm:ss): --time-unit states their reading
    mss = doc("inspect", CUV, "--time-unit", "min")
    assert mss["settings"]["clock_reading_source"] == "option"
    assert doc("inspect", CUV, "--time-unit", "h")["results"][0]["t_end_s"] == pytest.approx(
        60 * mss["results"][0]["t_end_s"])
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    wb.active.title = "first"
    wb.active.append(["Time (s)", "A1"])
    for i in range(8):
        wb.active.append([30 * i, 0.1 + 0.01 * i])
    second = wb.create_sheet("second")
    second.append(["Time (s)", "B1"])
    for i in range(8):
        second.append([30 * i, 0.5 - 0.02 * i])
    wb.save(tmp_path / "two.xlsx")
    assert doc("inspect", tmp_path / "two.xlsx", "--sheet", "second")["results"][0]["trace"] == "B1"


def test_output_options_are_used(tmp_path):
    r = run("temperature", TEMP, "--format", "csv")
    assert r.stdout.startswith("parameter,value,se")
    r = run("temperature", TEMP)
    assert "Arrhenius and Eyring" in r.stdout
    run("temperature", TEMP, "--out", tmp_path / "a", "--report", tmp_path / "r.html")
    assert (tmp_path / "a" / "temperature.json").exists()
    assert (tmp_path / "a" / "temperature_arrhenius.png").exists()
    assert (tmp_path / "r.html").read_text().startswith("<!DOCTYPE html>")
    run("temperature", TEMP, "--out", tmp_path / "b", "--no-plots")
    assert not (tmp_path / "b" / "temperature_arrhenius.png").exists()


def test_rates_conversion_options_are_used():
    base = _rates("--epsilon", "18000")
    w = "K1"
    assert "rate_uM_per_min" not in _rates()[w]
    assert _rates("--chromophore", "pnp")[w]["rate_uM_per_min"] == pytest.approx(
        base[w]["rate_uM_per_min"])                     # p-nitrophenolate: 18000 M^-1 cm^-1
    assert _rates("--epsilon", "18000", "--pathlength", "0.5 cm")[w]["rate_uM_per_min"] == (
        pytest.approx(2 * base[w]["rate_uM_per_min"]))
    assert _rates("--epsilon", "18000", "--epsilon-se", "1800")[w]["rate_uM_per_min_se"] > (
        base[w]["rate_uM_per_min_se"])
    b96 = _rates("--epsilon", "18000", "--well-volume", "50 uL", file=PLATE)["A1"][
        "rate_uM_per_min"]                             # wells A1..H12: a 96-well plate
    b384 = _rates("--epsilon", "18000", "--well-volume", "50 uL", "--plate", "384",
                  file=PLATE)["A1"]
    # same volume, a 384-well bottom is 0.10 cm2 against 0.32 cm2 (typical, from memory)
    assert b384["rate_uM_per_min"] == pytest.approx(b96 * 0.10 / 0.32, rel=1e-9)
    act = _rates("--epsilon", "18000", "--total-volume", "200 uL", "--sample-volume", "20 uL")[w]
    assert act["activity_U_per_mL"] == pytest.approx(base[w]["rate_uM_per_min"] * 10 / 1000)
    more = _rates("--epsilon", "18000", "--total-volume", "200 uL", "--sample-volume", "20 uL",
                  "--dilution", "10", "--protein", "0.5 mg/mL", "--katal")[w]
    assert more["activity_U_per_mL"] == pytest.approx(10 * act["activity_U_per_mL"])
    assert more["specific_activity_U_per_mg"] == pytest.approx(more["activity_U_per_mL"] / 0.5)
    assert more["activity_nkat_per_mL"] == pytest.approx(more["activity_U_per_mL"] * 1e3 / 60)


def test_rates_window_and_flag_options_are_used():
    base = _rates()
    w = "K1"
    assert _rates("--window", "60-240")[w]["window_start_s"] >= 60
    assert base["K6"]["n_points"] < 15              # K6 bends and overflows early
    assert _rates("--min-points", "15")["K6"]["n_points"] >= 15
    assert sum("noisy" in r["flags"] for r in _rates("--noisy-limit", "0.0001").values()) > sum(
        "noisy" in r["flags"] for r in base.values())
    assert sum("past-linear" in r["masked_readings"] for r in _rates("--linear-limit", "0.5")
               .values()) > sum("past-linear" in r["masked_readings"] for r in base.values())
    assert _rates("--no-curve")[w]["curve_slope_A_per_min"] is None
    assert base[w]["curve_slope_A_per_min"] is not None
    assert {r["method"] for r in _rates("--slope-from", "curve").values()} >= {"curve"}
    up = _rates("--direction", "down")
    assert sum("reversed" in r["flags"] for r in up.values()) > sum(
        "reversed" in r["flags"] for r in base.values())


def test_rates_single_well_options_are_used(tmp_path):
    base = _rates(file=PLATE)
    one = _rates("--well-window", "A1=60-300", "--skip-well", "B2", "--skip-reading", "A3=120",
                 file=PLATE)
    assert (one["A1"]["window_start_s"], one["A1"]["window_end_s"]) == (60, 300)
    assert one["A1"]["window_source"] == "--well-window" != base["A1"]["window_source"]
    assert "B2" in base and "B2" not in one
    assert one["A3"]["masked_readings"] == {"skipped": 1} and one["A3"]["skipped_s"] == [120]
    r = run("rates", PLATE, "--out", tmp_path / "none", "--well-pages", "none")
    assert r.exit_code == 0 and not list((tmp_path / "none").glob("rates_wells_*.png"))
    run("rates", PLATE, "--out", tmp_path / "all", "--well-pages", "all")
    assert len(list((tmp_path / "all").glob("rates_wells_*.png"))) == 4     # 96 wells, 24 a page


def test_rates_plate_map_options_are_used():
    plain = _rates(file=PLATE)
    mapped = _rates("--layout", MAP, file=PLATE)
    assert plain["A9"]["role"] == "sample" and mapped["A9"]["role"] == "blank"
    none = _rates("--layout", MAP, "--blank", "none", file=PLATE)
    assert none["A1"]["slope_A_per_min"] != pytest.approx(mapped["A1"]["slope_A_per_min"])
    r = run("rates", PLATE, "--layout", MAP, "--calibrate", "standards")
    assert r.exit_code == 3 and "standard" in r.stderr     # asked for, and no standard wells


def test_saturation_options_are_used(tables):
    t = tables / "sat.csv"
    base = doc("saturation", t, "--model", "mm")
    p = _params(base)
    assert p["Km"]["unit"] == "uM"
    assert _params(doc("saturation", t, "--model", "mm", "--conc", "S_mM"))["Km"]["value"] == (
        pytest.approx(p["Km"]["value"] / 1000, rel=1e-4))
    assert _params(doc("saturation", t, "--model", "mm", "--rate", "v_fast"))["Vmax"]["value"] == (
        pytest.approx(2 * p["Vmax"]["value"], rel=1e-4))
    assert _params(doc("saturation", t, "--model", "mm", "--select", "sample=B"))["Vmax"][
        "value"] == pytest.approx(3 * _params(doc("saturation", t, "--model", "mm", "--select",
                                                  "sample=A"))["Vmax"]["value"], rel=1e-4)
    sd = _params(doc("saturation", t, "--model", "mm", "--weighting", "sd", "--sd", "sd"))
    rel = _params(doc("saturation", t, "--model", "mm", "--weighting", "relative"))
    assert sd["Km"]["value"] != pytest.approx(p["Km"]["value"]) and rel["Km"]["value"] != (
        pytest.approx(p["Km"]["value"]))
    assert _params(doc("saturation", t, "--model", "mm", "--fix", "Km=60"))["Km"]["value"] == 60
    assert "kcat" in _params(doc("saturation", t, "--model", "mm", "--enzyme", "1 nM"))
    # the unit options name the unit of a column whose header names none (tests/test_unit_clashes.py:
    # a header that states another unit refuses them)
    assert _params(doc("saturation", t, "--model", "mm", "--rate", "v_fast", "--rate-unit",
                       "uM/s"))["Vmax"]["unit"] == "uM/s"
    assert run("saturation", t, "--model", "mm", "--conc-unit", "mM").exit_code == 2
    assert len(base["results"]) == 1 and len(doc("saturation", t)["results"]) == 3
    prof = _params(doc("saturation", t, "--model", "mm", "--ci", "profile"))
    assert prof["Km"]["ci_method"] == "profile"
    narrow = _params(doc("saturation", t, "--model", "mm", "--level", "0.5"))
    assert narrow["Km"]["ci_high"] - narrow["Km"]["ci_low"] < p["Km"]["ci_high"] - p["Km"]["ci_low"]


def test_saturation_bootstrap_and_inhibition_options_are_used(tables):
    t = tables / "sat.csv"
    boot = ["saturation", t, "--model", "mm", "--ci", "bootstrap", "--select", "sample=A"]
    a = _params(doc(*boot, "--resamples", "200"))["Km"]
    b = _params(doc(*boot, "--resamples", "200", "--seed", "5"))["Km"]
    c = _params(doc(*boot, "--resamples", "200", "--resample", "case"))["Km"]
    assert a["ci_method"] == "bootstrap-residual" and c["ci_method"] == "bootstrap-case"
    assert a["ci_low"] != b["ci_low"]
    d = doc(*boot, "--resamples", "300")
    assert d["settings"]["resamples"] == 300
    inhib = tables / "inhib.csv"
    assert _params(doc("saturation", inhib)).keys() <= {"Vmax", "Km", "S50", "n", "Ksi", "Vmax/Km"}
    named = _params(doc("saturation", inhib, "--inhibitor", "KB17 conc"))
    assert "Ki" in named
    assert _params(doc("saturation", inhib, "--inhibitor", "KB17 conc", "--inhibitor-unit",
                       "mM"))["Ki"]["unit"] == "mM"
    ic = ["saturation", SAT, "--model", "ic50", "--select", "substrate_uM=120"]
    assert "Ki" not in _params(doc(*ic))
    ki = _params(doc(*ic, "--mode", "competitive", "--substrate", "120", "--km", "120"))["Ki"]
    # Cheng & Prusoff (1973): competitive Ki = IC50 / (1 + [S]/Km) = IC50 / 2 here
    assert ki["value"] == pytest.approx(_params(doc(*ic))["IC50"]["value"] / 2)


def test_ratelaw_options_are_used():
    one = ["ratelaw", PROBE, "--order", "1"]
    base = doc(*one)["results"][0]
    # checks of values and choices that no interval enters take asymptotic intervals (the
    # profile's refits cost up to 0.7 s a run); the default's profile is checked on `base`
    fast = [*one, "--ci", "asymptotic"]
    plain = doc(*fast)["results"][0]
    assert doc("ratelaw", PROBE, "--order", "2", "--ci", "asymptotic")["results"][0][
        "order"] == "2"
    assert plain["params"]["k"]["ci_method"] == "asymptotic"
    assert base["params"]["k"]["ci_method"] == "profile"
    assert doc(*fast, "--fix", "Ainf=0.06")["results"][0]["params"]["Ainf"]["value"] == 0.06
    lvl = doc(*one, "--level", "0.5")["results"][0]["params"]["k"]
    assert lvl["ci_high"] - lvl["ci_low"] < base["params"]["k"]["ci_high"] - base["params"]["k"][
        "ci_low"]
    c0 = doc(*fast, "--epsilon", "30000")["results"][0]["c0_M"]["value"]
    assert base["c0_M"] is None is plain["c0_M"] and c0 == pytest.approx(
        abs(plain["params"]["A0"]["value"] - plain["params"]["Ainf"]["value"]) / 30000, rel=1e-6)
    assert doc(*fast, "--epsilon", "30000", "--pathlength", "0.5 cm")["results"][0]["c0_M"][
        "value"] == pytest.approx(2 * c0)
    assert doc(*fast, "--chromophore", "NADH")["results"][0]["c0_M"]["value"] == pytest.approx(
        c0 * 30000 / 6220)
    assert doc(*fast, "--epsilon", "30000", "--epsilon-product", "10000")["results"][0]["c0_M"][
        "value"] == pytest.approx(c0 * 30000 / 20000)
    assert doc(*fast, "--c0", "50 uM")["results"][0]["c0_M"]["value"] == pytest.approx(5e-5)
    assert doc(*fast, "--guggenheim", "10 min")["results"][0]["guggenheim"]["delta_s"] == 600
    r = run(*one, "--expect", "rise")
    assert r.exit_code == 4 and "rise was expected" in r.stderr
    mixed = doc("ratelaw", PROBE, "--order", "mixed", "--a0", "50 uM", "--b0", "120 uM", "--ci",
                "asymptotic")
    assert mixed["results"][0]["order"] == "mixed"
    runs = doc("ratelaw", RUNS, "--order", "1", "--trace", "run 2", "--ci", "asymptotic")
    assert [r["trace"] for r in runs["results"]] == ["run 2"]
    series = doc("ratelaw", RUNS, "--order", "1", "--excess", EXCESS, "--ci", "asymptotic")[
        "settings"]
    assert series["pseudo_first_order"]["n_runs"] == 5
    assert doc(*fast, "--drift", "on")["results"][0]["model"] == "1+drift" != plain["model"]
    assert base["model"] == plain["model"]
    late = doc(*fast, "--fit-from", "5 min")["results"][0]
    assert late["time_origin_s"] == 300 and late["n"] < plain["n"]


def test_completion_options_are_used():
    base = doc("completion", PROBE)
    r0 = base["results"][0]
    r95 = doc("completion", PROBE, "--target", "95")["results"][0]
    assert r95["t_target_s"]["value"] < r0["t_target_s"]["value"]
    assert doc("completion", PROBE, "--order", "2")["results"][0]["order"] == "2"
    lvl = doc("completion", PROBE, "--level", "0.5")["results"][0]["t_target_s"]
    assert lvl["ci_high"] - lvl["ci_low"] < r0["t_target_s"]["ci_high"] - r0["t_target_s"]["ci_low"]
    assert doc("completion", PROBE, "--fix", "Ainf=0.06")["results"][0]["end_absorbance"][
        "value"] == 0.06
    assert [r["trace"] for r in doc("completion", RUNS, "--trace", "run 3")["results"]] == [
        "run 3"]
    r = run("completion", PROBE, "--follow", "0.01", "--max-updates", "1", "--no-plots")
    assert r.exit_code == 0 and "following" in r.stderr and "final summary" in r.stderr
    assert "following" not in r.stdout and "A520" in r.stdout
    # the charge: c0 with an epsilon (or a chromophore, or both species' epsilons and the
    # pathlength) measures conversion against it; an end absorbance does the same
    charged = doc("completion", PROBE, "--c0", "119 uM", "--epsilon", "1e4")["results"][0]
    assert charged["conversion_basis"] == "charge" != r0["conversion_basis"]
    assert charged["charge"].startswith("c0 119 uM")
    for extra in (["--chromophore", "NADH"], ["--epsilon", "1e4", "--epsilon-product", "2000"],
                  ["--epsilon", "1e4", "--pathlength", "0.5 cm"]):
        other = doc("completion", PROBE, "--c0", "119 uM", *extra)["results"][0]
        assert other["conversion"]["value"] != pytest.approx(charged["conversion"]["value"])
    ends = doc("completion", PROBE, "--end-absorbance", "0.06")["results"][0]
    assert ends["conversion_basis"] == "charge" and "0.06" in ends["charge"]
    # an epsilon alone converts k (here order 2's) to concentration units
    k2 = doc("completion", PROBE, "--order", "2", "--epsilon", "1e4")["results"][0]
    assert k2["k_conc"]["unit"] == "L/(mol s)"
    drift = doc("completion", PROBE, "--drift", "on")["results"][0]
    assert drift["model"] == "1+drift" and base["results"][0]["model"] == "1"
    assert doc("completion", PROBE, "--drift", "off")["settings"]["drift"] == "off"
    late = doc("completion", PROBE, "--fit-from", "5 min")["results"][0]
    assert late["time_origin_s"] == 300 and late["t_now_s"] == r0["t_now_s"] - 300


def test_temperature_options_are_used(tables):
    t = tables / "temp.csv"
    base = doc("temperature", t)
    ea = base["results"][0]["params"]["Ea"]
    assert doc("temperature", t, "--k-column", "k_alt (1/s)")["results"][0]["params"]["Ea"][
        "value"] != pytest.approx(ea["value"])
    assert doc("temperature", t, "--se-column", "k_se_alt")["results"][0]["params"]["Ea"][
        "se"] != pytest.approx(ea["se"])
    # --temp-unit names the unit of a bare header (against 'T (C)' and Celsius values: refused,
    # tests/test_unit_clashes.py)
    bare = tables / "temp_bare.csv"
    bare.write_text(t.read_text().replace("T (C)", "T", 1))
    assert doc("temperature", bare, "--temp-unit", "K")["results"][0]["params"]["Ea"][
        "value"] != pytest.approx(ea["value"])
    pred = doc("temperature", t, "--at", "25 C")["results"][-1]["predictions"][0]
    assert pred["T_K"] == pytest.approx(298.15)
    assert pred["k"]["value"] == pytest.approx(8.0e-4, rel=0.1)
    lvl = doc("temperature", t, "--level", "0.5")["results"][0]["params"]["Ea"]
    assert lvl["ci_high"] - lvl["ci_low"] < ea["ci_high"] - ea["ci_low"]


def test_progress_options_are_used(tmp_path):
    base = doc("progress", *PROG_ARGS)
    km = base["results"][0]["params"]["Km"]
    assert doc("progress", *PROG_ARGS, "--trace", "c1", "--trace", "c3", "--trace", "c5")[
        "results"][0]["n_curves"] == 3
    eps = doc("progress", PROG, "--s0-column", "S0 (uM)", "--epsilon", "9000")
    half = doc("progress", *PROG_ARGS, "--pathlength", "0.5 cm")
    vmax = base["results"][0]["params"]["Vmax"]["value"]
    # Beer–Lambert: only epsilon x b matters, 9000 x 1 cm = 18000 (p-nitrophenolate) x 0.5 cm
    assert eps["results"][0]["params"]["Vmax"]["value"] == pytest.approx(
        half["results"][0]["params"]["Vmax"]["value"], rel=1e-6)
    assert half["results"][0]["params"]["Vmax"]["value"] != pytest.approx(vmax)
    # --s0 on a file without its per-curve S0 column (beside it --s0 is refused:
    # tests/test_unit_clashes.py), on the curves started at 100 uM
    lines = PROG.read_text().splitlines()
    no_s0 = tmp_path / "no_s0.csv"
    no_s0.write_text("\n".join([lines[0]] + [",".join(c for i, c in enumerate(ln.split(","))
                                                      if i != 1) for ln in lines[1:]]) + "\n")
    s0 = doc("progress", no_s0, "--s0", "0.1 mM", "--chromophore", "pnp", "--trace", "c3",
             "--trace", "c5", "--trace", "c6")
    assert s0["results"][0]["params"]["Km"]["unit"] == "mM"
    assert "Kp" in doc("progress", *PROG_ARGS, "--product-inhibition")["results"][0]["params"]
    assert any(r.get("test") == "selwyn" for r in doc("progress", *PROG_ARGS, "--selwyn",
                                                       "enzyme (nM)")["results"])
    # the profile (about 1 s a curve here) on three of the curves
    assert doc("progress", *PROG_ARGS, "--ci", "profile", "--trace", "c1", "--trace", "c3",
               "--trace", "c5")["results"][0]["params"]["Km"]["ci_method"] == "profile" != km[
                   "ci_method"]
    lvl = doc("progress", *PROG_ARGS, "--level", "0.5")["results"][0]["params"]["Km"]
    assert lvl["ci_high"] - lvl["ci_low"] < km["ci_high"] - km["ci_low"]
    # the product's rise read as substrate: refused, naming the species that fits the signal
    flipped = run("progress", *PROG_ARGS, "--species", "substrate")
    assert flipped.exit_code == 2 and "give --species product" in flipped.stderr


def test_progress_layout_gives_s0(tmp_path):
    curves = {"c1": 20, "c2": 50, "c3": 100, "c4": 200}
    (tmp_path / "map.csv").write_text("well,role,substrate_uM\n" + "".join(
        f"{k},sample,{v}\n" for k, v in curves.items()))
    d = doc("progress", PROG, "--layout", tmp_path / "map.csv", "--chromophore", "pnp",
            *sum((["--trace", k] for k in curves), []))
    assert [c["S0_uM"] for c in d["results"][0]["curves"]] == pytest.approx(list(curves.values()))
    assert d["settings"]["s0_source"] == "plate map"


def test_grade_options_are_used(tmp_path):
    args = ["grade", CLASS, "--rubric", CLASS / "rubric.toml"]
    r = run(*args, "--jobs", "1", "--format", "json", "--out", tmp_path)
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["settings"]["jobs"] == 1
    assert (tmp_path / "gradebook.csv").exists() and (tmp_path / "class_summary.html").exists()
    page = next((tmp_path / "feedback").glob("001-*.html")).read_text()   # roster #1, Ada
    assert "Ada Brennholt" in page and "<svg" in page    # the student's figure, drawn by views


# --------------------------------------------------------------------------- coverage

#: Where each option of each command is shown to be used (or refused); shared parts once.
#: --jobs, --scheduler (rates, grade) and --each (saturation): tests/test_batch.py.
USED = {
    "shared": {"--time-unit", "--signal", "--i0", "--sheet", "--format", "--out", "--report",
               "--plots/--no-plots"},
    "InspectOptions": {"--linear-limit"},
    "RatesOptions": {"--layout", "--epsilon", "--epsilon-se", "--chromophore", "--pathlength",
                     "--well-volume", "--plate", "--total-volume", "--sample-volume", "--protein",
                     "--dilution", "--window", "--min-points", "--blank", "--direction",
                     "--linear-limit", "--noisy-limit", "--katal", "--calibrate",
                     "--curve/--no-curve", "--slope-from", "--well-window", "--skip-well",
                     "--skip-reading", "--well-pages", "--jobs", "--scheduler"},
    "SaturationOptions": {"--conc", "--rate", "--inhibitor", "--sd", "--model", "--ci", "--level",
                          "--weighting", "--fix", "--enzyme", "--conc-unit", "--rate-unit",
                          "--inhibitor-unit", "--mode", "--substrate", "--km", "--resamples",
                          "--resample", "--seed", "--select", "--each"},
    "RatelawOptions": {"--level", "--fix", "--trace", "--epsilon", "--chromophore",
                       "--epsilon-product", "--pathlength", "--c0", "--order", "--a0", "--b0",
                       "--ci", "--expect", "--guggenheim", "--excess", "--drift", "--fit-from"},
    "CompletionOptions": {"--level", "--fix", "--trace", "--target", "--order", "--follow",
                          "--max-updates", "--c0", "--epsilon", "--epsilon-product",
                          "--chromophore", "--pathlength", "--end-absorbance", "--drift",
                          "--fit-from"},
    "TemperatureOptions": {"--temp-column", "--k-column", "--se-column", "--temp-unit", "--at",
                           "--level"},
    "ProgressOptions": {"--s0", "--s0-column", "--layout", "--epsilon", "--chromophore",
                        "--pathlength", "--species", "--product-inhibition", "--selwyn",
                        "--trace", "--ci", "--level"},
    "GradeOptions": {"--rubric", "--jobs", "--scheduler", "--format", "--out"},
}
REFUSED: dict = {}


@pytest.mark.parametrize("cls", [opts.InspectOptions, opts.RatesOptions, opts.SaturationOptions,
                                 opts.RatelawOptions, opts.CompletionOptions,
                                 opts.TemperatureOptions, opts.ProgressOptions,
                                 opts.GradeOptions], ids=lambda c: c.__name__)
def test_every_option_is_shown_used_or_refused(cls):
    flags = {f.metadata["flag"] for f in rules.flat_fields(cls) if "argument" not in f.metadata}
    covered = USED["shared"] | USED.get(cls.__name__, set()) | REFUSED.get(cls.__name__, set())
    assert flags <= covered, flags - covered
    for flag in REFUSED.get(cls.__name__, ()):
        assert any(a[0] == cls.__name__.removesuffix("Options").lower() and flag == f
                   for a, f in BAD)
