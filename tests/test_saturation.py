"""Saturation and inhibition analysis: published data, simulations, derived constants, CLI."""

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from rateabs.cli import main
from rateabs.errors import FitError
from rateabs.fitting import Param
from rateabs.models import SATURATION, direct_linear_plot
from rateabs.saturation import SaturationData, analyse, cheng_prusoff
from rateabs.units import unit_from_header

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"
PURO = ("conc (ppm),rate (counts/min^2)\n0.02,76\n0.02,47\n0.06,97\n0.06,107\n0.11,123\n"
        "0.11,139\n0.22,159\n0.22,152\n0.56,191\n0.56,201\n1.10,207\n1.10,200\n")


def _data(s, v, i=None, cu="uM", ru="uM/min"):
    return SaturationData(np.asarray(s, float), np.asarray(v, float),
                          None if i is None else np.asarray(i, float), None, cu, ru, "uM", {})


def test_puromycin_through_the_cli(tmp_path):
    # published: Treloar (1974) / Bates & Watts (1988): Vmax 212.68 (6.947), Km 0.06412 (0.008281)
    f = tmp_path / "puromycin.csv"
    f.write_text(PURO)
    r = CliRunner().invoke(main, ["saturation", str(f), "--model", "mm", "--format", "json"])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    res = doc["results"][0]
    assert res["model"] == "mm" and res["chosen"] is True
    assert {"model", "params", "aic", "chosen"} <= set(res)
    vm, km = res["params"]["Vmax"], res["params"]["Km"]
    assert round(vm["value"], 2) == 212.68 and round(vm["se"], 3) == 6.947
    assert round(km["value"], 5) == 0.06412 and round(km["se"], 6) == 0.008281
    assert set(vm) == {"value", "se", "ci_low", "ci_high", "ci_method", "unit"}
    assert vm["unit"] == "counts/min^2" and km["unit"] == "ppm"


def test_auto_on_sample_inhibitor_series_names_competitive(tmp_path):
    r = CliRunner().invoke(main, ["saturation", str(SAMPLES / "inhibition_kbdh_rates.csv"),
                                  "--enzyme", "1 nM", "--format", "json", "--out", str(tmp_path)])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    chosen = [x for x in doc["results"] if x["chosen"]]
    assert len(chosen) == 1 and chosen[0]["model"] == "competitive"
    p = chosen[0]["params"]
    # simulated truth (sample_runs/generate.py): Km 120 uM, Ki 4 uM, Vmax 9 uM/min, 1 nM enzyme
    assert p["Km"]["ci_low"] < 120 < p["Km"]["ci_high"] * 1.05
    assert 3.5 < p["Ki"]["value"] < 4.6
    assert p["kcat"]["unit"] == "1/s" and p["kcat"]["value"] == pytest.approx(
        p["Vmax"]["value"] * 1e-6 / 60 / 1e-9)
    assert "aicc_table" in chosen[0]["evidence"] and chosen[0]["evidence"]["f_tests"] is not None
    for png in ("saturation_fit.png", "saturation_linearised.png"):
        assert (tmp_path / png).stat().st_size > 20_000


def test_auto_picks_true_inhibition_mode_over_seeds():
    """Small seeded version of benchmarks/mode_choice.py."""
    s = np.array([10, 25, 50, 100, 200, 400, 800.0])
    ii = np.array([0, 3, 8, 20.0])
    S, I = (a.ravel() for a in np.meshgrid(s, ii))
    truths = {"competitive": (10.0, 80.0, 5.0), "uncompetitive": (10.0, 80.0, 5.0),
              "noncompetitive": (10.0, 80.0, 5.0), "mixed": (10.0, 80.0, 3.0, 15.0)}
    hits = total = 0
    for mode, p in truths.items():
        for seed in range(6):
            rng = np.random.default_rng(seed)
            v = SATURATION[mode].func(np.vstack([S, I]), *p)
            v = v * (1 + rng.normal(0, 0.03, v.size))
            a = analyse(_data(S, v, I))
            hits += a.chosen == mode
            total += 1
    assert hits / total >= 0.75


def test_mm_auto_prefers_mm_on_mm_data():
    s = np.repeat([5, 10, 20, 40, 80, 160, 320.0], 2)
    v = SATURATION["mm"].func(s, 10, 40) * (1 + np.random.default_rng(1).normal(0, 0.03, s.size))
    a = analyse(_data(s, v))
    assert a.chosen == "mm"
    assert a.cross_check["Km"] == pytest.approx(40, rel=0.2)


def test_cheng_prusoff_hand_worked():
    # published relation: Cheng & Prusoff (1973); hand-worked: IC50 = 10 uM, [S] = Km -> Ki = 5
    p = Param("IC50", 10.0, 1.0, 8.0, 12.0, "asymptotic", "uM")
    assert cheng_prusoff(p, "competitive", 50.0, 50.0).value == pytest.approx(5.0)
    assert cheng_prusoff(p, "competitive", 150.0, 50.0).value == pytest.approx(2.5)
    assert cheng_prusoff(p, "uncompetitive", 150.0, 50.0).value == pytest.approx(7.5)
    assert cheng_prusoff(p, "noncompetitive", 150.0, 50.0).value == pytest.approx(10.0)
    assert cheng_prusoff(p, "competitive", 50.0, 50.0).ci_high == pytest.approx(6.0)


