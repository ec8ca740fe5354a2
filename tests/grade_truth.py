"""Planted classes for the grading tests and benchmark, simulated from known truth without
rateabs.

Each student's run comes from a closed form typed here or from ``scipy.integrate.solve_ivp``;
each student's *honest* number is their own least-squares fit with ``scipy.optimize.curve_fit``
(reference library); each planted slip turns that number into the reported one with a factor
or a relation taken from a definition:

* 60 s = 1 min and 3600 s = 1 h (SI brochure, 9th edn, 2019, table 8: non-SI units accepted);
* ln 10 = 2.302585... (the natural logarithm's definition: log10 x = ln x / ln 10);
* the first-order half-life t1/2 = ln 2 / k and time constant 1/k (e.g. Atkins, Physical
  Chemistry, first-order kinetics);
* %T to absorbance A = 2 - log10(%T), i.e. A = -log10 T (IUPAC Compendium of Chemical
  Terminology, "absorbance");
* Beer–Lambert A = epsilon b c, 10 mm = 1 cm, 1 mM = 1000 uM (IUPAC, "molar absorption
  coefficient").

Nothing here imports rateabs.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import curve_fit

LN10 = math.log(10.0)     # from the definition of the logarithm
LN2 = math.log(2.0)
K_REF = 8.0e-4            # 1/s, the class reference of the first-order practical

#: planted kind -> (how many, the slip the grader should name, or None to be left alone)
FIRST_ORDER_PLAN = {
    "sound": (8, None), "noisy": (3, None), "honest-window": (3, None),
    "honest-loglinear": (3, None), "warm-bath": (1, None), "recorded-%T": (2, None),
    "bare-minutes": (2, None), "reported-zero": (1, None), "reported-text": (1, None),
    "reported-nan": (1, None),
    "minutes": (3, "time-unit"), "hours": (1, "time-unit"), "log10": (3, "log10"),
    "half-life-s": (2, "half-life"), "half-life-min": (2, "half-life"),
    "half-life-h": (1, "half-life"), "time-constant-s": (1, "time-constant"),
    "time-constant-min": (2, "time-constant"), "sign": (2, "sign"),
    "analysed-%T": (2, "percent-T"), "minutes+log10": (1, "time-unit+log10"),
}
#: kinds whose report is an honest value of the student's own data (never a slip)
HONEST = {k for k, (_, slip) in FIRST_ORDER_PLAN.items() if slip is None}


def first_order(t, a0, ainf, k):
    """A(t) = Ainf + (A0 - Ainf) exp(-k t): first-order decay of an absorbing reactant."""
    return ainf + (a0 - ainf) * np.exp(-k * t)


def fit_k(t, y) -> float:
    """A student's own first-order k: least squares with scipy.optimize.curve_fit."""
    p0 = (y[0], y[-1], 1.0 / (t[-1] / 3))
    p, _ = curve_fit(first_order, t, y, p0=p0, maxfev=20000)
    return float(p[2])


def _honest_other_method(kind: str, t, y) -> float:
    """k by another legitimate method: the first half of the run only, or the slope of
    ln(A - Ainf) with Ainf taken as the last reading minus 0.01 (a common hand method)."""
    if kind == "honest-window":
        half = t <= t[-1] / 2
        return fit_k(t[half], y[half])
    ainf = y[-1] - 0.01
    use = (y - ainf) > 0.05
    return float(-np.polyfit(t[use], np.log(y[use] - ainf), 1)[0])


def _report(kind: str, k: float, t, y, pt) -> str:
    """The number the student wrote in the roster, 4 significant digits."""
    values = {"minutes": k * 60, "hours": k * 3600, "log10": k / LN10,
              "half-life-s": LN2 / k, "half-life-min": LN2 / k / 60,
              "half-life-h": LN2 / k / 3600, "time-constant-s": 1 / k,
              "time-constant-min": 1 / k / 60, "sign": -k, "minutes+log10": k * 60 / LN10}
    if kind in values:
        return f"{values[kind]:.4g}"
    if kind in ("honest-window", "honest-loglinear"):
        return f"{_honest_other_method(kind, t, y):.4g}"
    if kind == "analysed-%T":
        return f"{fit_k(t, pt):.4g}"
    return {"reported-zero": "0", "reported-text": "about 8e-4", "reported-nan": "nan"}.get(
        kind, f"{k:.4g}")


