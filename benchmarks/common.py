"""Shared helpers of the benchmark scripts (timing, simulated plates)."""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np


def timed(fn, repeat: int = 3):
    """Best wall time of ``repeat`` calls, and the last result."""
    best, out = float("inf"), None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def plate_rows(rows: int, cols: int) -> list[str]:
    """Well names of a plate, A1..P24 style (AA.. for 1536-well plates)."""
    letters = [chr(65 + i) for i in range(26)] + ["A" + chr(65 + i) for i in range(26)]
    return [f"{letters[r]}{c + 1}" for r in range(rows) for c in range(cols)]


def write_plate(path: Path, n_rows=32, n_cols=48, n_reads=300, seed=1) -> Path:
    """A simulated kinetic plate export: metadata lines, clock times, one column per well."""
    rng = np.random.default_rng(seed)
    wells = plate_rows(n_rows, n_cols)
    t = np.arange(n_reads) * 10.0
    b = rng.uniform(0.5, 3, len(wells)) * 1e-4
    k = rng.uniform(0, 2, len(wells)) / t[-1]
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(k[:, None] > 0, (1 - np.exp(-k[:, None] * t)) / k[:, None], t)
    y = 0.2 + b[:, None] * frac + rng.normal(0, 0.002, (len(wells), n_reads))
    lines = ["Simulated 1536-well read (benchmark)", "Wavelength: 405 nm", "",
             "Time," + ",".join(wells)]
    for j, tt in enumerate(t):
        h, rem = divmod(int(tt), 3600)
        m, s = divmod(rem, 60)
        lines.append(f"{h}:{m:02d}:{s:02d}," + ",".join(f"{v:.4f}" for v in y[:, j]))
    path.write_text("\n".join(lines) + "\n")
    return path
