"""Figures of ``rateabs saturation``: the fit with residuals and the linearised views."""

from __future__ import annotations

import numpy as np

from ..fitting import fmt_pm
from ..models import INHIBITION_MODELS
from .style import GRID, INK, PALETTE, drawable, fixed_axes, house_style, save, unit_text


def _level_groups(data):
    if data.i is None:
        return [(None, np.ones(data.v.size, bool))]
    return [(lv, data.i == lv) for lv in np.unique(data.i)]


def _model_x(best, xc, level):
    """What the chosen model takes: [S], or [S] and [I] stacked for an inhibition model (a
    one-substrate model fitted across inhibitor levels draws one curve for all of them)."""
    if level is None or best.model not in INHIBITION_MODELS:
        return xc
    return np.vstack([xc, np.full_like(xc, level)])


def _curve_x(s, log=False):
    s = np.asarray(s, float)
    pos = s[s > 0]
    lo = pos.min() * 0.5 if pos.size else 1e-3
    hi = s.max() * 1.08
    return np.geomspace(lo, hi, 200) if log else np.linspace(0, hi, 200)


def _param_lines(analysis) -> list[str]:
    """The chosen fit's parameters and Vmax/Km, value ± SE; Km and Vmax of a fit whose Km is
    not identifiable read 'not identifiable' (Km with its lower bound)."""
    best = analysis.best
    hit = getattr(analysis, "unresolved", {}).get(best.model)
    lines = []
    for p in best.params.values():
        if hit is not None and p.name in ("Km", "Vmax"):
            low = hit.get(p.name)
            lines.append(f"{p.name} not identifiable" + (
                f" (> {low:.3g} {unit_text(p.unit)})" if low is not None and np.isfinite(low)
                else ""))
        else:
            lines.append(_value_line(p))
    vk = analysis.derived.get(best.model, {}).get("Vmax/Km")
    if vk is not None:
        lines.append(_value_line(vk))
    return lines


def _value_line(p, width: int = 34) -> str:
    """'name = value ± SE unit', the unit on a line of its own where the whole is wider than
    the room beside the axes ('counts/min² per ppm')."""
    unit = unit_text(p.unit)
    line = f"{p.name} = {fmt_pm(p.value, p.se)}"
    if not unit:
        return line
    return f"{line} {unit}" if len(line) + len(unit) < width else f"{line}\n    {unit}"


def saturation_fit(analysis, path, title: str = "rate vs substrate"):
    """Data (per inhibitor level), the chosen fit and residuals underneath; the legend and the
    parameters beside the axes, off the data."""
    d = analysis.data
    best = analysis.best
    vals = list(best.values().values())
    func = best.func
    xu = unit_text(d.conc_unit or "conc.")
    yu = unit_text(d.rate_unit or "rate")
    with house_style() as plt:
        fig, (ax, axr) = fixed_axes(plt, (8.8, 5.2), 2, 1, margins=(0.8, 2.4, 0.55, 0.4),
                                    height_ratios=[3, 1.2], hspace=0.08, sharex=True)
        if best.model == "ic50":
            xs = d.i
            xc = _curve_x(xs, log=True)
            ax.plot(xs[xs > 0], d.v[xs > 0], "o", color=PALETTE[0], label="data")
            ax.plot(xc, func(xc, *vals), color=PALETTE[1], label="4-parameter logistic")
            ax.set_xscale("log")
            axr.plot(xs[xs > 0], (d.v - best.fitted)[xs > 0], "o", color=PALETTE[0])
            axr.set_xlabel(f"[inhibitor] ({unit_text(d.inhib_unit or 'conc.')}, log scale; "
                           "zero dose not shown)")
        else:
            xc = _curve_x(d.s)
            for k, (lv, sel) in enumerate(_level_groups(d)):
                col = PALETTE[k % len(PALETTE)]
                lab = "data" if lv is None else f"[I] = {lv:g} {unit_text(d.inhib_unit)}"
                ax.plot(d.s[sel], d.v[sel], "o", color=col, label=lab)
                if k == 0 or best.model in INHIBITION_MODELS:
                    ax.plot(xc, func(_model_x(best, xc, lv), *vals),
                            color=col if best.model in INHIBITION_MODELS else INK, lw=1.4)
                axr.plot(d.s[sel], (d.v - best.fitted)[sel], "o", color=col)
            axr.set_xlabel(f"[S] ({xu})")
        axr.axhline(0, color=INK, lw=0.8)
        axr.set_ylabel(f"residual ({yu})")
        ax.set_ylabel(f"rate ({yu})")
        ax.set_title(f"{drawable(title)}: {best.model} fit (chosen)", loc="left")
        ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0)
        txt = "\n".join(_param_lines(analysis))
        ax.annotate(txt, xy=(1.02, 0.0), xycoords="axes fraction", ha="left", va="bottom",
                    fontsize=8, bbox={"boxstyle": "round", "fc": "white", "ec": GRID})
        return save(fig, path, tight=False)


