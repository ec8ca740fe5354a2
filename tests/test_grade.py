"""Batch grading: planted mistakes found, scores by hand, unsafe input, parallel classes."""

import json
import math
import shutil
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from rateabs.cli import main
from rateabs.grade import Rubric, agreement, data_quality, grade_class, read_rubric
from rateabs.simulate import first_order_class

# one worker runs the module, so its module fixture is made once
pytestmark = pytest.mark.xdist_group("grade-class")

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"
CLASS = SAMPLES / "class_kestrel_red"

#: planted slip (the roster's 'planted' column, ground truth of sample_runs/generate.py) ->
#: the slip the grader must name (None: none), and words a finding must hold
EXPECT = {
    "sound": (None, "no slip found"), "noisy": (None, "no slip found"),
    "warm-bath": (None, "class reference"), "minutes": ("time-unit", "per min"),
    "log10": ("log10", "2.303"), "half-life": ("half-life", "half-life"),
    "sign": ("sign", "sign is wrong"), "recorded-%T": (None, "percent transmittance"),
    "analysed-%T": ("percent-T", "as if they were absorbance"),
    "time-constant": ("time-constant", "time constant"),
    "missing-file": (None, "missing"), "path-escape": (None, "leaves the class folder"),
    "minutes+log10": ("time-unit+log10", "two slips"),
}


@pytest.fixture(scope="module")
def sample_graded(tmp_path_factory):
    """The sample class graded once by the command, on two processes, with pages."""
    out = tmp_path_factory.mktemp("sample") / "out"
    r = CliRunner().invoke(main, ["grade", str(CLASS), "--rubric", str(CLASS / "rubric.toml"),
                                  "--format", "json", "--jobs", "2", "--out", str(out)])
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout), out


def test_sample_class_every_planted_mistake_named(sample_graded):
    doc, out = sample_graded
    roster = [ln.split(",") for ln in (CLASS / "roster.csv").read_text().splitlines()[1:]]
    planted = {row[0].strip('"'): row[-1] for row in roster}
    res = doc["results"]
    assert [x["student"] for x in res] == list(planted)          # roster order kept
    for x in res:
        slip, words = EXPECT[planted[x["student"]]]
        assert x["slip"] == slip, (x["student"], x["diagnosis"])
        assert any(words in d for d in x["diagnosis"]), (x["student"], x["diagnosis"])
        assert {"student", "score", "diagnosis", "assumptions"} <= set(x)
    sound = [x["score"] for x in res if planted[x["student"]] == "sound"]
    assert min(sound) >= 95
    assert all(x["score"] <= 50 for x in res if planted[x["student"]] in ("minutes", "sign"))
    book = (out / "gradebook.csv").read_text()
    assert "bench" in book.splitlines()[0]                       # extra roster columns carried
    assert (out / "class_summary.html").exists()


def test_html_is_escaped(sample_graded):
    _, out = sample_graded
    pages = list((out / "feedback").glob("*.html")) + [out / "class_summary.html"]
    assert len(pages) == 16
    for p in pages:
        text = p.read_text()
        assert "<script>x" not in text and "<b>Nils" not in text
    assert "&lt;script&gt;x&lt;/script&gt;" in (out / "class_summary.html").read_text()


def test_students_who_could_not_be_graded_are_listed(sample_graded):
    _, out = sample_graded
    text = (out / "class_summary.html").read_text()
    section = text[text.index("Could not be graded"):]
    assert "Liam O&#x27;Shea" in section and "Mara Quist" in section


