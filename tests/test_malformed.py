"""A catalogue of malformed files: each ends in one clear line and a non-zero exit."""

import functools
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from helpers import mutate, seed_exports
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rateabs.cli import main
from rateabs.errors import InputError
from rateabs.io import read_traces
from rateabs.traces import TraceSet

GOOD = "Time (s),A1,A2\n0,0.10,0.20\n10,0.11,0.21\n20,0.12,0.22\n"

# name -> (file name, bytes, words the message must hold)
CASES = {
    "empty": ("e.csv", b"", "empty"),
    "blank lines only": ("b.csv", b"\n\n  \n", "empty"),
    "header only": ("h.csv", b"Time (s),A1,A2\n", "no numeric data"),
    "binary": ("bin.csv", bytes(range(256)) * 8, "binary"),
    "non-monotonic times": ("nm.csv", b"Time (s),A1\n0,0.1\n20,0.2\n10,0.3\n", "backwards"),
    "duplicated times": ("dup.csv", b"Time (s),A1\n0,0.1\n10,0.2\n10,0.3\n", "twice"),
    "text in values": ("txt.csv", b"Time (s),A1\n0,0.1\n10,abc\n20,0.3\n", "'abc' is not a reading"),
    "one point": ("one.csv", b"Time (s),A1\n0,0.1\n", "only one time point"),
    "ragged row": ("rag.csv", b"Time (s),A1,A2\n0,0.1,0.2\n10,0.2,0.3,0.4\n20,0.3,0.4\n",
                   "fields but the header has"),
    "short row": ("short.csv", b"Time (s),A1,A2\n0,0.1,0.2\n10,0.2\n20,0.3,0.4\n",
                  "fields but the header has"),
    "no time column": ("nt.csv", b"A1,A2\n0.1,0.2\n0.2,0.3\n0.3,0.4\n", "no time column"),
    "all-missing trace": ("miss.csv", b"Time (s),A1\n0,\n10,NaN\n20,\n", "no usable readings"),
    "all overflow": ("inf.csv", b"Time (s),A1\n0,inf\n10,inf\n20,OVER\n", "no usable readings"),
    "absurd magnitude": ("big.csv", b"Time (s),A1\n0,0.1\n10,1e30\n20,0.3\n", "not plausible"),
    "xlsx that is text": ("fake.xlsx", GOOD.encode(), "not an Excel workbook"),
    "old xls": ("old.xls", b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 500, ".xls"),
    "text in time": ("tt.csv", b"Time (s),A1\n0,0.1\nten,0.2\n20,0.3\n", "is not a time"),
    "missing time": ("mt.csv", b"Time (s),A1\n0,0.1\n,0.2\n20,0.3\n", "time is empty"),
    "duplicate trace names": ("dn.csv", b"Time (s),A1,A1\n0,0.1,0.2\n10,0.2,0.3\n",
                              "appears twice"),
    "unnamed data column": ("un.csv", b"Time (s),A1,\n0,0.1,0.2\n10,0.2,0.3\n", "no name"),
    "only a time column": ("ot.csv", b"Time (s),Temperature\n0,25\n10,25\n20,25\n",
                           "no trace columns"),
    "mixed clock and numbers": ("mix.csv", b"Time,A1\n0:00:00,0.1\n10,0.2\n0:00:20,0.3\n",
                                "mixes with clock times"),
    "single column": ("sc.csv", b"0.1\n0.2\n0.3\n", "single field"),
    "intensity without I0": ("i.csv", b"Time (s),counts A1\n0,100\n10,90\n20,80\n", "I0"),
    "long layout without values": ("lv.csv", b"well,Time (s)\nA1,0\nA1,10\nA2,0\n",
                                   "no value column"),
    "plate block without a time": ("pb.csv", b"Plate export\nfirst read\n,1,2,3\nA,0.1,0.2,0.3\n"
                                   b"B,0.1,0.2,0.3\n\nnext read\n,1,2,3\nA,0.2,0.3,0.4\n"
                                   b"B,0.2,0.3,0.4\n", "no time in the line above"),
    "plate blocks out of order": ("po.csv", b"Time: 30 s\n,1,2\nA,0.1,0.2\n\nTime: 0 s\n,1,2\n"
                                  b"A,0.2,0.3\n", "backwards"),
    "long layout duplicate times": ("ld.csv", b"well,Time (s),absorbance\nA1,0,0.1\nA1,0,0.2\n"
                                    b"A2,0,0.3\n", "twice in trace A1"),
    "two readings": ("two.csv", b"Time (s),A1,A2\n0,0.1,0.2\n10,0.2,0.3\n", "only two time points"),
    "truncated UTF-16 export": ("u16.csv", "Time (s),A1\n0,0.1\n10,0.2\n20,0.3\n".encode(
        "utf-16")[:-3], "only two time points"),
    "superscript in a column-number row": (
        "sup.csv", "Time: 0 s\n,1,2,3\nA,0.1,0.2,0.3\n\nTime: 30 s\n,1,2,3\u00b2\nA,0.2,0.3,0.4\n"
        .encode(), "number the columns 1, 2, 3"),
    "a 140,000-digit column number": (
        "hb.csv", b"Time: 0 s\n,1,2\nA,0.1,0.2\n\nTime: 30 s\n,1," + b"7" * 140_000 + b"\nA,0.2,0.3\n"
        b"\nTime: 60 s\n,1,2\nA,0.3,0.4\n", "number the columns 1, 2, 3"),
    "plate row without its column row": (
        "nc.csv", b"Time: 0 s\n,1,2\nA,0.1,0.2\n\nTime: 30 s\n,1,2\nA,0.2,0.3\n\nTime: 60 s\n"
        b"A,0.3,0.4\n", "no row of column numbers above it"),
    "plate row twice in a block": ("pr.csv", b"Time: 0 s\n,1,2\nA,0.1,0.2\nA,0.1,0.2\n\nTime: 30 s"
                                   b"\n,1,2\nA,0.2,0.3\n", "row A appears twice"),
    "I0 line without a number": ("i0.csv", b"I0: n/a\nTime (s),counts A1\n0,100\n10,90\n20,80\n",
                                 "gives no number for the reference intensity"),
    "field over 128 kB": ("lf.csv", b"Time (s),A1\n0,0.1\n10," + b"7" * 140_000 + b"x\n20,0.3\n",
                          "is not a reading"),
    "quoted field over 128 kB": ("qf.csv", b'Time (s),A1\n0,0.1\n10,"' + b"7" * 140_000 + b'"\n'
                                 b"20,0.3\n", "cannot be split into fields"),
    "time of 1e308": ("t308.csv", b"Time (s),A1\n0,0.1\n10,0.2\n1e308,0.3\n", "not plausible"),
    "time of 1e308 minutes": ("tmin.csv", b"Time (min),A1\n0,0.1\n1,0.2\n1e307,0.3\n",
                              "not plausible"),
    "time inf": ("tinf.csv", b"Time (s),A1\n0,0.1\n10,0.2\ninf,0.3\n", "time inf s is not plausible"),
    "all masked by markers": ("am.csv", b"Time (s),A1,A2\n0,OVER,n/a\n10,sat,-\n20,****,\n",
                              "no usable readings"),
}

