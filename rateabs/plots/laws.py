"""Figures of ``rateabs ratelaw``, ``completion`` and ``temperature``."""

from __future__ import annotations

import numpy as np

from ..fitting import fmt_pm
from .style import GRID, INK, PALETTE, SHADE, house_style, legend_below, save


def time_label(law) -> str:
    """The time axis of a rate-law figure, times as fitted (rateabs.models.time_origin, or
    --fit-from)."""
    if law.fit_from is not None:
        return f"time since --fit-from {law.fit_from:g} s (min)"
    return "time (min)" if law.t0 == 0 else "time since the first usable reading (min)"


def _readings(g, i, law):
    """A trace's usable readings with times as fitted, split into those fitted and those before
    --fit-from (not fitted): (t, y, t_before, y_before)."""
    ok = g.usable[i]
    t, y = g.times[i][ok] - law.t0, g.values[i][ok]
    before = t < 0 if law.fit_from is not None else np.zeros(t.shape, bool)
    return t[~before], y[~before], t[before], y[before]


def _not_fitted(ax, tb, yb) -> None:
    """Readings before --fit-from, hollow and grey: shown, not fitted."""
    if tb.size:
        ax.plot(tb / 60, yb, "o", ms=3, mfc="none", color=GRID, label="before --fit-from "
                "(not fitted)")


def _params_line(law) -> str:
    """k, t½ and the drift of a fit, for a title line above the axes (never over the data)."""
    from ..ratelaws import identifiable

    r = law.fit
    k = r.params["k"]
    txt = (f"k = {fmt_pm(k.value, k.se, unit=k.unit)}" if identifiable(k)
           else "k not identifiable")
    hl = law.half_life
    if hl is not None and identifiable(hl):
        txt += f",  t½ = {fmt_pm(hl.value / 60, hl.se / 60, unit='min')}"
    if law.drift is not None:
        d = law.drift
        txt += f",  drift = {fmt_pm(d.value * 6e4, d.se * 6e4, unit='mAU/min')}"
    return txt


def ratelaw_plots(analysis, out):
    """Per fitted trace: data, fit and residuals, and the linearised view of the chosen order.
    Parameters are written above the axes and legends below them, so neither covers data."""
    from ..output import safe_filename

    ts, laws = analysis["traces"], analysis["laws"]
    g = ts.grid()
    files = []
    for name, law in laws.items():
        i = g.names.index(name)
        t, y, tb, yb = _readings(g, i, law)             # as fitted: from the time origin
        r = law.fit
        vals = r.values()
        with house_style() as plt:
            fig = plt.figure(figsize=(10, 4.8))
            # laid out once (no constrained layout): room above for the two-line titles,
            # between the rows for the legend, between the columns for the right y label
            gs = fig.add_gridspec(2, 2, height_ratios=[3, 1.1], width_ratios=[1.25, 1],
                                  left=0.07, right=0.98, bottom=0.1, top=0.86, hspace=0.38,
                                  wspace=0.22)
            ax = fig.add_subplot(gs[0, 0])
            axr = fig.add_subplot(gs[1, 0], sharex=ax)
            axl = fig.add_subplot(gs[:, 1])
            tc = np.linspace(0, t.max(), 300)
            ax.plot(t / 60, y, "o", ms=3, color=PALETTE[0], label="readings")
            _not_fitted(ax, tb, yb)
            ax.plot(tc / 60, r.func(tc, *vals.values()), color=PALETTE[1],
                    label=f"order {law.model} fit")
            ax.set_ylabel("absorbance (AU)")
            ax.set_title(f"{name}: integrated rate law, order {law.model}\n{_params_line(law)}",
                         fontsize=9.5)
            ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.02), ncol=2, fontsize=7.5)
            ax.tick_params(labelbottom=False)
            axr.plot(t / 60, (y - r.fitted) * 1e3, "o", ms=2.5, color=PALETTE[0])
            axr.axhline(0, color=INK, lw=0.7)
            axr.set_xlabel(time_label(law))
            axr.set_ylabel("residual (mAU)")
            _linearised(axl, law, t, y, tc)
            files.append(save(fig, out / f"ratelaw_{safe_filename(name)}.png"))
    return files


