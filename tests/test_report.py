"""The generic parts of every report page and of every figure: settings in words with their
units, field names in words, values rounded to their uncertainty, the key table and the CSV one
click away, no Python literals; every trace drawn; names the house font cannot draw kept out of
the PNG without a warning per glyph. All in the test process, on small made-up values."""

import base64
import re
import warnings

import numpy as np
import pytest

from rateabs import report
from rateabs.options import RatesOptions


@pytest.mark.parametrize("key,words", [
    ("rate_uM_per_min_se", "rate SE (µM/min)"), ("window_start_s", "window start (s)"),
    ("k_per_s", "k (1/s)"), ("activity_U_per_mL", "activity (U/mL)"),
    ("slope_A_per_min", "slope (AU/min)"), ("specific_activity_U_per_mg",
                                            "specific activity (U/mg)"),
    ("S0_uM", "S0 (µM)"), ("epsilon_M_per_cm", "molar absorptivity (M⁻¹ cm⁻¹)"),
    ("noisy_rel_se", "noisy above relative SE"), ("r2", "r²"), ("trace", "trace"),
])
def test_field_names_in_words(key, words):
    assert report.label(key) == words


def test_values_in_words_carry_no_python_literals():
    assert [report.words(v) for v in (True, False, None, float("nan"), np.float64(0.1234567),
                                      np.bool_(True), [1, "a"], {"mode": "slope", "n_wells": 3})] \
        == ["yes", "no", "–", "–", "0.1235", "yes", "1, a", "mode: slope; n wells: 3"]


def test_settings_are_stated_in_words_with_their_units():
    o = RatesOptions("plate.csv", chromophore="NADH", well_volume="200 uL",
                     total_volume="200 uL", sample_volume="20 uL", window="30-300",
                     noisy_limit=0.2)
    html = report.settings_table(o)
    assert "--well-volume" in html and "200 µL" in html and "20 µL" in html
    assert "30 to 300 s" in html and "0.2 (relative SE of the slope)" in html
    assert "2 (absorbance, AU) (default)" in html          # a default is marked as one
    assert "Liquid volume per well" in html                # the option's own help
    assert "0.0002" not in html and "True" not in html and "plate.csv" not in html
    assert "plate.csv" in report.inputs_table(o)


def test_what_the_data_decided_is_shown_once_in_words():
    o = RatesOptions("plate.csv", chromophore="NADH", well_volume="200 uL", noisy_limit=0.1)
    doc_settings = {"epsilon_M_per_cm": 6220.0, "pathlength_cm": 0.625, "noisy_rel_se": 0.1,
                    "blank": {"mode": "slope", "wells": ["A9", "B9"]}, "curve_fit": True,
                    "time_unit": "clock", "flag_meanings": {"noisy": "..."},
                    "replicates": [{"group": "g"}], "layout": "plate.csv"}
    html = report.decided_table(doc_settings, o, ["plate.csv"])
    assert "molar absorptivity (M⁻¹ cm⁻¹)" in html and "pathlength (cm)" in html
    assert "mode: slope; wells: A9, B9" in html and "time unit" in html
    assert "noisy" not in html          # repeats --noisy-limit, stated with the options
    assert "curve fit" not in html and "replicates" not in html and "plate.csv" not in html


def test_key_table_fits_with_values_rounded_to_their_se_and_the_full_table_a_click_away():
    results = [{"trace": f"A{i}", "role": "sample", "sample": "S", "group": "g",
                "method": "window", "slope_A_per_min": 0.0123456, "slope_A_per_min_se": 0.00046,
                "rate_uM_per_min": 1.98765, "rate_uM_per_min_se": 0.0734,
                "activity_U_per_mL": 0.5, "activity_U_per_mL_se": 0.01,
                "window_start_s": 0.0, "window_end_s": 300.0, "n_points": 20, "r2": 0.99912,
                "lag_s": None, "noise_A": 0.002, "flags": ["noisy"] if i % 2 else []}
               for i in range(6)]
    doc = {"command": "rates", "inputs": ["p.csv"], "settings": {}, "results": results,
           "warnings": []}
    csv_text = "trace,slope\n" + "".join(f"A{i},0.01\n" for i in range(6))
    html = report.results_section(doc, csv_text, "rates.csv")
    heads = re.findall(r"<th[^>]*>([^<]*)</th>", html)
    assert len(heads) <= report.KEY_COLUMNS and heads[-1] == "flags"
    assert heads[:3] == ["trace", "role", "sample"] and "rate (µM/min)" in heads
    assert "1.988 ± 0.073" in html and "0.01235 ± 0.00046" in html
    assert "1.98765" not in html and "slope_A_per_min" not in html
    assert "more columns" in html
    b64 = re.search(r'download="rates.csv" href="data:text/csv;charset=utf-8;base64,([^"]+)"',
                    html).group(1)
    assert base64.b64decode(b64).decode() == csv_text