def test_ic50_with_cheng_prusoff_via_cli(tmp_path):
    rng = np.random.default_rng(5)
    i = np.repeat([0, 0.3, 1, 3, 10, 30, 100, 300.0], 2)
    v = SATURATION["ic50"].func(i, 100, 4, 8.0, 1.0) + rng.normal(0, 1.5, i.size)
    f = tmp_path / "dose.csv"
    f.write_text("inhibitor_uM,rate_uM_per_min\n" + "".join(f"{a},{b}\n" for a, b in zip(i, v, strict=True)))
    r = CliRunner().invoke(main, ["saturation", str(f), "--model", "ic50", "--inhibitor",
                                  "inhibitor_uM", "--mode", "competitive", "--substrate", "100",
                                  "--km", "100", "--format", "json"])
    assert r.exit_code == 0, r.output
    p = json.loads(r.stdout)["results"][0]["params"]
    assert p["IC50"]["ci_low"] < 8 < p["IC50"]["ci_high"]
    assert p["Ki"]["value"] == pytest.approx(p["IC50"]["value"] / 2)


def test_kcat_units_and_propagation():
    s = np.array([5, 10, 20, 40, 80, 160, 320, 640.0])
    v = SATURATION["mm"].func(s, 9.0, 50.0) * (1 + np.random.default_rng(2).normal(0, 0.02, 8))
    a = analyse(_data(s, v), model="mm", enzyme_M=1e-9)
    d = a.derived["mm"]
    vm = a.best.params["Vmax"]
    # 1 uM/min per 1 nM enzyme = 1e-6/60/1e-9 = 16.67 per s
    assert d["kcat"].value == pytest.approx(vm.value * 1e3 / 60)
    assert d["kcat"].se / d["kcat"].value == pytest.approx(vm.se / vm.value)
    assert d["kcat/Km"].unit == "M^-1 s^-1"
    assert d["kcat/Km"].value == pytest.approx(d["kcat"].value / (a.best.params["Km"].value * 1e-6))


def test_design_warnings():
    s = np.array([1, 2, 4, 8, 16.0])
    v = SATURATION["mm"].func(s, 10, 40.0) * (1 + np.random.default_rng(3).normal(0, 0.01, 5))
    a = analyse(_data(s, v), model="mm")
    assert any("highest substrate" in w for w in a.warnings)
    s2 = np.array([100, 200, 400, 800, 1600.0])
    v2 = SATURATION["mm"].func(s2, 10, 40.0) * (1 + np.random.default_rng(4).normal(0, 0.01, 5))
    a2 = analyse(_data(s2, v2), model="mm")
    assert any("lowest substrate" in w for w in a2.warnings)


def test_direct_linear_plot_exact_data():
    s = np.array([1, 2, 5, 10.0])
    vm, km = direct_linear_plot(s, 10 * s / (3 + s))
    assert vm == pytest.approx(10) and km == pytest.approx(3)


def test_units_from_headers():
    assert unit_from_header("[S] (mM)") == "mM"
    assert unit_from_header("rate_uM_per_min") == "uM/min"
    assert unit_from_header("substrate_uM") == "uM"
    assert unit_from_header("v") == ""


@pytest.mark.parametrize("content,args,words,code", [
    ("conc_uM,rate\n1,2\n2,3\n", ["--model", "hill"], "not estimable", 4),
    ("conc_uM,rate\n1,0\n2,0\n4,0\n8,0\n", [], "every rate is zero", 4),
    ("conc_uM,rate\n1,2\n-2,3\n4,4\n", [], "negative concentration", 3),
    ("conc_uM,inhibitor_uM,rate\n1,5,2\n2,5,3\n4,5,4\n8,5,5\n", ["--model", "competitive"],
     "at least two inhibitor levels", 4),
    ("conc_uM,rate\n1,2\n2,abc\n", [], "'abc' is not a number", 3),
    ("a,b\n1,2\n2,3\n", [], "no rate column", 3),
    ("conc_uM,rate\n1,2\n2,3\n4,4\n", ["--fix", "Km"], "NAME=VALUE", 2),
])
def test_bad_input_one_line(tmp_path, content, args, words, code):
    f = tmp_path / "t.csv"
    f.write_text(content)
    r = CliRunner().invoke(main, ["saturation", str(f), *args])
    assert r.exit_code == code, r.output
    assert words in r.output and len(r.output.strip().splitlines()) == 1
    assert "Traceback" not in r.output


def test_single_inhibitor_level_auto_falls_back_to_substrate_models():
    s = np.array([5, 10, 20, 40, 80.0])
    a = analyse(_data(s, SATURATION["mm"].func(s, 5, 20) + 0.01 * np.arange(5), np.zeros(5)))
    assert a.chosen in ("mm", "hill", "substrate-inhibition")


def test_failed_candidate_reported_and_auto_goes_on():
    s = np.array([5, 10, 20, 40, 80, 160.0])
    v = SATURATION["mm"].func(s, 5, 20) * (1 + np.random.default_rng(0).normal(0, 0.02, 6))
    a = analyse(_data(s, v))
    assert a.chosen == "mm"
    assert a.comparison is not None


def test_fit_error_when_nothing_fits():
    with pytest.raises(FitError):
        analyse(_data([1, 2], [1, 2]), model="mm")