def _linearised(axl, law, t, y, tc) -> None:
    """The straight-line view of the chosen order (drift removed), for inspection only."""
    r = law.fit
    vals = r.values()
    drift = vals.get("drift", 0.0)
    if law.order in ("1", "2", "mixed"):
        ainf = vals["Ainf"]
        d = np.abs(y - drift * t - ainf)
        dc = np.abs(r.func(tc, *vals.values()) - drift * tc - ainf)
        keep = d > 0
        if law.order == "2":
            axl.plot(t[keep] / 60, 1 / d[keep], "o", ms=3, color=PALETTE[0])
            axl.plot(tc / 60, 1 / dc, color=PALETTE[1])
            axl.set_ylabel("1 / |A − A∞| (1/AU)")
        else:
            axl.plot(t[keep] / 60, np.log(d[keep]), "o", ms=3, color=PALETTE[0])
            axl.plot(tc / 60, np.log(dc), color=PALETTE[1])
            axl.set_ylabel("ln(|A − A∞| / AU)")
    else:
        axl.plot(t / 60, y, "o", ms=3, color=PALETTE[0])
        axl.plot(tc / 60, r.func(tc, *vals.values()), color=PALETTE[1])
        axl.set_ylabel("absorbance (AU)")
    axl.set_xlabel(time_label(law))
    axl.set_title(f"linearised view of order {law.order}\n(inspection only"
                  + ("; drift removed)" if "drift" in vals else ")"), fontsize=9.5)


def _horizon(c, t) -> float:
    """How far the forecast figure reaches: past the latest finite forecast bound, capped at
    twenty times the run."""
    ends = [t.max()]
    for f in c.forecasts:
        if f.t_target is not None:
            ends += [f.t_target.value] + ([f.t_target.ci_high]
                                          if np.isfinite(f.t_target.ci_high) else [])
    return min(max(ends) * 1.1, 20 * t.max())


def completion_plot(c, ts, path):
    """The completion forecast: readings, the fitted curve of every order that carries weight
    extended into the future, the chosen order's band, the target and the forecast time.
    The legend and the verdict sit outside the axes."""
    g = ts.grid()
    i = g.names.index(c.trace)
    t, y, tb, yb = _readings(g, i, c.law)             # as fitted: from the time origin
    horizon = _horizon(c, t)
    tc = np.linspace(0, horizon, 400)
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(7.6, 5.2))
        ax.plot(t / 60, y, "o", ms=3, color=PALETTE[0], label="readings")
        _not_fitted(ax, tb, yb)
        for n, f in enumerate(c.forecasts):
            r = c.law.fits[f.model]
            vals = r.values()
            if f.model == c.model:
                k = r.params["k"]
                lo, hi = (r.func(tc, *dict(vals, k=kv).values()) for kv in (k.ci_low, k.ci_high))
                if np.all(np.isfinite(lo)) and np.all(np.isfinite(hi)):
                    ax.fill_between(tc / 60, np.minimum(lo, hi), np.maximum(lo, hi), color=SHADE,
                                    alpha=0.18, lw=0, label=f"{100 * r.level:g} % band "
                                    f"(interval of k, order {f.model})")
            ax.plot(tc / 60, r.func(tc, *vals.values()), color=PALETTE[1 + n % 6],
                    ls="-" if f.model == c.model else "--",
                    label=f"{f.model} forecast (AICc weight {f.weight:.2f})")
            _target_marks(ax, c, f, r, PALETTE[1 + n % 6], horizon)
        if c.charge is not None:
            _charge_marks(ax, c)
        ax.axvline(c.t_now / 60, color=GRID, lw=1)
        ax.set_xlabel(time_label(c.law))
        ax.set_ylabel("absorbance (AU)")
        verdict = c.verdict.split(":")[0].lower()
        conv = c.conversion
        now = (f"{100 * conv.value:.1f} % of the {'charge' if c.basis == 'charge' else 'fitted change'}"
               if np.isfinite(conv.value) else "conversion unknown")
        ax.set_title(f"{c.trace}: {now} at {c.t_now / 60:.1f} min, {verdict}"
                     + (f"\nflags: {', '.join(c.flags)}" if c.flags else ""), fontsize=9.5)
        legend_below(fig, ax, note="a forecast, not a process-safety assessment")
        return save(fig, path, tight=False)


