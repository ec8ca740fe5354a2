"""Plots, in one house style settled here and used by every figure.

The palette is the Okabe–Ito colour-blind-safe set (Okabe & Ito 2008, "Color Universal
Design"); every axis carries its unit; figures are written atomically as PNG.
"""

from __future__ import annotations

import io
from contextlib import contextmanager
from pathlib import Path

import numpy as np

PALETTE = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000"]
INK = "#222222"
GRID = "#d9d9d9"
SHADE = "#0072B2"

RC = {
    "figure.dpi": 110, "savefig.dpi": 110, "font.size": 9.5, "axes.titlesize": 10.5,
    "axes.labelsize": 9.5, "axes.edgecolor": INK, "axes.labelcolor": INK,
    "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True,
    "grid.color": GRID, "grid.linewidth": 0.6, "xtick.color": INK, "ytick.color": INK,
    "legend.frameon": False, "legend.fontsize": 8.5, "lines.linewidth": 1.6,
    "lines.markersize": 4, "axes.prop_cycle": None, "font.family": "DejaVu Sans",
}


@contextmanager
def house_style():
    """Matplotlib settings of every rateabs figure (Agg backend, palette, grid, fonts)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt
    from cycler import cycler

    rc = dict(RC, **{"axes.prop_cycle": cycler(color=PALETTE)})
    with plt.rc_context(rc):
        yield plt


def save(fig, path: str | Path) -> Path:
    """Write a figure as PNG atomically and close it."""
    from .io import write_atomic

    buf = io.BytesIO()
    fig.savefig(buf, format="png", bbox_inches="tight")
    import matplotlib.pyplot as plt

    plt.close(fig)
    write_atomic(path, buf.getvalue())
    return Path(path)


def traces_overview(ts, path, title: str, ylabel: str, scale: float = 1.0, max_traces: int = 24):
    """All traces of a TraceSet on one axis (at most ``max_traces``), masked readings marked."""
    g = ts.grid()
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(6.4, 3.8))
        for i in range(min(len(g.names), max_traces)):
            ok = g.usable[i]
            t = g.times[i] / 60.0
            ax.plot(t[ok], g.values[i][ok] * scale, marker="o", ms=2.5, lw=1.0,
                    label=g.names[i], color=PALETTE[i % len(PALETTE)])
            bad = ~ok & np.isfinite(g.times[i])
            if bad.any():
                ax.plot(t[bad], np.full(bad.sum(), np.nanmax(g.values[i][ok] * scale)
                                        if ok.any() else 0), "x", color=INK, ms=4)
        ax.set_xlabel("time (min)")
        ax.set_ylabel(ylabel)
        ax.set_title(title)
        if len(g.names) <= 12:
            ax.legend(ncol=2, loc="best")
        elif len(g.names) > max_traces:
            ax.text(0.99, 0.01, f"first {max_traces} of {len(g.names)} traces", ha="right",
                    va="bottom", transform=ax.transAxes, fontsize=8, color=INK)
        return save(fig, path)
