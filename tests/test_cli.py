"""The command line end to end with click's test runner."""

import json
from pathlib import Path

from click.testing import CliRunner

from rateabs.cli import main

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"


def test_inspect_json_fields():
    r = CliRunner().invoke(main, ["inspect", str(SAMPLES / "plate_kbdh_340nm.csv"),
                                  "--format", "json"])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    assert set(doc) == {"rateabs_version", "command", "inputs", "settings", "results", "warnings"}
    assert doc["command"] == "inspect"
    s = doc["settings"]
    assert (s["delimiter"], s["decimal"], s["layout"], s["time_unit"], s["signal_kind"]) == (
        ",", ".", "wide", "clock", "absorbance")
    assert s["metadata"]["Wavelength"] == "340 nm"
    res = {x["trace"]: x for x in doc["results"]}
    assert len(res) == 96
    a1 = res["A1"]
    assert set(a1) >= {"trace", "n_points", "t_start_s", "t_end_s", "signal", "A_first", "A_last",
                       "flags"}
    assert a1["n_points"] == 31 and a1["t_end_s"] == 600 and a1["signal"] == "absorbance"
    assert "overflow" in res["H12"]["flags"] and "past-linear" in res["H12"]["flags"]
    assert "Temp (C)" not in res


def test_inspect_table_and_csv_and_out(tmp_path):
    path = SAMPLES / "cuvettes_kbap_405nm_messy.csv"
    r = CliRunner().invoke(main, ["inspect", str(path), "--out", str(tmp_path)])
    assert r.exit_code == 0
    assert "t start (s)" in r.stdout and "K6" in r.stdout and "semicolon" in r.stdout
    assert (tmp_path / "inspect.json").exists() and (tmp_path / "inspect.csv").exists()
    r = CliRunner().invoke(main, ["inspect", str(path), "--format", "csv"])
    assert r.stdout.splitlines()[0] == "trace,n_points,t_start_s,t_end_s,A_first,A_last,flags"


def test_linear_limit_option():
    path = SAMPLES / "cuvettes_kbap_405nm_messy.csv"
    r = CliRunner().invoke(main, ["inspect", str(path), "--format", "json", "--linear-limit",
                                  "1.0"])
    res = {x["trace"]: x for x in json.loads(r.stdout)["results"]}
    assert "past-linear" in res["K6"]["flags"]
    assert "past-linear" not in res["K1"]["flags"]


def test_help_is_fast_and_lazy():
    import subprocess
    import sys
    out = subprocess.run([sys.executable, "-c", "import sys, rateabs.cli; "
                          "print(sorted(m for m in ('pandas','scipy','lmfit','matplotlib') "
                          "if m in sys.modules))"], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"          # no heavy import at start-up


def test_public_api_names_resolve():
    import rateabs

    for name in rateabs.__all__:
        assert getattr(rateabs, name) is not None, name


def test_csv_numbers_are_plain_numbers():
    """numpy 2 writes repr(np.float64(x)) as 'np.float64(x)': CSV cells must be plain numbers."""
    r = CliRunner().invoke(main, ["ratelaw", str(SAMPLES / "process_kestrel_red_probe.csv"),
                                  "--format", "csv", "--no-plots"])
    assert r.exit_code == 0, r.output
    header, row = r.stdout.splitlines()[:2]
    assert "temperature_K" in header and "np." not in row
    # every fitted value carries its uncertainty in the CSV too: the half-life's SE
    assert "half_life_s_se" in header and float(row.split(",")[header.split(",").index(
        "half_life_s_se")]) > 0
    assert float(row.split(",")[header.split(",").index("temperature_K")]) > 273


def test_csv_keeps_the_assumptions_and_warnings_on_stderr():
    """A CSV on stdout has no room for what was assumed: it goes to stderr, as the table's
    header lines and warnings, so a rate resting on an assumed 1 cm pathlength is never
    handed on without a word (a user audit found both dropped)."""
    r = CliRunner().invoke(main, ["rates", str(SAMPLES / "plate_kbdh_340nm.csv"), "--epsilon",
                                  "6220", "--format", "csv", "--no-plots"])
    assert r.exit_code == 0, r.output
    assert r.stdout.startswith("trace,") and "#" not in r.stdout and "warning" not in r.stdout
    assert "# pathlength: 1 cm, assumed" in r.stderr
    assert "warning: the traces are plate wells but no --pathlength" in r.stderr