def linearised(analysis, path):
    """Lineweaver–Burk, Eadie–Hofstee and Hanes–Woolf views, with the nonlinear fit carried on.

    For inspection only: the estimates come from the nonlinear fit, never from these lines.
    Each panel spans the data (x from 0, where the lines meet their intercept on the y axis:
    1/Vmax, Vmax, Km/Vmax for Michaelis–Menten); the lines are drawn over that span only, so
    no axis runs on for a part of a line that is not shown.
    """
    d = analysis.data
    best = analysis.best
    vals = list(best.values().values())
    xu, yu = unit_text(d.conc_unit or "conc."), unit_text(d.rate_unit or "rate")
    pos = (d.s > 0) & (d.v > 0)
    s_min = float(np.min(d.s[pos])) if pos.any() else 1.0
    s_max = float(np.max(d.s[pos])) if pos.any() else 1.0
    spans = [1.1 / s_min, 1.1 * float(np.max(d.v[pos] / d.s[pos])) if pos.any() else 1.0,
             1.1 * s_max]
    # [S] along each line: 1/[S] over (0, span], v/[S] from near [S] = 0 to far above the
    # data (cut at the span below), [S] over (0, span]
    grids = [1 / np.linspace(spans[0] * 1e-3, spans[0], 300),
             np.geomspace(s_min * 1e-3, s_max * 1e3, 600),
             np.linspace(spans[2] * 1e-3, spans[2], 300)]
    tops = [0.0, 0.0, 0.0]
    with house_style() as plt:
        fig, axes = fixed_axes(plt, (11.5, 4.2), 1, 3, margins=(0.75, 0.2, 0.55, 0.95),
                               wspace=0.32)
        for k, (lv, sel) in enumerate(_level_groups(d)):
            col = PALETTE[k % len(PALETTE)]
            s, v = d.s[sel], d.v[sel]
            ok = (s > 0) & (v > 0)
            lab = None if lv is None else f"[I] = {lv:g} {unit_text(d.inhib_unit or '')}"
            points = [(1 / s[ok], 1 / v[ok]), (v[ok] / s[ok], v[ok]), (s[ok], s[ok] / v[ok])]
            for j, (ax, (xd, yd), sc) in enumerate(zip(axes, points, grids, strict=True)):
                with np.errstate(all="ignore"):
                    vc = best.func(_model_x(best, sc, lv), *vals)
                    xl, yl = [(1 / sc, 1 / vc), (vc / sc, vc), (sc, sc / vc)][j]
                seen = np.isfinite(xl) & np.isfinite(yl) & (xl >= 0) & (xl <= spans[j])
                ax.plot(xd, yd, "o", color=col, label=lab if j == 0 else None)
                ax.plot(xl[seen], yl[seen], color=col, lw=1.2)
                tops[j] = max([tops[j], *yd[xd <= spans[j]], *yl[seen]])
        axes[0].set(xlabel=f"1/[S] (1/{xu})", ylabel=f"1/v (1/({yu}))", title="Lineweaver–Burk")
        axes[1].set(xlabel=f"v/[S] (({yu})/{xu})", ylabel=f"v ({yu})", title="Eadie–Hofstee")
        axes[2].set(xlabel=f"[S] ({xu})", ylabel=f"[S]/v ({xu}/({yu}))", title="Hanes–Woolf")
        for ax, span, top in zip(axes, spans, tops, strict=True):
            ax.set_xlim(0, span)
            ax.set_ylim(0, top * 1.05 if top > 0 else 1)
        if d.i is not None:
            fig.legend(*axes[0].get_legend_handles_labels(), loc="upper left", ncol=8,
                       bbox_to_anchor=(0.75 / 11.5, 1 - 0.28 / 4.2), borderaxespad=0,
                       fontsize=7.5)
        fig.text(0.75 / 11.5, 0.985, "linearised views for inspection only; lines are the "
                 f"nonlinear {best.model} fit, not regressions", fontsize=9, va="top")
        return save(fig, path, tight=False)
