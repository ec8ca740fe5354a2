"""Two-part clock times (``a:b``): m:ss or h:mm, decided by --time-unit, the header, the cells or
the stated read interval, and otherwise read as m:ss with a warning; always stated in the
output's time line. Truths: the times written from known minutes, slopes by numpy.polyfit."""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rateabs.cli import main
from rateabs.errors import UsageError
from rateabs.io import read_traces

SLOPE = 0.002          # A/min, the simulated truth


def hhmm_file(path, header="Time", preamble="", seed=9):
    """Readings every 5 min for 3 h written as h:mm, rising SLOPE A/min, seeded noise; the
    times in minutes and the readings."""
    rng = np.random.default_rng(seed)
    minutes = np.arange(0, 181, 5.0)
    a = np.round(0.1 + SLOPE * minutes + rng.normal(0, 5e-4, minutes.size), 5)   # as written
    rows = [f"{int(m) // 60}:{int(m) % 60:02d},{x:.5f}" for m, x in zip(minutes, a, strict=True)]
    path.write_text(preamble + f"{header},A1\n" + "\n".join(rows) + "\n")
    return minutes, a


def cli(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def rates_doc(path, *extra):
    r = cli("rates", path, "--format", "json", "--no-plots", *extra)
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def test_clock_read_as_hours_minutes_with_time_unit_h_gives_the_true_rate(tmp_path):
    p = tmp_path / "hhmm.csv"
    minutes, a = hhmm_file(p)
    doc = rates_doc(p, "--time-unit", "h")
    row = doc["results"][0]
    # reference: numpy.polyfit of the readings on the true times (the window is the whole read)
    ref = np.polyfit(minutes, a, 1)[0]
    assert row["window_end_s"] == pytest.approx(180 * 60)
    assert row["slope_A_per_min"] == pytest.approx(ref, rel=1e-6)
    assert abs(row["slope_A_per_min"] - SLOPE) < 3 * row["slope_A_per_min_se"]
    s = doc["settings"]
    assert (s["clock_reading"], s["clock_reading_source"]) == ("h:mm", "option")
    assert "read as h:mm" in s["time_unit_in_words"]
    assert "--time-unit min" in s["time_unit_in_words"]
    assert not any("two parts" in w for w in doc["warnings"])


def test_default_reading_is_stated_in_the_time_line_and_warned(tmp_path):
    p = tmp_path / "hhmm.csv"
    hhmm_file(p)
    doc = rates_doc(p)
    s = doc["settings"]
    assert (s["clock_reading"], s["clock_reading_source"]) == ("m:ss", "default")
    assert "m:ss (minutes:seconds) by default" in s["time_unit_in_words"]
    assert "--time-unit h" in s["time_unit_in_words"]
    warned = [w for w in doc["warnings"] if "two parts" in w]
    assert len(warned) == 1 and "--time-unit h" in warned[0] and "3 h" in warned[0]
    # read as m:ss the slope is 60 times the truth: the reason the reading is said aloud
    assert doc["results"][0]["slope_A_per_min"] == pytest.approx(60 * SLOPE, rel=0.05)
    table = cli("rates", p, "--no-plots")
    assert table.exit_code == 0
    head = [ln for ln in table.stdout.splitlines() if ln.startswith("# time unit:")]
    assert head and "by default" in head[0] and "--time-unit h" in head[0]
    assert "--time-unit h" in table.stderr


@pytest.mark.parametrize("command", ["rates", "inspect", "completion"])
def test_time_unit_s_on_a_two_part_clock_is_refused_in_one_line(tmp_path, command):
    p = tmp_path / "hhmm.csv"
    hhmm_file(p)
    r = cli(command, p, "--time-unit", "s", "--no-plots")
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.output
    assert lines[0].startswith(f"rateabs: {p}: row 2, column Time: --time-unit s")
    assert "--time-unit h" in lines[0] and "--time-unit min" in lines[0]


def test_time_unit_on_three_part_clocks_is_still_refused(tmp_path):
    p = tmp_path / "hms.csv"
    p.write_text("Time,A1\n0:00:00,0.1\n0:00:30,0.2\n0:01:00,0.3\n")
    r = cli("rates", p, "--time-unit", "h", "--no-plots")
    assert r.exit_code == 2 and "carry their unit" in r.stderr


@pytest.mark.parametrize("header,reading", [
    ("Time (h)", "h:mm"), ("Time [hh:mm]", "h:mm"), ("Clock h:mm", "h:mm"),
    ("Time (min)", "m:ss"), ("Elapsed mm:ss", "m:ss"), ("time_min", "m:ss")])
def test_the_header_says_what_two_parts_mean(tmp_path, header, reading):
    p = tmp_path / "c.csv"
    hhmm_file(p, header=header)
    info = read_traces(p).info
    assert (info["clock_reading"], info["clock_reading_source"]) == (reading, "header")
    end = read_traces(p).grid().times[0, -1]
    assert end == (180 * 60 if reading == "h:mm" else 3 * 60 + 0)
    assert not any("two parts" in w for w in info["warnings"])


@pytest.mark.parametrize("header", ["Time", "Clock", "Time (s)"])
def test_no_evidence_headers_keep_the_default_and_warn(tmp_path, header):
    p = tmp_path / "c.csv"
    hhmm_file(p, header=header)
    info = read_traces(p).info
    assert info["clock_reading_source"] == "default"
    assert any("two parts" in w for w in info["warnings"])


def test_the_option_beats_the_header_with_a_warning(tmp_path):
    p = tmp_path / "c.csv"
    hhmm_file(p, header="Time (h)")
    ts = read_traces(p, time_unit="min")
    assert ts.info["clock_reading"] == "m:ss" and ts.grid().times[0, -1] == 180
    assert any("overrides the header" in w for w in ts.info["warnings"])


def test_a_decimal_second_part_is_seconds(tmp_path):
    p = tmp_path / "c.csv"
    p.write_text("Time,A1\n0:00.0,0.1\n0:30.5,0.2\n1:01.0,0.3\n")
    ts = read_traces(p)
    assert (ts.info["clock_reading"], ts.info["clock_reading_source"]) == ("m:ss", "data")
    np.testing.assert_allclose(ts.grid().times[0], [0, 30.5, 61])


def test_beside_three_part_times_only_the_rising_reading_is_kept(tmp_path):
    p = tmp_path / "c.csv"
    p.write_text("Time,A1\n58:00,0.1\n59:00,0.2\n1:00:00,0.3\n1:01:00,0.4\n")
    ts = read_traces(p)
    assert (ts.info["clock_reading"], ts.info["clock_reading_source"]) == ("m:ss", "data")
    np.testing.assert_allclose(ts.grid().times[0], [3480, 3540, 3600, 3660])


def test_a_stated_read_interval_decides_the_reading(tmp_path):
    p = tmp_path / "c.csv"
    hhmm_file(p, preamble="Read interval: 5 min\n")
    ts = read_traces(p)
    assert (ts.info["clock_reading"], ts.info["clock_reading_source"]) == ("h:mm", "interval")
    assert ts.grid().times[0, -1] == 180 * 60
    assert not any("two parts" in w for w in ts.info["warnings"])


def test_time_unit_s_refused_by_the_reader_names_the_cell(tmp_path):
    p = tmp_path / "c.csv"
    hhmm_file(p)
    with pytest.raises(UsageError, match=r"row 2, column Time: --time-unit s .*'0:00'"):
        read_traces(p, time_unit="s")


def test_plate_blocks_with_two_part_labels_follow_the_option(tmp_path):
    lines = []
    for k in range(3):
        lines += [f"Time {k}:{5 * k:02d}", ",1,2", f"A,{0.1 + k * 0.01},{0.2 + k * 0.01}", ""]
    p = tmp_path / "blocks.csv"
    p.write_text("\n".join(lines) + "\n")
    default = read_traces(p)
    assert default.info["clock_reading_source"] == "default"
    hours = read_traces(p, time_unit="h")
    np.testing.assert_allclose(hours.grid().times[0], [0, 3900, 7800])
    np.testing.assert_allclose(default.grid().times[0], [0, 65, 130])


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.integers(1, 90), min_size=3, max_size=15), st.sampled_from([",", ";", "\t"]))
def test_two_part_clocks_read_by_the_option_property(tmp_path, steps, delimiter):
    """Any rising two-part clock: --time-unit h reads a:b as a h b min, --time-unit min as
    a min b s, and the default is m:ss with the warning; truth from the integers written."""
    units = np.cumsum(steps) - steps[0]                 # minutes (h:mm) or seconds (m:ss)
    cells = [f"{u // 60}:{u % 60:02d}" for u in units]
    p = tmp_path / "prop.csv"
    p.write_text(f"Time{delimiter}A1\n" + "".join(f"{c}{delimiter}{0.1 + 0.001 * i}\n"
                                                  for i, c in enumerate(cells)))
    np.testing.assert_allclose(read_traces(p, time_unit="h").grid().times[0], units * 60.0)
    np.testing.assert_allclose(read_traces(p, time_unit="min").grid().times[0], units * 1.0)
    d = read_traces(p)
    np.testing.assert_allclose(d.grid().times[0], units * 1.0)
    assert d.info["clock_reading_source"] == "default"
    assert sum("two parts" in w for w in d.info["warnings"]) == 1


