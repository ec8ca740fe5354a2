"""Pictures drawn by warm processes beside the analysis (rateabs.views.drawing): the same files,
byte for byte, as drawn here; written through the command's run; errors raised as if drawn
here; no process left behind; --jobs used or refused."""

import json
import os

import pytest
from click.testing import CliRunner

from rateabs.cli import main
from rateabs.io import sample_path
from rateabs.views import drawing

PLATE = ["rates", str(sample_path("plate_kbdh_340nm.csv")), "--layout",
         str(sample_path("plate_kbdh_map.csv")), "--chromophore", "NADH", "--well-volume",
         "200 uL", "--total-volume", "200 uL", "--sample-volume", "20 uL"]


def _run(args):
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 0, r.output
    return r


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="drawing processes need two cores")
def test_pictures_drawn_by_processes_equal_pictures_drawn_here(tmp_path):
    _run([*PLATE, "--out", str(tmp_path / "here"), "--jobs", "1"])
    _run([*PLATE, "--out", str(tmp_path / "there"), "--jobs", "2"])
    here = sorted(p.name for p in (tmp_path / "here").glob("*.png"))
    assert here == sorted(p.name for p in (tmp_path / "there").glob("*.png"))
    assert "rates_plate_overview.png" in here and "rates_plate.png" in here
    for name in here:
        assert (tmp_path / "here" / name).read_bytes() == (tmp_path / "there" / name).read_bytes()
    listed = {f["name"] for f in json.loads(
        (tmp_path / "there" / ".rateabs-manifest.json").read_text())["files"]}
    assert set(here) <= listed          # written through the run: guarded and listed


def _fails(x):
    raise ValueError(f"cannot draw {x}")


def _ok(x):
    from rateabs.files import write_atomic

    write_atomic(x, "drawn")
    return os.getpid()


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="drawing processes need two cores")
def test_a_part_that_fails_raises_here_and_no_process_is_left(tmp_path):
    with pytest.raises(ValueError, match="cannot draw 3"):
        with drawing.drawing_pool(2) as pool:
            pids = pool.pids
            drawing.draw_parts(pool, [(_ok, (tmp_path / "a.txt",)), (_fails, (3,))])
    for pid in pids:
        with pytest.raises(ProcessLookupError):
            os.kill(pid, 0)


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="drawing processes need two cores")
def test_files_of_a_part_are_written_by_the_command_not_the_process(tmp_path):
    with drawing.drawing_pool(2) as pool:
        (pid,) = drawing.draw_parts(pool, [(_ok, (tmp_path / "a.txt",))])
    assert pid != os.getpid()
    assert (tmp_path / "a.txt").read_text() == "drawn"


def test_how_many_processes_draw():
    assert drawing.drawing_processes(None, False) == 0
    assert drawing.drawing_processes(1, True) == 0
    cores = os.cpu_count() or 1
    assert drawing.drawing_processes(4, True) == (min(4, cores, 2) if cores >= 2 else 0)
    assert drawing.drawing_processes(4, True, parts=1) == (1 if cores >= 2 else 0)


def test_jobs_with_one_file_and_no_pictures_is_refused(tmp_path):
    r = CliRunner().invoke(main, [*PLATE, "--no-plots", "--jobs", "2", "--out",
                                  str(tmp_path / "o")])
    assert r.exit_code == 2
    assert "--jobs" in r.output and "no pictures" in r.output
    assert "Traceback" not in r.output


