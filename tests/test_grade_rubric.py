"""The rubric is checked once, before any student is graded: every problem one line naming its
key, with what to do; a rubric that passes is trusted."""

import datetime as dt

import pytest
from click.testing import CliRunner

from rateabs.cli import main
from rateabs.grade import RubricError, read_rubric
from rateabs.simulate import first_order_class

GOOD = '[assignment]\nquantity = "k"\nunit = "1/s"\nreference = 8e-4\ntolerance_pct = 5\n'


@pytest.fixture(scope="module")
def klass(tmp_path_factory):
    return first_order_class(tmp_path_factory.mktemp("rubric") / "c", 2)


def _grade(klass, tmp_path, text):
    rub = tmp_path / "rubric.toml"
    rub.write_text(text)
    out = tmp_path / "out"
    r = CliRunner().invoke(main, ["grade", str(klass), "--rubric", str(rub), "--out", str(out)])
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("rateabs:")]
    return r, lines, out


CASES = [   # (rubric text, words of the one line naming the key)
    (GOOD.replace("tolerance_pct = 5", "tolerance_pct = 500"),
     "[assignment] tolerance_pct = 500 is out of range"),
    (GOOD.replace("tolerance_pct = 5", "tolerance_pct = 0"), "tolerance_pct = 0 is out of range"),
    (GOOD.replace("tolerance_pct = 5", "tolerance_pct = nan"), "tolerance_pct = nan is not a "
                                                               "finite number"),
    (GOOD.replace("tolerance_pct = 5", 'tolerance_pct = "5"'), "tolerance_pct = '5' is not a "
                                                               "number"),
    (GOOD.replace("reference = 8e-4", "reference = true"), "reference = true is not a number"),
    (GOOD.replace("reference = 8e-4", "reference = 0"), "reference = 0 is out of range"),
    (GOOD.replace("reference = 8e-4", "reference = -8e-4"), "reference = -0.0008 is out of "
                                                            "range"),
    (GOOD.replace("reference = 8e-4", "reference = inf"), "reference = inf is not a finite"),
    (GOOD.replace("reference = 8e-4\n", ""), "[assignment] reference is missing"),
    (GOOD + "[weights]\ndata = -10\n", "[weights] data = -10 is out of range"),
    (GOOD + "[weights]\ndata = nan\n", "[weights] data = nan is not a finite number"),
    (GOOD + "[weights]\ndata = 0\nreport = 0\nreference = 0\n", "[weights] add up to zero"),
    (GOOD + "[weights]\nreprot = 50\n", "did you mean 'report'?"),
    (GOOD + "[weights]\ntolerance_pct = 5\n", "[weights] tolerance_pct is in the wrong place; "
                                              "move it to the [assignment] table"),
    (GOOD + "[weight]\ndata = 5\n", "[weight] is not a rubric table; did you mean [weights]?"),
    (GOOD.replace("tolerance_pct", "tolerance"), "[assignment] tolerance is not a rubric key; "
                                                 "did you mean 'tolerance_pct'?"),
    (GOOD.replace('unit = "1/s"', 'unit = "furlong"'), "unit = 'furlong' does not fit quantity k"),
    (GOOD.replace('"k"', '"kk"'), "quantity = 'kk' is not one of k, half_life, v0, Km, Vmax"),
    (GOOD + 'model = "initial-rate"\n', "model = 'initial-rate' does not give k"),
    (GOOD + 'epsilon = "6220"\n', "[assignment] epsilon is used for v0 assignments only"),
    (GOOD + '[runs]\nwindow = "0-100"\n', "[runs] window applies to v0 assignments only"),
    (GOOD + '[runs]\ntime_unit = "minutes"\n', "[runs] time_unit = 'minutes' is not one of s, "
                                               "min, h"),
    (GOOD + 'deadline = "next friday"\n', "deadline = 'next friday' is not a date"),
    (GOOD.replace('"k"', '"v0"').replace('"1/s"', '"uM/min"'),
     "unit = 'uM/min' is a concentration rate but the rubric gives no epsilon"),
    (GOOD.replace('"k"', '"v0"').replace('"1/s"', '"uM/min"') + 'epsilon = "abc"\n',
     "[assignment] epsilon = 'abc'"),
    (GOOD.replace('"k"', '"v0"').replace('"1/s"', '"A/min"') + 'pathlength = "-1 cm"\n',
     "[assignment] pathlength = '-1 cm'"),
    (GOOD.replace('"k"', '"v0"').replace('"1/s"', '"A/min"') + '[runs]\nwindow = "300-100"\n',
     "[runs] window = '300-100' is not a window of time"),
    ("not [toml", "not valid TOML"),
]


