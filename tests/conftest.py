"""Shared fixtures. Expensive things are made once per session and shared: the demo folder
(the README's first command, run once in a subprocess) and a small seeded plate. A test takes
under a second unless the process boundary or a real study is its point (DEVELOPERS.md)."""

import subprocess
import sys
from pathlib import Path

import matplotlib
import numpy as np
import pytest

matplotlib.use("Agg")
sys.path.insert(0, str(Path(__file__).parent))
# Keep this checkout's compiled bytecode even where the environment says not to write any
# (PYTHONDONTWRITEBYTECODE, as on this project's CI machine): every command the tests start in
# a fresh process would otherwise compile the package again (about 0.3 s each), which a user's
# installed copy never does. The files go to __pycache__ folders that git ignores.
sys.dont_write_bytecode = False

ROOT = Path(__file__).resolve().parents[1]


def readme_demo_command() -> str:
    """The README's first set-up command, minus the install step CI has already done."""
    import re

    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```\n(.*?)\n```", text, flags=re.S)
    first = blocks[0].strip()
    assert first.startswith("pip install . && rateabs demo")
    return first.split("&&", 1)[1].strip()


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """The demo as a newcomer runs it (README's command, own process): (folder, stdout)."""
    import os

    cwd = tmp_path_factory.mktemp("newcomer")
    cmd = readme_demo_command().split()
    assert cmd[0] == "rateabs"
    # `rateabs` is this checkout's module (an installed script may belong to another checkout)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH",
                                                                                   "")]))
    r = subprocess.run([sys.executable, "-m", "rateabs.cli", *cmd[1:]], cwd=cwd, env=env,
                       capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr
    return cwd / cmd[cmd.index("--out") + 1], r.stdout


@pytest.fixture(scope="session")
def demo_dir(demo_run):
    """The folder the demo wrote (made once per session)."""
    return demo_run[0]


@pytest.fixture(scope="session")
def sample_plate_run(tmp_path_factory):
    """`rates` on the sample 96-well plate with its map, NADH, volumes, katal, pictures and a
    report, run once: {"folder": FOLDER (outputs in FOLDER/o, the page FOLDER/report.html),
    "stdout": the JSON document}. Its tests are marked ``xdist_group("plate-report")``."""
    from click.testing import CliRunner

    from rateabs.cli import main

    samples = ROOT / "sample_runs"
    d = tmp_path_factory.mktemp("r96")
    r = CliRunner().invoke(main, [str(a) for a in (
        "rates", samples / "plate_kbdh_340nm.csv", "--layout", samples / "plate_kbdh_map.csv",
        "--chromophore", "NADH", "--well-volume", "200 uL", "--total-volume", "200 uL",
        "--sample-volume", "20 uL", "--katal", "--format", "json", "--out", d / "o",
        "--report", d / "report.html")])
    assert r.exit_code == 0, r.output
    return {"folder": d, "stdout": r.stdout}


#: The small shared plate: wells, their true slopes (absorbance per minute) and roles.
SMALL_PLATE = {"A1": (0.020, "sample"), "A2": (0.040, "sample"), "A3": (0.060, "sample"),
               "B1": (0.021, "sample"), "B2": (0.041, "sample"), "B3": (0.059, "sample"),
               "C1": (0.0, "blank"), "C2": (0.0, "blank"), "C3": (0.0, "blank")}


@pytest.fixture(scope="session")
def small_plate(tmp_path_factory):
    """A small seeded plate (9 wells x 16 reads, straight lines, noise 0.001 AU) and its map,
    written once per session: {"data": path, "layout": path, "truth": {well: slope A/min}}.
    Use it where a plate is needed but its size is not the point."""
    folder = tmp_path_factory.mktemp("small_plate")
    rng = np.random.default_rng(20261202)
    t = np.arange(16) * 15.0
    lines = ["Time (s)," + ",".join(SMALL_PLATE)]
    cols = {w: 0.1 + s * t / 60 + rng.normal(0, 0.001, t.size) for w, (s, _) in SMALL_PLATE.items()}
    lines += [f"{t[j]:g}," + ",".join(f"{cols[w][j]:.5f}" for w in SMALL_PLATE)
              for j in range(t.size)]
    (folder / "plate.csv").write_text("\n".join(lines) + "\n")
    (folder / "map.csv").write_text("well,role,sample\n" + "".join(
        f"{w},{role},{'buffer' if role == 'blank' else 'S' + w[1]}\n"
        for w, (_, role) in SMALL_PLATE.items()))
    return {"data": folder / "plate.csv", "layout": folder / "map.csv",
            "truth": {w: s for w, (s, _) in SMALL_PLATE.items()}}


@pytest.fixture(scope="session")
def _dask_clusters():
    """Holder of the running Dask cluster (at most one), always stopped at the end."""
    held: dict = {}
    try:
        yield held
    finally:
        stop_dask_cluster(held)


def stop_dask_cluster(held: dict) -> None:
    """Stop the held cluster, if any (its workers burn CPU for as long as it runs)."""
    cluster = held.pop("cluster", None)
    if cluster is not None:
        cluster.close(timeout=60)


@pytest.fixture
def dask_scheduler(_dask_clusters):
    """A Dask scheduler and two worker processes on 127.0.0.1 only (dashboard on a free port);
    its address. One cluster serves a run of consecutive tests that take it and is stopped
    after the last of them (pytest_runtest_teardown below): a cluster costs seconds of CPU to
    start and its workers to warm, and burns about 0.1 s of CPU a second while it runs. Every
    test that takes it is marked ``xdist_group("dask")``, so that one worker runs them all
    one after another."""
    import logging

    distributed = pytest.importorskip("distributed")
    if "cluster" not in _dask_clusters:
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                           host="127.0.0.1", dashboard_address=":0",
                                           silence_logs=logging.ERROR)
        _dask_clusters["cluster"] = cluster
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
    return _dask_clusters["cluster"].scheduler_address


def pytest_runtest_teardown(item, nextitem):
    """Stop the Dask cluster after the last of a run of tests that take it."""
    if "dask_scheduler" in getattr(item, "fixturenames", ()) and (
            nextitem is None or "dask_scheduler" not in getattr(nextitem, "fixturenames", ())):
        stop_dask_cluster(item.funcargs.get("_dask_clusters", {}))


@pytest.fixture(autouse=True, scope="session")
def _pictures_drawn_here():
    """Commands run in the test process draw their pictures here, one after another: the
    suite's own workers already fill the cores. tests/test_drawing.py passes --jobs 2 to test
    the drawing processes; commands run in their own process keep the default."""
    from rateabs.views import drawing

    drawing.DRAWING_PROCESSES = 1
