"""Many plates in one command (issue 15): ``rates FILE...`` over files, folders and patterns, one
map per plate by name, a failing file that costs only itself, the same numbers serially, on local
processes and on a Dask cluster, rows streamed as they arrive, and ``saturation --each``.

Ground truth: plates simulated here from stated slopes (numpy, seeded; straight lines plus
Gaussian noise), and Michaelis–Menten rates from tests/kinetics_truth.py (typed from
Cornish-Bowden 2012), independent of the code under test. The slopes are read with a fixed
window over the whole read (``--window 0-600``), so that these checks are about the many-file
machinery (each number back to its own file, map and place) and not about the window search.
"""

from __future__ import annotations

import json
import os
import pickle
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import v_competitive

from rateabs.batch import expand, maps_for, natural_key
from rateabs.cli import main
from rateabs.errors import SOME_FAILED, InputError, UsageError
from rateabs.files import MANIFEST, TMP_SUFFIX
from rateabs.options import RatesOptions
from rateabs.output import to_json
from rateabs.simulate import first_order_class
from rateabs.views import batch as views_batch

EPS = 6220.0                      # M^-1 cm^-1, the value given on the command line below
TIMES = np.arange(0, 601, 10.0)   # s
WELLS = [f"{r}{c}" for r in "ABCDEFGH" for c in range(1, 13)]
SUBSTRATE_UM = [10, 15, 20, 40, 60, 80, 120, 160, 240, 320, 480]   # columns 1-11; 12 is blank
FIXED = ["--window", "0-600", "--epsilon", str(EPS), "--pathlength", "1 cm"]


def write_plate(path: Path, slopes_per_min: dict, seed: int, noise: float = 0.0005) -> None:
    """A 96-well kinetic read, wells as columns: A = 0.1 + slope t + N(0, noise)."""
    rng = np.random.default_rng(seed)
    cols = [0.1 + slopes_per_min[w] * TIMES / 60 + rng.normal(0, noise, TIMES.size)
            for w in WELLS]
    lines = ["time (s)," + ",".join(WELLS)]
    lines += [f"{t:g}," + ",".join(f"{c[k]:.5f}" for c in cols) for k, t in enumerate(TIMES)]
    path.write_text("\n".join(lines) + "\n")