@pytest.mark.parametrize("text,words", CASES, ids=range(len(CASES)))
def test_each_bad_rubric_is_one_line_naming_its_key_before_any_grading(klass, tmp_path, text,
                                                                        words):
    r, lines, out = _grade(klass, tmp_path, text)
    assert r.exit_code == 3
    assert len(lines) == 1 and words in lines[0], lines
    assert "rubric.toml" in lines[0] and "Traceback" not in r.output
    assert not out.exists()                                  # nothing graded, nothing written


def test_every_problem_of_a_rubric_is_listed_one_line_each(klass, tmp_path):
    text = ('[assignment]\nquantity = "k"\nunit = "1/s"\nreference = true\ntolerance = 5\n'
            'tolerance_pct = 500\n[weights]\ndata = -10\n[weight]\nreport = 2\n')
    r, lines, _ = _grade(klass, tmp_path, text)
    assert r.exit_code == 3
    assert len(lines) == 5
    for words in ("tolerance is not a rubric key", "[weight] is not a rubric table",
                  "reference = true", "tolerance_pct = 500", "[weights] data = -10"):
        assert sum(words in ln for ln in lines) == 1, (words, lines)


def test_a_good_rubric_is_read_with_its_class_settings(tmp_path):
    p = tmp_path / "r.toml"
    p.write_text('[assignment]\ntitle = "Initial rates"\nquantity = "v0"\nunit = "µM/min"\n'
                 'reference = 5\ntolerance_pct = 10\nepsilon = "6.22 mM^-1 cm^-1"\n'
                 'pathlength = "0.5 cm"\ndeadline = 2026-03-14T17:00:00\n'
                 '[weights]\nreport = 60\n[runs]\ntime_unit = "min"\ntrace = "A340"\n'
                 'window = "0-2 min"\n')
    r = read_rubric(p)
    assert (r.unit, r.epsilon, r.pathlength_cm) == ("uM/min", 6220.0, 0.5)
    assert r.weights == {"data": 20.0, "report": 60.0, "reference": 30.0}
    assert (r.time_unit, r.trace, r.window) == ("min", "A340", (0.0, 120.0))
    assert r.deadline == dt.datetime(2026, 3, 14, 17, 0)


def test_a_rubric_without_the_assignment_header_is_read(tmp_path):
    p = tmp_path / "r.toml"
    p.write_text(GOOD.replace("[assignment]\n", ""))
    assert read_rubric(p).reference == 8e-4


def test_rubric_error_carries_every_problem(tmp_path):
    p = tmp_path / "r.toml"
    p.write_text(GOOD.replace("reference = 8e-4", "reference = 0") + "[weights]\ndata = -1\n")
    with pytest.raises(RubricError) as e:
        read_rubric(p)
    assert len(e.value.problems) == 2 and len(e.value.also) == 1


@pytest.mark.parametrize(("quantity", "text", "per_base"), [
    ("k", "1/sec", 1.0), ("k", "min^-1", 60.0), ("k", "per hour", 3600.0), ("k", "s⁻¹", 1.0),
    ("half_life", "minutes", 1 / 60), ("Km", "umol/L", 1.0), ("Km", "mmol/L", 1e-3),
    ("Vmax", "umol/L/min", 1.0), ("Vmax", "mM/s", 1e-3 / 60), ("v0", "A/min", 1.0),
    ("k", "1/d", None), ("Km", "mg/mL", None)])
def test_rubric_units_are_read_by_the_package_unit_rules(quantity, text, per_base):
    """Unit spellings in a rubric or a report are read by rateabs.units, the one home of
    unit spellings (so "1/sec" and "umol/L" mean here what they mean to every command); the
    factor is from the base unit (k 1/s, half-life s, Km uM, rates uM/min), by hand (1 min =
    60 s; 1 mM = 1000 uM, SI prefixes); a time must be s, min or h, the units whose slips
    the feedback names."""
    from rateabs.grade.rubric import parse_unit

    u = parse_unit(quantity, text)
    if per_base is None:
        assert u is None
    else:
        assert u.per_base == pytest.approx(per_base, rel=1e-12)
