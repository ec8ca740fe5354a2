"""How often the automatic window does the right thing, over many seeded simulated traces
(ground truth known): linear traces, lag phases, substrate depletion, at two noise levels.

    python benchmarks/window_hit_rates.py [n_traces_per_case]
"""

from __future__ import annotations

import sys

import numpy as np

from rateabs.simulate import rate_traces as simulate
from rateabs.slopes import find_windows


def main(n: int = 1000) -> None:
    print(f"{n} traces per case, 61 reads over 10 min, seeds 0..")
    print("case        noise  whole-read  lag found  bend found  |err| report  within 3SE  "
          "|err| curve")
    for noise in (0.001, 0.004):
        for seed, kind in enumerate(("linear", "lag", "depletion")):
            ts, truth = simulate(kind, n, 1000 + seed, noise=noise)
            w = find_windows(ts.grid())
            err = np.abs(w.slope / truth - 1)           # the reported slope (auto)
            cerr = np.abs(w.curve_slope / truth - 1)
            print(f"{kind:<11} {noise:5.3f}  {np.mean(w.end_reason == 0):10.2f} "
                  f"{np.mean(w.lag_s > 0):10.2f} {np.mean(np.isin(w.end_reason, [2, 3])):11.2f} "
                  f"{np.median(err):12.3f} {np.mean(np.abs(w.slope - truth) < 3 * w.slope_se):11.2f}"
                  f" {np.nanmedian(cerr):12.3f}")
    print("expected: linear -> whole read, no lag, no bend; lag -> lag found; depletion -> bend "
          "found (the curve estimate is then the better initial rate)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1000)
