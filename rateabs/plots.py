"""Plots, in one house style settled here and used by every figure.

The palette is the Okabe–Ito colour-blind-safe set (Okabe & Ito 2008, "Color Universal
Design"); every axis carries its unit; figures are written atomically as PNG.
"""

from __future__ import annotations

import io
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from .fitting import fmt_interval, fmt_pm

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
    from .files import write_atomic

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


def _level_groups(data):
    if data.i is None:
        return [(None, np.ones(data.v.size, bool))]
    return [(lv, data.i == lv) for lv in np.unique(data.i)]


def _curve_x(s, log=False):
    s = np.asarray(s, float)
    pos = s[s > 0]
    lo = pos.min() * 0.5 if pos.size else 1e-3
    hi = s.max() * 1.08
    return np.geomspace(lo, hi, 200) if log else np.linspace(0, hi, 200)


def saturation_fit(analysis, path, title: str = "rate vs substrate"):
    """Data (per inhibitor level), the chosen fit and residuals underneath."""
    d = analysis.data
    best = analysis.best
    vals = list(best.values().values())
    func = best.func
    xu = d.conc_unit or "conc."
    yu = d.rate_unit or "rate"
    with house_style() as plt:
        fig, (ax, axr) = plt.subplots(2, 1, figsize=(6.4, 5.2), sharex=True,
                                      gridspec_kw={"height_ratios": [3, 1.2]})
        if best.model == "ic50":
            xs = d.i
            xc = _curve_x(xs, log=True)
            ax.plot(xs[xs > 0], d.v[xs > 0], "o", color=PALETTE[0], label="data")
            ax.plot(xc, func(xc, *vals), color=PALETTE[1], label="4-parameter logistic")
            ax.set_xscale("log")
            axr.plot(xs[xs > 0], (d.v - best.fitted)[xs > 0], "o", color=PALETTE[0])
            axr.set_xlabel(f"[inhibitor] ({d.inhib_unit or 'conc.'}, log scale; zero dose "
                           "not shown)")
        else:
            xc = _curve_x(d.s)
            for k, (lv, sel) in enumerate(_level_groups(d)):
                col = PALETTE[k % len(PALETTE)]
                lab = "data" if lv is None else f"[I] = {lv:g} {d.inhib_unit}"
                ax.plot(d.s[sel], d.v[sel], "o", color=col, label=lab)
                xx = xc if lv is None else np.vstack([xc, np.full_like(xc, lv)])
                ax.plot(xc, func(xx, *vals), color=col, lw=1.4)
                axr.plot(d.s[sel], (d.v - best.fitted)[sel], "o", color=col)
            axr.set_xlabel(f"[S] ({xu})")
        axr.axhline(0, color=INK, lw=0.8)
        axr.set_ylabel(f"residual ({yu})")
        ax.set_ylabel(f"rate ({yu})")
        ax.set_title(f"{title}: {best.model} fit (chosen)")
        ax.legend(loc="center right")
        txt = "\n".join(f"{p.name} = {fmt_pm(p.value, p.se, unit=p.unit)}"
                        for p in best.params.values())
        ax.text(0.98, 0.04, txt, transform=ax.transAxes, ha="right", va="bottom", fontsize=8,
                bbox={"boxstyle": "round", "fc": "white", "ec": GRID})
        return save(fig, path)


def linearised(analysis, path):
    """Lineweaver–Burk, Eadie–Hofstee and Hanes–Woolf views, with the nonlinear fit carried on.

    For inspection only: the estimates come from the nonlinear fit, never from these lines.
    """
    d = analysis.data
    best = analysis.best
    vals = list(best.values().values())
    xu, yu = d.conc_unit or "conc.", d.rate_unit or "rate"
    with house_style() as plt:
        fig, axes = plt.subplots(1, 3, figsize=(11.5, 3.8), layout="constrained")
        xc = _curve_x(d.s, log=True)
        for k, (lv, sel) in enumerate(_level_groups(d)):
            col = PALETTE[k % len(PALETTE)]
            s, v = d.s[sel], d.v[sel]
            ok = (s > 0) & (v > 0)
            xx = xc if lv is None else np.vstack([xc, np.full_like(xc, lv)])
            vc = best.func(xx, *vals)
            lab = None if lv is None else f"[I] = {lv:g}"
            axes[0].plot(1 / s[ok], 1 / v[ok], "o", color=col, label=lab)
            axes[0].plot(1 / xc, 1 / vc, color=col, lw=1.2)
            axes[1].plot(v[ok] / s[ok], v[ok], "o", color=col)
            axes[1].plot(vc / xc, vc, color=col, lw=1.2)
            axes[2].plot(s[ok], s[ok] / v[ok], "o", color=col)
            axes[2].plot(xc, xc / vc, color=col, lw=1.2)
        axes[0].set(xlabel=f"1/[S] (1/{xu})", ylabel=f"1/v (1/({yu}))", title="Lineweaver–Burk")
        axes[1].set(xlabel=f"v/[S] (({yu})/{xu})", ylabel=f"v ({yu})", title="Eadie–Hofstee")
        axes[2].set(xlabel=f"[S] ({xu})", ylabel=f"[S]/v ({xu}/({yu}))", title="Hanes–Woolf")
        s_max = np.max(d.s[d.s > 0]) if np.any(d.s > 0) else 1
        axes[0].set_xlim(0, 1.1 / np.min(d.s[d.s > 0]) if np.any(d.s > 0) else 1)
        axes[2].set_xlim(0, s_max * 1.1)
        axes[0].set_ylim(bottom=0)
        axes[1].set_xlim(left=0)
        axes[2].set_ylim(bottom=0)
        if d.i is not None:
            axes[0].legend(loc="upper left")
        fig.suptitle(f"linearised views for inspection only; lines are the nonlinear {best.model} "
                     "fit, not regressions", fontsize=9)
        return save(fig, path)


