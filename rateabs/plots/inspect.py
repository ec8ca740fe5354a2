"""Figures of ``rateabs inspect``: every trace of a file in one picture.

Plate wells are drawn in plate geometry (one cell per well, rows A.. down, columns 1.. across),
other traces in a grid of cells in reading order, a few traces overlaid with a legend. All the
traces of a picture are one line collection on one axis, so a 1536-well plate costs about as much
as a 96-well one.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass

import numpy as np

from .style import GRID, INK, PALETTE, drawable, fixed_axes, house_style, save

#: Up to this many traces are overlaid on one axis with a legend; more get a cell each.
OVERLAY_MAX = 12


@dataclass(frozen=True)
class TraceArrays:
    """A TraceSet's readings as plain arrays, with its plate format: what the figure draws, in
    a form a drawing process takes in without pandas (so it can be forked before the command
    loads pandas: :mod:`rateabs.views.drawing`). Drawn as the TraceSet itself."""

    names: list[str]
    times: np.ndarray
    values: np.ndarray
    usable: np.ndarray
    plate_format: int | None = None

    @classmethod
    def of(cls, ts) -> TraceArrays:
        """The arrays of a TraceSet."""
        g = ts.grid()
        return cls(list(g.names), np.asarray(g.times, float), np.asarray(g.values, float),
                   np.asarray(g.usable, bool), ts.info.get("plate_format"))

    def grid(self) -> TraceArrays:
        """The arrays (as ``TraceSet.grid``)."""
        return self

    @property
    def info(self) -> dict:
        """The plate format (as ``TraceSet.info``)."""
        return {"plate_format": self.plate_format}


def _row_name(r: int) -> str:
    return chr(65 + r) if r < 26 else chr(64 + r // 26) + chr(65 + r % 26)


def trace_cells(names: list[str], stated: int | None = None
                ) -> tuple[np.ndarray, np.ndarray, int, int, bool]:
    """Each trace's (row, column) cell, the grid's rows and columns, and whether it is a plate.

    Well names (A1..AF48) give plate geometry: the plate the reader settled on (``stated``, the
    TraceSet's ``plate_format``, e.g. from the file header) where the names fit in it, else the
    smallest standard plate that holds them; other names fill a near-square grid in reading
    order.
    """
    from ..wells import PLATES, plate_format, well_position

    wells, _ = plate_format(names)
    if wells is not None and stated in PLATES and stated >= wells:
        wells = stated
    if wells is not None:
        pos = np.array([well_position(n) for n in names])
        rows, cols = PLATES[wells]
        return pos[:, 0], pos[:, 1], rows, cols, True
    n = len(names)
    cols = int(np.ceil(np.sqrt(n * 1.5)))
    rows = -(-n // cols)
    k = np.arange(n)
    return k // cols, k % cols, rows, cols, False


def _cell_paths(g, scale: float, r, c):
    """Every trace as a polyline in its cell (x in [c, c+1], y in [r, r+1], up is smaller y),
    on one time axis and one absorbance scale; also the masked readings' points and the range."""
    t = np.where(g.usable, g.times, np.nan)
    y = np.where(g.usable, g.values * scale, np.nan)
    t0, t1 = np.nanmin(t), np.nanmax(t)
    y0, y1 = np.nanmin(y), np.nanmax(y)
    dt = (t1 - t0) or 1.0
    dy = (y1 - y0) or 1.0
    x = c[:, None] + 0.08 + 0.84 * (g.times - t0) / dt
    yy = r[:, None] + 0.9 - 0.8 * (g.values * scale - y0) / dy
    segs = np.stack([np.where(g.usable, x, np.nan), np.where(g.usable, yy, np.nan)], axis=-1)
    bad = ~g.usable & np.isfinite(g.times) & np.isfinite(g.values)
    return segs, (x[bad], np.clip(yy, r[:, None], r[:, None] + 1)[bad]), (y0, y1)


def _grid_picture(plt, g, scale, ylabel, title, flagged, plate=None):
    """All traces in cells (plate geometry or reading order), one collection."""
    from matplotlib.collections import LineCollection, PatchCollection
    from matplotlib.patches import Rectangle

    r, c, rows, cols, plate = trace_cells(g.names, plate)
    width = min(16.0, max(8.5, 0.33 * cols + 1.6))
    height = max(3.2, width * rows / cols * 0.92 + 1.1)
    fig, ax = fixed_axes(plt, (width, height), margins=(0.55, 0.2, 0.75, 0.55))
    segs, (bx, by), (y0, y1) = _cell_paths(g, scale, r, c)
    if flagged.any():
        ax.add_collection(PatchCollection([Rectangle((ci, ri), 1, 1) for ri, ci in
                                           zip(r[flagged], c[flagged], strict=True)],
                                          facecolor=PALETTE[4], alpha=0.22, lw=0))
    lw = 1.0 if rows * cols <= 96 else (0.7 if rows * cols <= 384 else 0.5)
    ax.add_collection(LineCollection(segs, colors=PALETTE[0], linewidths=lw))
    if bx.size:
        ax.plot(bx, by, "x", ms=2.5, mew=0.7, color=PALETTE[1], ls="none")
    ax.set_xlim(0, cols)
    ax.set_ylim(rows, 0)
    ax.set_aspect("auto")
    ax.grid(False)
    ax.vlines(np.arange(1, cols), 0, rows, colors=GRID, lw=0.5)
    ax.hlines(np.arange(1, rows), 0, cols, colors=GRID, lw=0.5)
    step = 1 if cols <= 24 else 4
    if plate:
        ax.set_xticks(np.arange(0, cols, step) + 0.5, [str(k + 1) for k in range(0, cols, step)])
        rstep = 1 if rows <= 16 else 2
        ax.set_yticks(np.arange(0, rows, rstep) + 0.5, [_row_name(k) for k in range(0, rows,
                                                                                   rstep)])
    else:
        ax.set_xticks([])
        ax.set_yticks([])
        for i, name in enumerate(g.names):
            ax.text(c[i] + 0.06, r[i] + 0.06, drawable(name, f"#{i + 1}"), fontsize=6.5,
                    va="top", ha="left", color=INK)
    ax.tick_params(length=0, labelsize=7 if cols <= 24 else 6)
    for side in ("top", "right", "bottom", "left"):
        ax.spines[side].set_visible(False)
    span = np.nanmax(g.times[g.usable]) / 60 if g.usable.any() else 0.0
    ax.set_title(title, loc="left")
    note = (f"each cell: {ylabel} from {y0:.3g} to {y1:.3g} (bottom to top, one scale for all) "
            f"over 0 to {span:.3g} min")
    if flagged.any():
        note += f"; orange cells: {int(flagged.sum())} traces with a flag (see the table)"
    if bx.size:
        note += "; x: masked readings"
    fig.text(0.55 / width, 0.12 / height, textwrap.fill(note, int(width * 15)), fontsize=7.5,
             color=INK, ha="left", va="bottom")
    return fig


def _overlay_picture(plt, g, scale, ylabel, title):
    """A few traces overlaid, one colour each, the legend beside the axes (off the data)."""
    fig, ax = fixed_axes(plt, (7.6, 3.9), margins=(0.75, 1.55, 0.5, 0.4))
    for i, name in enumerate(g.names):
        ok = g.usable[i]
        t = g.times[i] / 60.0
        col = PALETTE[i % len(PALETTE)]
        ax.plot(t[ok], g.values[i][ok] * scale, marker="o", ms=2.5, lw=1.0, color=col,
                label=drawable(name, f"trace {i + 1}")[:22])
        bad = ~ok & np.isfinite(g.times[i]) & np.isfinite(g.values[i])
        if bad.any():
            ax.plot(t[bad], g.values[i][bad] * scale, "x", color=col, ms=4)
    ax.set_xlabel("time (min)")
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0)
    return fig


def traces_overview(ts, path, title: str, ylabel: str, scale: float = 1.0, flagged=None):
    """Every trace of a TraceSet (or its :class:`TraceArrays`) in one picture, masked readings
    marked with x.

    Up to :data:`OVERLAY_MAX` traces share one axis with a legend; more are drawn in cells, in
    plate geometry for well names, with ``flagged`` traces (a boolean per trace) shaded.
    """
    g = ts.grid()
    flagged = np.zeros(len(g.names), bool) if flagged is None else np.asarray(flagged, bool)
    with house_style() as plt:
        if len(g.names) <= OVERLAY_MAX:
            fig = _overlay_picture(plt, g, scale, ylabel, drawable(title))
        else:
            fig = _grid_picture(plt, g, scale, ylabel, drawable(title), flagged,
                                ts.info.get("plate_format"))
        return save(fig, path, tight=False)
