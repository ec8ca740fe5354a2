"""Figures of ``rateabs ratelaw``, ``completion`` and ``temperature``."""

from __future__ import annotations

import numpy as np

from ..fitting import fmt_interval, fmt_pm
from .style import GRID, INK, PALETTE, SHADE, house_style, save


def ratelaw_plots(analysis, out):
    """Per fitted trace: data, fit and residuals, and the linearised view of the chosen order."""
    from ..output import safe_filename

    ts, laws = analysis["traces"], analysis["laws"]
    g = ts.grid()
    files = []
    for name, law in laws.items():
        i = g.names.index(name)
        ok = g.usable[i]
        t, y = g.times[i][ok], g.values[i][ok]
        r = law.fit
        vals = list(r.values().values())
        with house_style() as plt:
            fig = plt.figure(figsize=(10, 4.4), layout="constrained")
            gs = fig.add_gridspec(2, 2, height_ratios=[3, 1.1], width_ratios=[1.25, 1])
            ax = fig.add_subplot(gs[0, 0])
            axr = fig.add_subplot(gs[1, 0], sharex=ax)
            axl = fig.add_subplot(gs[:, 1])
            tc = np.linspace(0, t.max(), 300)
            ax.plot(t / 60, y, "o", ms=3, color=PALETTE[0], label="readings")
            ax.plot(tc / 60, r.func(tc, *vals), color=PALETTE[1], label=f"order {law.order} fit")
            ax.set_ylabel("absorbance (AU)")
            k = r.params["k"]
            hl = law.half_life
            txt = f"k = {fmt_pm(k.value, k.se, unit=k.unit)}"
            if hl is not None:
                txt += f"\nt½ = {hl.value:.4g} s {fmt_interval(hl.ci_low, hl.ci_high)}"
            ax.text(0.98, 0.95, txt, transform=ax.transAxes, ha="right", va="top", fontsize=8,
                    bbox={"boxstyle": "round", "fc": "white", "ec": GRID})
            ax.set_title(f"{name}: integrated rate law")
            ax.legend(loc="lower left")
            axr.plot(t / 60, (y - r.fitted) * 1e3, "o", ms=2.5, color=PALETTE[0])
            axr.axhline(0, color=INK, lw=0.7)
            axr.set_xlabel("time (min)")
            axr.set_ylabel("residual (mA)")
            if law.order in ("1", "2", "mixed"):
                ainf = r.value("Ainf")
                d = np.abs(y - ainf)
                keep = d > 0
                if law.order == "2":
                    axl.plot(t[keep] / 60, 1 / d[keep], "o", ms=3, color=PALETTE[0])
                    axl.plot(tc / 60, 1 / np.abs(r.func(tc, *vals) - ainf), color=PALETTE[1])
                    axl.set_ylabel("1 / |A - Ainf| (1/AU)")
                else:
                    axl.plot(t[keep] / 60, np.log(d[keep]), "o", ms=3, color=PALETTE[0])
                    axl.plot(tc / 60, np.log(np.abs(r.func(tc, *vals) - ainf)), color=PALETTE[1])
                    axl.set_ylabel("ln |A - Ainf|")
            else:
                axl.plot(t / 60, y, "o", ms=3, color=PALETTE[0])
                axl.plot(tc / 60, r.func(tc, *vals), color=PALETTE[1])
                axl.set_ylabel("absorbance (AU)")
            axl.set_xlabel("time (min)")
            axl.set_title(f"linearised view of order {law.order} (inspection only)")
            files.append(save(fig, out / f"ratelaw_{safe_filename(name)}.png"))
    return files


