"""Coverage of the completion forecast's 95 % interval for t(99 %), by simulation.

First-order runs with known k, stopped at different conversions (the reaction still running),
at two noise levels; the interval is the profile-likelihood interval of k mapped through t(k).

    python benchmarks/completion_coverage.py [seeds]
"""

from __future__ import annotations

import math
import sys

import numpy as np

from rateabs.completion import assess
from rateabs.models import order1


def main(seeds: int = 400) -> None:
    k = 8e-4
    truth = -math.log(0.01) / k
    print(f"{seeds} seeds per case; k = {k} 1/s, true t(99 %) = {truth / 60:.1f} min")
    print("stopped at   noise   coverage of 95 % interval   median width (min)")
    for stop_min in (15, 30, 45):
        for noise in (0.004, 0.015):
            t = np.arange(0, stop_min * 60 + 1, 30.0)
            hits, widths = 0, []
            for seed in range(seeds):
                rng = np.random.default_rng(seed)
                y = order1(t, 1.25, 0.06, k) + rng.normal(0, noise, t.size)
                c = assess(t, y, target=0.99)
                hits += c.t_target.ci_low <= truth <= c.t_target.ci_high
                widths.append(c.t_target.ci_high - c.t_target.ci_low)
            conv = 100 * (1 - math.exp(-k * stop_min * 60))
            print(f"{stop_min:4d} min ({conv:4.1f} %)  {noise:5.3f}   {hits / seeds:26.3f}   "
                  f"{np.median(widths) / 60:18.1f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 400)