def _charge_marks(ax, c) -> None:
    """The absorbance of the full charge and of the target share of it."""
    r = c.law.fits[c.model]
    a0 = r.value("A0")
    sign = np.sign(r.value("Ainf") - a0) if "Ainf" in r.params else np.sign(r.value("k"))
    full = c.charge.change(a0)
    for share, ls, what in ((1.0, "-.", "full charge"),
                            (c.target, "--", f"{100 * c.target:g} % of the charge")):
        level = a0 + sign * share * full
        ax.axhline(level, color=INK, ls=ls, lw=1, label=f"{what} (A = {level:.3f} AU)")


def _target_marks(ax, c, f, r, color, horizon) -> None:
    """The target level of one order's fit and its forecast time with the interval."""
    vals = r.values()
    if "Ainf" not in vals:
        return
    if c.charge is None:
        a_target = vals["A0"] + (vals["Ainf"] - vals["A0"]) * c.target
        ax.axhline(a_target, color=color, ls=":", lw=1, label=f"{100 * c.target:g} % of order "
                   f"{f.model}'s change (A = {a_target:.3f} AU)")
    tt = f.t_target
    if tt is None or not np.isfinite(tt.value) or tt.value > horizon:
        return
    hi = min(tt.ci_high, horizon) if np.isfinite(tt.ci_high) else horizon
    ax.axvspan(tt.ci_low / 60, hi / 60, color=color, alpha=0.12, lw=0)
    ax.axvline(tt.value / 60, color=color, lw=1.2,
               label=f"t({100 * c.target:g} %) = {tt.value / 60:.1f} min "
                     f"[{tt.ci_low / 60:.1f}, "
                     f"{'open' if not np.isfinite(tt.ci_high) else f'{tt.ci_high / 60:.1f}'}]")


def pseudo_first_order_plot(series: dict, path):
    """kobs against the excess concentration with the weighted line k2 [B] + k0 and its band."""
    from ..distributions import t_quantile

    x = np.asarray(series["conc_M"]) * 1e3
    y = np.asarray(series["kobs_per_s"]) * 1e3
    se = np.asarray(series["kobs_se_per_s"]) * 1e3
    k2, k0 = series["k2"], series["k0"]
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(6.4, 4.4))
        ax.errorbar(x, y, yerr=se, fmt="o", ms=4, color=PALETTE[0], label="kobs ± SE (first order)")
        xs = np.linspace(0, x.max() * 1.05, 100)
        line = (k0["value"] + k2["value"] * xs / 1e3) * 1e3
        ax.plot(xs, line, color=PALETTE[1], label="kobs = k2 [B] + k0")
        cov = series.get("covariance_k0_k2")
        if cov is not None:         # the line's confidence band, (1, [B]) C (1, [B])'
            G = np.column_stack([np.ones_like(xs), xs / 1e3])
            half = t_quantile(0.975, max(len(x) - 2, 1)) * np.sqrt(
                np.einsum("ij,jk,ik->i", G, np.asarray(cov), G)) * 1e3
            ax.fill_between(xs, line - half, line + half, color=SHADE, alpha=0.15, lw=0,
                            label="95 % band of the line")
        for name, xx, yy in zip(series["traces"], x, y, strict=True):
            ax.annotate(name, (xx, yy), textcoords="offset points", xytext=(4, -10), fontsize=7)
        ax.set_xlabel("[excess reagent] (mM)")
        ax.set_ylabel("kobs (10⁻³ 1/s)")
        ax.set_title(f"pseudo-first-order series: k2 = {fmt_pm(k2['value'], k2['se'])} L/(mol s)"
                     f"\nk0 = {fmt_pm(k0['value'], k0['se'])} 1/s", fontsize=9.5)
        ax.set_xlim(left=0)
        legend_below(fig, ax)
        return save(fig, path, tight=False)