def test_progress_states_the_time_reading_and_the_reader_warnings(tmp_path):
    from rateabs.io import sample_path

    lines = sample_path("progress_kbap_405nm.csv").read_text().splitlines()
    out = [lines[0], lines[1].replace("time (s)", "time")]
    for ln in lines[2:]:
        c = ln.split(",")
        t = int(float(c[3]))
        c[3] = f"{t // 60}:{t % 60:02d}"
        out.append(",".join(c))
    p = tmp_path / "prog.csv"
    p.write_text("\n".join(out) + "\n")
    r = cli("progress", p, "--s0-column", "S0 (uM)", "--chromophore", "pnp", "--no-plots")
    assert r.exit_code == 0, r.output
    assert r.stdout.startswith("time: s (clock times in column 'time'; two-part times read as "
                               "m:ss")
    assert "--time-unit h" in r.stderr


def test_a_clock_of_the_time_of_day_passing_midnight_is_counted_on(tmp_path):
    """23:50:00 to 00:10:00: the times after midnight are a day later, said in a warning, and
    the rate constant is the simulated one (against numpy.polyfit of ln(A - Ainf) on the true
    seconds); a clock running backwards by less than half a day is still refused."""
    t = np.arange(0, 1201, 30.0)
    a = 0.05 + 0.9 * np.exp(-1.5e-3 * t)
    day = (23 * 3600 + 50 * 60 + t) % 86400
    rows = [f"{int(s // 3600):02d}:{int(s % 3600 // 60):02d}:{int(s % 60):02d},{y:.6f}"
            for s, y in zip(day, a, strict=True)]
    p = tmp_path / "night.csv"
    p.write_text("time,A\n" + "\n".join(rows) + "\n")
    ts = read_traces(p)
    np.testing.assert_allclose(ts.grid().times[0], 85800 + t)
    assert any("passes midnight after 23:59:30" in w for w in ts.info["warnings"])
    r = cli("ratelaw", p, "--order", "1", "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    k = json.loads(r.stdout)["results"][0]["params"]["k"]["value"]
    assert k == pytest.approx(-np.polyfit(t, np.log(a - 0.05), 1)[0], rel=1e-3)
    rows[5], rows[6] = rows[6], rows[5]                      # backwards by 30 s: refused
    p.write_text("time,A\n" + "\n".join(rows) + "\n")
    assert cli("ratelaw", p, "--no-plots").exit_code != 0


def _afternoon_plate(path, start_s=14 * 3600 + 5 * 60):
    """Two wells read every 20 s for 10 min from a wall clock (14:05:00 by default), rising
    0.012 and 0.0006 A/min, seeded noise; the same readings with times from zero are returned
    for comparison."""
    rng = np.random.default_rng(4)
    t = np.arange(0, 601, 20)
    a1 = np.round(0.1 + 0.012 / 60 * t + rng.normal(0, 1e-3, t.size), 5)      # as written
    a2 = np.round(0.1 + 0.0006 / 60 * t + rng.normal(0, 1e-3, t.size), 5)
    clock = [f"{(start_s + s) // 3600}:{(start_s + s) % 3600 // 60:02d}:{(start_s + s) % 60:02d}"
             for s in t]
    path.write_text("Time,A1,A2\n" + "".join(f"{c},{x:.5f},{y:.5f}\n"
                                               for c, x, y in zip(clock, a1, a2, strict=True)))
    return t, a1, a2


def test_rates_on_a_wall_clock_count_from_the_first_reading_and_say_so(tmp_path):
    t, a1, _ = _afternoon_plate(tmp_path / "clock.csv")
    doc = rates_doc(tmp_path / "clock.csv", "--window", "60-300", "--skip-reading", "A1=120")
    s = doc["settings"]
    assert s["time_origin_s"] == 14 * 3600 + 5 * 60               # 14:05:00 in s of the day
    assert "14:05:00" in s["time_origin_in_words"]
    a = doc["results"][0]
    # the window is the read's 60-300 s, reported so, and reading 120 s of A1 is left out:
    # the slope is the least-squares line of those readings (numpy.polyfit)
    assert (a["window_start_s"], a["window_end_s"]) == (60, 300)
    keep = (t >= 60) & (t <= 300) & (t != 120)
    assert a["n_points"] == keep.sum() == 12
    assert a["slope_A_per_min"] == pytest.approx(np.polyfit(t[keep] / 60, a1[keep], 1)[0],
                                                 rel=1e-9)
    text = cli("rates", tmp_path / "clock.csv", "--no-plots").stdout
    assert ("# time origin: times counted from the first usable reading, 14:05:00 on the "
            "file's clock, not from the clock's zero long before it; windows and times shown "
            "are seconds from there\n") in text                  # in plain words, in one line
    assert "0-600" in text and "50700" not in text.split("# time origin")[1].split("\n", 1)[1]


def test_rates_from_a_files_own_zero_say_nothing_of_an_origin(tmp_path):
    t, a1, a2 = _afternoon_plate(tmp_path / "clock.csv", start_s=0)
    doc = rates_doc(tmp_path / "clock.csv")
    assert doc["settings"]["time_origin_s"] == 0
    assert "time origin" not in cli("rates", tmp_path / "clock.csv", "--no-plots").stdout