def first_order_class(folder: Path, seed: int = 20261202) -> dict[str, str]:
    """Write a planted class (roster.csv, rubric.toml, one run per student); returns
    student -> planted kind."""
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    t = np.arange(0, 2401, 30.0)
    roster, planted, i = ["student,file,reported"], {}, 0
    for kind, (count, _) in FIRST_ORDER_PLAN.items():
        for _ in range(count):
            i += 1
            k = K_REF * (1 + rng.normal(0, 0.02)) * (1.35 if kind == "warm-bath" else 1)
            pct = kind in ("recorded-%T", "analysed-%T")
            a0, ainf = (0.45, 0.05) if pct else (rng.uniform(1.0, 1.3), 0.05)
            noise = 0.03 if kind == "noisy" else 0.004
            y = first_order(t, a0, ainf, k) + rng.normal(0, noise, t.size)
            pt = 100 * 10 ** (-y)                      # A = 2 - log10(%T)  <=>  %T = 100 10^-A
            own = fit_k(t, y)
            name = f"student {i:02d}"
            fname = f"run_{i:02d}.csv"
            _write_run(folder / fname, kind, t, y, pt)
            roster.append(f"{name},{fname},{_report(kind, own, t, y, pt)}")
            planted[name] = kind
    (folder / "roster.csv").write_text("\n".join(roster) + "\n")
    (folder / "rubric.toml").write_text(
        '[assignment]\ntitle = "Planted first-order class"\nquantity = "k"\nunit = "1/s"\n'
        f"reference = {K_REF}\ntolerance_pct = 5\n")
    return planted


def _write_run(path: Path, kind: str, t, y, pt) -> None:
    if kind == "bare-minutes":
        head, tt = "Time", t / 60                      # minutes, under a header naming no unit
    else:
        head, tt = "time (s)", t
    col, vals = ("Absorbance", pt) if kind == "recorded-%T" else (
        ("%T", pt) if kind == "analysed-%T" else ("A520", y))
    path.write_text(f"{head},{col}\n" + "".join(f"{a:g},{b:.4f}\n" for a, b in zip(
        tt, vals, strict=True)))


# --------------------------------------------------------------------------- initial rates

EPSILON = 6220.0          # NADH at 340 nm, L mol^-1 cm^-1 (Horecker & Kornberg 1948, from memory)
V0_PLAN = {"sound": (5, None), "mM": (2, "conc-unit"), "per-s": (2, "time-unit"),
           "pathlength-mm": (2, "pathlength"), "not-converted": (2, "not-converted"),
           "sign": (1, "sign")}


def nadh_trace(t, s0_uM: float, vmax: float, km: float) -> np.ndarray:
    """[NADH] (uM) consumed by Michaelis–Menten kinetics, integrated with solve_ivp:
    d[S]/dt = -Vmax [S] / (Km + [S]); the initial rate is Vmax S0 / (Km + S0) (uM/s)."""
    sol = solve_ivp(lambda _, s: -vmax * s / (km + s), (0, t[-1]), [s0_uM], t_eval=t,
                    rtol=1e-10, atol=1e-12)
    return sol.y[0]


def initial_rate_class(folder: Path, seed: int = 7) -> tuple[dict[str, str], float]:
    """A planted v0 class (uM/min, epsilon 6220, 1 cm); returns student -> kind and the mean
    true initial rate (uM/min)."""
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    t = np.arange(0, 301, 10.0)
    roster, planted, truths, i = ["student,file,reported"], {}, [], 0
    for kind, (count, _) in V0_PLAN.items():
        for _ in range(count):
            i += 1
            vmax, km, s0 = 0.12 * (1 + rng.normal(0, 0.02)), 400.0, 150.0     # uM/s, uM, uM
            v0 = vmax * s0 / (km + s0) * 60                                    # uM/min
            a = 0.05 + EPSILON * 1e-6 * nadh_trace(t, s0, vmax, km) + rng.normal(0, 0.002,
                                                                                  t.size)
            fname = f"v_{i:02d}.csv"
            (folder / fname).write_text("time (s),A340\n" + "".join(
                f"{x:g},{y:.4f}\n" for x, y in zip(t, a, strict=True)))
            rep = v0 * (1 + rng.normal(0, 0.01))
            rep = {"mM": rep / 1000, "per-s": rep / 60, "pathlength-mm": rep / 10,
                   "not-converted": rep * EPSILON * 1e-6, "sign": -rep}.get(kind, rep)
            name = f"v student {i:02d}"
            roster.append(f"{name},{fname},{rep:.4g}")
            planted[name] = kind
            truths.append(v0)
    (folder / "roster.csv").write_text("\n".join(roster) + "\n")
    ref = float(np.mean(truths))
    (folder / "rubric.toml").write_text(
        '[assignment]\nquantity = "v0"\nunit = "uM/min"\n'
        f'reference = {ref:.4g}\ntolerance_pct = 10\nepsilon = "{EPSILON:g} M^-1 cm^-1"\n'
        'pathlength = "1 cm"\n')
    return planted, ref
