"""The reader: round trips through every supported shape, and the sample runs."""

from pathlib import Path

import numpy as np
import pytest
from helpers import write_table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rateabs.errors import InputError
from rateabs.io import read_traces, sample_path, time_unit_from_header
from rateabs.io.values import cell_kind, column_kinds
from rateabs.photometry import absorbance_from_percent_t

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"


@st.composite
def tables(draw):
    n = draw(st.integers(1, 5))
    m = draw(st.integers(3, 12))      # kinetics needs three time points (two: the catalogue)
    style = draw(st.sampled_from(["s", "min", "h", "hms", "ms", "hm"]))
    step = draw(st.sampled_from([1, 15, 30, 60])) if style in ("hms", "ms") else draw(
        st.sampled_from([60, 300, 900])) if style == "hm" else draw(
        st.floats(0.5, 120, allow_nan=False))
    if style == "h":
        step = 360.0
    times = np.arange(m) * float(step)
    values = np.array(draw(st.lists(st.lists(st.floats(-0.2, 3.0, allow_nan=False), min_size=m,
                                              max_size=m), min_size=n, max_size=n)))
    if draw(st.booleans()):
        values[draw(st.integers(0, n - 1)), draw(st.integers(1, m - 1))] = np.nan
    pool = ["A1", "B12", "H7", "sample x", "K-3", "P24", "blank 1"]
    names = draw(st.permutations(pool))[:n]
    layout = draw(st.sampled_from(["wide", "long", "transposed"]))
    delimiter = draw(st.sampled_from([",", ";", "\t"]))
    decimal = "," if delimiter != "," and draw(st.booleans()) else "."
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16"]))
    newline = draw(st.sampled_from(["\n", "\r\n"]))
    pre = draw(st.sampled_from([(), ("Instrument notes", "Wavelength: 340 nm", "")]))
    return dict(names=list(names), times=times, values=values, layout=layout,
                delimiter=delimiter, decimal=decimal, encoding=encoding, newline=newline,
                time_style=style, preamble=pre)


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(tables())
def test_round_trip_every_shape(tmp_path, case):
    text = write_table(case["names"], case["times"], case["values"], layout=case["layout"],
                       delimiter=case["delimiter"], decimal=case["decimal"],
                       time_style=case["time_style"], preamble=case["preamble"],
                       newline=case["newline"])
    path = tmp_path / "export.txt"
    path.write_bytes(text.encode(case["encoding"]))
    ts = read_traces(path)
    assert ts.names == case["names"]
    assert ts.info["layout"] == case["layout"]
    g = ts.grid()
    np.testing.assert_allclose(g.times, np.broadcast_to(case["times"], g.times.shape), rtol=1e-9,
                               atol=1e-9)
    np.testing.assert_allclose(g.values, case["values"], rtol=1e-12, equal_nan=True)
    assert np.array_equal(g.usable, np.isfinite(case["values"]))
    if case["preamble"]:
        assert ts.info["wavelength_nm"] == 340


def test_time_units_from_header_words(tmp_path):
    for header, factor in [("Time (min)", 60), ("time_min", 60), ("t [h]", 3600),
                           ("Time (s)", 1), ("Time/sec", 1), ("minutes", 60), ("hours", 3600)]:
        p = tmp_path / "t.csv"
        p.write_text(f"{header},A1\n0,0.1\n1,0.2\n2,0.3\n")
        ts = read_traces(p)
        assert ts.grid().times[0, 1] == factor, header


