"""Every report page rendered by a real browser (headless Chromium): it renders, its pictures
load, and it does not scroll sideways at a laptop width (1366 px). `.ci/run` installs Chromium
where it is missing, so in CI this test runs; elsewhere it is skipped without a browser."""

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

#: A common laptop screen width (px).
LAPTOP = 1366

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

pytestmark = [pytest.mark.skipif(CHROMIUM is None and not os.environ.get("CI"),
                                 reason="Chromium is not installed here (.ci/run installs it)"),
              pytest.mark.xdist_group("demo"), pytest.mark.slow]

#: One page holds every report page in a frame of laptop width and measures each once loaded
#: (file:// frames may be read by their parent with --allow-file-access-from-files).
MEASURE = """<!DOCTYPE html><html><body>%s<pre id="out"></pre><script>
window.addEventListener("load", () => {
  const res = [];
  for (const f of document.querySelectorAll("iframe")) {
    const d = f.contentDocument, e = d.documentElement;
    const broken = Array.from(d.images).filter(i => !(i.complete && i.naturalWidth > 0));
    res.push({page: f.dataset.page, scroll: e.scrollWidth, width: e.clientWidth,
              text: d.body ? d.body.innerText.length : 0, images: d.images.length,
              broken: broken.length});
  }
  document.getElementById("out").textContent = JSON.stringify(res);
});
</script></body></html>"""


def render(pages: list[Path], tmp: Path) -> list[dict]:
    """Load every page in headless Chromium at laptop width; what each measured."""
    assert CHROMIUM, "Chromium is missing: .ci/run installs it (apt-get install chromium)"
    frames = "".join(f'<iframe data-page="{p}" src="{p.resolve().as_uri()}" '
                     f'style="width:{LAPTOP}px;height:700px;border:0;display:block"></iframe>'
                     for p in pages)
    wrapper = tmp / "measure.html"
    wrapper.write_text(MEASURE % frames)
    r = subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                        "--no-first-run", "--disable-background-networking",
                        "--disable-component-update", "--disable-sync",
                        f"--user-data-dir={tmp / 'profile'}", "--allow-file-access-from-files",
                        f"--window-size={LAPTOP + 40},900", "--virtual-time-budget=20000",
                        "--dump-dom", wrapper.as_uri()],
                       capture_output=True, text=True, timeout=240)
    found = re.search(r'<pre id="out">(.*?)</pre>', r.stdout, flags=re.S)
    assert found and found.group(1), (r.returncode, r.stderr[-2000:])
    return json.loads(found.group(1).replace("&quot;", '"').replace("&amp;", "&"))


def test_every_report_page_renders_and_fits_a_laptop_screen(demo_dir, non_latin_page, tmp_path):
    feedback = sorted((demo_dir / "9_class" / "feedback").glob("*.html"))
    pages = ([demo_dir / "index.html"] + sorted(demo_dir.glob("*/report.html"))
             + [demo_dir / "9_class" / "class_summary.html"] + feedback[:3] + [non_latin_page])
    assert len(pages) >= 13
    measured = render(pages, tmp_path)
    assert len(measured) == len(pages)
    for m in measured:
        assert m["text"] > 300, m                          # it rendered, with its words
        assert m["broken"] == 0, m                         # every picture decoded
        assert m["scroll"] <= m["width"], m                # nothing scrolls sideways
    figures = {m["page"]: m["images"] for m in measured}
    assert all(figures[str(p)] >= 1 for p in pages if p.name == "report.html")


@pytest.fixture
def non_latin_page(tmp_path):
    """An inspect report of a file whose name and trace names are in other scripts."""
    from click.testing import CliRunner

    from rateabs.cli import main

    data = tmp_path / "动力学 Кинетика.csv"
    names = ["样品一", "Проба-2", "عينة ٣", "Ελένη"]
    data.write_text("Time (s)," + ",".join(names) + "\n" + "".join(
        f"{10 * k}," + ",".join(f"{0.1 + 0.01 * (i + 1) * k:.3f}" for i in range(4)) + "\n"
        for k in range(20)))
    page = tmp_path / "page.html"
    r = CliRunner().invoke(main, ["inspect", str(data), "--report", str(page)])
    assert r.exit_code == 0, r.output
    text = page.read_text()
    assert all(n in text for n in names) and "动力学 Кинетика.csv" in text
    return page
