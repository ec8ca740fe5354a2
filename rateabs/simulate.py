"""Ground-truth simulations from known parameters, for tests, benchmarks and teaching.

Nothing here is a measurement: each function draws seeded noise around a known model so that a
method's answer can be checked against the truth.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .models import order1
from .traces import TraceSet

TRACE_KINDS = ("linear", "lag", "depletion")


def rate_traces(kind: str, n: int, seed: int, reads: int = 61, noise: float = 0.002):
    """``n`` absorbance traces over 10 min with known initial slopes (A/s), and those slopes.

    ``linear``: straight lines; ``lag``: a hysteretic lag, y = b (t - tau (1 - e^(-t/tau)));
    ``depletion``: a first-order approach to a plateau, initial slope b.
    """
    if kind not in TRACE_KINDS:
        raise ValueError(f"kind must be one of {TRACE_KINDS}")
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 600, reads)
    ys, truth = [], []
    for _ in range(n):
        b = rng.uniform(0.5, 3) * 1e-4 * rng.choice([-1, 1])
        if kind == "linear":
            y = 0.3 + b * t
        elif kind == "lag":
            tau = rng.uniform(60, 120)
            y = 0.3 + b * (t - tau * (1 - np.exp(-t / tau)))
        else:
            k = rng.uniform(1.5, 3) / 600
            y = 0.3 + b / k * (1 - np.exp(-k * t))
        ys.append(y + rng.normal(0, noise, reads))
        truth.append(b)
    return TraceSet.from_arrays([f"w{i}" for i in range(n)], t, np.array(ys)), np.array(truth)


def first_order_class(folder: str | Path, n: int, seed: int = 0, k: float = 8e-4,
                      spread: float = 0.01, minutes_slip_every: int = 0) -> Path:
    """A class folder (roster.csv, rubric.toml, one first-order run per student).

    Every ``minutes_slip_every``-th student (if set) reports k per minute as per second.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    t = np.arange(0, 2401, 30.0)
    rows = ["student,file,reported"]
    for i in range(n):
        ki = k * (1 + rng.normal(0, spread))
        a = order1(t, 1.1, 0.05, ki) + rng.normal(0, 0.004, t.size)
        (folder / f"r{i}.csv").write_text("time (s),A\n" + "".join(
            f"{tt:g},{v:.4f}\n" for tt, v in zip(t, a, strict=True)))
        slip = 60 if minutes_slip_every and i % minutes_slip_every == 0 else 1
        rows.append(f"s{i:03d},r{i}.csv,{ki * slip:.4g}")
    (folder / "roster.csv").write_text("\n".join(rows) + "\n")
    (folder / "rubric.toml").write_text(f'[assignment]\nquantity = "k"\nunit = "1/s"\n'
                                        f'reference = {k:g}\ntolerance_pct = 5\n')
    return folder
