"""Figures of ``rateabs progress``: the integrated fit and Selwyn's overlay."""

from __future__ import annotations

import numpy as np

from ..fitting import fmt_pm
from .style import INK, PALETTE, house_style, save


def progress_plots(a, out):
    """Curves with the global fit and residuals; the Selwyn overlay when enzyme amounts vary."""
    c = a.curves
    r = a.fit
    files = []
    with house_style() as plt:
        fig, (ax, axr) = plt.subplots(2, 1, figsize=(7, 5.6), sharex=True,
                                      gridspec_kw={"height_ratios": [3, 1.1]})
        start = 0
        for i, n in enumerate(c.names):
            col = PALETTE[i % len(PALETTE)]
            t, p = c.t[i], c.p[i]
            k = slice(start, start + t.size)
            start += t.size
            base = r.value(f"base_{i}")
            lab = f"{n}: S0 {c.s0[i]:g} µM" + ("" if c.enzyme is None else f", E {c.enzyme[i]:g}")
            ax.plot(t / 60, p - base, "o", ms=2.2, color=col, alpha=0.7, label=lab)
            ax.plot(t / 60, r.fitted[k] - base, color=col, lw=1.3)
            axr.plot(t / 60, (p - r.fitted[k]), ".", ms=2.5, color=col)
        axr.axhline(0, color=INK, lw=0.7)
        ax.set_ylabel("product formed (µM)")
        axr.set_ylabel("residual (µM)")
        axr.set_xlabel("time (min)")
        km, vm = a.params["Km"], a.params["Vmax"]
        ax.set_title(f"integrated Michaelis–Menten, global fit: Km = "
                     f"{fmt_pm(km.value, km.se, 3, km.unit)}, Vmax = "
                     f"{fmt_pm(vm.value, vm.se, 3, vm.unit)}", fontsize=9)
        ax.legend(loc="upper left", fontsize=7)
        files.append(save(fig, out / "progress_fit.png"))
    if c.enzyme is not None and np.unique(c.enzyme).size > 1:
        with house_style() as plt:
            fig, ax = plt.subplots(figsize=(6.4, 4.2))
            s0_sets = {}
            for i in range(len(c.names)):
                s0_sets.setdefault(c.s0[i], []).append(i)
            for s0, members in s0_sets.items():
                if len({c.enzyme[i] for i in members}) < 2:
                    continue
                for j, i in enumerate(sorted(members, key=lambda m: c.enzyme[m])):
                    # model-free: product formed since the first reading
                    ax.plot(c.enzyme[i] * c.t[i] / 60, c.p[i] - c.p[i][0], "o", ms=2.5,
                            color=PALETTE[j % len(PALETTE)],
                            label=f"E = {c.enzyme[i]:g} (S0 {s0:g} µM)")
            ax.set_xlabel("enzyme amount x time (enzyme unit x min)")
            ax.set_ylabel("product formed since the first reading (µM)")
            s = a.selwyn or {}
            verdict = "stable: curves superimpose" if s.get("enzyme_stable") else (
                "not stable: curves do not superimpose")
            ax.set_title(f"Selwyn's test: {verdict}")
            ax.legend(loc="lower right")
            files.append(save(fig, out / "progress_selwyn.png"))
    return files
