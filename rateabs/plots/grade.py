"""Figures of ``rateabs grade``: the class summary (PNG) and each student's figure (inline SVG).

No student's name is drawn into a raster image: the class summary labels its rows with the
roster number (#), and the HTML page beside it gives the names, so names in any script render
with the browser's fonts. Each student's figure is a small SVG written here directly (readings,
the fit or the initial slope, the window, the residuals): it costs well under a millisecond, so
a class of hundreds gets its feedback pages in a second or two.
"""

from __future__ import annotations

import html
import math
import re

import numpy as np

from .style import GRID, INK, PALETTE, SHADE, house_style, save

#: Most readings drawn in a student's figure (more are thinned evenly, and the caption says so).
MAX_DOTS = 600


def class_summary_plot(results: list[dict], rubric, path):
    """One row per graded student (#roster number): the own value (filled) and the reported
    value (open), the reference line and its tolerance band; a reported or own value far off
    the scale (beyond a factor 3 of the class's median), zero or negative is drawn at the edge
    as a triangle with its ratio, so that one run 60 times off does not squeeze the class."""
    rows = [r for r in results if r["value"] is not None]
    ref, tol = rubric.reference, rubric.tolerance_pct / 100
    own = np.array([r["value"] for r in rows], float)
    rep = np.array([r["reported"] if r["reported"] is not None else np.nan for r in rows],
                   float)
    lo, hi = _summary_range(own, rep, ref, tol)
    n = len(rows)
    ms = 5 if n <= 80 else 3
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(7.2, float(np.clip(0.22 * n + 1.5, 2.8, 18))))
        ax.axvspan(ref * (1 - tol), ref * (1 + tol), color=PALETTE[2], alpha=0.18, lw=0,
                   label=f"reference ± {rubric.tolerance_pct:g} %")
        ax.axvline(ref, color=PALETTE[2], lw=1.4)
        y = np.arange(n)
        inside = (rep >= lo) & (rep <= hi)
        own_in = (own >= lo) & (own <= hi)
        pairs = np.nonzero(inside & own_in)[0]
        gaps = np.full(pairs.size, np.nan)
        ax.plot(np.column_stack([own[pairs], rep[pairs], gaps]).ravel(),
                np.column_stack([pairs, pairs, gaps]).ravel(), color=GRID, lw=1.0, zorder=1)
        ax.plot(own[own_in], y[own_in], "o", ms=ms, color=PALETTE[0],
                label="own value (student's data)", zorder=3)
        span = hi - lo
        label = "own value, off the scale"
        for side, at, mark in ((own < lo, lo + 0.04 * span, "<"), (own > hi, hi - 0.04 * span,
                                                                     ">")):
            if side.any():                          # beside a reported triangle at the edge
                ax.plot(np.full(side.sum(), at), y[side], mark, ms=6, color=PALETTE[0],
                        zorder=3, label=label)
                label = "_nolegend_"
        for k in np.nonzero(~own_in)[0] if n <= 80 else ():
            ax.annotate(f"own ×{own[k] / ref:.3g} of the reference", (lo if own[k] < lo else hi,
                                                                       k), fontsize=6.5,
                        color=PALETTE[0], ha="left" if own[k] < lo else "right", va="top",
                        xytext=(2 if own[k] < lo else -2, -2), textcoords="offset points")
        ax.plot(rep[inside], y[inside], "D", ms=ms, mfc="none", mec=PALETTE[1], mew=1.2,
                label="reported", zorder=4)
        off = np.isfinite(rep) & ~inside
        left, right = off & (rep < lo), off & (rep > hi)
        label = "reported, off the scale"
        for side, at, mark in ((left, lo + 0.01 * span, "<"), (right, hi - 0.01 * span, ">")):
            if side.any():
                ax.plot(np.full(side.sum(), at), y[side], mark, ms=6, color=PALETTE[1],
                        label=label, zorder=4)
                label = "_nolegend_"
        for k in np.nonzero(off)[0] if n <= 80 else ():      # ratios where they can be read
            ratio = rep[k] / own[k] if own[k] else np.nan
            ax.annotate(f"×{ratio:.3g}", (lo if rep[k] < lo else hi, k), fontsize=6.5,
                        color=PALETTE[1], ha="left" if rep[k] < lo else "right",
                        va="bottom", xytext=(2 if rep[k] < lo else -2, 2),
                        textcoords="offset points")
        ax.set_xlim(lo, hi)
        every = max(1, math.ceil(n / 50))
        ax.set_yticks(y[::every], [f"#{r['index']}" for r in rows[::every]], fontsize=7)
        ax.set_ylim(n - 0.5, -0.5)
        ax.set_xlabel(f"{rubric.quantity} ({rubric.unit})")
        ax.set_ylabel("student (roster #)")
        ax.legend(loc="lower center", bbox_to_anchor=(0.5, 1.0), ncol=2, fontsize=7.5)
        return save(fig, path)