# name -> (file name, bytes, words of a warning, or ""): read, any damage flagged (exit 0)
FLAGGED = {
    "half-written last line": ("hw.csv", b"Time (s),A1,A2\n0,0.1,0.2\n10,0.2,0.3\n20,0.3,0.4\n"
                               b"30,0.4", "left out 1 row (line 5)"),
    "truncated UTF-16 export, longer": (
        "u16.csv", "Time (s),A1\n0,0.1\n10,0.2\n20,0.3\n30,0.4\n".encode("utf-16")[:-3],
        "left out 1 row (line 5)"),
    "a trace with two readings among good ones": (
        "few.csv", b"Time (s),A1,A2\n0,0.1,0.2\n10,0.2,0.3\n20,,0.4\n30,,0.5\n",
        "1 trace(s) have fewer than 3 usable readings (A1)"),
    "a well missing from one plate block": (
        "wb.csv", b"Time: 0 s\n,1,2\nA,0.1,0.2\nB,0.1,0.2\n\nTime: 30 s\n,1,2\nA,0.2,0.3\n\n"
        b"Time: 60 s\n,1,2\nA,0.3,0.4\nB,0.3,0.4\n", "missing from some plate blocks"),
    "a trace named like a unit of time": ("sec.csv", b"Time (s),second\n0,0.1\n10,0.2\n20,0.3\n",
                                          "'second' is named like a unit of time"),
    "a bare time column": ("bare.csv", b"Time,A1\n0,0.1\n10,0.2\n20,0.3\n",
                           "read as seconds (assumed)"),
    "a second section after the table": ("sec2.csv", b"Time (s),A1\n0,0.1\n10,0.2\n20,0.3\n\n"
                                          b"Summary\nslope,0.01\n", "left out 2 rows"),
    "a metadata line over 128 kB": ("ml.csv", b"Note: " + b"x" * 140_000 + b"\nTime (s),A1\n0,0.1\n"
                                    b"10,0.2\n20,0.3\n", ""),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_malformed_file_gives_one_clear_line(tmp_path, case):
    name, content, words = CASES[case]
    path = tmp_path / name
    path.write_bytes(content)
    result = CliRunner().invoke(main, ["inspect", str(path)])
    assert result.exit_code == 3, (case, result.output)
    msg = result.stderr.strip() if hasattr(result, "stderr") else result.output.strip()
    lines = msg.splitlines()
    assert len(lines) == 1, msg
    assert lines[0].startswith(f"rateabs: {path}"), msg
    assert words in lines[0], msg
    assert "Traceback" not in result.output
    assert path.read_bytes() == content           # the input is never written


@pytest.mark.parametrize("case", sorted(FLAGGED))
def test_damage_that_can_be_read_is_flagged(tmp_path, case):
    name, content, words = FLAGGED[case]
    path = tmp_path / name
    path.write_bytes(content)
    result = CliRunner().invoke(main, ["inspect", str(path)])
    assert result.exit_code == 0, (case, result.output)
    lines = result.stderr.strip().splitlines()
    assert all(ln.startswith("warning: ") for ln in lines), lines
    assert not words or any(words in ln for ln in lines), lines
    assert path.read_bytes() == content


@pytest.mark.parametrize("command,table,option,content,words", [
    ("rates", "map.csv", "--layout", b"well,role,role\nA1,blank,sample\n", "'role' appears twice"),
    ("rates", "map.csv", "--layout", b"well,,role\nA1,x,blank\n", "no name in the header"),
    ("rates", "map.csv", "--layout", b"well,role,exclude\nA1,blank,excluded\n",
     "exclude 'excluded' is neither yes nor no"),
])
def test_bad_side_tables_give_one_clear_line(tmp_path, command, table, option, content, words):
    data = tmp_path / "g.csv"
    data.write_text(GOOD)
    side = tmp_path / table
    side.write_bytes(content)
    result = CliRunner().invoke(main, [command, str(data), option, str(side), "--no-plots"])
    assert result.exit_code == 3, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"rateabs: {side}") and words in lines[0], lines


