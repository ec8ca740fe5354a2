"""How often ``saturation --model auto`` picks the true inhibition mode, over many seeds.

    python benchmarks/mode_choice.py [seeds_per_mode]
"""

from __future__ import annotations

import sys
from collections import Counter

import numpy as np

from rateabs.models import SATURATION
from rateabs.saturation import SaturationData, analyse

TRUTH = {"competitive": (10.0, 80.0, 5.0), "uncompetitive": (10.0, 80.0, 5.0),
         "noncompetitive": (10.0, 80.0, 5.0), "mixed": (10.0, 80.0, 3.0, 15.0)}


def main(seeds: int = 200) -> None:
    s = np.array([10, 25, 50, 100, 200, 400, 800.0])
    ii = np.array([0, 3, 8, 20.0])
    S, I = (a.ravel() for a in np.meshgrid(s, ii))
    print(f"{seeds} seeds per mode; 7 [S] x 4 [I], 3 % proportional noise; rows: truth")
    print(f"{'':16}" + "".join(f"{m:>16}" for m in TRUTH) + "     hit rate")
    total = 0
    for mode, p in TRUTH.items():
        c = Counter()
        for seed in range(seeds):
            rng = np.random.default_rng(seed)
            v = SATURATION[mode].func(np.vstack([S, I]), *p) * (1 + rng.normal(0, 0.03, S.size))
            c[analyse(SaturationData(S, v, I, None, "uM", "uM/min", "uM", {})).chosen] += 1
        total += c[mode]
        print(f"{mode:<16}" + "".join(f"{c[m]:>16}" for m in TRUTH) + f"     {c[mode] / seeds:.3f}")
    print(f"overall hit rate {total / (seeds * len(TRUTH)):.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