def test_hand_worked_score(tmp_path):
    # One student whose run is an exact first-order trace, k = 8.0e-4 1/s (written to 6 decimals,
    # so the fitted k is 8.0e-4 to about 1e-6 relative and its SE far below 2 %).
    # Rubric: reference 8.8e-4 1/s, tolerance 5 %, default weights data 20, report 50, ref. 30.
    #   data:      relative SE <= 2 %                                   -> 1
    #   report:    8.6e-4 vs own 8.0e-4 is 7.5 % off; 1 - (7.5 - 5)/(4 x 5) = 0.875
    #   reference: own 8.0e-4 vs 8.8e-4 is 9.0909 % off; 1 - 4.0909/20     = 0.79545
    #   score = (20 x 1 + 50 x 0.875 + 30 x 0.79545) / 100 x 100 = 20 + 43.75 + 23.864 = 87.614,
    #   reported to one decimal: 87.6
    t = np.arange(0, 2401, 30.0)
    a = 0.05 + 1.05 * np.exp(-8e-4 * t)
    (tmp_path / "run.csv").write_text("time (s),A\n" + "".join(
        f"{x:g},{y:.6f}\n" for x, y in zip(t, a, strict=True)))
    (tmp_path / "roster.csv").write_text("student,file,reported\nava,run.csv,8.6e-4\n")
    (tmp_path / "rubric.toml").write_text('[assignment]\nquantity = "k"\nunit = "1/s"\n'
                                          'reference = 8.8e-4\ntolerance_pct = 5\n')
    res = grade_class(tmp_path, read_rubric(tmp_path / "rubric.toml"), plots=False)[0]
    assert res["score"] == 87.6
    assert res["parts"] == pytest.approx({"data": 1.0, "report": 0.875, "reference": 0.79545},
                                         abs=5e-5)
    # 7.5 % off with a 5 % tolerance: a difference, no cause invented
    assert res["slip"] is None and "cause not identified" in res["diagnosis"][0]


def test_a_reported_value_typed_with_its_unit_is_read_in_that_unit(tmp_path):
    """'0.0008 1/s', '8e-4 s-1', '0.0008/s' and '0.048 1/min' are all k = 8.0e-4 1/s (60 s in a
    minute); a unit k cannot have gives no value and says so (a user audit saw every one of
    them called 'not a number')."""
    t = np.arange(0, 2401, 30.0)
    a = 0.05 + 1.05 * np.exp(-8e-4 * t)
    (tmp_path / "run.csv").write_text("time (s),A\n" + "".join(
        f"{x:g},{y:.6f}\n" for x, y in zip(t, a, strict=True)))
    typed = ["0.0008 1/s", "8e-4 s-1", "0.0008/s", "0.048 1/min", "0.0008 furlongs"]
    (tmp_path / "roster.csv").write_text("student,file,reported\n" + "".join(
        f"s{i},run.csv,{v}\n" for i, v in enumerate(typed)))
    (tmp_path / "rubric.toml").write_text('[assignment]\nquantity = "k"\nunit = "1/s"\n'
                                          'reference = 8.0e-4\ntolerance_pct = 5\n')
    res = grade_class(tmp_path, read_rubric(tmp_path / "rubric.toml"), plots=False)
    for r in res[:4]:
        assert r["reported"] == pytest.approx(8e-4, rel=1e-12) and r["score"] == 100.0, r
    assert res[4]["reported"] is None and "'furlongs'" in " ".join(res[4]["diagnosis"])


def test_a_bare_time_column_in_minutes_against_a_rubric_in_seconds_is_named(tmp_path):
    """The rubric reads bare time columns in seconds; a student recorded minutes and reported
    the right k per second: the grader's own value is 60 times it (60 s per min), and the slip
    is named instead of 'cause not identified' (a user audit's case)."""
    t_min = np.arange(0, 40.01, 0.5)
    a = 0.05 + 1.05 * np.exp(-8e-4 * 60 * t_min)
    (tmp_path / "run.csv").write_text("time,A\n" + "".join(
        f"{x:g},{y:.6f}\n" for x, y in zip(t_min, a, strict=True)))
    (tmp_path / "roster.csv").write_text("student,file,reported\nmo,run.csv,8.0e-4\n")
    (tmp_path / "rubric.toml").write_text('[assignment]\nquantity = "k"\nunit = "1/s"\n'
                                          'reference = 8.0e-4\ntolerance_pct = 5\n'
                                          '[runs]\ntime_unit = "s"\n')
    (r,) = grade_class(tmp_path, read_rubric(tmp_path / "rubric.toml"), plots=False)
    assert r["value"] == pytest.approx(8e-4 * 60, rel=1e-3)       # read in seconds, as told
    assert r["slip"] == "time-unit-unstated" and "in minutes" in r["diagnosis"][0]