def test_bare_time_is_seconds_and_says_so(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Time,A1\n0,0.1\n1,0.2\n2,0.3\n")
    ts = read_traces(p)
    assert ts.info["time_unit"] == "s" and ts.info["time_unit_source"] == "assumed"
    assert read_traces(p, time_unit="min").grid().times[0, 2] == 120


def test_overflow_markers_masked_never_numbers(tmp_path):
    p = tmp_path / "o.csv"
    p.write_text("Time (s),A1,A2,A3,A4,A5\n0,0.1,OVER,>3.5,sat,****\n10,0.2,overflow,3.4,0.5,0.6\n"
                 "20,0.3,0.4,0.5,0.6,0.7\n")
    ts = read_traces(p)
    d = ts.data
    over = d[d["flag"] == "overflow"]
    assert sorted(over["trace"]) == ["A2", "A2", "A3", "A4", "A5"]
    assert over["value"].isna().all() and not over["usable"].any()


def test_temperature_and_counter_columns_are_set_aside(tmp_path):
    p = tmp_path / "m.csv"
    p.write_text("Read no,Elapsed (s),Block temperature (C),A1,A2\n1,0,30.1,0.1,0.2\n"
                 "2,30,30.0,0.2,0.3\n3,60,29.9,0.3,0.4\n")
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"]
    assert ts.info["temperature_K"] == pytest.approx(303.15)
    assert ts.info["set_aside"] == {"Read no": "index", "Block temperature (C)": "temperature"}
    assert set(ts.info["extra_columns"]) == {"Read no", "Block temperature (C)"}


@pytest.mark.parametrize("header,values,expected", [
    ("%T", [50.0, 10.0, 1.0], [0.30103, 1.0, 2.0]),
    ("Transmittance", [0.5, 0.1, 0.01], [0.30103, 1.0, 2.0]),
])
def test_transmittance_converted(tmp_path, header, values, expected):
    # published: IUPAC "absorbance", A = -log10 T
    p = tmp_path / "t.csv"
    rows = "\n".join(f"{i * 10},{v}" for i, v in enumerate(values))
    p.write_text(f"Time (s),{header} A1\n{rows}\n")
    ts = read_traces(p)
    np.testing.assert_allclose(ts.grid().values[0], expected, atol=1e-5)


def test_signal_from_metadata_and_intensity_with_i0(tmp_path):
    p = tmp_path / "i.csv"
    p.write_text("Mode: %T\nTime (s),A1\n0,50\n10,10\n20,1\n")
    np.testing.assert_allclose(read_traces(p).grid().values[0], [0.30103, 1, 2], atol=1e-5)
    q = tmp_path / "j.csv"
    q.write_text("Time (s),I0,cell 1\n0,1000,500\n10,1000,100\n20,1000,10\n")
    ts = read_traces(q, signal="intensity")
    assert ts.names == ["cell 1"]
    np.testing.assert_allclose(ts.grid().values[0], [0.30103, 1, 2], atol=1e-5)


def test_reference_intensity_from_a_metadata_line_is_recorded(tmp_path):
    p = tmp_path / "i.csv"
    p.write_text("I0: 1000\nTime (s),counts tube 1\n0,500\n10,100\n20,10\n")
    ts = read_traces(p)
    np.testing.assert_allclose(ts.grid().values[0], [0.30103, 1, 2], atol=1e-5)
    assert (ts.info["i0"], ts.info["i0_source"]) == (1000, "metadata line 'I0: 1000'")
    assert read_traces(p, i0=500).info["i0_source"] == "option"


def test_absorbance_that_looks_like_percent_t_warns(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text("Time (s),Absorbance\n0,88.1\n10,70.2\n20,55.3\n")
    ts = read_traces(p)
    assert any("percent transmittance" in w for w in ts.info["warnings"])


def test_negative_transmittance_warns(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text("Time (s),T A1\n0,0.5\n10,-0.01\n20,0.4\n")
    ts = read_traces(p, signal="transmittance")
    assert any("negative transmittance" in w for w in ts.info["warnings"])
    assert ts.data["flag"].tolist()[1] == "overflow"


def test_xlsx_with_time_cells(tmp_path):
    import datetime as dt

    import openpyxl
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Plate read, 405 nm"])
    ws.append([])
    ws.append(["Time", "Stage °C", "A1", "A2"])
    for k in range(5):
        ws.append([dt.time(0, k // 2, (k % 2) * 30), 25.0, 0.1 + 0.01 * k, "OVER" if k == 2 else 0.2])
    p = tmp_path / "plate.xlsx"
    wb.save(p)
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"]
    np.testing.assert_allclose(ts.grid().times[0], [0, 30, 60, 90, 120])
    assert ts.info["format"] == "xlsx"
    assert ts.data.loc[ts.data["trace"] == "A2", "flag"].tolist()[2] == "overflow"


def test_a_workbook_of_several_sheets_says_which_it_read(tmp_path):
    """An empty first sheet is passed over for the first with data, and the choice is said
    (a user audit found the first sheet read without a word, and an empty one refused as if
    the file held no table)."""
    import openpyxl

    wb = openpyxl.Workbook()
    wb.active.title = "notes"
    ws = wb.create_sheet("run")
    ws.append(["time (s)", "A405"])
    for t in range(0, 601, 30):
        ws.append([t, 0.05 + 2e-4 * t])
    wb.create_sheet("other").append(["x"])
    p = tmp_path / "two.xlsx"
    wb.save(p)
    ts = read_traces(p)
    assert ts.names == ["A405"]
    assert any("3 sheets (notes, run, other): sheet 'run' was read" in w
               for w in ts.info["warnings"])
    assert not any("sheets" in w for w in read_traces(p, sheet="run").info["warnings"])


@pytest.mark.parametrize("name", ["plate_kbdh_340nm.csv", "cuvettes_kbap_405nm_messy.csv",
                                  "tubes_tnb_412nm_counts.tsv"])
def test_sample_runs_read(name):
    ts = read_traces(SAMPLES / name)
    assert len(ts) >= 3
    assert (SAMPLES / name).read_bytes() == sample_path(name).read_bytes()


def test_messy_export_details():
    ts = read_traces(SAMPLES / "cuvettes_kbap_405nm_messy.csv")
    i = ts.info
    assert (i["format"], i["decimal"], i["encoding"], i["layout"]) == (
        "semicolon", ",", "utf-8-sig", "wide")
    assert i["time_unit"] == "clock" and i["wavelength_nm"] == 405
    assert "overflow" in ts.reading_flags()["K6"]
    assert ts.names == ["K1", "K2", "K3", "K4", "K5", "K6"]


def test_transposed_counts_sample():
    ts = read_traces(SAMPLES / "tubes_tnb_412nm_counts.tsv")
    assert ts.info["signal_kind"] == "intensity" and ts.info["layout"] == "transposed"
    assert ts.names == ["tube 1", "tube 2", "tube 3"]
    assert ts.grid().times[0, 1] == 30.0
    np.testing.assert_allclose(ts.grid().values[:, 0], 0.08, atol=0.005)


def test_input_file_never_written(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text("Time (s),A1\n0,0.1\n10,0.2\n20,0.3\n")
    before = (p.read_bytes(), p.stat().st_mtime_ns)
    read_traces(p)
    assert (p.read_bytes(), p.stat().st_mtime_ns) == before


def test_percent_helper_consistent():
    assert absorbance_from_percent_t(100.0) == 0.0


def test_transposed_with_counter_time_and_temperature_rows(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Read #,1,2,3,4\nElapsed [s],0,30,60,90\nHolder temperature (C),25.0,25.1,"
                 "25.0,25.1\nA1,0.10,0.12,0.14,0.16\nA2,0.20,0.21,0.22,0.23\n")
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"] and ts.info["layout"] == "transposed"
    np.testing.assert_allclose(ts.grid().times[0], [0, 30, 60, 90])
    assert ts.info["temperature_K"] == pytest.approx(298.2, abs=0.1)
    assert ts.info["set_aside"] == {"Read #": "index", "Holder temperature (C)": "temperature"}
    assert "Read #" not in ts.info["metadata"]


def test_times_written_with_units_in_the_cells(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Well,0 s,30 s,1 min,1.5 min\nB3,0.1,0.2,0.3,0.4\n")
    np.testing.assert_allclose(read_traces(p).grid().times[0], [0, 30, 60, 90])


@pytest.mark.parametrize("labels", [["Scan 1 at 0:00:00", "Scan 2 at 0:00:30",
                                     "Scan 3 at 0:01:00"], ["Time: 0 s", "Time: 30 s",
                                                            "Time: 1 min"]])
def test_plate_grid_per_read(tmp_path, labels):
    lines = ["Kinetic read, 340 nm", ""]
    for k, label in enumerate(labels):
        lines += [label, "," + ",".join(str(c) for c in range(1, 13))]
        lines += [r + "," + ",".join(f"{0.5 - 0.01 * k * (c + 1):.4f}" if (r, c) != ("H", 11)
                                     else ("OVER" if k == 2 else "2.9") for c in range(12))
                  for r in "ABCDEFGH"]
        lines.append("")
    p = tmp_path / "blocks.csv"
    p.write_text("\n".join(lines) + "\n")
    ts = read_traces(p)
    assert ts.info["layout"] == "plate-blocks" and len(ts) == 96
    assert ts.info["plate_format"] == 96
    np.testing.assert_allclose(ts.grid().times[0], [0, 30, 60])
    np.testing.assert_allclose(ts.grid().values[ts.names.index("A2")], [0.5, 0.48, 0.46])
    assert "overflow" in ts.reading_flags()["H12"]


def test_packaged_samples_equal_sample_runs():
    files = [p for p in SAMPLES.rglob("*") if p.is_file() and p.name != "generate.py"
             and "__pycache__" not in p.parts]
    assert len(files) >= 25
    for p in files:
        assert p.read_bytes() == sample_path(str(p.relative_to(SAMPLES))).read_bytes(), p


# --------------------------------------------------------------------------- header rules

@pytest.mark.parametrize("rule,yes,no", [
    ("temperature", ["Temperature", "Temp (C)", "T [°C]", "T (K)", "plate temp", "deg C",
                     "Kelvin", "Stage °C", "Temperatur"],
     ["Time (s)", "Temps (s)", "A1", "Template", "sample c"]),
    ("time", ["Time", "Time (s)", "time_min", "Zeit [s]", "t", "t [min]", "t/s", "Elapsed",
              "Reading time [min]", "minutes since mixing"],
     ["Temp (C)", "seconds", "min", "A1", "tube 2", "T [°C]", "trace"]),
    ("time-unit-word", ["second", "seconds", "min", "Minutes", "h", "(s)", "hrs"],
     ["Time (s)", "minutes since mixing", "A1", "max"]),
    ("index", ["Cycle", "cycle no.", "Cycle Nr.", "Read #", "read no", "Index", "No.", "#",
               "Step", "n", "Kinetic read"], ["A1", "Reading", "Time", "sample n1"]),
    ("trace-name", ["Well", "well id", "Sample ID", "trace", "Cuvette", "name"],
     ["A1", "Time", "well volume (uL)"]),
    ("value", ["Absorbance", "A340", "OD405", "abs", "%T", "counts", "value", "A (AU)"],
     ["Time (s)", "well", "S0 (uM)"]),
])
def test_header_rules(rule, yes, no):
    from rateabs.io.headers import RULES
    test = next(r for r in RULES if r.name == rule)
    assert [h for h in yes if not test(h)] == []
    assert [h for h in no if test(h)] == []


@pytest.mark.parametrize("header,unit", [("Time (min)", "min"), ("time_min", "min"),
                                         ("t [h]", "h"), ("Time/sec", "s"), ("Zeit", None),
                                         ("Elapsed [ms]", "ms"), ("hours", "h")])
def test_time_unit_named_by_a_header(header, unit):
    assert time_unit_from_header(header) == unit


# --------------------------------------------------------------------------- decisions stated

def test_a_trace_named_like_a_unit_of_time_stays_a_trace(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("Time (s),second,first,min\n0,0.10,0.2,0.05\n10,0.12,0.3,0.06\n"
                 "20,0.14,0.4,0.07\n")
    ts = read_traces(p)
    assert ts.names == ["second", "first", "min"]
    assert ts.info["set_aside"] == {}
    assert sum("'second' is named like a unit of time" in w for w in ts.info["warnings"]) == 1


def test_a_second_time_column_in_its_own_unit_is_set_aside(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("Time (s),minutes,A1\n0,0,0.1\n30,0.5,0.2\n60,1,0.3\n")
    ts = read_traces(p)
    assert ts.names == ["A1"] and ts.info["set_aside"] == {"minutes": "time"}


def test_a_unit_word_first_column_with_rising_values_is_the_time(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("min,A1,A2\n0,0.1,0.2\n0.5,0.2,0.3\n1,0.3,0.4\n")
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"] and ts.info["time_unit"] == "min"
    assert ts.info["time_unit_source"] == "header" and ts.grid().times[0, 2] == 60


def test_a_trace_named_like_a_counter_stays_a_trace(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("Time (s),Step,Cycle,A1\n0,0.31,1,0.1\n10,0.35,2,0.2\n20,0.38,3,0.3\n")
    ts = read_traces(p)
    assert ts.names == ["Step", "A1"] and ts.info["set_aside"] == {"Cycle": "index"}
    assert any("'Step' is named like a counter" in w for w in ts.info["warnings"])


def test_bare_time_that_looks_like_minutes_says_so(tmp_path):
    t = np.arange(30) * 0.5                   # 30 readings, steps of 0.5, last 14.5
    p = tmp_path / "t.csv"
    p.write_text("Time,A1\n" + "".join(f"{x:g},{0.1 + 0.01 * x:.4f}\n" for x in t))
    info = read_traces(p).info
    assert (info["time_unit"], info["time_unit_source"], info["time_looks_like"]) == (
        "s", "assumed", "min")
    text = " ".join(info["warnings"])
    assert "read as seconds (assumed)" in text and "--time-unit min" in text
    assert "step by 0.5 and end at 14.5, which looks like minutes" in text
    stated = read_traces(p, time_unit="min").info
    assert stated["time_unit_source"] == "option" and stated["warnings"] == []


def test_stated_time_unit_beats_the_header_with_a_warning(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Time (s),A1\n0,0.1\n1,0.2\n2,0.3\n")
    ts = read_traces(p, time_unit="min")
    assert ts.grid().times[0, 2] == 120
    assert (ts.info["time_unit"], ts.info["time_unit_source"], ts.info["time_unit_header"]) == (
        "min", "option", "s")
    assert ts.info["warnings"] == ["--time-unit min overrides the header 'Time (s)', which "
                                   "names s"]
    assert read_traces(p, time_unit="s").info["warnings"] == []


def test_stated_time_unit_is_not_used_on_clock_times_and_says_so(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Time,A1\n0:00:00,0.1\n0:00:30,0.2\n0:01:00,0.3\n")
    ts = read_traces(p, time_unit="min")
    assert ts.info["time_unit_source"] == "clock" and ts.grid().times[0, 2] == 60
    assert "--time-unit min is not used" in ts.info["warnings"][0]


def test_facts_from_metadata_lines_name_their_line(tmp_path):
    p = tmp_path / "m.csv"
    p.write_text("Wavelength: 405 nm\nPath length: 5.6 mm\nRead interval: 0.5 min\n"
                 "Time (s),A1\n0,0.1\n30,0.2\n60,0.3\n")
    info = read_traces(p).info
    assert (info["wavelength_nm"], info["pathlength_cm"], info["read_interval_s"]) == (
        405, pytest.approx(0.56), 30)
    assert info["metadata_facts"]["pathlength_cm"] == "Path length: 5.6 mm"


def test_info_records_format_plate_and_sources(tmp_path):
    p = tmp_path / "p.csv"
    wells = [f"{r}{c}" for r in "ABCD" for c in range(1, 7)]
    p.write_bytes(("Zeit;" + ";".join(wells) + "\n" + "".join(
        f"{30 * k};" + ";".join(f"0,{10 + k}" for _ in wells) + "\n" for k in range(4))
                   ).encode("latin-1"))
    info = read_traces(p).info
    assert (info["format"], info["delimiter"], info["decimal"], info["encoding"]) == (
        "semicolon", ";", ",", "utf-8")
    # A1..D6 would fill a 24-well plate, but a kinetic read with no header line naming the
    # plate is taken as part of a 96-well one, and the source says so
    assert (info["plate_format"], info["plate_format_source"]) == (
        96, "well names A1..D6, the smallest of 96/384/1536 wells that holds them")
    assert (info["signal_kind"], info["signal_source"]) == ("absorbance", "assumed")
    assert info["dropped_rows"] == {} and info["file_ends_mid_line"] is False


# --------------------------------------------------------------------------- half-written lines

@pytest.mark.parametrize("tail,why", [("30,0.4", "fewer fields"), ("30,0.4000,0.5", "cut number"),
                                      ("30,0.4000,0.", "cut number")])
def test_half_written_last_line_is_left_out_with_a_note(tmp_path, tail, why):
    p = tmp_path / "torn.csv"
    p.write_text("Time (s),A1,A2\n0,0.1000,0.2000\n10,0.2000,0.3000\n20,0.3000,0.4000\n" + tail)
    ts = read_traces(p)
    assert ts.grid().times.shape[1] == 3, why
    assert ts.info["dropped_rows"]["half-written"]["lines"] == [5]
    assert ts.info["file_ends_mid_line"] is True
    assert any(w.startswith("left out 1 row (line 5)") for w in ts.info["warnings"])


def test_complete_last_line_without_line_end_is_read(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Time (s),A1\n0,0.1000\n10,0.2000\n20,0.3000\n30,0.4000")
    ts = read_traces(p)
    assert ts.grid().values.shape == (1, 4) and ts.info["dropped_rows"] == {}
    assert read_traces(p, partial=True).info["dropped_rows"]["unfinished"]["count"] == 1


@pytest.mark.parametrize("layout", ["wide", "long", "transposed"])
def test_truncated_utf16_export_loses_only_its_torn_line(tmp_path, layout):
    times = np.arange(6) * 10.0
    values = np.array([[0.1, 0.2, 0.3, 0.4, 0.5, 0.6], [0.2, 0.3, 0.4, 0.5, 0.6, 0.7]])
    text = write_table(["A1", "A2"], times, values, layout=layout)
    raw = text.encode("utf-16")
    p = tmp_path / "cut.csv"
    p.write_bytes(raw[:-5])                  # an odd number of bytes: cut inside a character
    ts = read_traces(p)
    assert ts.info["encoding"] == "utf-16" and len(ts.info["dropped_rows"]) == 1
    g = ts.grid()
    assert np.isfinite(g.values).sum() == values.size - (1 if layout == "long" else (
        2 if layout == "wide" else 6))


def test_plate_blocks_with_a_well_missing_from_one_block(tmp_path):
    from helpers import write_plate_blocks
    text = write_plate_blocks([0, 30, 60], np.full((96, 3), 0.2)).splitlines()
    row_h_second = [i for i, ln in enumerate(text) if ln.startswith("H,")][1]
    text.pop(row_h_second)
    p = tmp_path / "b.csv"
    p.write_text("\n".join(text) + "\n")
    ts = read_traces(p)
    assert len(ts) == 96 and ts.reading_flags()["H5"] == ["missing"]
    assert any("12 well(s) are missing from some plate blocks" in w for w in ts.info["warnings"])


def test_a_plate_block_time_without_its_unit_is_refused_saying_so(tmp_path):
    """'Time: 30' above a block: the time is there but not its unit, and the refusal says that
    (it said there was no time)."""
    from helpers import write_plate_blocks

    from rateabs.errors import InputError

    text = write_plate_blocks([0, 30, 60], np.full((96, 3), 0.2))
    assert "elapsed 30 s" in text                  # a label above each block
    p = tmp_path / "b.csv"
    p.write_text(text.replace(" s\n", "\n"))
    with pytest.raises(InputError, match="'0', has no unit"):
        read_traces(p)


# --------------------------------------------------------------------------- large files

def test_a_file_of_many_chunks_reads_like_a_small_one(tmp_path):
    n = 120_000                              # more rows than one chunk and than the head
    t = np.arange(n) * 0.5
    rows = [f"{x:.1f},{0.1 + 1e-6 * k:.6f},{0.2:.4f}" for k, x in enumerate(t)]
    rows[100_000] = f"{t[100_000]:.1f},OVER,0.2"
    p = tmp_path / "big.csv"
    p.write_text("Long read\n" + "x" * 5000 + "\nTime (s),A1,A2\n" + "\n".join(rows) + "\n")
    ts = read_traces(p)
    g = ts.grid()
    assert g.values.shape == (2, n) and g.times[1, -1] == t[-1]
    assert g.values[0, 99_999] == pytest.approx(0.1 + 1e-6 * 99_999)
    assert ts.reading_flags()["A1"] == ["overflow"] and not g.usable[0, 100_000]
    rows[110_000] = f"{t[110_000]:.1f},abc,0.2"
    p.write_text("Time (s),A1,A2\n" + "\n".join(rows) + "\n")
    with pytest.raises(InputError, match="row 110002, column A1: 'abc' is not a reading"):
        read_traces(p)


def test_readings_are_held_once_as_floats(tmp_path):
    p = tmp_path / "p.csv"
    p.write_text("Time (s),A1,A2\n" + "".join(f"{k},{0.1 * k},0.5\n" for k in range(50)))
    ts = read_traces(p)
    g = ts.grid()
    assert g.values.dtype == float and g.flags.dtype == np.int8
    assert g.times.strides[0] == 0           # one row of times shared by every trace
    assert ts.data["time_s"].iloc[50] == 0.0 and len(ts.data) == 100


def test_a_bare_time_column_takes_its_unit_from_the_stated_read_interval(tmp_path):
    # readings every 20 s (common practice: a kinetic read states its interval), written in
    # minutes under a bare 'Time' header: read as minutes and said so, not as seconds (60x)
    t = np.arange(0, 601, 20.0)
    lines = ["Read interval: 20 s", "", "Time,A1"] + [f"{x / 60:.3f},{0.1 + 0.001 * x:.4f}"
                                                      for x in t]
    (tmp_path / "m.csv").write_text("\n".join(lines) + "\n")
    ts = read_traces(tmp_path / "m.csv")
    assert ts.info["time_unit"] == "min" and ts.info["time_unit_source"] == "interval"
    assert ts.grid().times[0][-1] == pytest.approx(600.0, abs=0.1)
    assert any("read interval of 20 s" in w for w in ts.info["warnings"])
    # a stated unit is kept, and a contradicting interval is said
    lines = ["Read interval: 60 s", "", "Time (s),A1"] + [f"{x:g},{0.1 + 0.001 * x:.4f}"
                                                         for x in t]
    (tmp_path / "s.csv").write_text("\n".join(lines) + "\n")
    ts = read_traces(tmp_path / "s.csv")
    assert ts.info["time_unit"] == "s" and ts.grid().times[0][-1] == 600.0
    assert any("read interval of 60 s" in w for w in ts.info["warnings"])


_CELL = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.from_regex(r"[ \t]*[-+]?\d{0,3}[.,]?\d{0,3}([eE][-+]?\d{1,2})?[ \t]*", fullmatch=True),
    st.sampled_from(["", "n/a", "OVER", "1:30", "30 s", "1_0", "1.0\n2", " 2.5\r", "٣"]),
    st.text(max_size=6))


@settings(max_examples=120, deadline=None)
@given(st.lists(_CELL, max_size=12), st.sampled_from(".,"))
def test_column_kinds_equal_the_kind_of_each_cell(cells, decimal):
    # the one-pass recognition of a column of plain numbers never disagrees with cell_kind
    assert column_kinds(cells, decimal) == [cell_kind(c, decimal) for c in cells]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.one_of(_CELL, st.sampled_from(["nan", "inf", "-Infinity", "1_000", "1e5",
                                                  " .5 ", "5.", "1,5", "\u0663", "+-1", "e3"])),
                min_size=1, max_size=12), st.sampled_from(".,"))
def test_a_block_called_plain_numbers_holds_only_numbers(cells, decimal):
    # the whole-column check the reader's sample uses first: never "plain" unless cell_kind
    # calls every cell a number, and plain ASCII numbers always are
    from rateabs.io.values import all_plain_numbers

    if all_plain_numbers(cells, decimal):
        assert all(cell_kind(c, decimal) == "num" for c in cells)
    ascii_nums = [c for c in cells if c.isascii() and cell_kind(c, decimal) == "num"
                  and "\n" not in c and "\r" not in c and "_" not in c]
    if ascii_nums and all(set(c) <= set("0123456789eE+- \t" + decimal) for c in ascii_nums):
        assert all_plain_numbers(ascii_nums, decimal)


_READING = st.one_of(st.floats(-5, 5, allow_nan=False).map(lambda x: f"{x:.4f}"),
                     st.integers(-3, 3).map(str),
                     st.sampled_from(["", "OVER", "inf", "-inf", "nan", "1e400"]))


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.integers(1, 6).flatmap(lambda n: st.lists(
    st.lists(_READING, min_size=n, max_size=n), min_size=3, max_size=8)))
def test_wide_columns_taken_at_once_equal_column_by_column(tmp_path, rows):
    # the wide reader takes every trace column from pandas at once where all are numbers;
    # the readings and flags are those of the column-by-column path, bit for bit
    from rateabs.io import body

    n = len(rows[0])
    lines = ["Time (s)," + ",".join(f"W{j}" for j in range(n))]
    lines += [f"{10 * i}," + ",".join(r) for i, r in enumerate(rows)]
    path = tmp_path / "w.csv"
    path.write_text("\n".join(lines) + "\n")

    def read():
        try:
            return read_traces(path).grid()
        except InputError as e:
            return str(e)

    fast = read()
    block = body.ChunkTable.readings_block
    body.ChunkTable.readings_block = lambda self, js: None
    try:
        slow = read()
    finally:
        body.ChunkTable.readings_block = block
    if isinstance(slow, str):
        assert fast == slow
        return
    for a, b in ((fast.values, slow.values), (fast.usable, slow.usable), (fast.times, slow.times)):
        assert np.array_equal(a, b, equal_nan=True)
    assert np.array_equal(fast.flags, slow.flags)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.floats(0.0, 3.0), min_size=3, max_size=8),
       st.sampled_from(["mAU", "mOD", "mAbs"]), st.sampled_from(["(", "["]),
       st.sampled_from([(".", ","), (",", ";")]))
def test_readings_in_milli_absorbance_after_the_well_name_are_absorbance(tmp_path, a, unit,
                                                                         bracket, style):
    """Trace headers 'A1 (mAU)' and 'B2 (mAU)': the readings are milli-absorbance (1 mAU =
    0.001 AU, common practice), read as absorbance, the names are the wells A1 and B2 again,
    and the run says what it did; they were refused as |A| > 10."""
    decimal, delimiter = style
    close = ")" if bracket == "(" else "]"
    names = [f"A1 {bracket}{unit}{close}", f"B2 {bracket}{unit}{close}"]
    milli = np.array([a, a[::-1]]) * 1000
    p = tmp_path / "m.csv"
    p.write_text(write_table(names, np.arange(len(a)) * 30.0, milli, decimal=decimal,
                             delimiter=delimiter))
    ts = read_traces(p)
    assert list(ts.names) == ["A1", "B2"] and ts.info["plate_format"] == 96
    np.testing.assert_allclose(ts.grid().values, np.array([a, a[::-1]]), atol=1e-6)
    assert any(f"({unit})" in w and "divided by 1000" in w for w in ts.info["warnings"])


def test_a_unit_after_every_name_names_the_signal_and_is_taken_off(tmp_path):
    # published: IUPAC "absorbance", A = -log10 T; 50 %T -> 0.30103
    p = tmp_path / "t.csv"
    p.write_text("Time (s),A1 (%T),A2 (%T)\n0,50,10\n30,50,10\n60,50,10\n")
    ts = read_traces(p)
    assert list(ts.names) == ["A1", "A2"] and ts.info["signal_kind"] == "percent"
    np.testing.assert_allclose(ts.grid().values[:, 0], [0.30103, 1.0], atol=1e-5)
    # names that do not all carry a unit are left as they are
    q = tmp_path / "q.csv"
    q.write_text("Time (s),sample (A),blank\n0,0.5,0.1\n30,0.6,0.1\n60,0.7,0.1\n")
    assert list(read_traces(q).names) == ["sample (A)", "blank"]


def test_a_long_table_whose_readings_column_says_mau_is_read_as_absorbance(tmp_path):
    # 1 mAU = 0.001 AU (common practice)
    p = tmp_path / "l.csv"
    p.write_text("well,time (s),absorbance (mAU)\nA1,0,350\nA1,30,360\nA1,60,370\n"
                 "A2,0,340\nA2,30,341\nA2,60,342\n")
    ts = read_traces(p)
    np.testing.assert_allclose(ts.grid().values, [[0.35, 0.36, 0.37], [0.34, 0.341, 0.342]])
    assert any("readings' column" in w and "divided by 1000" in w for w in ts.info["warnings"])
