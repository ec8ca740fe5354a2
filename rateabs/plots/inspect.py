"""Figures of ``rateabs inspect``."""

from __future__ import annotations

import numpy as np

from .style import INK, PALETTE, house_style, save


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