def test_agreement_and_data_quality_parts_by_hand():
    # agreement: 1 within the tolerance, linear to 0 at five times it (grade.scoring docstring)
    assert agreement(1.04, 1.0, 5) == 1.0                  # 4 % off, within the tolerance
    assert agreement(1.15, 1.0, 5) == pytest.approx(0.5)   # 15 %: 1 - 10/20
    assert agreement(1.30, 1.0, 5) == 0.0                  # 30 %: past 25 %
    # data quality: 1 at <= 2 % relative SE, 0 at >= 20 %, x 0.8 when readings were masked
    assert data_quality(0.11, 0) == pytest.approx(0.5)     # 1 - (11 - 2)/18
    assert data_quality(0.01, 3) == pytest.approx(0.8)     # full marks x 0.8


def test_class_in_parallel_keeps_order(tmp_path):
    first_order_class(tmp_path / "c", 120)
    r = CliRunner().invoke(main, ["grade", str(tmp_path / "c"), "--rubric",
                                  str(tmp_path / "c" / "rubric.toml"), "--jobs", "2",
                                  "--format", "json"])
    assert r.exit_code == 0, r.output
    res = json.loads(r.stdout)["results"]
    assert [x["student"] for x in res] == [f"s{i:03d}" for i in range(120)]
    assert np.mean([x["score"] for x in res]) > 90


def test_executor_seam_accepts_any_executor(tmp_path):
    first_order_class(tmp_path / "c", 6)
    rub = read_rubric(tmp_path / "c" / "rubric.toml")
    with ThreadPoolExecutor(2) as ex:
        a = grade_class(tmp_path / "c", rub, executor=ex, plots=False)
    b = grade_class(tmp_path / "c", rub, plots=False)
    assert [x["score"] for x in a] == [x["score"] for x in b]


def test_v0_assignment_concentration_and_pathlength_slips(tmp_path):
    # initial rate in uM/min with epsilon 6220 and 1 cm: mM/uM slip (1000) and mm/cm slip (10);
    # Beer–Lambert A = epsilon b c (IUPAC, "molar absorption coefficient")
    f = tmp_path / "v"
    f.mkdir()
    t = np.arange(0, 301, 15.0)
    y = 0.2 + 0.0311 * t / 60 + np.random.default_rng(1).normal(0, 0.001, t.size)
    (f / "a.csv").write_text("Time (s),A340\n" + "".join(f"{a:g},{b:.5f}\n" for a, b in zip(
        t, y, strict=True)))
    v = 0.0311 / 6220 * 1e6                              # 5.0 uM/min
    (f / "roster.csv").write_text(f"student,file,reported\nok,a.csv,{v:.4g}\nmilli,a.csv,"
                                  f"{v / 1000:.4g}\npath,a.csv,{v * 10:.4g}\n")
    (f / "rubric.toml").write_text('[assignment]\nquantity = "v0"\nmodel = "initial-rate"\n'
                                   'unit = "uM/min"\nreference = 5.0\ntolerance_pct = 5\n'
                                   'epsilon = "6220"\npathlength = "1 cm"\n')
    res = {x["student"]: x for x in grade_class(f, read_rubric(f / "rubric.toml"), plots=False)}
    assert res["ok"]["slip"] is None and "no slip" in res["ok"]["diagnosis"][0]
    assert res["milli"]["slip"] == "conc-unit" and "mM" in res["milli"]["diagnosis"][0]
    assert res["path"]["slip"] == "pathlength"


@pytest.mark.parametrize("fname", ["../x.csv", "/etc/passwd", "sub/../../x.csv", "~/x.csv"])
def test_path_escape_rejected(tmp_path, fname):
    first_order_class(tmp_path / "c", 1)
    roster = tmp_path / "c" / "roster.csv"
    roster.write_text(f"student,file,reported\nmallory,{fname},1e-3\n")
    (tmp_path / "x.csv").write_text("time (s),A\n0,1\n")
    res = grade_class(tmp_path / "c", read_rubric(tmp_path / "c" / "rubric.toml"), plots=False)
    assert res[0]["status"] == "not analysed"
    assert "class folder" in res[0]["diagnosis"][0]


