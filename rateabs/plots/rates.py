"""Figures of ``rateabs rates``: the plate at a glance, pages of single wells, the plate map of
rates and the replicates.

Drawing costs in proportion to what a person can look at: the overview puts every well's trace
in plate geometry on one Axes as a few collections (LineCollection, PolyCollection, one scatter),
so a 1536-well plate costs about what a 96-well one does; single-well pages are drawn only for
the wells that need a look (up to a cap) unless every well is asked for; layouts are fixed
numbers computed once, never a constrained layout, and every figure is closed when saved.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np

from .rate_data import RateDrawing, rate_drawing
from .style import GRID, INK, PALETTE, RC, SHADE, house_style, save, text_marks

LOOK = "#fbe3cf"          # background of a well that needs a look
LEFT_OUT = "#d6d6d6"      # background of a well left out of the analysis
EMPTY_WELL = "#f6f6f6"    # background of any other well
WINDOW = PALETTE[2]       # readings inside the window
LINE = PALETTE[1]         # the reported initial slope
FAST_PNG = 1              # zlib level of these PNGs: a third of the encoding time, files ~1.3x
WELL_PAGE_SIZE = 24       # single wells to a page


def plate_positions(names: list[str], plate_format: int | None):
    """(rows, columns, row of each trace, column of each trace, row labels, column labels):
    plate geometry for well names, cut to the rows and columns the wells span (28 wells of a
    384-well plate drawn as tiny cells in one corner of an empty plate could not be read),
    else a near-square grid in the traces' order."""
    from ..wells import PLATES, well_position

    pos = [well_position(n) for n in names]
    if plate_format in PLATES and all(p is not None for p in pos) and pos:
        rows = np.array([p[0] for p in pos])
        cols = np.array([p[1] for p in pos])
        r0, c0 = int(rows.min()), int(cols.min())
        nrow, ncol = int(rows.max()) - r0 + 1, int(cols.max()) - c0 + 1
        letters = [chr(65 + r) if r < 26 else "A" + chr(65 + r - 26)
                   for r in range(r0, r0 + nrow)]
        return nrow, ncol, rows - r0, cols - c0, letters, [str(c + 1)
                                                           for c in range(c0, c0 + ncol)]
    n = max(len(names), 1)
    ncol = max(1, math.ceil(math.sqrt(n * 1.5)))
    nrow = math.ceil(n / ncol)
    k = np.arange(len(names))
    return nrow, ncol, k // ncol, k % ncol, [""] * nrow, [""] * ncol


def _cell_scale(g, ok):
    """Per-trace centre and span of the values: each well is scaled on its own, but never to
    less than a fifth of the plate's typical change, so that a flat well looks flat."""
    v = np.where(ok, g.values, np.inf)
    lo = np.min(v, axis=1)
    hi = np.max(np.where(ok, g.values, -np.inf), axis=1)
    lo, hi = np.where(ok.any(axis=1), lo, 0.0), np.where(ok.any(axis=1), hi, 0.0)
    ptp = np.nan_to_num(hi - lo)
    floor = max(0.2 * float(np.percentile(ptp, 90)) if ptp.size else 0.0, 1e-4)
    return np.nan_to_num((hi + lo) / 2), np.maximum(ptp, floor) * 1.1


