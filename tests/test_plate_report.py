"""What a person reads and looks at after `rates`: the report page, the plate's pictures, and
the commands that read a rates table next (saturation with an inhibitor column; progress with
the absorbing species checked against the signal)."""

import html
import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner
from plate_truth import plate_384

from rateabs.cli import main

# one worker runs the module, so its module fixture is made once
pytestmark = pytest.mark.xdist_group("plate-report")

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"
PLATE = SAMPLES / "plate_kbdh_340nm.csv"
MAP = SAMPLES / "plate_kbdh_map.csv"
PROG = SAMPLES / "progress_kbap_405nm.csv"


def _run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


@pytest.fixture(scope="module")
def sample_run(sample_plate_run):
    """The sample plate's rates run (conftest.sample_plate_run, shared with tests/test_rates.py)."""
    return sample_plate_run["folder"]


def _visible_text(page: str) -> str:
    body = re.sub(r"<style>.*?</style>", "", page, flags=re.S)
    body = re.sub(r'(src|href)="data:[^"]*"', "", body)
    return html.unescape(re.sub(r"<[^>]+>", " ", body))


def test_the_report_reads_like_a_lab_report(sample_run):
    page = (sample_run / "report.html").read_text()
    text = _visible_text(page)
    for heading in ("At a glance", "What was assumed", "Activity per sample", "Replicates",
                    "Wells", "What each flag means", "Z' = 0.9"):
        assert heading in text, heading
    assert "pathlength" in text and "0.625 cm" in text and "NADH" in text
    # no raw field names, no Python literals, no 16-digit values
    for raw in ("epsilon_M_per_cm", "noisy_rel_se", "rate_uM_per_min", "slope_A_per_min_se",
                "None", "True", "nan"):
        assert raw not in text, raw
    assert not re.search(r"\d\.\d{9,}", text)
    assert 'download="rates.csv" href="data:text/csv;base64,' in page
    assert page.count("data:image/png;base64,") >= 4          # overview, map, replicates, wells
    # the page's cautions are a rates page's: not for diagnosis, the fitted rate's own, the
    # local rules; nothing of a completion forecast
    cautions = text.split("Cautions", 1)[1]
    assert "not for clinical diagnosis" in cautions and "local safety rules" in cautions
    assert "initial rate is fitted" in cautions and "completion" not in cautions


def test_the_figures_of_a_96_well_plate(sample_run):
    out = sample_run / "o"
    names = sorted(p.name for p in out.glob("*.png"))
    # the wells that need a look get pages, at most 24 of them (one page)
    assert names == ["rates_plate.png", "rates_plate_overview.png", "rates_replicates.png",
                     "rates_wells_1.png"]
    assert (out / "rates_activity.csv").read_text().startswith("sample,")


def test_a_384_well_plate_gets_one_overview_and_no_numbers_in_its_map(tmp_path):
    p = plate_384(tmp_path / "p", seed=3)
    r = _run("rates", p.data, "--layout", p.layout, "--time-unit", "min", "--chromophore",
             "pnp", "--out", tmp_path / "o", "--well-pages", "none")
    assert r.exit_code == 0, r.output
    assert sorted(x.name for x in (tmp_path / "o").glob("*.png")) == [
        "rates_plate.png", "rates_plate_overview.png", "rates_replicates.png"]


def test_traces_that_are_not_wells_get_an_overview_and_no_plate_map(tmp_path):
    data = tmp_path / "c.csv"
    data.write_text("Time (s),cuvette 1,cuvette 2\n" + "".join(
        f"{10 * k},{0.1 + 0.01 * k},{0.2 + 0.004 * k}\n" for k in range(20)))
    r = _run("rates", data, "--out", tmp_path / "o")
    assert r.exit_code == 0, r.output
    assert sorted(x.name for x in (tmp_path / "o").glob("*.png")) == [
        "rates_plate_overview.png"]


# --------------------------------------------------------------------------- downstream


def test_saturation_reads_a_rates_table_with_an_inhibitor_column(sample_run, tmp_path):
    rates_csv = sample_run / "o" / "rates.csv"
    assert "inhibitor_uM" in rates_csv.read_text().splitlines()[0]
    # a one-substrate model across four inhibitor levels used to crash while plotting
    r = _run("saturation", rates_csv, "--select", "sample=KbDH1", "--model", "mm", "--out",
             tmp_path / "s")
    assert r.exit_code == 0, r.output
    assert (tmp_path / "s" / "saturation_fit.png").exists()
    assert "several inhibitor levels" in r.stderr
    r = _run("saturation", rates_csv, "--select", "sample=KbDH1", "--out", tmp_path / "a")
    assert r.exit_code == 0 and "competitive" in r.stdout


def test_saturation_sets_an_empty_inhibitor_column_aside(tmp_path):
    mp = tmp_path / "map.csv"
    mp.write_text("\n".join(",".join(line.split(",")[:4])
                            for line in MAP.read_text().splitlines()) + "\n")   # no inhibitor
    r = _run("rates", PLATE, "--layout", mp, "--chromophore", "NADH", "--format", "csv",
             "--no-plots")
    table = tmp_path / "rates.csv"
    table.write_text(r.stdout)
    r = _run("saturation", table, "--model", "mm", "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    assert '"inhibitor": null' in r.stdout
    assert "1 row(s) without a rate" in r.stdout                  # H12 saturates: no rate


def test_progress_refuses_a_species_against_the_signal(tmp_path):
    lines = PROG.read_text().splitlines()
    mirrored = lines[:2] + [",".join(c.split(",")[:-1] + [f"{1.6 - float(c.split(',')[-1]):.4f}"])
                            for c in lines[2:]]
    falling = tmp_path / "falling.csv"
    falling.write_text("\n".join(mirrored) + "\n")             # the substrate absorbs
    args = ["--s0-column", "S0 (uM)", "--chromophore", "pnp", "--format", "json", "--no-plots"]
    r = _run("progress", falling, *args, "--species", "product")
    assert r.exit_code == 2
    assert "falls in 6 of 6 curves" in r.stderr and "give --species substrate" in r.stderr
    r = _run("progress", falling, *args, "--species", "substrate")
    rising = _run("progress", PROG, *args)
    assert r.exit_code == 0 and rising.exit_code == 0
    km = [json.loads(x.stdout)["results"][0]["params"]["Km"]["value"] for x in (r, rising)]
    # the mirror image read the other way round is the same curves: the same Km
    assert km[0] == pytest.approx(km[1], rel=1e-4)
