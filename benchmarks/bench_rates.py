"""Speed of ``rateabs rates`` on a 1536-well x 300-read plate, against the parse alone and against
the plain approach (a per-trace scipy.stats.linregress loop), all measured in this run.

    python benchmarks/bench_rates.py
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).parent))
from common import timed, write_plate  # noqa: E402

from rateabs.io import read_traces  # noqa: E402
from rateabs.rates import RateSettings, analyse_plate  # noqa: E402
from rateabs.slopes import find_windows  # noqa: E402


def main() -> None:
    with tempfile.TemporaryDirectory() as d:
        path = write_plate(Path(d) / "plate1536.csv")
        t_parse, ts = timed(lambda: read_traces(path))
        t_all, _ = timed(lambda: analyse_plate(read_traces(path)))
        t_fast, _ = timed(lambda: analyse_plate(read_traces(path), settings=RateSettings(
            curve=False)))
        g = ts.grid()
        t_win, w = timed(lambda: find_windows(g, curve=False))
        t_win_curve, w = timed(lambda: find_windows(g))

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
    assert np.allclose(slopes, w.slope, rtol=1e-9)
    n = len(g.names)
    print(f"plate: {n} wells x {g.values.shape[1]} reads")
    print(f"parse the file alone                  {t_parse:7.3f} s")
    print(f"rates (parse + windows + curve + QC)  {t_all:7.3f} s   ratio to parse {t_all / t_parse:5.2f}")
    print(f"rates --no-curve (no whole-curve fit) {t_fast:7.3f} s   ratio to parse {t_fast / t_parse:5.2f}")
    print(f"vectorised windows, no curve fit      {t_win:7.3f} s")
    print(f"vectorised windows with curve fit     {t_win_curve:7.3f} s")
    print(f"per-trace linregress loop on the      {t_loop:7.3f} s   (slopes only, windows given;"
          f" the vectorised search finds")
    print(f"  windows found                                  the windows too in "
          f"{t_win / t_loop:4.2f}x this loop's time)")
    print(f"same window search trace by trace     {t_loop_win:7.3f} s   vectorised is "
          f"{t_loop_win / t_win:5.1f}x faster")


if __name__ == "__main__":
    main()
