"""The reader: round trips through every supported shape, and the sample runs."""

from pathlib import Path

import numpy as np
import pytest
from helpers import write_table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rateabs.io import read_traces, sample_path
from rateabs.photometry import absorbance_from_percent_t

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"


@st.composite
def tables(draw):
    n = draw(st.integers(1, 5))
    m = draw(st.integers(3, 12))      # kinetics needs three time points (two: the catalogue)
    style = draw(st.sampled_from(["s", "min", "h", "hms", "ms"]))
    step = draw(st.sampled_from([1, 15, 30, 60])) if style in ("hms", "ms") else draw(
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


def test_temperature_and_cycle_columns_are_metadata(tmp_path):
    p = tmp_path / "m.csv"
    p.write_text("Cycle,Time [s],Temp. [°C],A1,A2\n1,0,30.1,0.1,0.2\n2,30,30.0,0.2,0.3\n"
                 "3,60,29.9,0.3,0.4\n")
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"]
    assert ts.info["temperature_K"] == pytest.approx(303.15)
    assert set(ts.info["extra_columns"]) == {"Cycle", "Temp. [°C]"}


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
    ws.append(["Time", "T° read", "A1", "A2"])
    for k in range(5):
        ws.append([dt.time(0, k // 2, (k % 2) * 30), 25.0, 0.1 + 0.01 * k, "OVER" if k == 2 else 0.2])
    p = tmp_path / "plate.xlsx"
    wb.save(p)
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"]
    np.testing.assert_allclose(ts.grid().times[0], [0, 30, 60, 90, 120])
    assert ts.info["format"] == "xlsx"
    assert ts.data.loc[ts.data["trace"] == "A2", "flag"].tolist()[2] == "overflow"


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


def test_transposed_with_cycle_time_and_temperature_rows(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Cycle Nr.,1,2,3,4\nTime [s],0,30,60,90\nTemp. [°C],25.0,25.1,25.0,25.1\n"
                 "A1,0.10,0.12,0.14,0.16\nA2,0.20,0.21,0.22,0.23\n")
    ts = read_traces(p)
    assert ts.names == ["A1", "A2"] and ts.info["layout"] == "transposed"
    np.testing.assert_allclose(ts.grid().times[0], [0, 30, 60, 90])
    assert ts.info["temperature_K"] == pytest.approx(298.2, abs=0.1)


def test_times_written_with_units_in_the_cells(tmp_path):
    p = tmp_path / "t.csv"
    p.write_text("Well,0 s,30 s,1 min,1.5 min\nB3,0.1,0.2,0.3,0.4\n")
    np.testing.assert_allclose(read_traces(p).grid().times[0], [0, 30, 60, 90])


@pytest.mark.parametrize("labels", [["Read 1, time 0:00:00", "Read 2, time 0:00:30",
                                     "Read 3, time 0:01:00"], ["Time: 0 s", "Time: 30 s",
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
    np.testing.assert_allclose(ts.grid().times[0], [0, 30, 60])
    np.testing.assert_allclose(ts.grid().values[ts.names.index("A2")], [0.5, 0.48, 0.46])
    assert "overflow" in ts.reading_flags()["H12"]


def test_packaged_samples_equal_sample_runs():
    files = [p for p in SAMPLES.rglob("*") if p.is_file() and p.name != "generate.py"
             and "__pycache__" not in p.parts]
    assert len(files) >= 25
    for p in files:
        assert p.read_bytes() == sample_path(str(p.relative_to(SAMPLES))).read_bytes(), p
