"""The demo as a newcomer runs it: the README's first command (run once per session, see
conftest.demo_run), pages that parse, pictures inline, nothing external, hostile names escaped,
pages that read like a lab report. The real render in Chromium is tests/test_report_render.py."""

import re
from html.parser import HTMLParser
from pathlib import Path

import pytest

#: The demo folder is made once per session; its tests share one worker (pytest-xdist).
pytestmark = pytest.mark.xdist_group("demo")


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.srcs, self.hrefs, self.scripts, self.tags = [], [], 0, 0

    def handle_starttag(self, tag, attrs):
        self.tags += 1
        a = dict(attrs)
        if tag == "img":
            self.srcs.append(a.get("src", ""))
        if tag == "a":
            self.hrefs.append(a.get("href", ""))
        if tag in ("script", "link", "iframe"):
            self.scripts += 1


def _pages(demo_dir):
    return sorted(demo_dir.rglob("*.html"))


def test_index_links_every_step(demo_dir):
    index = demo_dir / "index.html"
    p = _Collect()
    p.feed(index.read_text())
    assert len(p.hrefs) >= 9
    for h in p.hrefs:
        assert (demo_dir / h).is_file(), h
    summary = (demo_dir / "summary.txt").read_text()
    for words in ("plate:", "inhibition:", "Selwyn", "completion:", "Ea =", "class:"):
        assert words in summary


def test_pages_parse_and_are_self_contained(demo_dir):
    pages = _pages(demo_dir)
    assert len(pages) >= 20
    for page in pages:
        text = page.read_text()
        p = _Collect()
        p.feed(text)
        p.close()
        assert p.tags > 10 and text.rstrip().endswith("</html>"), page
        assert p.scripts == 0, page                        # no scripts, no external sheets
        assert all(s.startswith("data:image/png;base64,") for s in p.srcs), page
        assert not re.search(r'(src|href)="(https?:)?//', text), page
    reports = [p for p in pages if p.name == "report.html"]
    assert all("data:image/png;base64," in p.read_text() for p in reports)
    assert all("not for clinical diagnosis" in p.read_text() for p in reports)


def test_demo_says_it_is_not_for_diagnosis(demo_run):
    assert "not for clinical diagnosis" in demo_run[1]


def test_pages_read_like_a_lab_report(demo_dir):
    """No Python literals, no raw field names, no path inside the installed package; inputs
    named as the demo gave them (its own copies beside the results)."""
    site = str(Path(__import__("rateabs").__file__).parent)
    for page in _pages(demo_dir):
        text = page.read_text()
        cells = re.findall(r">([^<>]*)<", text)
        for literal in ("True", "False", "None", "nan", "{'"):
            assert not [c for c in cells if c.strip() == literal or c.startswith("{'")], (
                page, literal)
        for raw in ("epsilon_M_per_cm", "noisy_rel_se", "slope_A_per_min", "= True", "= False"):
            assert raw not in text, (page, raw)
        assert site not in text and "data/samples" not in text, page
    index = (demo_dir / "index.html").read_text()
    assert "stable = " not in index and "enzyme stable" in index
    assert "wells that need a look" in index and "meanings on the plate" in index
    rates = (demo_dir / "2_plate_rates" / "report.html").read_text()
    assert "inputs/plate_kbdh_340nm.csv" in rates and "200 µL" in rates
    assert 'download="rates.csv" href="data:text/csv' in rates


def test_hostile_sample_name_is_escaped(demo_dir):
    summary = (demo_dir / "9_class" / "class_summary.html").read_text()
    assert "&lt;script&gt;x&lt;/script&gt;" in summary
    for page in _pages(demo_dir):
        assert "<script>x</script>" not in page.read_text()


def test_demo_results_carry_units(demo_dir):
    import json

    doc = json.loads((demo_dir / "2_plate_rates" / "rates.json").read_text())
    assert {"rate_uM_per_min", "activity_U_per_mL", "slope_A_per_min_se"} <= set(doc["results"][0])
    sat = json.loads((demo_dir / "3_inhibition" / "saturation.json").read_text())
    chosen = [r for r in sat["results"] if r["chosen"]]
    assert len(chosen) == 1 and chosen[0]["model"] == "competitive"
    assert all(p["unit"] is not None for p in chosen[0]["params"].values())


def test_report_escapes_a_hostile_sample_name(tmp_path):
    from click.testing import CliRunner

    from rateabs.cli import main

    data = tmp_path / "d.csv"
    data.write_text("Time (s),A1,A2\n" + "".join(f"{10 * k},{0.1 + 0.01 * k},{0.1 + 0.001 * k}\n"
                                                for k in range(20)))
    mp = tmp_path / "map.csv"
    mp.write_text('well,role,sample\nA1,sample,"<img src=x onerror=alert(1)>"\nA2,blank,buffer\n')
    rep = tmp_path / "r.html"
    r = CliRunner().invoke(main, ["rates", str(data), "--layout", str(mp), "--report", str(rep)])
    assert r.exit_code == 0, r.output
    text = rep.read_text()
    assert "<img src=x" not in text and "&lt;img src=x onerror=alert(1)&gt;" in text
    assert "data:image/png;base64," in text                 # plots drawn without --out
    r = CliRunner().invoke(main, ["inspect", str(data), "--report", str(tmp_path / "i.html")])
    assert r.exit_code == 0 and "data:image/png" in (tmp_path / "i.html").read_text()