def arrhenius_plot(a, path, predictions=()):
    """ln k vs 1/T with the fitted line and its confidence band; the Eyring view beside it.
    Predictions (``{"T_K", "k"}`` as the view makes them) are drawn with their intervals, the
    line's band reaching out to them, so an extrapolation shows as one. Parameters sit in the
    titles and legends below the axes."""
    from ..distributions import t_two_sided

    with house_style() as plt:
        fig, axes = plt.subplots(1, 2, figsize=(10, 4.6), gridspec_kw={"wspace": 0.28})
        x = 1000.0 / a.T
        px = np.array([1000.0 / pr["T_K"] for pr in predictions])
        lo, hi = min(x.min(), *px) if px.size else x.min(), max(x.max(), *px) if px.size else (
            x.max())
        for ax, r, y, lab in ((axes[0], a.arrhenius, np.log(a.k), f"ln(k / ({a.k_unit}))"),
                              (axes[1], a.eyring, np.log(a.k / a.T),
                               f"ln((k/T) / ({a.k_unit} K^-1))")):
            xs = np.linspace(lo - 0.02 * (hi - lo), hi + 0.02 * (hi - lo), 100)
            v = r.values()
            fit_y = v["intercept"] + v["slope"] * xs / 1000
            G = np.vstack([np.ones_like(xs), xs / 1000]).T
            se = np.sqrt(np.einsum("ij,jk,ik->i", G, r.cov, G)) if r.cov is not None else 0 * xs
            tq = t_two_sided(r.level, max(r.dof, 1))
            ax.fill_between(xs, fit_y - tq * se, fit_y + tq * se, color=SHADE, alpha=0.18, lw=0,
                            label=f"{100 * r.level:g} % band")
            if a.k_se is not None:
                ax.errorbar(x, y, yerr=np.asarray(a.k_se) / a.k, fmt="o", ms=4, color=PALETTE[0],
                            label="measured")
            else:
                ax.plot(x, y, "o", ms=4, color=PALETTE[0], label="measured")
            ax.plot(xs, fit_y, color=PALETTE[1], label="fit")
            if r is a.arrhenius and predictions:
                _predictions(ax, predictions)
            ax.set_xlabel("1000 / T (1/K)")
            ax.set_ylabel(lab)
            ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=3, fontsize=7.5)
        p = a.params
        axes[0].set_title(f"Arrhenius: Ea = {fmt_pm(p['Ea'].value, p['Ea'].se)} kJ/mol\n"
                          f"ln A = {fmt_pm(p['lnA'].value, p['lnA'].se)} "
                          f"(A in {p['A'].unit})", fontsize=9.5)
        axes[1].set_title(f"Eyring: ΔH‡ = {fmt_pm(p['dH'].value, p['dH'].se)} kJ/mol\n"
                          f"ΔS‡ = {fmt_pm(p['dS'].value, p['dS'].se)} J/(mol K)", fontsize=9.5)
        return save(fig, path)


def _predictions(ax, predictions) -> None:
    """Predicted ln k with its interval; open markers, marked where extrapolated."""
    for pr in predictions:
        k = pr["k"]
        xx = 1000.0 / pr["T_K"]
        yy = np.log(k["value"])
        err = [[yy - np.log(k["ci_low"])], [np.log(k["ci_high"]) - yy]]
        what = "extrapolated" if pr.get("extrapolated") else "predicted"
        ax.errorbar([xx], [yy], yerr=err, fmt="s", mfc="white", ms=5, color=PALETTE[3],
                    label=f"{what} at {pr['T_K'] - 273.15:.0f} C")
