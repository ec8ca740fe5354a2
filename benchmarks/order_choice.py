"""How often ``ratelaw --order auto`` recovers the true order, over many seeds.

    python benchmarks/order_choice.py [seeds]
"""

from __future__ import annotations

import sys
from collections import Counter

import numpy as np

from rateabs.models import order0, order1, order2
from rateabs.ratelaws import fit_trace


def main(seeds: int = 200) -> None:
    t = np.arange(0, 3600, 30.0)
    cases = {"0": lambda: order0(t[:60], 0.9, -2e-4), "1": lambda: order1(t, 0.9, 0.1, 8e-4),
             "2": lambda: order2(t, 0.9, 0.1, 3e-3)}
    print(f"{seeds} seeds per order, noise 0.003 A; rows: truth, columns: chosen")
    for order, gen in cases.items():
        c = Counter()
        for seed in range(seeds):
            y = gen()
            tt = t[:y.size]
            y = y + np.random.default_rng(seed).normal(0, 0.003, y.size)
            c[fit_trace(tt, y, order="auto", ci="asymptotic").order] += 1
        print(f"order {order}: " + ", ".join(f"{k}: {c[k]}" for k in "012")
              + f"   hit rate {c[order] / seeds:.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