def screen_plate(folder: Path, stem: str, samples: list[tuple[str, float, float]],
                 seed: int) -> dict:
    """Plate STEM.csv and its map STEM_map.csv: rows A-D one sample, E-H another, each across
    11 substrate levels with Michaelis–Menten rates (V uM/min, Km uM), column 12 blanks.
    Returns the true slope (A/min) of every well."""
    truth, rows = {}, ["well,role,sample,substrate_uM"]
    for w in WELLS:
        name, vmax, km = samples["ABCDEFGH".index(w[0]) // 4]
        col = int(w[1:])
        if col == 12:
            truth[w] = 0.0
            rows.append(f"{w},blank,,")
            continue
        s = SUBSTRATE_UM[col - 1]
        # Beer–Lambert: A/min = v (mol/L/min) x epsilon x 1 cm
        truth[w] = v_competitive(s, 0.0, vmax, km, 1.0) * 1e-6 * EPS
        rows.append(f"{w},sample,{name},{s}")
    write_plate(folder / f"{stem}.csv", truth, seed)
    (folder / f"{stem}_map.csv").write_text("\n".join(rows) + "\n")
    return truth


SCREEN = {"P1": [("E1", 40.0, 50.0), ("E2", 25.0, 150.0)],
          "P2": [("E3", 60.0, 25.0), ("E4", 20.0, 300.0)],
          "P10": [("E5", 35.0, 80.0), ("E6", 30.0, 200.0)]}


@pytest.fixture(scope="module")
def screen(tmp_path_factory):
    """Three plates with their own maps, side by side in one folder; the truth per file."""
    folder = tmp_path_factory.mktemp("screen")
    truth = {stem: screen_plate(folder, stem, samples, seed)
             for seed, (stem, samples) in enumerate(SCREEN.items())}
    return folder, truth


def invoke(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def rates_json(*args) -> tuple[dict, int]:
    r = invoke("rates", *args, "--format", "json")
    assert r.exit_code in (0, SOME_FAILED), r.output
    return json.loads(r.stdout), r.exit_code


# --------------------------------------------------------------------------- which files


def test_folder_files_in_natural_order_maps_and_earlier_outputs_left_out(tmp_path):
    for name in ("p10.csv", "p2.csv", "p1.xlsx", "p2_map.csv", "notes.md", ".hidden.csv",
                 "rates.csv"):
        (tmp_path / name).write_text("x")
    (tmp_path / "sub").mkdir()
    (tmp_path / MANIFEST).write_text(json.dumps({"format": "rateabs-manifest/1",
                                                 "files": [{"name": "rates.csv"}]}))
    got = expand([str(tmp_path)])
    assert [Path(f).name for f in got.files] == ["p1.xlsx", "p2.csv", "p10.csv"]
    assert all(f.startswith(str(tmp_path) + os.sep) for f in got.files)   # named as given
    left = " ".join(got.left_out)
    assert "p2_map.csv (a plate map" in left and "notes.md (not a data file" in left
    assert "rates.csv (written by an earlier rateabs run)" in left


def test_patterns_and_repeats(tmp_path):
    for name in ("b2.csv", "b1.csv", "a.tsv", "b1_map.csv"):
        (tmp_path / name).write_text("x")
    pattern = str(tmp_path / "b*.csv")
    got = expand([pattern, str(tmp_path / "b1.csv"), str(tmp_path / "a.tsv")])
    assert [Path(f).name for f in got.files] == ["b1.csv", "b2.csv", "a.tsv"]
    assert len(got.notes) == 1 and "analysed once" in got.notes[0]
    assert natural_key("plate2") < natural_key("plate10")


@pytest.mark.parametrize("what", ["empty folder", "pattern"])
def test_a_folder_or_pattern_without_data_files_is_refused(tmp_path, what):
    arg = str(tmp_path) if what == "empty folder" else str(tmp_path / "*.csv")
    with pytest.raises(UsageError, match="names no data file"):
        expand([arg])


def test_maps_by_name_missing_ambiguous_and_spare(tmp_path):
    maps = tmp_path / "maps"
    maps.mkdir()
    for name in ("P1_map.csv", "P2_map.xlsx", "P9_map.csv"):
        (maps / name).write_text("x")
    files = ("runs/P1.csv", "runs/P2.csv", "runs/P3.csv")
    found, notes = maps_for(files, str(maps))
    assert found[:2] == [str(maps / "P1_map.csv"), str(maps / "P2_map.xlsx")]
    assert isinstance(found[2], InputError) and "P3_map.csv" in found[2].one_line()
    assert notes == [f"1 map(s) in {maps} match no plate: P9_map.csv"]
    assert maps_for(files, "one_map.csv")[0] == ["one_map.csv"] * 3
    (maps / "P1_map.tsv").write_text("x")
    with pytest.raises(UsageError, match="2 maps"):
        maps_for(files, str(maps))
    with pytest.raises(UsageError, match="same name P2"):
        maps_for(("a/P2.csv", "b/P2.csv"), str(maps))


# --------------------------------------------------------------------------- the combined table


def test_rows_carry_their_file_and_known_slopes_come_back_within_3_percent(screen):
    folder, truth = screen
    doc, code = rates_json(folder, "--layout", folder, "--jobs", "1", *FIXED)
    assert code == 0
    files = [f"{folder}{os.sep}{stem}.csv" for stem in ("P1", "P2", "P10")]   # natural order
    assert [r["file"] for r in doc["results"]] == [f for f in files for _ in WELLS]
    samples = [r for r in doc["results"] if r["role"] == "sample"]
    assert len(samples) == 3 * 88
    for r in samples:
        want = truth[Path(r["file"]).stem][r["trace"]]
        assert r["slope_A_per_min"] == pytest.approx(want, rel=0.03), (r["file"], r["trace"])
    # each plate read its own map: its own sample names
    for stem, pair in SCREEN.items():
        names = {r["sample"] for r in samples if Path(r["file"]).stem == stem}
        assert names == {pair[0][0], pair[1][0]}
    plates = doc["settings"]["plates"]
    assert [p["layout"] for p in plates] == [str(folder / f"{s}_map.csv") for s in SCREEN]
    assert all(p["status"] == "ok" and p["settings"]["blank"]["wells"] for p in plates)


def test_a_failing_file_costs_only_that_file(screen, tmp_path):
    folder, _ = screen
    broken = tmp_path / "P5.csv"
    broken.write_text("time (s),A1\n")                     # a header and no readings
    args = [folder / "P1.csv", broken, tmp_path / "gone.csv", folder / "P2.csv"]
    doc, code = rates_json(*args, "--layout", folder / "P1_map.csv", *FIXED)
    assert code == SOME_FAILED
    by_file = {}
    for r in doc["results"]:
        by_file.setdefault(r["file"], []).append(r)
    assert list(by_file) == [str(a) for a in args]             # the order as given
    assert len(by_file[str(folder / "P1.csv")]) == 96 == len(by_file[str(folder / "P2.csv")])
    for bad in (broken, tmp_path / "gone.csv"):
        (row,) = by_file[str(bad)]
        assert row["error"].startswith(str(bad)) and "\n" not in row["error"]
    status = [(p["status"], p["exit_code"]) for p in doc["settings"]["plates"]]
    assert status == [("ok", None), ("failed", 3), ("failed", 3), ("ok", None)]
    assert sum(w.startswith(str(broken)) for w in doc["warnings"]) == 1
    r = invoke("rates", *args, "--layout", folder / "P1_map.csv", *FIXED)  # the person's table
    assert r.exit_code == SOME_FAILED
    assert "2 of 4 file(s) failed (their rows say why)" in r.stderr
    assert "Traceback" not in r.output


def test_a_plate_without_its_map_fails_alone(screen, tmp_path):
    folder, _ = screen
    lone = tmp_path / "P7.csv"
    lone.write_bytes((folder / "P1.csv").read_bytes())
    doc, code = rates_json(folder / "P1.csv", lone, "--layout", folder, *FIXED)
    assert code == SOME_FAILED
    assert [p["status"] for p in doc["settings"]["plates"]] == ["ok", "failed"]
    assert "no plate map P7_map.csv" in doc["results"][-1]["error"]


def test_the_json_document_is_what_to_json_writes_and_the_csv_has_fixed_columns(screen,
                                                                                tmp_path):
    folder, _ = screen
    out = tmp_path / "out"
    r = invoke("rates", folder, "--layout", folder, "--format", "json", "--out", out, *FIXED)
    assert r.exit_code == 0, r.output
    assert to_json(json.loads(r.stdout)) == r.stdout == (out / "rates.json").read_text()
    csv_lines = (out / "rates.csv").read_text().splitlines()
    assert csv_lines[0] == ",".join(views_batch.CSV_FIELDS) and len(csv_lines) == 1 + 3 * 96
    assert (out / "rates_files.csv").read_text().count("\n") == 4
    assert not list(out.glob(f"*{TMP_SUFFIX}"))
    manifest = json.loads((out / MANIFEST).read_text())
    assert manifest["status"] == "complete"
    assert {f["name"] for f in manifest["files"]} == {"rates.json", "rates.csv",
                                                      "rates_files.csv",
                                                      "rates_replicates.csv"}


def test_rows_are_written_as_each_file_arrives_and_never_half(screen, tmp_path, monkeypatch):
    folder, _ = screen
    events = []
    real = views_batch.rates_of_file

    def spy(o):
        events.append(("analyse", Path(o.file).stem))
        return real(o)

    def echo(text="", nl=True, err=False):
        if not err and not text.startswith("file,"):
            events.append(("csv", Path(text.split(",", 1)[0]).stem))

    monkeypatch.setattr(views_batch, "rates_of_file", spy)
    o = RatesOptions.build(file=str(folder), layout_file=str(folder), jobs=1, fmt="csv",
                           window="0-600")
    views_batch.run_plates(views_batch.plan_plates(o), echo)
    # the CSV of a file is out before the next file is analysed (a serial run shows it)
    assert events == [("analyse", "P1"), ("csv", "P1"), ("analyse", "P2"), ("csv", "P2"),
                      ("analyse", "P10"), ("csv", "P10")]

    def stop(text="", nl=True, err=False):           # Ctrl-C after the first file's rows
        if "P2.csv" in text:
            raise KeyboardInterrupt

    out = tmp_path / "out"
    o = RatesOptions.build(file=str(folder), layout_file=str(folder), jobs=1, fmt="csv",
                           window="0-600", out=str(out))
    with pytest.raises(KeyboardInterrupt):
        views_batch.run_plates(views_batch.plan_plates(o), stop)
    assert sorted(p.name for p in out.iterdir()) == sorted([MANIFEST, ".rateabs.lock"])
    assert json.loads((out / MANIFEST).read_text())["status"] == "interrupted"


def test_workers_get_paths_and_settings_not_the_readings(screen):
    folder, _ = screen
    plan = views_batch.plan_plates(RatesOptions.build(file=str(folder), layout_file=str(folder)))
    for path, task in zip(plan.inputs.files, plan.tasks, strict=True):
        payload = pickle.dumps((views_batch.rates_of_file, task))
        data = Path(path).read_bytes()
        assert path.encode() in payload and data.splitlines()[7] not in payload
        assert len(payload) < len(data) / 4


# --------------------------------------------------------------------------- one file


def test_one_file_refuses_jobs_and_scheduler_and_takes_its_map_from_a_folder(screen):
    folder, _ = screen
    for flag, value in (("--jobs", "2"), ("--scheduler", "tcp://127.0.0.1:8786")):
        r = invoke("rates", folder / "P2.csv", flag, value)
        assert r.exit_code == 2 and f"{flag} shares out the files" in r.stderr
    one = invoke("rates", folder / "P2.csv", "--layout", folder, "--format", "json", *FIXED)
    assert one.exit_code == 0, one.output
    doc = json.loads(one.stdout)
    assert "file" not in doc["results"][0] and doc["settings"]["layout"] == str(
        folder / "P2_map.csv")


def test_without_distributed_the_scheduler_says_how_to_install(screen, monkeypatch):
    folder, _ = screen
    monkeypatch.setitem(sys.modules, "distributed", None)        # as if not installed
    r = invoke("rates", folder, "--scheduler", "tcp://127.0.0.1:8786")
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and 'pip install ".[cluster]"' in lines[0]


def test_jobs_and_scheduler_together_are_refused(screen):
    folder, _ = screen
    for cmd in (["rates", folder], ["grade", folder, "--rubric", "r.toml"]):
        r = invoke(*cmd, "--jobs", "2", "--scheduler", "tcp://127.0.0.1:8786")
        assert r.exit_code == 2 and "--jobs and --scheduler were both given" in r.stderr


# --------------------------------------------------------------------------- Dask


def _same_numbers(doc: dict) -> dict:
    """What must not depend on where the work ran: everything but ``settings.ran_on``."""
    settings = {k: v for k, v in doc["settings"].items() if k != "ran_on"}
    return {**doc, "settings": settings}


@pytest.mark.xdist_group("dask")          # one cluster for the session
def test_serial_two_processes_and_dask_give_identical_documents(screen, tmp_path,
                                                                  dask_scheduler):
    folder, _ = screen
    broken = tmp_path / "P11.csv"
    broken.write_text("not, a plate\n1,2\n")
    args = [folder / "P1.csv", folder / "P10.csv", broken, "--layout", folder, *FIXED]
    serial, c1 = rates_json(*args, "--jobs", "1")
    local, c2 = rates_json(*args, "--jobs", "2")
    dask, c3 = rates_json(*args, "--scheduler", dask_scheduler)
    assert c1 == c2 == c3 == SOME_FAILED
    assert [d["settings"]["ran_on"] for d in (serial, local, dask)] == [
        "serial (this process)", "2 local processes", f"Dask cluster at {dask_scheduler}"]
    assert to_json(_same_numbers(serial)) == to_json(_same_numbers(local)) == to_json(
        _same_numbers(dask))


@pytest.mark.xdist_group("dask")          # one cluster for the session
def test_grade_runs_on_the_scheduler_too(tmp_path, dask_scheduler):
    folder = first_order_class(tmp_path / "c", 6, seed=5, minutes_slip_every=3)
    base = ["grade", folder, "--rubric", folder / "rubric.toml", "--format", "json"]
    here, there = invoke(*base, "--jobs", "1"), invoke(*base, "--scheduler", dask_scheduler)
    assert here.exit_code == there.exit_code == 0, there.output
    a, b = json.loads(here.stdout), json.loads(there.stdout)
    assert b["settings"]["ran_on"] == f"Dask cluster at {dask_scheduler}"
    assert a["results"] == b["results"]


# --------------------------------------------------------------------------- saturation --each


def test_raw_plates_to_km_per_sample_in_two_commands(screen, tmp_path):
    folder, _ = screen
    out = tmp_path / "rates"
    first = invoke("rates", folder, "--layout", folder, "--out", out, "--format", "csv", *FIXED)
    assert first.exit_code == 0, first.output
    second = invoke("saturation", out / "rates.csv", "--each", "sample", "--model", "mm",
                    "--format", "json")
    assert second.exit_code == 0, second.output
    doc = json.loads(second.stdout)
    truth = {name: (v, km) for pair in SCREEN.values() for name, v, km in pair}
    assert [r["group"] for r in doc["results"]] == list(truth)     # order of appearance
    for r in doc["results"]:
        vmax, km = truth[r["group"]]
        assert r["status"] == "ok" and r["n_points"] == 44
        assert r["params"]["Km"]["value"] == pytest.approx(km, rel=0.05), r["group"]
        assert r["params"]["Vmax"]["value"] == pytest.approx(vmax, rel=0.03), r["group"]
    assert doc["settings"]["each"] == "sample" and doc["settings"]["failed"] == 0


def test_a_group_that_cannot_be_fitted_costs_only_that_group(tmp_path):
    s = np.array([10, 20, 40, 80, 160, 320.0])
    lines = ["sample,S_uM,rate"]
    lines += [f"good,{x:g},{v_competitive(x, 0.0, 10.0, 40.0, 1.0):.6f}" for x in s]
    lines += ["poor,10,1.0", ",40,2.0"]                     # one point; one row without a name
    lines += [f"also good,{x:g},{v_competitive(x, 0.0, 4.0, 100.0, 1.0):.6f}" for x in s]
    table = tmp_path / "rates.csv"
    table.write_text("\n".join(lines) + "\n")
    r = invoke("saturation", table, "--each", "sample", "--model", "mm", "--format", "json")
    assert r.exit_code == SOME_FAILED
    assert "1 of 3 group(s) could not be fitted" in r.stderr
    doc = json.loads(r.stdout)
    assert [(x["group"], x["status"]) for x in doc["results"]] == [
        ("good", "ok"), ("poor", "failed"), ("also good", "ok")]
    assert doc["results"][0]["params"]["Km"]["value"] == pytest.approx(40.0, rel=1e-4)
    assert doc["results"][2]["params"]["Km"]["value"] == pytest.approx(100.0, rel=1e-4)
    assert "1 row(s) have no sample: left out" in doc["warnings"]
    bad = invoke("saturation", table, "--each", "plate")
    assert bad.exit_code == 2 and "--each plate: the table has no column 'plate'" in bad.stderr


def test_pictures_asked_of_a_many_file_run_are_refused_or_said(tmp_path):
    # an option accepted is used or refused: a many-file run draws no pictures
    slopes = {w: 0.01 for w in WELLS}
    for k in (1, 2):
        write_plate(tmp_path / f"p{k}.csv", slopes, seed=k)
    files = [tmp_path / "p1.csv", tmp_path / "p2.csv"]
    r = invoke("rates", *files, "--epsilon", "6220", "--well-pages", "all", "--no-plots")
    assert r.exit_code == 2 and "--well-pages" in r.output
    doc, _ = rates_json(*files, "--epsilon", "6220", "--out", tmp_path / "out")
    assert any("no pictures in a many-file run" in w for w in doc["warnings"])