def _dies(x):
    os._exit(9)                 # a drawing process killed (out of memory, a signal)


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="drawing processes need two cores")
def test_parts_are_drawn_here_when_the_processes_died(tmp_path):
    from concurrent.futures.process import BrokenProcessPool

    with drawing.drawing_pool(2) as pool:
        with pytest.raises(BrokenProcessPool):
            pool.submit(_dies, 1).result()       # the pool is broken, as by a killed process
        done = drawing.draw_parts(pool, [(_ok, (tmp_path / "b.txt",))])
    assert done == [os.getpid()] and (tmp_path / "b.txt").read_text() == "drawn"


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="drawing processes need two cores")
def test_inspect_draws_its_picture_in_a_process_alike(tmp_path, monkeypatch):
    args = ["inspect", str(sample_path("cuvettes_kbap_405nm_messy.csv"))]
    _run([*args, "--out", str(tmp_path / "here")])
    monkeypatch.setattr(drawing, "DRAWING_PROCESSES", 2)
    _run([*args, "--out", str(tmp_path / "there")])
    name = "inspect_traces.png"
    assert (tmp_path / "here" / name).read_bytes() == (tmp_path / "there" / name).read_bytes()
    listed = {f["name"] for f in json.loads(
        (tmp_path / "there" / ".rateabs-manifest.json").read_text())["files"]}
    assert name in listed


def _pid_and(x):
    return os.getpid(), x


def _dies_in_child(marker):
    if os.getpid() != marker:   # only in a forked child: the process that forked it stays
        os._exit(9)
    return "drawn by the drawing process"


def test_forked_calls_run_at_once_in_children_and_answer_in_order():
    from functools import partial

    from rateabs.parallel import ChildDied, forked

    here = os.getpid()
    out = forked([partial(_pid_and, 0), partial(_pid_and, 1), partial(_fails, 2),
                  partial(_dies_in_child, here)])
    assert [o.index for o in out] == [0, 1, 2, 3]
    assert out[0].value == (here, 0)                       # the first runs here
    assert out[1].value[0] != here and out[1].value[1] == 1  # the others in children
    assert isinstance(out[2].error, ValueError) and "cannot draw 2" in str(out[2].error)
    assert isinstance(out[3].error, ChildDied)


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="drawing processes need two cores")
def test_a_part_whose_child_died_is_drawn_by_the_drawing_process(tmp_path):
    with drawing.drawing_pool(2) as pool:
        (warm,) = pool.pids
        done = drawing.draw_parts(pool, [(_ok, (tmp_path / "a.txt",)),
                                         (_dies_in_child, (warm,))])
    assert done == [warm, "drawn by the drawing process"]
    assert (tmp_path / "a.txt").read_text() == "drawn"


def _fresh(code: str, stderr: bool = False) -> str:
    import subprocess
    import sys

    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    return r.stderr if stderr else r.stdout


def test_a_drawing_process_loads_matplotlib_without_the_set_help_and_set_still_works():
    out = _fresh(
        "from rateabs.plots.style import skip_artist_help\n"
        "skip_artist_help()\n"
        "import matplotlib.lines as ml\n"
        "line = ml.Line2D([0, 1], [0, 1]); line.set(color='red', linewidth=3, ls='--')\n"
        "print(line.get_color(), line.get_linewidth(), line.get_linestyle(),\n"
        "      ml.Line2D.set.__doc__ is None)\n")
    assert out.split() == ["red", "3.0", "--", "True"]


def test_matplotlib_loaded_before_keeps_its_set_help():
    out = _fresh(
        "import matplotlib.lines as ml\n"
        "from rateabs.plots.style import skip_artist_help\n"
        "skip_artist_help()\n"
        "import matplotlib.patches as mp\n"
        "print('Supported properties' in mp.Rectangle.set.__doc__)\n")
    assert out.split() == ["True"]


def test_the_loaded_heap_is_frozen_only_in_a_one_command_process(tmp_path):
    """A shell command freezes what it loaded (gc.freeze); the test runner's in-process
    commands, like a library user's session, are left alone."""
    import gc

    before = gc.get_freeze_count()
    _run([*PLATE, "--out", str(tmp_path / "here"), "--no-plots"])
    assert gc.get_freeze_count() == before
    out = _fresh(
        "import atexit, gc, sys\n"
        f"sys.argv = ['rateabs', *{PLATE!r}, '--out', {str(tmp_path / 'shell')!r}, "
        "'--no-plots', '--format', 'csv']\n"
        "atexit.register(lambda: sys.stderr.write(f'frozen {gc.get_freeze_count()}'))\n"
        "from rateabs.cli import main\n"
        "main()\n", stderr=True)
    assert int(out.rsplit("frozen ", 1)[1]) > 10000


