"""Figures of ``rateabs progress``: the integrated fit and Selwyn's overlay.

Concentrations are drawn in the unit Km and Vmax are reported in (the fit works in µM), so the
picture and the numbers beside it agree; legends stand beside the axes, off the curves.
"""

from __future__ import annotations

import numpy as np

from ..fitting import fmt_pm
from .style import INK, PALETTE, drawable, fixed_axes, house_style, save, unit_text

#: Right margin (inches) that holds a legend beside the axes.
LEGEND_ROOM = 2.1


def _report_unit(a) -> tuple[str, float]:
    """The concentration unit Km is reported in, and the factor from µM to it."""
    from ..units import concentration_factor

    unit = a.params["Km"].unit
    return unit, 1e-6 / concentration_factor(unit)


def _constants_line(params: dict, ratio: bool = True) -> str:
    """Km, Vmax and (with ``ratio``) Vmax/Km for a title; a Km the curves bound only from below
    reads 'not identifiable (> X)' and Vmax 'not identifiable', Vmax/Km then always shown."""
    km, vm, vk = params["Km"], params["Vmax"], params["Vmax/Km"]
    spec = f"Vmax/Km = {fmt_pm(vk.value, vk.se, unit=unit_text(vk.unit))}"
    if not np.isfinite(km.value):
        low = f" (> {km.ci_low:.3g} {unit_text(km.unit)})" if np.isfinite(km.ci_low) else ""
        return f"{spec};  Km not identifiable{low}, Vmax not identifiable"
    return (f"Km = {fmt_pm(km.value, km.se, unit=unit_text(km.unit))},  "
            f"Vmax = {fmt_pm(vm.value, vm.se, unit=unit_text(vm.unit))}"
            + (f",  {spec}" if ratio else ""))


def _fit_figure(plt, a):
    """Curves (product formed since the fitted baseline), the global fit and the residuals.

    Where Selwyn's test finds the enzyme not stable the fit drawn is the one corrected for
    inactivation (its constants in the title), the fit that assumes a stable enzyme dashed."""
    c = a.curves
    corrected = a.corrected is not None and a.decay_fit is not None
    r = a.decay_fit if corrected else a.fit
    unit, f = _report_unit(a)
    u = unit_text(unit)
    fig, (ax, axr) = fixed_axes(plt, (8.6, 5.6), 2, 1, margins=(0.8, LEGEND_ROOM, 0.55, 0.6),
                                height_ratios=[3, 1.1], hspace=0.08, sharex=True)
    start = 0
    for i, n in enumerate(c.names):
        col = PALETTE[i % len(PALETTE)]
        t, p = c.t[i] / 60, c.p[i]
        k = slice(start, start + c.t[i].size)
        start += c.t[i].size
        base = r.value(f"base_{i}")
        lab = f"{drawable(n, f'curve {i + 1}')[:14]}: S0 {c.s0[i] * f:.3g} {u}"
        if c.enzyme is not None:
            lab += f", E {c.enzyme[i]:g}"
        ax.plot(t, (p - base) * f, "o", ms=2.2, color=col, alpha=0.7, label=lab)
        ax.plot(t, (r.fitted[k] - base) * f, color=col, lw=1.3)
        if corrected:
            ax.plot(t, (a.fit.fitted[k] - base) * f, color=col, lw=0.9, ls="--")
        axr.plot(t, (p - r.fitted[k]) * f, ".", ms=2.5, color=col)
    axr.axhline(0, color=INK, lw=0.7)
    ax.set_ylabel(f"product formed ({u})")
    axr.set_ylabel(f"residual ({u})")
    moved = c.t0 is not None and bool(np.any(c.t0 != 0))
    axr.set_xlabel("time since the first usable reading (min)" if moved else "time (min)")
    if corrected:
        ax.plot([], [], color=INK, lw=1.3, label="fit with enzyme inactivation")
        ax.plot([], [], color=INK, lw=0.9, ls="--", label="fit assuming a stable\nenzyme (biased)")
        half = a.corrected["enzyme half-life"]
        title = ("integrated Michaelis–Menten with first-order enzyme inactivation, one global "
                 f"fit\n{_constants_line(a.corrected, ratio=False)},  enzyme half-life "
                 f"{fmt_pm(half.value, half.se, unit='min')}")
    else:
        title = "integrated Michaelis–Menten, one global fit\n" + _constants_line(a.params)
    ax.set_title(title, fontsize=9.5, loc="left")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0, fontsize=7.5)
    return fig


def _selwyn_figure(plt, a):
    """Product formed against enzyme amount x time: curves of one S0 superimpose when the
    enzyme is stable (Selwyn 1965)."""
    c = a.curves
    unit, f = _report_unit(a)
    u = unit_text(unit)
    fig, ax = fixed_axes(plt, (8.2, 4.3), margins=(0.8, LEGEND_ROOM, 0.55, 0.4))
    s0_sets: dict = {}
    for i in range(len(c.names)):
        s0_sets.setdefault(c.s0[i], []).append(i)
    for s0, members in s0_sets.items():
        if len({c.enzyme[i] for i in members}) < 2:
            continue
        for j, i in enumerate(sorted(members, key=lambda m: c.enzyme[m])):
            # model-free: product formed since the first reading
            ax.plot(c.enzyme[i] * c.t[i] / 60, (c.p[i] - c.p[i][0]) * f, "o", ms=2.5,
                    color=PALETTE[j % len(PALETTE)],
                    label=f"E = {c.enzyme[i]:g}{' ' + unit_text(c.enzyme_unit) if c.enzyme_unit else ''}"
                          f" (S0 {s0 * f:.3g} {u})")
    ax.set_xlabel(f"enzyme amount × time ({unit_text(c.enzyme_unit) or 'amount'} × min)")
    ax.set_ylabel(f"product formed since the first reading ({u})")
    stable = (a.selwyn or {}).get("enzyme_stable")
    verdict = ("enzyme stable: the curves superimpose" if stable else
               "enzyme not stable: the curves do not superimpose")
    ax.set_title(f"Selwyn's test: {verdict}", loc="left")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0, fontsize=7.5)
    return fig


def progress_plots(a, out):
    """Curves with the global fit and residuals; the Selwyn overlay when enzyme amounts vary."""
    c = a.curves
    with house_style() as plt:
        files = [save(_fit_figure(plt, a), out / "progress_fit.png", tight=False)]
        if c.enzyme is not None and np.unique(c.enzyme).size > 1:
            files.append(save(_selwyn_figure(plt, a), out / "progress_selwyn.png", tight=False))
    return files
