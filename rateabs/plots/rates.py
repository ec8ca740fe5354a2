"""Figures of ``rateabs rates``: trace pages, the plate map of rates, replicates."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .style import GRID, INK, PALETTE, SHADE, house_style, save


def rate_traces(analysis, out, stem: str = "rates", per_page: int = 24) -> list:
    """Small multiples of every trace: readings, the window shaded, the line, residuals below."""

    ts = analysis.traces
    g = ts.grid()
    w = analysis.windows
    table = analysis.table.set_index("trace")
    files = []
    n = len(g.names)
    pages = max(1, -(-n // per_page))
    for page in range(pages):
        idx = list(range(page * per_page, min(n, (page + 1) * per_page)))
        cols = 6 if len(idx) > 12 else min(4, len(idx))
        rows = -(-len(idx) // cols)
        with house_style() as plt:
            fig = plt.figure(figsize=(2.35 * cols, 2.3 * rows), layout="constrained")
            outer = fig.add_gridspec(rows, cols)
            for k, i in enumerate(idx):
                sub = outer[k // cols, k % cols].subgridspec(2, 1, height_ratios=[3, 1], hspace=0)
                ax = fig.add_subplot(sub[0])
                axr = fig.add_subplot(sub[1], sharex=ax)
                ok = g.usable[i]
                t = g.times[i] / 60
                y = g.values[i]
                ax.plot(t[ok], y[ok], ".", ms=3, color=PALETTE[0])
                bad = ~ok & np.isfinite(t) & np.isfinite(y)
                if bad.any():
                    ax.plot(t[bad], y[bad], "x", ms=3, color=PALETTE[1])
                name = g.names[i]
                flags = table.loc[name, "flags"]
                if np.isfinite(w.t_start[i]):
                    t0, t1 = w.t_start[i] / 60, w.t_end[i] / 60
                    ax.axvspan(t0, t1, color=SHADE, alpha=0.12, lw=0)
                    tt = np.linspace(t0, t1, 2)
                    ax.plot(tt, w.intercept[i] + w.window_slope[i] * tt * 60, color=PALETTE[1],
                            lw=1.3)
                    res = y - (w.intercept[i] + w.window_slope[i] * g.times[i])
                    inside = ok & (g.times[i] >= w.t_start[i]) & (g.times[i] <= w.t_end[i])
                    axr.plot(t[inside], res[inside] * 1e3, ".", ms=2.5, color=PALETTE[0])
                    axr.plot(t[ok & ~inside], res[ok & ~inside] * 1e3, ".", ms=2.5, color=GRID)
                if np.isfinite(w.curve_slope[i]) and ok.any():
                    tc = np.linspace(np.nanmin(g.times[i][ok]), np.nanmax(g.times[i][ok]), 60)
                    ax.plot(tc / 60, w.curve_values(i, tc), ":", lw=1.0, color=INK)
                axr.axhline(0, color=INK, lw=0.6)
                role = table.loc[name, "role"]
                ax.set_title(f"{name} ({role})" + (f"\n{','.join(flags)}" if flags else ""),
                             fontsize=7.5, color=PALETTE[1] if flags else INK)
                ax.tick_params(labelsize=6.5, labelbottom=False)
                axr.tick_params(labelsize=6.5)
                if k % cols == 0:
                    ax.set_ylabel("A (AU)", fontsize=7)
                    axr.set_ylabel("res. (mA)", fontsize=6.5)
                if k // cols == rows - 1:
                    axr.set_xlabel("time (min)", fontsize=7)
            fig.suptitle("shaded: window used for the initial rate; solid: its line; dotted: "
                         "whole-curve estimate; x: masked readings", fontsize=8.5)
            files.append(save(fig, Path(out) / f"{stem}_traces_{page + 1}.png"))
    return files


def plate_heatmap(analysis, path):
    """Plate map of rates (or slopes); flagged wells outlined. None if traces are not wells."""
    import re

    t = analysis.table
    if len(t) < 8:               # a few cuvettes named like wells are not a plate
        return None
    col = "rate_uM_per_min" if "rate_uM_per_min" in t.columns else "slope_A_per_min"
    unit = "µM/min" if col.startswith("rate") else "A/min"
    wells = {}
    for rec in t.to_dict("records"):
        m = re.fullmatch(r"([A-Pa-p])(\d{1,2})", rec["trace"])
        if not m:
            return None
        wells[(ord(m.group(1).upper()) - 65, int(m.group(2)) - 1)] = rec
    nrow = 8 if max(r for r, _ in wells) < 8 and max(c for _, c in wells) < 12 else 16
    ncol = 12 if nrow == 8 else 24
    grid = np.full((nrow, ncol), np.nan)
    for (r, c), rec in wells.items():
        grid[r, c] = rec[col]
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(0.62 * ncol + 1.6, 0.55 * nrow + 1.2))
        im = ax.imshow(grid, cmap="viridis", aspect="equal")
        ax.grid(False)
        for (r, c), rec in wells.items():
            v = rec[col]
            txt = "-" if not np.isfinite(v) else f"{v:.3g}"
            ax.text(c, r, txt, ha="center", va="center", fontsize=6.5 if ncol == 12 else 4.5,
                    color="white" if np.isfinite(v) and v < np.nanmean(grid) else INK)
            if rec["flags"]:
                ax.add_patch(plt.Rectangle((c - 0.46, r - 0.46), 0.92, 0.92, fill=False,
                                           ec=PALETTE[1], lw=1.2))
        ax.set_xticks(range(ncol), [str(i + 1) for i in range(ncol)], fontsize=7)
        ax.set_yticks(range(nrow), [chr(65 + i) for i in range(nrow)], fontsize=7)
        ax.tick_params(length=0)
        fig.colorbar(im, ax=ax, label=f"{col.split('_')[0]} ({unit})", shrink=0.8)
        ax.set_title(f"{col.split('_')[0]} per well ({unit}); orange outline: flagged well")
        return save(fig, path)


def replicate_plot(analysis, path):
    """Each replicate group's wells as dots with mean ± SD; outliers marked."""
    reps = analysis.replicates
    t = analysis.table.set_index("trace")
    col = "rate_uM_per_min" if "rate_uM_per_min" in t.columns else "slope_A_per_min"
    unit = reps["unit"].iloc[0]
    n = len(reps)
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(7.2, max(2.5, 0.22 * n + 1.0)))
        for k, rec in enumerate(reps.to_dict("records")):
            vals = t.loc[rec["wells"], col].to_numpy(dtype=float)
            ax.plot(vals, np.full(vals.size, k), "o", ms=3.5, color=PALETTE[0], alpha=0.8)
            if np.isfinite(rec["sd"]):
                ax.errorbar(rec["mean"], k, xerr=rec["sd"], fmt="|", color=INK, ms=9, lw=1)
            if rec["outlier"]:
                ax.plot(t.loc[rec["outlier"], col], k, "o", ms=7, mfc="none", color=PALETTE[1])
        ax.set_yticks(range(n), list(reps["group"]), fontsize=6.5)
        ax.invert_yaxis()
        ax.set_xlabel(f"{col.split('_')[0]} ({unit})")
        ax.set_title("replicates: wells (dots), mean ± SD (bars), Grubbs outlier (ring)")
        return save(fig, path)
