"""A catalogue of malformed files: each ends in one clear line and a non-zero exit."""

import pytest
from click.testing import CliRunner

from rateabs.cli import main

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
