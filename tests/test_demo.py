"""The demo as a newcomer runs it: the README's first command, pages that parse, pictures
inline, nothing external, hostile names escaped, and (where Chromium exists) a real render."""

import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def readme_demo_command() -> str:
    """The README's first set-up command, minus the install step CI has already done."""
    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```\n(.*?)\n```", text, flags=re.S)
    first = blocks[0].strip()
    assert first.startswith("pip install . && rateabs demo")
    return first.split("&&", 1)[1].strip()


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    cwd = tmp_path_factory.mktemp("newcomer")
    cmd = readme_demo_command().split()
    exe = shutil.which(cmd[0])
    argv = [exe, *cmd[1:]] if exe else [sys.executable, "-m", "rateabs.cli", *cmd[1:]]
    r = subprocess.run(argv, cwd=cwd, capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    out = cwd / cmd[cmd.index("--out") + 1]
    assert "not for clinical diagnosis" in r.stdout
    return out


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


@pytest.mark.skipif(shutil.which("chromium") is None, reason="Chromium is not installed here")
def test_index_renders_in_headless_chromium(demo_dir, tmp_path):
    shot = tmp_path / "index.png"
    r = subprocess.run(["chromium", "--headless", "--no-sandbox", "--disable-gpu",
                        "--disable-quic", "--no-first-run", "--disable-background-networking",
                        "--disable-component-update", "--disable-sync",
                        f"--user-data-dir={tmp_path / 'profile'}", "--window-size=1100,1400",
                        f"--screenshot={shot}", (demo_dir / "index.html").as_uri()],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    assert shot.stat().st_size > 20_000


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