def test_a_few_results_read_field_by_field():
    doc = {"command": "progress", "inputs": ["c.csv"], "settings": {}, "warnings": [],
           "results": [{"model": "integrated-mm", "params": {"Km": {
               "value": 59.9812, "se": 0.2812, "ci_low": 59.4, "ci_high": 60.5,
               "ci_method": "asymptotic", "unit": "uM"}}, "n": 300, "chosen": True}]}
    html = report.results_section(doc)
    assert "59.98 ± 0.28 [59.40, 60.50] uM" in html and ">yes<" in html and "True" not in html


def test_the_house_font_never_warns_and_keeps_undrawable_names_out_of_the_png(tmp_path):
    from rateabs.plots import drawable, fixed_axes, house_style, save

    assert drawable("Проба Ελένη") == "Проба Ελένη"
    assert drawable("样品 7") == "[…] 7" and drawable("样品", "trace 1") == "trace 1"
    with warnings.catch_warnings():
        warnings.simplefilter("error")                      # a glyph warning would fail here
        with house_style() as plt:
            fig, ax = fixed_axes(plt, (4, 3))
            ax.plot([0, 1], [0, 1], label="样品一")
            ax.set_title("动力学 run")
            ax.legend()
            inset = fig.add_axes((0.6, 0.6, 0.3, 0.3))
            inset.set_axis_off()                        # its texts are drawn all the same
            inset.text(0.5, 0.5, "样品二 A1")
            save(fig, tmp_path / "f.png", tight=False)
    assert (tmp_path / "f.png").stat().st_size > 1000


def _plate(n_rows: int, n_cols: int, last: float):
    from rateabs.traces import TraceSet

    names = [f"{chr(65 + r)}{c + 1}" for r in range(n_rows) for c in range(n_cols)]
    t = np.arange(10) * 30.0
    y = 0.1 + np.outer(np.linspace(1, 2, len(names)), t) * 1e-4
    y[-1] = 0.1 + last * t
    return TraceSet.from_arrays(names, t, y)


def test_inspect_draws_every_trace_in_plate_geometry(tmp_path):
    """The last well of a 96-well plate changes the picture (only 24 were drawn before)."""
    from rateabs.plots import traces_overview
    from rateabs.plots.inspect import trace_cells

    r, c, rows, cols, plate = trace_cells(_plate(8, 12, 0.0).names)
    assert (rows, cols, plate) == (8, 12, True) and (r[-1], c[-1]) == (7, 11)
    # a 384-well plate (the file header says so) using rows A-H only is drawn as 16 x 24
    assert trace_cells(_plate(8, 12, 0.0).names, 384)[2:] == (16, 24, True)
    assert trace_cells(_plate(8, 12, 0.0).names, 24)[2:] == (8, 12, True)   # names need more
    a = traces_overview(_plate(8, 12, 0.0), tmp_path / "a.png", "t", "absorbance (AU)")
    b = traces_overview(_plate(8, 12, 1e-4), tmp_path / "b.png", "t", "absorbance (AU)")
    assert a.read_bytes() != b.read_bytes()


def test_a_page_carries_the_forecast_caution_only_where_it_forecasts():
    # the rates page is no place for a process-safety word about predicted completion times
    from rateabs.report import cautions_for

    assert not any("process-safety" in c for c in cautions_for("rates"))
    assert any("process-safety" in c for c in cautions_for("completion"))
    assert all(any("clinical diagnosis" in c for c in cautions_for(cmd))
               for cmd in ("rates", "completion", "saturation"))
    assert any("initial rate is fitted" in c for c in cautions_for("rates"))
    assert not any("initial rate is fitted" in c for c in cautions_for("completion"))
