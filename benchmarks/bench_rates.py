"""Speed of ``rateabs rates``, as ratios measured in this run.

1. The 96-well sample plate with its map and a report, each run a fresh ``python -m
   rateabs.cli`` process: pictures on (the plate overview, the rate map, the replicates and the
   pages of wells that need a look, in the report too) against pictures off. Goal: at most 1.5.
2. A simulated 1536-well x 300-read plate with pictures, in a fresh process, against pandas
   reading the same file in a fresh process (``import pandas; pandas.read_csv``). Goal: at most
   4. The stages of the analysis in one process show where the time goes.
3. The vectorised window search against the plain approach (a per-trace scipy.stats.linregress
   loop over the same windows, and the same search trace by trace).

Each figure is the best of a few runs, in wall-clock seconds and in CPU seconds of the child
process (the CPU figure is steadier on a shared machine).

    python benchmarks/bench_rates.py [repeats]
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))      # this checkout's rateabs
from common import timed, write_plate  # noqa: E402

from rateabs.io import read_traces  # noqa: E402
from rateabs.rates import RateSettings, analyse_plate  # noqa: E402
from rateabs.slopes import find_windows  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_runs"


def child(args: list[str], repeat: int) -> tuple[float, float]:
    """Best wall and CPU seconds of a fresh Python process running ``args``."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    best_wall, best_cpu = float("inf"), float("inf")
    for _ in range(repeat):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        subprocess.run([sys.executable, *args], check=True, env=env, cwd=ROOT,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        wall = time.perf_counter() - t0
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        best_wall, best_cpu = min(best_wall, wall), min(best_cpu, cpu)
    return best_wall, best_cpu


def rates_cli(*args: str) -> list[str]:
    """The command line of one rates run."""
    return ["-m", "rateabs.cli", "rates", *args]


def line(label: str, wall: float, cpu: float, ref=None) -> str:
    """One printed row: seconds, and the ratio to ``ref`` (wall, cpu) where given."""
    text = f"{label:<46} {wall:7.2f} s wall {cpu:7.2f} s cpu"
    if ref is not None:
        text += f"   ratio {wall / ref[0]:5.2f} (wall) {cpu / ref[1]:5.2f} (cpu)"
    return text


def plate_96(repeat: int, d: Path) -> None:
    base = [str(SAMPLES / "plate_kbdh_340nm.csv"), "--layout", str(SAMPLES / "plate_kbdh_map.csv"),
            "--chromophore", "NADH", "--well-volume", "200 uL", "--total-volume", "200 uL",
            "--sample-volume", "20 uL"]
    off = child(rates_cli(*base, "--out", str(d / "off"), "--no-plots", "--report",
                          str(d / "off.html")), repeat)
    on = child(rates_cli(*base, "--out", str(d / "on"), "--report", str(d / "on.html")), repeat)
    print("96-well sample plate with its map, tables and report (fresh process each)")
    print(line("  pictures off", *off))
    print(line("  pictures on", *on, ref=off) + "   goal <= 1.5")


def plate_1536(repeat: int, d: Path) -> None:
    path = write_plate(d / "plate1536.csv")
    read = child(["-c", f"import pandas; pandas.read_csv({str(path)!r}, skiprows=3)"], repeat)
    on = child(rates_cli(str(path), "--out", str(d / "p1536")), repeat)
    off = child(rates_cli(str(path), "--out", str(d / "p1536off"), "--no-plots"), repeat)
    print(f"\n1536 wells x 300 reads ({path.stat().st_size / 1e6:.1f} MB)")
    print(line("  pandas reads the file (fresh process)", *read))
    print(line("  rates, pictures off", *off, ref=read))
    print(line("  rates, pictures on", *on, ref=read) + "   goal <= 4")
    stages(path)


def stages(path: Path) -> None:
    """Where the time of one 1536-well run goes (one process, imports done)."""
    import matplotlib

    matplotlib.use("Agg")
    from rateabs.options import RatesOptions
    from rateabs.views.rates import compute_rates, rate_plots

    t_read, ts = timed(lambda: read_traces(path), repeat=1)
    t_an, _ = timed(lambda: analyse_plate(ts), repeat=1)
    t_win, _ = timed(lambda: find_windows(ts.grid()), repeat=1)
    view = compute_rates(RatesOptions.build(file=str(path)))
    with tempfile.TemporaryDirectory() as out:
        t_pic, _ = timed(lambda: rate_plots(view, out), repeat=1)
    print(f"  stages in one process: read {t_read:.2f} s, analysis {t_an:.2f} s (of which the "
          f"window search {t_win:.2f} s), pictures {t_pic:.2f} s")


def window_search(path: Path) -> None:
    ts = read_traces(path)
    g = ts.grid()
    t_fast, _ = timed(lambda: analyse_plate(ts, settings=RateSettings(curve=False)))
    t_win, w = timed(lambda: find_windows(g, curve=False))
    t_win_curve, w = timed(lambda: find_windows(g))
    from rateabs.parallel import lanes_allowed

    with lanes_allowed(2):
        t_lanes, laned = timed(lambda: find_windows(g))
    assert np.array_equal(laned.slope, w.slope, equal_nan=True)   # lanes change no number

    def loop_linregress():
        out = np.empty(len(g.names))
        for i in range(len(g.names)):
            sel = slice(w.start[i], w.end[i] + 1)
            out[i] = stats.linregress(g.times[i][sel], g.values[i][sel]).slope
        return out

    t_loop, slopes = timed(loop_linregress)

    def loop_windows():           # the same window search, one trace at a time
        for i in range(0, len(g.names), 8):
            sub = type(g)(g.names[i:i + 1], g.times[i:i + 1], g.values[i:i + 1],
                          g.usable[i:i + 1])
            find_windows(sub, curve=False)

    t_loop_win, _ = timed(loop_windows, repeat=1)
    t_loop_win *= 8               # 1 in 8 traces timed, scaled to the plate
    assert np.allclose(slopes, w.window_slope, rtol=1e-9)   # the straight windows alone
    print("\nwindow search on the same plate (one process)")
    print(f"  analysis --no-curve                 {t_fast:7.3f} s")
    print(f"  vectorised windows, no curve fit    {t_win:7.3f} s")
    print(f"  vectorised windows with curve fit   {t_win_curve:7.3f} s")
    print(f"  the same in two lanes (forked)      {t_lanes:7.3f} s   {t_win_curve / t_lanes:4.2f}x "
          "faster on 2 cores (a one-file rates run on a big plate does this)")
    print(f"  per-trace linregress loop           {t_loop:7.3f} s   (slopes only, windows given; "
          f"the search finds the windows too in {t_win / t_loop:4.2f}x its time)")
    print(f"  the same search trace by trace      {t_loop_win:7.3f} s   vectorised is "
          f"{t_loop_win / t_win:5.1f}x faster")


def main() -> None:
    repeat = int(sys.argv[1]) if len(sys.argv) > 1 else 3
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        plate_96(repeat, d)
        plate_1536(repeat, d)
        window_search(d / "plate1536.csv")


if __name__ == "__main__":
    main()