def completion_plot(c, ts, path):
    """The completion forecast: readings, fitted curve extended, its band, the target line."""
    g = ts.grid()
    i = g.names.index(c.trace)
    ok = g.usable[i]
    t, y = g.times[i][ok], g.values[i][ok]
    r = c.law.fit
    vals = r.values()
    k = r.params["k"]
    horizon = max(c.t_target.ci_high if np.isfinite(c.t_target.ci_high) else 0,
                  c.t_target.value, t.max()) * 1.1
    tc = np.linspace(0, horizon, 400)

    def curve(kv):
        p = dict(vals, k=kv)
        return r.func(tc, *p.values())

    a0, ainf = vals["A0"], vals["Ainf"]
    a_target = a0 + (ainf - a0) * c.target
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(7.2, 4.2))
        lo, hi = curve(k.ci_low), curve(k.ci_high)
        ax.fill_between(tc / 60, np.minimum(lo, hi), np.maximum(lo, hi), color=SHADE, alpha=0.18,
                        lw=0, label=f"{100 * c.law.fit.level:g} % band (interval of k)")
        ax.plot(t / 60, y, "o", ms=3, color=PALETTE[0], label="readings")
        ax.plot(tc / 60, curve(k.value), color=PALETTE[1], label=f"order {c.law.order} forecast")
        ax.axhline(a_target, color=INK, ls="--", lw=1,
                   label=f"{100 * c.target:g} % conversion (A = {a_target:.3f})")
        ax.axvspan(c.t_target.ci_low / 60, min(c.t_target.ci_high, horizon) / 60, color=PALETTE[4],
                   alpha=0.18, lw=0)
        ax.axvline(c.t_target.value / 60, color=PALETTE[4], lw=1.4,
                   label=f"t({100 * c.target:g} %) = {c.t_target.value / 60:.1f} min "
                         f"[{c.t_target.ci_low / 60:.1f}, {c.t_target.ci_high / 60:.1f}]")
        ax.axvline(c.t_now / 60, color=GRID, lw=1)
        ax.set_xlabel("time (min)")
        ax.set_ylabel("absorbance (AU)")
        verdict = "complete" if c.complete else "not yet complete"
        ax.set_title(f"{c.trace}: {100 * c.conversion.value:.1f} % converted now, {verdict}")
        ax.legend(loc="best", fontsize=7.5)
        ax.text(0.01, 0.01, "a forecast, not a process-safety assessment", transform=ax.transAxes,
                fontsize=7, color=INK)
        return save(fig, path)


def arrhenius_plot(a, path):
    """ln k vs 1/T with the fitted line and its confidence band; the Eyring view beside it."""
    from scipy import stats

    with house_style() as plt:
        fig, axes = plt.subplots(1, 2, figsize=(10, 4), layout="constrained")
        x = 1000.0 / a.T
        for ax, r, y, lab in ((axes[0], a.arrhenius, np.log(a.k), f"ln(k / ({a.k_unit}))"),
                              (axes[1], a.eyring, np.log(a.k / a.T), "ln((k/T) / (1/(s K)))")):
            xs = np.linspace(x.min() * 0.98, x.max() * 1.02, 100)
            v = r.values()
            fit_y = v["intercept"] + v["slope"] * xs / 1000
            G = np.vstack([np.ones_like(xs), xs / 1000]).T
            se = np.sqrt(np.einsum("ij,jk,ik->i", G, r.cov, G)) if r.cov is not None else 0 * xs
            tq = stats.t.ppf(0.5 + r.level / 2, max(r.dof, 1))
            ax.fill_between(xs, fit_y - tq * se, fit_y + tq * se, color=SHADE, alpha=0.18, lw=0,
                            label=f"{100 * r.level:g} % band")
            if a.k_se is not None:
                ax.errorbar(x, y, yerr=np.asarray(a.k_se) / a.k, fmt="o", ms=4, color=PALETTE[0],
                            label="measured")
            else:
                ax.plot(x, y, "o", ms=4, color=PALETTE[0], label="measured")
            ax.plot(xs, fit_y, color=PALETTE[1], label="fit")
            ax.set_xlabel("1000 / T (1/K)")
            ax.set_ylabel(lab)
            ax.legend(loc="best")
        p = a.params
        axes[0].set_title(f"Arrhenius: Ea = {p['Ea'].value:.1f} [{p['Ea'].ci_low:.1f}, "
                          f"{p['Ea'].ci_high:.1f}] kJ/mol")
        axes[1].set_title(f"Eyring: dH = {p['dH'].value:.1f} kJ/mol, dS = {p['dS'].value:.0f} "
                          "J/(mol K)")
        return save(fig, path)
