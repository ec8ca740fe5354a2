"""How often ``saturation --model auto`` picks the true inhibition mode, over many seeds.

    python benchmarks/mode_choice.py [seeds_per_mode]

The truth is the dead-end inhibition mechanism integrated with solve_ivp
(tests/kinetics_truth.py), not the package's rate equations; seeds start at 1000, apart from the
seeds of tests/test_saturation.py, whose acceptance bound uses the rate measured here.
"""

from __future__ import annotations

import sys
from collections import Counter
from pathlib import Path

import numpy as np

from rateabs.saturation import SaturationData, analyse

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from kinetics_truth import mechanism_rates  # noqa: E402

TRUTH = {"competitive": {"Kic": 5.0}, "uncompetitive": {"Kiu": 5.0},
         "noncompetitive": {"Kic": 5.0, "Kiu": 5.0}, "mixed": {"Kic": 3.0, "Kiu": 15.0}}


def main(seeds: int = 200) -> None:
    s = np.array([10, 25, 50, 100, 200, 400, 800.0])
    ii = np.array([0, 3, 8, 20.0])
    S, I = (a.ravel() for a in np.meshgrid(s, ii))
    print(f"{seeds} seeds per mode; 7 [S] x 4 [I], 3 % proportional noise; rows: truth")
    print(f"{'':16}" + "".join(f"{m:>16}" for m in TRUTH) + "     hit rate")
    total = 0
    for mode, ks in TRUTH.items():
        c = Counter()
        v_true = mechanism_rates(S, I, V=10.0, Km=80.0, **ks)
        for seed in range(1000, 1000 + seeds):
            rng = np.random.default_rng(seed)
            v = v_true * (1 + rng.normal(0, 0.03, S.size))
            c[analyse(SaturationData(S, v, I, None, "uM", "uM/min", "uM", {})).chosen] += 1
        total += c[mode]
        print(f"{mode:<16}" + "".join(f"{c[m]:>16}" for m in TRUTH) + f"     {c[mode] / seeds:.3f}")
    print(f"overall hit rate {total / (seeds * len(TRUTH)):.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