def test_symlink_out_of_folder_rejected(tmp_path):
    first_order_class(tmp_path / "c", 1)
    outside = tmp_path / "secret.csv"
    shutil.copy(tmp_path / "c" / "r0.csv", outside)
    (tmp_path / "c" / "link.csv").symlink_to(outside)
    (tmp_path / "c" / "roster.csv").write_text("student,file,reported\nm,link.csv,1e-3\n")
    res = grade_class(tmp_path / "c", read_rubric(tmp_path / "c" / "rubric.toml"), plots=False)
    assert "outside the class folder" in res[0]["diagnosis"][0]


def test_broken_student_file_gets_a_row(tmp_path):
    first_order_class(tmp_path / "c", 3)
    (tmp_path / "c" / "r1.csv").write_text("this is not data\n")
    res = grade_class(tmp_path / "c", read_rubric(tmp_path / "c" / "rubric.toml"), plots=False)
    assert res[1]["status"] == "not analysed" and res[0]["status"] == res[2]["status"] == "graded"


def test_rubric_defaults():
    r = Rubric("k", "first-order", "1/s", 8e-4, 5)
    assert r.weights == {"data": 20.0, "report": 50.0, "reference": 30.0}
    assert math.isclose(sum(r.weights.values()), 100)


def test_km_and_half_life_assignments(tmp_path):
    # Km from each student's own rates table; a student who reports Km in mM while the rubric
    # asks for uM is a factor of 1000 off. Rates from the E + S <-> ES -> E + P mechanism
    # (solve_ivp steady state, tests/kinetics_truth.py), 1 % noise
    from kinetics_truth import mechanism_rates

    f = tmp_path / "km"
    f.mkdir()
    s = np.array([5, 10, 20, 40, 80, 160, 320.0])
    v = mechanism_rates(s, 0 * s, V=10.0, Km=40.0) * (1 + np.random.default_rng(2).normal(0, 0.01, 7))
    (f / "t.csv").write_text("substrate_uM,rate_uM_per_min\n" + "".join(
        f"{a:g},{b:.5f}\n" for a, b in zip(s, v, strict=True)))
    (f / "roster.csv").write_text("student,file,reported\nok,t.csv,40.2\nmm,t.csv,0.0402\n")
    (f / "rubric.toml").write_text('[assignment]\nquantity = "Km"\nmodel = "michaelis-menten"\n'
                                   'unit = "uM"\nreference = 40\ntolerance_pct = 5\n')
    res = {x["student"]: x for x in grade_class(f, read_rubric(f / "rubric.toml"), plots=False)}
    assert res["ok"]["value"] == pytest.approx(40, rel=0.05) and res["ok"]["score"] > 90
    assert res["mm"]["slip"] == "conc-unit" and "mM" in res["mm"]["diagnosis"][0]
    # the same table graded in mM: the table's uM header is converted (1 mM = 1000 uM)
    (f / "rubric.toml").write_text('[assignment]\nquantity = "Km"\nunit = "mM"\n'
                                   'reference = 0.040\ntolerance_pct = 5\n')
    res = {x["student"]: x for x in grade_class(f, read_rubric(f / "rubric.toml"), plots=False)}
    assert res["mm"]["value"] == pytest.approx(0.040, rel=0.05) and res["mm"]["slip"] is None
    # half-life in min; a student who reports k instead is named
    g = tmp_path / "hl"
    first_order_class(g, 2)
    k = [float(ln.split(",")[2]) for ln in (g / "roster.csv").read_text().splitlines()[1:]]
    (g / "roster.csv").write_text(f"student,file,reported\nok,r0.csv,{math.log(2) / k[0] / 60:.4g}"
                                  f"\nswap,r1.csv,{k[1] * 60:.4g}\n")
    (g / "rubric.toml").write_text('[assignment]\nquantity = "half_life"\nunit = "min"\n'
                                   'reference = 14.44\ntolerance_pct = 5\n')
    res = {x["student"]: x for x in grade_class(g, read_rubric(g / "rubric.toml"), plots=False)}
    assert "no slip" in res["ok"]["diagnosis"][0]
    assert res["swap"]["slip"] == "rate-constant" and "1/min" in res["swap"]["diagnosis"][0]