def _thin(x, y, keep, pixels: int):
    """At most about two points per pixel of a cell's width: each run of readings that falls
    on one pixel keeps its lowest and its highest reading, in time order, so a spike stays
    visible while a 300-reading trace in a 40-pixel cell costs a tenth to draw."""
    n, m = x.shape
    k = m // max(pixels, 1)
    if k < 3:
        return x, y, keep
    bins = -(-m // k)
    fill = bins * k - m

    def pad(a, v):
        return np.hstack([a, np.full((n, fill), v, dtype=a.dtype)]).reshape(n, bins, k)

    xb, yb, kb = pad(x, np.nan), pad(y, np.nan), pad(keep, False)
    lo = np.argmin(np.where(kb, yb, np.inf), axis=2)
    hi = np.argmax(np.where(kb, yb, -np.inf), axis=2)
    idx = np.stack([np.minimum(lo, hi), np.maximum(lo, hi)], axis=2)
    take = lambda a: np.take_along_axis(a, idx, axis=2).reshape(n, 2 * bins)  # noqa: E731
    return take(xb), take(yb), take(kb)


def _well_backgrounds(ax, shape, rows, cols, flagged, n: int) -> None:
    """Each well's background as one collection of cells (wells light grey, wells that need a
    look shaded and outlined, wells left out grey; empty positions stay white), parted by white
    gaps. Cells, not an image: an image is resampled to every pixel of the plate."""
    from matplotlib.collections import PolyCollection

    nrow, ncol = shape
    gap_pt = 1.5 if ncol <= 24 else 1.0
    cell_in = ax.get_position().width * ax.figure.get_figwidth() / ncol
    h = gap_pt / 72 / cell_in / 2           # half the gap, in cells
    colours = np.array([EMPTY_WELL] * len(rows), dtype=object)
    colours[:n][flagged[:n]] = LOOK
    colours[n:] = LEFT_OUT
    ax.add_collection(PolyCollection(_cells(rows, cols, h), facecolors=list(colours), lw=0,
                                     zorder=0))
    ax.add_collection(PolyCollection(_cells(rows[flagged], cols[flagged], 0.03),
                                     facecolors="none", edgecolors=PALETTE[1],
                                     linewidths=1.0 if ncol <= 24 else 0.7))


def _cells(rows, cols, m: float):
    """The square of each (row, column) cell, inset by ``m`` cells on every side."""
    r, c = np.asarray(rows, float), np.asarray(cols, float)
    return np.stack([np.column_stack(p) for p in ((c + m, r + m), (c + 1 - m, r + m),
                                                   (c + 1 - m, r + 1 - m), (c + m, r + 1 - m))],
                    axis=1)


def _window_boxes(x, inside, rows, band):
    """The window of each well as a bar under the trace, over the window's readings."""
    has = inside.any(axis=1)
    xa = np.where(inside, x, np.inf).min(axis=1)[has]
    xb = np.where(inside, x, -np.inf).max(axis=1)[has]
    top, bottom = rows[has] + band[1] + 0.01, rows[has] + min(band[1] + 0.06, 0.975)
    return np.stack([np.column_stack(p) for p in ((xa, bottom), (xb, bottom), (xb, top),
                                                  (xa, top))], axis=1)


def _joined(x, y, keep):
    """All rows as one polyline broken by NaN (between rows and where ``keep`` fails): one
    path that matplotlib simplifies and draws at once, instead of a path per well."""
    gap = np.full((x.shape[0], 1), np.nan)
    return (np.hstack([np.where(keep, x, np.nan), gap]).ravel(),
            np.hstack([np.where(keep, y, np.nan), gap]).ravel())


def as_drawing(analysis, wells=()) -> RateDrawing:
    """The figures' data (:class:`~rateabs.plots.rate_data.RateDrawing`): as given, or made
    from a rates analysis (``wells``: those drawn on single-well pages)."""
    return analysis if isinstance(analysis, RateDrawing) else rate_drawing(analysis, list(wells))


def plate_overview(analysis, path, title: str = ""):
    """Every well's trace in plate geometry on one Axes: readings, the window (green), the
    reported initial slope (orange line), masked readings (x), wells that need a look shaded.
    ``analysis``: a rates analysis or its :class:`~rateabs.plots.rate_data.RateDrawing`."""
    from matplotlib.collections import LineCollection, PolyCollection

    g = as_drawing(analysis)
    t = g.table
    left_out = g.left_out
    names = list(g.names) + left_out
    nrow, ncol, rows, cols, rlab, clab = plate_positions(names, g.plate_format)
    cell_in = 1.0 if ncol <= 12 else (0.56 if ncol <= 24 else 0.34)
    n = len(g.names)
    ok = g.usable & np.isfinite(g.times)
    tmin = float(np.nanmin(g.times)) if np.isfinite(g.times).any() else 0.0
    tspan = max(float(np.nanmax(g.times)) - tmin, 1e-9) if np.isfinite(g.times).any() else 1.0
    centre, span = _cell_scale(g, ok)
    pad = 0.1
    band = (0.24, 0.94) if ncol <= 12 else (0.1, 0.9)   # room above the trace for its label
    c0, r0 = cols[:n, None].astype(float), rows[:n, None].astype(float)
    x = c0 + pad + (1 - 2 * pad) * (np.nan_to_num(g.times) - tmin) / tspan
    y = _cell_y(r0, np.nan_to_num(g.values), centre[:, None], span[:, None], band)
    t0 = np.asarray(t["window_start_s"], float)[:, None]
    t1 = np.asarray(t["window_end_s"], float)[:, None]
    with np.errstate(invalid="ignore"):
        inside = ok & (g.times >= t0) & (g.times <= t1)
    flagged = np.array([bool(f) for f in t["flags"]] + [False] * len(left_out))
    fig_w, fig_h = ncol * cell_in + 1.2, nrow * cell_in + 1.3
    n_look = int(flagged.sum())
    heading, extra = _wrapped(
        (f"{title}: " if title else "") + f"{n} wells, time left to right, each well scaled to "
        f"its own change; green bar: window, orange line: initial slope; shaded: needs a look "
        f"({n_look})" + (f"; grey: left out ({len(left_out)})" if left_out else ""), fig_w, 0.6)
    fig_h += extra
    with house_style() as plt:
        fig = plt.figure(figsize=(fig_w, fig_h))
        ax = fig.add_axes((0.6 / fig_w, 0.5 / fig_h, ncol * cell_in / fig_w,
                           nrow * cell_in / fig_h))
        _well_backgrounds(ax, (nrow, ncol), rows, cols, flagged, n)
        lw = 0.7 if ncol <= 12 else 0.45
        ax.add_collection(PolyCollection(_window_boxes(x, inside, rows[:n], band),
                                         facecolors=WINDOW, lw=0))
        ax.plot(*_joined(*_thin(x, y, ok, int(cell_in * 0.8 * RC["savefig.dpi"]))),
                color=PALETTE[0], lw=lw)
        ax.add_collection(LineCollection(_slope_lines(g, (rows[:n], cols[:n]), tmin,
                                                      tspan, (centre, span), pad, band),
                                         colors=LINE, linewidths=1.2 * lw))
        bad = ~g.usable & np.isfinite(g.times) & np.isfinite(g.values)
        if bad.any():
            ax.scatter(x[bad], y[bad], marker="x", s=6 if ncol <= 12 else 2, c=INK, lw=0.5)
        if ncol <= 12:
            _cell_labels(ax, t, rows, cols, left_out)
        ax.set_xlim(0, ncol)
        ax.set_ylim(nrow, 0)
        ax.set_axis_off()
        _plate_labels(ax, rlab, clab, 7 if ncol <= 24 else 5)
        _fig_title(fig, heading, 0.6, fig_h - 0.5 - extra)
        return save(fig, path, tight=False, compress_level=FAST_PNG)


def _plate_labels(ax, rlab: list[str], clab: list[str], size: float) -> None:
    """Row letters left of the plate and column numbers below it, as glyph collections
    (:func:`~rateabs.plots.style.text_marks`; tick labels are measured again and again)."""
    text_marks(ax, np.full(len(rlab), -0.15), np.arange(len(rlab)) + 0.5, rlab, size=size,
               ha="right")
    text_marks(ax, np.arange(len(clab)) + 0.5, np.full(len(clab), len(rlab) + 0.08), clab,
               size=size, va="top")


def _wrapped(text: str, fig_w: float, left_in: float) -> tuple[str, float]:
    """A title wrapped to the figure's width (9 pt: about 14.5 characters an inch) and the
    height its extra lines need (in)."""
    import textwrap

    lines = textwrap.wrap(text, max(20, int((fig_w - left_in - 0.2) * 14.5)))
    return "\n".join(lines), 0.16 * (len(lines) - 1)


def _fig_title(fig, text: str, left_in: float, bottom_in: float) -> None:
    """A title at a fixed place (inches from the figure's left and bottom)."""
    w, h = fig.get_size_inches()
    fig.text(left_in / w, (bottom_in + 0.1) / h, text, fontsize=9, ha="left", va="bottom")


def _cell_y(r0, v, centre, span, band):
    """Values to y within a well's cell: the band (top, bottom) of the cell holds the well's
    span around its centre, larger values higher."""
    top, bottom = band
    y = r0 + (top + bottom) / 2 - (bottom - top) * (v - centre) / span
    return np.clip(y, r0 + top - 0.04, r0 + bottom + 0.005)


def _slope_lines(g: RateDrawing, cells, tmin, tspan, scale, pad, band):
    """The reported initial slope of each well as a line over its window, in cell units.

    A window's slope passes through the mean of the window's readings; a whole-curve estimate
    is drawn as the tangent at the first usable reading, from the curve's value there, over
    the first 35 % of the read."""
    r0, c0 = cells
    t = g.table
    slope = np.asarray(t["slope_A_per_min"], float) / 60.0       # on the traces as analysed
    t0, t1 = np.asarray(t["window_start_s"], float), np.asarray(t["window_end_s"], float)
    ok = g.usable & np.isfinite(g.times)
    times, values = np.where(ok, g.times, 0.0), np.where(ok, g.values, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        sel = ok & (g.times >= t0[:, None]) & (g.times <= t1[:, None])
        n_sel = sel.sum(axis=1)
        has_window = (np.isfinite(t0) & np.isfinite(t1) & (t1 > t0) & (n_sel > 0)
                      & (np.asarray(t["method"]) != "curve"))
        first = np.argmax(ok, axis=1)
        k = np.arange(len(g.names))
        tm = np.where(has_window, (times * sel).sum(axis=1) / n_sel, times[k, first])
        ym = np.where(has_window, (values * sel).sum(axis=1) / n_sel, values[k, first])
    at = g.curve_start if g.curve_start is not None else np.full(len(g.names), np.nan)
    ym = np.where(np.isfinite(at), at, ym)      # a whole-curve slope: from the curve's value
    ta = np.where(has_window, t0, tm)
    tb = np.where(has_window, t1, tm + 0.35 * tspan)
    keep = np.isfinite(slope) & ok.any(axis=1)
    tt = np.column_stack([ta, tb])[keep]
    xs = c0[keep, None] + pad + (1 - 2 * pad) * (tt - tmin) / tspan
    ys = _cell_y(r0[keep, None], ym[keep, None] + slope[keep, None] * (tt - tm[keep, None]),
                 scale[0][keep, None], scale[1][keep, None], band)
    return np.stack([xs, ys], axis=-1)


def _cell_labels(ax, t, rows, cols, left_out) -> None:
    """Role and flags written small in each cell (96 wells or fewer)."""
    short = {"blank": "blank", "positive": "+ ctrl", "negative": "- ctrl", "standard": "std"}
    texts, colors = [], []
    for role, flags in zip(t["role"], t["flags"], strict=True):
        text = short.get(role, "")
        if flags:
            text = (text + " " if text else "") + ",".join(flags)
        texts.append(text)
        colors.append(PALETTE[1] if flags else "#666666")
    n = len(texts)
    text_marks(ax, cols[:n] + 0.06, rows[:n] + 0.1, texts, size=5.2, ha="left", va="top",
               colors=colors)
    text_marks(ax, cols[n:] + 0.5, rows[n:] + 0.5, ["left out"] * len(left_out), size=6,
               colors="#666666")


def well_pages(analysis, out, wells: list[str], stem: str = "rates",
               per_page: int = WELL_PAGE_SIZE) -> list[Path]:
    """Pages of single wells, ``per_page`` to a page on a fixed grid: readings, masked readings
    (x), the window (shaded), the reported initial slope (orange line), the whole-curve fit
    (dotted) and the residuals of the slope line below (mAU), each well on its own scale with
    its range written beside it. One Axes a page, drawn as collections. ``analysis``: a rates
    analysis or its :class:`~rateabs.plots.rate_data.RateDrawing` (made for these wells)."""
    files = []
    d = as_drawing(analysis, wells)
    for page, start in enumerate(range(0, len(wells), per_page)):
        files.append(_well_page(d, wells[start:start + per_page],
                                Path(out) / f"{stem}_wells_{page + 1}.png"))
    return files


class _Cells:
    """Cell geometry of a well page: cell (row, col) spans [col, col+1] x [row, row+1], and
    within it the main panel and the residual strip, in fractions of the cell."""

    X0, X1 = 0.16, 0.97          # panel left and right
    MAIN = (0.34, 0.80)          # main panel, bottom and top, from the cell's bottom
    RES = (0.10, 0.28)           # residual strip

    def __init__(self, row: int, col: int, tspan: tuple[float, float]):
        self.row, self.col = row, col
        self.t0, self.t1 = tspan

    def x(self, t):
        """Times (s) to page x."""
        f = (np.asarray(t, float) - self.t0) / max(self.t1 - self.t0, 1e-12)
        return self.col + self.X0 + (self.X1 - self.X0) * f

    def y(self, v, lo: float, hi: float, band) -> np.ndarray:
        """Values to page y within a band (bottom, top) of the cell, lo..hi spanning it."""
        f = np.clip((np.asarray(v, float) - lo) / max(hi - lo, 1e-12), -0.02, 1.02)
        return self.row + 1 - (band[0] + (band[1] - band[0]) * f)


def _well_page(g: RateDrawing, names: list[str], path: Path) -> Path:
    from matplotlib.collections import LineCollection, PolyCollection

    cols = 6 if len(names) > 12 else min(4, len(names))
    rows = math.ceil(len(names) / cols)
    fig_w = max(cols * 2.3, 4.6)                  # room for the legend above one or two wells
    legend = textwrap.fill("readings (dots; x masked), window (shaded), initial slope (orange), "
                           "whole-curve fit (dotted); below: residuals from the slope line (mAU)",
                           int(fig_w * 13))
    fig_h = rows * 2.1 + 0.15 + 0.14 * (legend.count("\n") + 1)
    parts: dict[str, list] = {k: [] for k in ("dots", "grey", "bad", "res", "res_out", "shade",
                                              "line", "curve", "zero", "frame", "text")}
    for k, name in enumerate(names):
        _draw_cell(parts, g, g.names.index(name), g.row(name), k // cols, k % cols)
    with house_style() as plt:
        fig = plt.figure(figsize=(fig_w, fig_h))
        ax = fig.add_axes((0, 0, cols * 2.3 / fig_w, rows * 2.1 / fig_h))
        ax.set_axis_off()
        ax.set_xlim(0, cols)
        ax.set_ylim(rows, 0)
        ax.add_collection(PolyCollection(parts["shade"], facecolors=SHADE, alpha=0.12, lw=0))
        ax.add_collection(PolyCollection(parts["frame"], facecolors="none", edgecolors=GRID,
                                         lw=0.6))
        ax.add_collection(LineCollection(parts["zero"], colors=INK, lw=0.5))
        ax.add_collection(LineCollection(parts["curve"], colors=INK, lw=0.9, linestyles=":"))
        ax.add_collection(LineCollection(parts["line"], colors=LINE, lw=1.2))
        for key, colour, marker, size in (("dots", PALETTE[0], "o", 2.2),
                                          ("grey", "#9a9a9a", "o", 2.0), ("res", PALETTE[0], "o", 1.6),
                                          ("res_out", "#9a9a9a", "o", 1.6), ("bad", INK, "x", 6)):
            if parts[key]:
                xy = np.concatenate(parts[key])
                ax.scatter(xy[:, 0], xy[:, 1], s=size, c=colour, marker=marker, lw=0.6 if
                           marker == "x" else 0)
        _page_texts(ax, parts["text"])
        fig.text(0.5, 1 - 0.06 / fig_h, legend, ha="center", va="top",
                 fontsize=8.5 if fig_w > 9 else 7.5)
        return save(fig, path, tight=False, compress_level=FAST_PNG)


def _page_texts(ax, texts: list) -> None:
    """The cells' texts: one-line texts as glyph collections, one per style (a page of 24
    wells has over a hundred), the others as text artists."""
    groups: dict = {}
    for x, y, text, kw in texts:
        if "\n" in text or set(kw) - {"fontsize", "color", "ha", "va"}:
            ax.text(x, y, text, **kw)
            continue
        style = (kw["fontsize"], kw.get("color", INK), kw.get("ha", "left"),
                 kw.get("va", "baseline"))
        groups.setdefault(style, []).append((x, y, text))
    for (size, color, ha, va), items in groups.items():
        xs, ys, words = zip(*items, strict=True)
        text_marks(ax, xs, ys, words, size=size, ha=ha, va=va, colors=color)


def _draw_cell(parts: dict, g: RateDrawing, i: int, rec: dict, row: int, col: int) -> None:
    """Add one well's pieces to the page's collections (see :func:`well_pages`)."""
    ok = g.usable[i]
    t, y = g.times[i], g.values[i]
    real = np.isfinite(t)
    cell = _Cells(row, col, (float(np.nanmin(t)), float(np.nanmax(t))) if real.any()
                  else (0.0, 1.0))
    seen = real & np.isfinite(y)
    src = ok if ok.any() else seen          # no usable reading: the masked ones set the scale
    lo, hi = (float(np.min(y[src])), float(np.max(y[src]))) if src.any() else (0.0, 1.0)
    pad = 0.06 * max(hi - lo, 1e-4)
    lo, hi = lo - pad, hi + pad
    main, res_band = _Cells.MAIN, _Cells.RES
    parts["frame"] += [_box(cell, main), _box(cell, res_band)]
    t0, t1 = rec["window_start_s"], rec["window_end_s"]
    inside = ok & (t >= t0) & (t <= t1) if np.isfinite(t0) else np.zeros_like(ok)
    parts["dots"].append(np.column_stack([cell.x(t[ok & inside]), cell.y(y[ok & inside], lo, hi,
                                                                         main)]))
    parts["grey"].append(np.column_stack([cell.x(t[ok & ~inside]),
                                          cell.y(y[ok & ~inside], lo, hi, main)]))
    bad = seen & ~ok
    if bad.any():
        parts["bad"].append(np.column_stack([cell.x(t[bad]), cell.y(y[bad], lo, hi, main)]))
    slope = rec["slope_A_per_min"] / 60.0                        # on the traces as analysed
    res_txt = ""
    if np.isfinite(t0) and np.isfinite(t1) and inside.sum() >= 2 and np.isfinite(slope):
        parts["shade"].append(_box(cell, main, cell.x(t0), cell.x(t1)))
        tm, ym = t[inside].mean(), y[inside].mean()
        tt = np.array([t0, t1])
        parts["line"].append(np.column_stack([cell.x(tt), cell.y(ym + slope * (tt - tm), lo, hi,
                                                                  main)]))
        res = (y - (ym + slope * (t - tm))) * 1e3
        r_max = max(float(np.max(np.abs(res[inside]))) * 1.15, 1e-3)
        parts["res"].append(np.column_stack([cell.x(t[inside]),
                                             cell.y(res[inside], -r_max, r_max, res_band)]))
        parts["res_out"].append(np.column_stack([cell.x(t[ok & ~inside]), cell.y(
            res[ok & ~inside], -r_max, r_max, res_band)]))
        res_txt = f"±{r_max:.2g}"
    parts["zero"].append(np.column_stack([cell.x([cell.t0, cell.t1]), [cell.row + 1 - sum(
        res_band) / 2] * 2]))
    curve = g.curve_lines.get(g.names[i])
    if curve is not None:
        parts["curve"].append(np.column_stack([cell.x(curve[0]), cell.y(curve[1], lo, hi,
                                                                        main)]))
    _cell_texts(parts["text"], cell, rec, g.names[i], (lo + pad, hi - pad), res_txt)


def _box(cell: _Cells, band, x0=None, x1=None):
    """The corners of a band of a cell (optionally only from x0 to x1)."""
    x0 = cell.col + _Cells.X0 if x0 is None else x0
    x1 = cell.col + _Cells.X1 if x1 is None else x1
    yb, yt = cell.row + 1 - band[0], cell.row + 1 - band[1]
    return [(x0, yb), (x1, yb), (x1, yt), (x0, yt)]


def _cell_texts(texts: list, cell: _Cells, rec, name: str, yrange, res_txt: str) -> None:
    """Title, flags and the ranges of one cell, as (x, y, text, keywords)."""
    flags = list(rec["flags"])
    left, right = cell.col + _Cells.X0, cell.col + _Cells.X1
    small = {"fontsize": 5.5, "color": "#555555"}
    head = f"{name} ({rec['role']}, {rec['method']})" + ("\n" + ",".join(flags) if flags else "")
    texts.append((left, cell.row + 0.03, head, {"fontsize": 6.5, "va": "top", "linespacing": 1.1,
                                                "color": PALETTE[1] if flags else INK}))
    top, bottom = cell.row + 1 - _Cells.MAIN[1], cell.row + 1 - _Cells.MAIN[0]
    texts.append((left - 0.015, top, f"{yrange[1]:.3g} A", {**small, "ha": "right",
                                                             "va": "center"}))
    texts.append((left - 0.015, bottom, f"{yrange[0]:.3g}", {**small, "ha": "right",
                                                            "va": "center"}))
    if res_txt:
        texts.append((left - 0.015, cell.row + 1 - sum(_Cells.RES) / 2, res_txt,
                      {**small, "ha": "right", "va": "center"}))
    span = (cell.t1 - cell.t0) / 60
    texts.append((right, cell.row + 1 - 0.03, f"0 to {span:.3g} min", {**small, "ha": "right",
                                                                        "va": "bottom"}))


def plate_heatmap(analysis, path):
    """Plate map of rates (or slopes); wells that need a look outlined. Numbers in the cells
    of a 96-well plate (or smaller); beyond that a colour bar only. None if not a plate."""
    from matplotlib.collections import PolyCollection

    d = as_drawing(analysis)
    t, fmt = d.table, d.plate_format
    if not fmt or len(d.names) < 8:
        return None
    col = d.rate_column
    unit = "µM/min" if col.startswith("rate") else "A/min"
    nrow, ncol, rows, cols, rlab, clab = plate_positions(list(t["trace"]), fmt)
    grid = np.full((nrow, ncol), np.nan)
    vals = np.asarray(t[col], float)
    grid[rows, cols] = vals
    cell = 0.62 if ncol <= 12 else (0.36 if ncol <= 24 else 0.22)
    fig_w, fig_h = ncol * cell + 2.2, nrow * cell + 1.1
    blanks = (" (blank wells: their own slope; it was taken out of the others)"
              if d.blank_mode == "slope" and (t["role"] == "blank").any() else "")
    heading, extra = _wrapped(f"{col.split('_')[0]} per well ({unit}){blanks}; orange outline: "
                              "needs a look", fig_w, 0.5)
    fig_h += extra
    with house_style() as plt:
        fig = plt.figure(figsize=(fig_w, fig_h))
        ax = fig.add_axes((0.5 / fig_w, 0.35 / fig_h, ncol * cell / fig_w, nrow * cell / fig_h))
        im = ax.imshow(grid, cmap="viridis", aspect="auto", extent=(0, ncol, nrow, 0),
                       interpolation="nearest")
        ax.grid(False)
        look = np.array([bool(f) for f in t["flags"]])
        if look.any():
            m = 0.06
            boxes = [[(c + m, r + m), (c + 1 - m, r + m), (c + 1 - m, r + 1 - m),
                      (c + m, r + 1 - m)] for r, c in zip(rows[look], cols[look], strict=True)]
            ax.add_collection(PolyCollection(boxes, facecolors="none", edgecolors=PALETTE[1],
                                             linewidths=1.4 if ncol <= 24 else 0.8))
        if ncol <= 12:
            mid = np.nanmean(grid)
            with np.errstate(invalid="ignore"):
                light = np.isfinite(vals) & (vals < mid)
            text_marks(ax, cols + 0.5, rows + 0.5,
                       [f"{v:.3g}" if np.isfinite(v) else "-" for v in vals], size=6.5,
                       colors=np.where(light, "white", INK))
        ax.set_axis_off()
        _plate_labels(ax, rlab, clab, 7 if ncol <= 24 else 5)
        _colour_bar(ax, im, (nrow, ncol), cell, f"{col.split('_')[0]} ({unit})")
        _fig_title(fig, heading, 0.5, 0.35 + nrow * cell)
        return save(fig, path, tight=False, compress_level=FAST_PNG)


def _colour_bar(ax, im, shape: tuple[int, int], cell: float, label: str) -> None:
    """The heat map's colour scale drawn in the plate's own axes, right of the plate (0.2 in
    off, 0.15 in wide, ``cell`` inches per well): a gradient, ticks labelled as glyph
    collections and the label. A colour bar of its own took an Axes and its tick machinery, a
    third of the figure's time."""
    from matplotlib.collections import LineCollection
    from matplotlib.ticker import MaxNLocator

    nrow, ncol = shape
    im.autoscale_None()
    lo, hi = im.norm.vmin, im.norm.vmax
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi <= lo:
        return
    x0 = ncol + 0.2 / cell
    x1 = x0 + 0.15 / cell
    ax.imshow(np.linspace(hi, lo, 256)[:, None], cmap=im.get_cmap(), norm=im.norm,
              aspect="auto", extent=(x0, x1, nrow, 0), interpolation="nearest", clip_on=False)
    ticks = [v for v in MaxNLocator(6).tick_values(lo, hi) if lo <= v <= hi]
    ys = [(hi - v) / (hi - lo) * nrow for v in ticks]
    ax.add_collection(LineCollection([[(x1, y), (x1 + 0.05 / cell, y)] for y in ys],
                                     colors=INK, linewidths=0.6, clip_on=False), autolim=False)
    text_marks(ax, np.full(len(ys), x1 + 0.08 / cell), ys,
               [np.format_float_positional(v, precision=10, trim="-") for v in ticks], size=8,
               ha="left")
    ax.text(x1 + 0.6 / cell, nrow / 2, label, rotation=90, ha="center", va="center",
            fontsize=8, clip_on=False)
    ax.set_xlim(0, ncol)                # the gradient's image must not widen the plate
    ax.set_ylim(nrow, 0)


def replicate_plot(analysis, path, most: int = 60):
    """Each replicate group's wells as dots with mean ± SD of the wells kept; outliers ringed,
    wells left out of the mean because they need a look (another flag) drawn as crosses.
    None when the plate has more than ``most`` groups (the replicate table says it all)."""
    d = as_drawing(analysis)
    reps = d.replicates
    if not reps or len(reps["group"]) > most:
        return None
    t, col = d.table, d.rate_column
    unit = reps["unit"].replace("uM", "µM")
    n = len(reps["group"])
    value = dict(zip(t["trace"], np.asarray(t[col], float), strict=True))
    outlier = {w for w, f in zip(t["trace"], t["flags"], strict=True) if "outlier" in f}
    doubted = {why.split(":")[0] for whys in reps.get("left_out", []) for why in whys
               if "needs a look" in why and "kept" not in why}
    ks, xs, ring, cross = [], [], [], []
    for k, wells in enumerate(reps["wells"]):
        for w in wells:
            if w in doubted:
                cross.append((value[w], k))
                continue
            ks.append(k)
            xs.append(value[w])
            if w in outlier:
                ring.append((value[w], k))
    labels = [f"{g} (1:{d:g})" if d != 1 else str(g) for g, d in zip(reps["group"],
                                                                     reps["dilution"],
                                                                     strict=True)]
    fig_h = max(2.5, 0.2 * n + 1.0)
    with house_style() as plt:
        fig = plt.figure(figsize=(7.4, fig_h))
        ax = fig.add_axes((2.3 / 7.4, 0.55 / fig_h, 4.9 / 7.4, (fig_h - 0.95) / fig_h))
        ax.scatter(xs, ks, s=12, color=PALETTE[0], alpha=0.8, lw=0)
        sd = np.asarray(reps["sd"], float)
        ax.errorbar(reps["mean"], np.arange(n), xerr=np.where(np.isfinite(sd), sd, 0), fmt="|",
                    color=INK, ms=9, lw=1)
        if ring:
            rx, ry = zip(*ring, strict=True)
            ax.scatter(rx, ry, s=55, facecolors="none", edgecolors=PALETTE[1], lw=1.2)
        if cross:
            cx, cy = zip(*cross, strict=True)
            ax.scatter(cx, cy, s=22, marker="x", color=PALETTE[1], lw=1.0)
        ax.set_yticks([])
        ax.grid(False, axis="y")
        ax.hlines(np.arange(n), 0, 1, transform=ax.get_yaxis_transform(), colors=GRID,
                  lw=0.6, zorder=0)
        text_marks(ax, np.full(n, -0.02), np.arange(n), labels, size=6.5, ha="right",
                   transform=ax.get_yaxis_transform())     # cheaper than tick labels
        ax.set_ylim(n - 0.5, -0.5)
        ax.set_xlabel(f"{col.split('_')[0]} ({unit})")
        _fig_title(fig, "replicates: wells (dots), mean ± SD of wells kept (bars), outliers "
                   "(ringed)" + (", left out for a flag (x)" if cross else ""), 0.3,
                   fig_h - 0.4)
        return save(fig, path, tight=False, compress_level=FAST_PNG)