@pytest.mark.parametrize("content,words", [
    (b"S (uM),v (uM/min),v (uM/min)\n1,0.1,0.1\n2,0.2,0.2\n", "appears twice"),
    (b"S (uM),v (uM/min)\n1,0.1\n2,inf\n4,0.3\n8,0.35\n", "not a finite number"),
])
def test_bad_rate_tables_give_one_clear_line(tmp_path, content, words):
    table = tmp_path / "rates.csv"
    table.write_bytes(content)
    result = CliRunner().invoke(main, ["saturation", str(table), "--no-plots"])
    assert result.exit_code == 3, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"rateabs: {table}") and words in lines[0], lines


def test_row_and_column_named(tmp_path):
    path = tmp_path / "txt.csv"
    path.write_bytes(b"Note: x\nTime (s),A1,B2\n0,0.1,0.2\n10,0.2,bad\n")
    result = CliRunner().invoke(main, ["inspect", str(path)])
    assert "row 4, column B2" in result.output


def test_missing_file_and_folder(tmp_path):
    r = CliRunner().invoke(main, ["inspect", str(tmp_path / "nope.csv")])
    assert r.exit_code == 3 and "no such file" in r.output
    r = CliRunner().invoke(main, ["inspect", str(tmp_path)])
    assert r.exit_code == 3 and "folder" in r.output


def test_usage_error_exit_code(tmp_path):
    path = tmp_path / "g.csv"
    path.write_text(GOOD)
    r = CliRunner().invoke(main, ["inspect", str(path), "--time-unit", "weeks"])
    assert r.exit_code == 2


def test_debug_shows_traceback(tmp_path):
    path = tmp_path / "e.csv"
    path.write_bytes(b"")
    r = CliRunner().invoke(main, ["--debug", "inspect", str(path)])
    assert r.exit_code != 0 and r.exception is not None


# --------------------------------------------------------------------------- fuzzing

@functools.lru_cache(maxsize=1)
def _seeds() -> list[tuple[str, bytes]]:
    samples = Path(__file__).resolve().parents[1] / "sample_runs"
    return seed_exports(np.random.default_rng(7)) + [
        (p.name, p.read_bytes()) for p in sorted(samples.glob("*.[ct]sv"))]


@settings(max_examples=300, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(pick=st.integers(0, 10_000), seed=st.integers(0, 2**32 - 1), n=st.integers(1, 3))
def test_mutated_exports_read_or_give_one_line(tmp_path, pick, seed, n):
    """Seeded fuzzing (benchmarks/fuzz_reader.py runs 100,000 such cases): whatever the
    damage, the reader returns a TraceSet or raises InputError, and ``inspect`` exits 0 with
    warnings only, or 3 with one line naming the file."""
    name, data = _seeds()[pick % len(_seeds())]
    bad, done = mutate(np.random.default_rng(seed), data, n)
    path = tmp_path / f"fuzz{Path(name).suffix}"
    path.write_bytes(bad)
    try:
        assert isinstance(read_traces(path), TraceSet)
    except InputError as exc:
        assert "\n" not in str(exc), done
    result = CliRunner().invoke(main, ["inspect", str(path)])
    assert result.exit_code in (0, 3), (done, result.output)
    lines = result.stderr.strip().splitlines()
    if result.exit_code == 3:
        assert len(lines) == 1 and lines[0].startswith(f"rateabs: {path}"), (done, lines)
    else:
        assert all(ln.startswith("warning: ") for ln in lines), (done, lines)
