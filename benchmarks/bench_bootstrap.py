"""Cost of 2000 bootstrap resamples by the batched solver, against one plain fit and against a
loop of one-at-a-time fits (fitting.fit, scipy least_squares), measured in this run; and the
same seen from the command line, start-up included.

    python benchmarks/bench_bootstrap.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
from common import timed  # noqa: E402

from rateabs.fitting import fit  # noqa: E402
from rateabs.models import SATURATION  # noqa: E402

S = np.array([0.02, 0.02, 0.06, 0.06, 0.11, 0.11, 0.22, 0.22, 0.56, 0.56, 1.10, 1.10])
V = np.array([76, 47, 97, 107, 123, 139, 159, 152, 191, 201, 207, 200.0])


def main() -> None:
    m = SATURATION["mm"]
    t_plain, r = timed(lambda: fit(m, S, V), repeat=5)
    t_boot, rb = timed(lambda: fit(m, S, V, ci="bootstrap", n_boot=2000), repeat=3)

    def fit_loop(n=2000):
        rng = np.random.default_rng(0)
        res = (V - r.fitted) * np.sqrt(12 / 10)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for _ in range(n):
                fit(m, S, r.fitted + rng.choice(res - res.mean(), 12))

    t_loop, _ = timed(fit_loop, repeat=1)
    print(f"one plain fit (asymptotic CI)            {t_plain * 1e3:8.1f} ms")
    print(f"fit + 2000 bootstrap resamples (batched)  {t_boot * 1e3:8.1f} ms   "
          f"{t_boot / t_plain:5.1f}x the plain fit")
    print(f"2000 fits one at a time in a loop        {t_loop * 1e3:8.1f} ms   batched is "
          f"{t_loop / t_boot:5.1f}x faster")
    with tempfile.TemporaryDirectory() as d:
        f = Path(d) / "p.csv"
        f.write_text("conc,rate\n" + "".join(f"{a},{b}\n" for a, b in zip(S, V, strict=True)))
        times = {}
        for ci in ("asymptotic", "bootstrap"):
            best = float("inf")
            for _ in range(3):
                t0 = time.perf_counter()
                subprocess.run([sys.executable, "-m", "rateabs.cli", "saturation", str(f),
                                "--model", "mm", "--ci", ci, "--format", "json"],
                               check=True, capture_output=True)
                best = min(best, time.perf_counter() - t0)
            times[ci] = best
    print(f"command line, start-up included: asymptotic {times['asymptotic']:.3f} s, bootstrap "
          f"{times['bootstrap']:.3f} s: {100 * (times['bootstrap'] / times['asymptotic'] - 1):+.1f} %"
          " (aim: under +20 %)")
    print(f"bootstrap 95 % CI of Km: [{rb.params['Km'].ci_low:.5f}, {rb.params['Km'].ci_high:.5f}]"
          f" ppm, {rb.n_boot_ok} of 2000 converged")


if __name__ == "__main__":
    main()