def test_rate_figures_draw_in_a_process_without_pandas(tmp_path):
    """The rates figures are drawn from plain arrays (plots.rate_data.RateDrawing), so that the
    drawing process can start before the command loads pandas: a fresh interpreter that takes
    in the pickled drawing data and draws every figure has not loaded pandas, and its files
    equal those drawn here from the analysis, byte for byte."""
    import pickle
    import subprocess
    import sys

    from rateabs.options import RatesOptions
    from rateabs.plots.rate_data import rate_drawing
    from rateabs.views.rates import FIGURES, compute_rates, rate_figures

    o = RatesOptions(PLATE[1], layout_file=PLATE[3], chromophore="NADH", well_volume="200 uL")
    a = compute_rates(o).analysis
    wells = list(a.needs_look)
    data = tmp_path / "data.pickle"
    data.write_bytes(pickle.dumps((rate_drawing(a, wells), wells)))
    code = ("import pickle, sys\n"
            "from pathlib import Path\n"
            "from rateabs.views.rates import FIGURES, rate_figures\n"
            f"d, wells = pickle.loads(Path({str(data)!r}).read_bytes())\n"
            f"rate_figures(d, Path({str(tmp_path / 'there')!r}), 'rates', FIGURES, wells, 'p')\n"
            "assert 'pandas' not in sys.modules, 'pandas was loaded'\n")
    (tmp_path / "there").mkdir()
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    (tmp_path / "here").mkdir()
    rate_figures(a, tmp_path / "here", "rates", FIGURES, wells, "p")
    there = sorted(p.name for p in (tmp_path / "there").glob("*.png"))
    assert len(there) == 4 and there == sorted(p.name for p in (tmp_path / "here").glob("*.png"))
    for name in there:
        assert (tmp_path / "here" / name).read_bytes() == (tmp_path / "there" / name).read_bytes()


def test_inspect_figure_draws_in_a_process_without_pandas(tmp_path):
    """``inspect`` hands its drawing process plain arrays (plots.inspect.TraceArrays): a fresh
    interpreter draws the figure from them without loading pandas, byte for byte as the
    TraceSet itself draws here."""
    import pickle
    import subprocess
    import sys

    from rateabs.io import read_traces
    from rateabs.plots.inspect import TraceArrays
    from rateabs.views.inspect import traces_picture

    ts = read_traces(PLATE[1])
    data = tmp_path / "data.pickle"
    data.write_bytes(pickle.dumps(TraceArrays.of(ts)))
    (tmp_path / "there").mkdir()
    (tmp_path / "here").mkdir()
    code = ("import pickle, sys\n"
            "from pathlib import Path\n"
            "from rateabs.views.inspect import traces_picture\n"
            f"d = pickle.loads(Path({str(data)!r}).read_bytes())\n"
            f"traces_picture(d, Path({str(tmp_path / 'there')!r}), 'p', [False] * 96)\n"
            "assert 'pandas' not in sys.modules, 'pandas was loaded'\n")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    traces_picture(ts, tmp_path / "here", "p", [False] * 96)
    name = "inspect_traces.png"
    assert (tmp_path / "here" / name).read_bytes() == (tmp_path / "there" / name).read_bytes()


def test_figures_are_shared_out_so_the_slowest_lane_is_short():
    """Every figure is drawn exactly once, in two lanes; on 1536 wells the overview (the
    costliest figure there) has a lane to itself, and with many well pages the pages do."""
    from rateabs.views.rates import FIGURES, figure_parts

    for wells, pages in ((96, 1), (384, 0), (1536, 1), (96, 4)):
        parts = figure_parts(wells, pages)
        assert len(parts) == 2
        assert sorted(f for p in parts for f in p) == sorted(FIGURES)
    assert ("overview",) in figure_parts(1536, 1)
    assert ("pages",) in figure_parts(96, 4)