def _summary_range(own, rep, ref, tol) -> tuple[float, float]:
    """The x range: the band, and own and reported values within a factor 3 of the own values'
    median (further ones are off the scale)."""
    med = float(np.median(own)) if own.size else ref
    near = [v[np.isfinite(v) & (v > med / 3) & (v < med * 3)] for v in (own, rep)]
    vals = np.concatenate([*near, [ref * (1 - tol), ref * (1 + tol)]])
    lo, hi = float(np.min(vals)), float(np.max(vals))
    pad = 0.08 * (hi - lo) or 0.1 * abs(hi) or 1.0
    return lo - pad, hi + pad


# --------------------------------------------------------------------------- the SVG figure


def nice_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """About ``n`` round tick values (1, 2, 2.5 or 5 x 10^k apart) covering [lo, hi].

    >>> nice_ticks(0, 40)
    [0.0, 10.0, 20.0, 30.0, 40.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / max(n - 1, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= 0.75 * raw)
    first = math.ceil(lo / step - 1e-9) * step
    return [float(round(first + i * step, 12))
            for i in range(int((hi - first) / step + 1e-9) + 1)]


def _label(v: float, ticks: list[float]) -> str:
    step = abs(ticks[1] - ticks[0]) if len(ticks) > 1 else abs(v) or 1.0
    big = max(abs(t) for t in ticks)
    if big and (big < 1e-3 or big >= 1e5):
        return f"{v:.2e}".replace("e-0", "e-").replace("e+0", "e")
    dec = max(0, -math.floor(math.log10(step) + 1e-9)) if step < 1 else 0
    return f"{v:.{dec}f}" if dec or v != 0 else "0"


class _Axis:
    """A linear map from data to pixels, with round ticks."""

    def __init__(self, lo: float, hi: float, p0: float, p1: float, pad: float = 0.05) -> None:
        if not (math.isfinite(lo) and math.isfinite(hi)):
            lo, hi = 0.0, 1.0
        if hi <= lo:
            lo, hi = lo - (abs(lo) * 0.1 or 1.0), hi + (abs(hi) * 0.1 or 1.0)
        d = (hi - lo) * pad
        self.lo, self.hi, self.p0, self.p1 = lo - d, hi + d, p0, p1
        self.ticks = [t for t in nice_ticks(self.lo, self.hi) if self.lo <= t <= self.hi]

    def __call__(self, v):
        return self.p0 + (np.asarray(v, float) - self.lo) / (self.hi - self.lo) * (self.p1 - self.p0)


def _dots(xs, ys, colour: str, size: float = 4.6, hollow: bool = False) -> str:
    pts = "".join(f"M{x:.1f} {y:.1f}h0" for x, y in zip(xs, ys, strict=True)
                  if math.isfinite(x) and math.isfinite(y))
    width = size * (0.75 if hollow else 1)
    return (f'<path d="{pts}" stroke="{colour}" stroke-width="{width:.1f}" '
            f'stroke-linecap="round" fill="none"/>')


def _line(xs, ys, colour: str, width: float = 1.8) -> str:
    pts = " ".join(f"{x:.1f},{y:.1f}" for x, y in zip(xs, ys, strict=True)
                   if math.isfinite(x) and math.isfinite(y))
    return f'<polyline points="{pts}" fill="none" stroke="{colour}" stroke-width="{width}"/>'


def _text(x, y, s, size=11, anchor="middle", rotate=False, colour=INK) -> str:
    rot = f' transform="rotate(-90 {x:.1f} {y:.1f})"' if rotate else ""
    return (f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size}" text-anchor="{anchor}" '
            f'fill="{colour}"{rot}>{html.escape(s)}</text>')


def _frame(ax_x: _Axis, ax_y: _Axis, top: float, bottom: float, left: float, right: float,
           xlabels: bool) -> list[str]:
    out = [f'<line x1="{left}" y1="{bottom}" x2="{right}" y2="{bottom}" stroke="{INK}"/>',
           f'<line x1="{left}" y1="{top}" x2="{left}" y2="{bottom}" stroke="{INK}"/>']
    for t in ax_y.ticks:
        p = float(ax_y(t))
        out.append(f'<line x1="{left}" y1="{p:.1f}" x2="{right}" y2="{p:.1f}" stroke="{GRID}" '
                   'stroke-width="0.6"/>')
        out.append(_text(left - 5, p + 3.5, _label(t, ax_y.ticks), 10, "end"))
    for t in ax_x.ticks:
        p = float(ax_x(t))
        out.append(f'<line x1="{p:.1f}" y1="{top}" x2="{p:.1f}" y2="{bottom}" stroke="{GRID}" '
                   'stroke-width="0.6"/>')
        if xlabels:
            out.append(_text(p, bottom + 14, _label(t, ax_x.ticks), 10))
    return out


def student_svg(figure: dict) -> str:
    """One student's readings, the fit (or the initial slope over its window, shaded) and the
    residuals, as an inline SVG.

    ``figure`` holds ``x``, ``y``, ``fit_x``, ``fit_y``, ``resid_x``, ``resid``, ``window``
    (seconds, or None), ``kind`` ("time", or "table" for a rate table) and ``ylabel``
    (:func:`rateabs.grade.scoring.figure`).
    """
    w, h, left, right = 640, 400, 74, 624
    top, bottom, r_top, r_bottom = 30, 246, 268, 344
    table = figure["kind"] == "table"
    span = max(figure["x"]) if figure["x"] else 0.0
    per = 1.0 if table or span <= 300 else 60.0
    xunit = "" if table else ("s" if per == 1 else "min")
    x = np.asarray(figure["x"], float) / per
    y = np.asarray(figure["y"], float)
    fx, fy = np.asarray(figure["fit_x"], float) / per, np.asarray(figure["fit_y"], float)
    rx, rr = np.asarray(figure["resid_x"], float) / per, np.asarray(figure["resid"], float)
    thin = max(1, math.ceil(x.size / MAX_DOTS))
    ax = _Axis(float(np.nanmin(x)), float(np.nanmax(x)), left, right, 0.02)
    both = np.concatenate([y, fy]) if fy.size else y
    ay = _Axis(float(np.nanmin(both)), float(np.nanmax(both)), bottom, top)
    big = float(np.nanmax(np.abs(rr))) if rr.size else 1.0
    ar = _Axis(-big, big, r_bottom, r_top, 0.08)
    parts = [f'<rect width="{w}" height="{h}" fill="white"/>']
    win = figure.get("window")
    if win:
        a, b = float(ax(win[0] / per)), float(ax(win[1] / per))
        parts.append(f'<rect x="{a:.1f}" y="{top}" width="{max(b - a, 1):.1f}" '
                     f'height="{r_bottom - top}" fill="{SHADE}" fill-opacity="0.10"/>')
    parts += _frame(ax, ay, top, bottom, left, right, False)
    parts += _frame(ax, ar, r_top, r_bottom, left, right, True)
    parts.append(f'<line x1="{left}" y1="{float(ar(0)):.1f}" x2="{right}" '
                 f'y2="{float(ar(0)):.1f}" stroke="{INK}" stroke-width="0.8"/>')
    parts.append(_dots(ax(x[::thin]), ay(y[::thin]), PALETTE[0]))
    parts.append(_line(ax(fx), ay(fy), PALETTE[1]))
    parts.append(_dots(ax(rx[::thin]), ar(rr[::thin]), PALETTE[0], 4.0))
    note = figure.get("xlabel_note")
    xlabel = figure.get("xlabel") or (f"time {note} ({xunit})" if note else f"time ({xunit})")
    parts.append(_text((left + right) / 2, h - 10, xlabel))
    parts.append(_text(16, (top + bottom) / 2, figure.get("ylabel", ""), rotate=True))
    parts.append(_text(16, (r_top + r_bottom) / 2, residual_label(figure.get("ylabel", "")),
                       rotate=True))
    parts.append(_legend(right, figure, thin))
    label = "readings, the fitted line and the residuals"
    return (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" width="{w}" '
            f'height="{h}" role="img" aria-label="{label}" style="max-width:100%;height:auto" '
            f'font-family="DejaVu Sans, Helvetica, Arial, sans-serif">{"".join(parts)}</svg>')


def residual_label(ylabel: str) -> str:
    """The residual axis's label, in the unit of the readings' axis (its last parenthesis).

    >>> residual_label("absorbance (AU)"), residual_label("rate (µM/min)"), residual_label("y")
    ('residual (AU)', 'residual (µM/min)', 'residual')
    """
    m = re.search(r"\(([^()]*)\)\s*$", ylabel)
    return f"residual ({m.group(1)})" if m else "residual"


def _legend(right: float, figure: dict, thin: int) -> str:
    fit = "initial slope" if figure.get("window") else "fit"
    dots = "your readings" + (f" (every {thin}th shown)" if thin > 1 else "")
    x, y = right - 250, 14
    items = [_dots([x], [y], PALETTE[0]), _text(x + 8, y + 4, dots, 10, "start"),
             _line([x + 120, x + 138], [y, y], PALETTE[1]), _text(x + 142, y + 4, fit, 10,
                                                                  "start")]
    if figure.get("window"):
        items += [f'<rect x="{x + 205}" y="{y - 6}" width="12" height="12" fill="{SHADE}" '
                  'fill-opacity="0.18"/>', _text(x + 220, y + 4, "window", 10, "start")]
    return "".join(items)