def rate_traces(analysis, out, stem: str = "rates", per_page: int = 24) -> list:
    """Small multiples of every trace: readings, the window shaded, the line, residuals below."""
    from pathlib import Path

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
                    ax.plot(tt, w.intercept[i] + w.slope[i] * tt * 60, color=PALETTE[1], lw=1.3)
                    res = y - (w.intercept[i] + w.slope[i] * g.times[i])
                    inside = ok & (g.times[i] >= w.t_start[i]) & (g.times[i] <= w.t_end[i])
                    axr.plot(t[inside], res[inside] * 1e3, ".", ms=2.5, color=PALETTE[0])
                    axr.plot(t[ok & ~inside], res[ok & ~inside] * 1e3, ".", ms=2.5, color=GRID)
                if np.isfinite(w.curve_slope[i]):
                    c, v0, kk = w.curve_params[i]
                    ts0 = w.t_start[i] if np.isfinite(w.t_start[i]) else 0.0
                    y0 = y[ok][0] if ok.any() else 0.0
                    tau = np.linspace(0, np.nanmax(g.times[i][ok]) - ts0, 60)
                    from .rates import rate_curve
                    base = y0 - g.values[i][ok][0] if ok.any() else 0.0
                    ax.plot((tau + ts0) / 60, y0 + rate_curve(tau, c, v0, kk) - base, ":", lw=1.0,
                            color=INK)
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


def ratelaw_plots(analysis, out):
    """Per fitted trace: data, fit and residuals, and the linearised view of the chosen order."""
    from .output import safe_filename

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


def class_summary_plot(results, rubric, path):
    """Each student's own value as a dot, the reference line and the tolerance band."""
    vals = [(r["student"], r["value"]) for r in results if r["value"] is not None]
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(7.2, max(2.6, 0.2 * len(vals) + 1.2)))
        ref, tol = rubric.reference, rubric.tolerance_pct / 100
        ax.axvspan(ref * (1 - tol), ref * (1 + tol), color=PALETTE[2], alpha=0.18, lw=0,
                   label=f"reference ± {rubric.tolerance_pct:g} %")
        ax.axvline(ref, color=PALETTE[2], lw=1.4)
        for k, (_, v) in enumerate(vals):
            inside = abs(v / ref - 1) <= tol
            ax.plot(v, k, "o", ms=5, color=PALETTE[0] if inside else PALETTE[1])
        ax.set_yticks(range(len(vals)), [n[:24] for n, _ in vals], fontsize=7)
        ax.invert_yaxis()
        ax.set_xlabel(f"{rubric.quantity} from each student's own data ({rubric.unit})")
        ax.set_title("class distribution (orange: outside the tolerance band)")
        ax.legend(loc="best")
        return save(fig, path)


def student_plot(figure: dict) -> bytes:
    """One student's readings and the fit used to check their number, as PNG bytes.

    ``figure`` holds ``x``, ``y``, ``fitted``, ``title`` and ``table`` (True when x is [S] from a
    rate table rather than time in s), as :func:`rateabs.grade.grade_one` returns it.
    """
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(5.6, 3.4))
        table = figure["table"]
        xs = figure["x"] if table else np.asarray(figure["x"]) / 60
        fitted = figure["fitted"]
        ax.plot(xs, figure["y"], "o", ms=3, color=PALETTE[0], label="your data")
        ax.plot(xs[:len(fitted)], fitted, color=PALETTE[1], label="fit")
        ax.set_xlabel("[S]" if table else "time (min)")
        ax.set_ylabel("rate" if table else "absorbance (AU)")
        ax.set_title(figure["title"], fontsize=9.5)
        ax.legend(loc="best")
        buf = io.BytesIO()
        fig.savefig(buf, format="png", bbox_inches="tight", dpi=90)
        plt.close(fig)
        return buf.getvalue()
