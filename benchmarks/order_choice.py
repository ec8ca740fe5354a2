"""How often ``ratelaw --order auto`` recovers the true order, over many seeds.

    python benchmarks/order_choice.py [seeds]

Traces are absorbance (eps 1e4 L/(mol cm), 1 cm, baseline 0.1) of a reactant lost by the
mechanism integrated with solve_ivp (tests/kinetics_truth.py), not the package's integrated
laws; seeds start at 1000, apart from the seeds of tests/test_ratelaws.py, whose acceptance
bound uses the rates measured here.
"""

from __future__ import annotations

import sys
from collections import Counter
from pathlib import Path

import numpy as np

from rateabs.ratelaws import fit_trace

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from kinetics_truth import beer_lambert, first_order_decay, second_order_decay  # noqa: E402


def main(seeds: int = 200) -> None:
    t = np.arange(0, 3600, 30.0)
    c0, eps = 8e-5, 1e4
    cases = {"0": lambda: 0.1 + beer_lambert(c0 - 2e-8 * t[:60], eps),
             "1": lambda: 0.1 + beer_lambert(first_order_decay(t, c0, 8e-4), eps),
             "2": lambda: 0.1 + beer_lambert(second_order_decay(t, c0, 40.0), eps)}
    print(f"{seeds} seeds per order, noise 0.003 A; rows: truth, columns: chosen")
    for order, gen in cases.items():
        c = Counter()
        for seed in range(1000, 1000 + seeds):
            y = gen()
            tt = t[:y.size]
            y = y + np.random.default_rng(seed).normal(0, 0.003, y.size)
            c[fit_trace(tt, y, order="auto", ci="asymptotic").order] += 1
        print(f"order {order}: " + ", ".join(f"{k}: {c[k]}" for k in "012")
              + f"   hit rate {c[order] / seeds:.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
