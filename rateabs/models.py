"""Pure model functions, each with an automatic starting guess (lmfit's convention: a model is a
function plus a guess, kept apart from the machinery that fits it).

A model function takes ``(x, *params)`` and broadcasts: parameters may be scalars or arrays of
shape ``(B, 1)`` for ``B`` datasets fitted at once. Models of two variables take ``x`` stacked
on the first axis, ``x[0]`` the substrate and ``x[1]`` the inhibitor concentration.

Units of parameters are given as kinds: ``"y"`` (the unit of the fitted values), ``"x"`` (the
unit of the first variable), ``"i"`` (the inhibitor's unit), ``"1"`` (dimensionless), ``"1/t"``
(per second) and so on; :func:`unit_of` turns a kind into a unit string.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Model:
    """A model: pure function, parameter names, starting guess, bounds and parameter units."""

    name: str
    func: Callable
    params: tuple[str, ...]
    guess: Callable                     # guess(x, y) -> dict name -> start value
    lower: dict = field(default_factory=dict)
    upper: dict = field(default_factory=dict)
    units: dict = field(default_factory=dict)   # name -> unit kind
    equation: str = ""
    source: str = ""
    #: Parameters measured from an arbitrary zero (absorbance levels, a baseline drift), or whose
    #: zero is a limit the data may well sit at (1/Km = 0: Km infinite, rates first order in
    #: [S]): their size relative to their SE means nothing, so the engine's "poorly determined"
    #: rule (SE over 10 times the value) passes them by.
    offsets: tuple = ()

    def __call__(self, x, *params):
        return self.func(x, *params)


def unit_of(kind: str, units: dict[str, str]) -> str:
    """Unit string of a parameter kind given the data's units (keys ``x``, ``y``, ``i``, ``t``)."""
    if kind in units:
        return units[kind]
    if kind in ("1", "x", "y", "i", "t"):
        return ""
    if "/" in kind:
        num, den = kind.split("/", 1)
        n = units.get(num, "" if num == "1" else num)
        d = units.get(den, den)
        return f"1/{d}" if num == "1" else f"{n}/{d}"
    return kind


# --------------------------------------------------------------------------- helpers


def direct_linear_plot(s, v) -> tuple[float, float]:
    """Vmax and Km as medians of the pairwise intersections of the direct linear plot.

    Eisenthal & Cornish-Bowden (1974), Biochem. J. 139:715: each observation (s_i, v_i) is a line
    V = v_i + (v_i / s_i) Km in the (Km, V) plane; the medians of the intersections estimate
    Km and Vmax robustly, with no assumption about the error distribution.
    """
    s = np.asarray(s, dtype=float)
    v = np.asarray(v, dtype=float)
    ok = (s > 0) & np.isfinite(v)
    s, v = s[ok], v[ok]
    i, j = np.triu_indices(s.size, 1)
    slope_i, slope_j = v[i] / s[i], v[j] / s[j]
    den = slope_i - slope_j
    with np.errstate(divide="ignore", invalid="ignore"):
        km = (v[j] - v[i]) / den
        vm = v[i] + slope_i * km
    good = np.isfinite(km) & np.isfinite(vm) & (np.abs(den) > 1e-300) & (s[i] != s[j])
    if not good.any():
        return float(np.nanmax(v)) if v.size else 1.0, float(np.median(s)) if s.size else 1.0
    return float(np.median(vm[good])), float(np.median(km[good]))


def _positive(x, fallback):
    return float(x) if np.isfinite(x) and x > 0 else float(fallback)


def _mm_start(s, v):
    vmax, km = direct_linear_plot(s, v)
    highest = float(np.nanmax(v)) if np.size(v) else 1.0
    s_pos = s[s > 0] if np.any(s > 0) else np.array([1.0])
    vmax = _positive(vmax, highest * 1.2)
    km = _positive(km, np.median(s_pos))
    # keep starts in a sane range even for odd data
    vmax = min(max(vmax, 0.5 * highest), 20 * abs(highest) + 1e-300)
    km = min(max(km, s_pos.min() * 0.01), s_pos.max() * 100)
    return vmax, km


# --------------------------------------------------------------------------- saturation


def mm(s, Vmax, Km):
    """Michaelis–Menten: v = Vmax S / (Km + S)."""
    return Vmax * s / (Km + s)


def mm_specificity(s, specificity, inv_km):
    """Michaelis–Menten written with Vmax/Km and 1/Km: v = (Vmax/Km) S / (1 + S/Km).

    The same curve as :func:`mm` for finite Km; 1/Km = 0 is the straight line through the origin
    that rates far below Km follow, where Km and Vmax run off together and only their ratio is
    determined."""
    return specificity * s / (1 + inv_km * s)


def hill(s, Vmax, S50, n):
    """Hill (1910): v = Vmax S^n / (S50^n + S^n); S50 is the substrate giving half of Vmax."""
    sn = np.power(np.maximum(s, 0.0), n)
    return Vmax * sn / (np.power(S50, n) + sn)


def substrate_inhibition(s, Vmax, Km, Ksi):
    """Substrate inhibition: v = Vmax S / (Km + S (1 + S / Ksi))."""
    return Vmax * s / (Km + s * (1 + s / Ksi))


def competitive(x, Vmax, Km, Ki):
    """Competitive inhibition: v = Vmax S / (Km (1 + I/Ki) + S)."""
    s, i = x[0], x[1]
    return Vmax * s / (Km * (1 + i / Ki) + s)


def uncompetitive(x, Vmax, Km, Ki):
    """Uncompetitive inhibition: v = Vmax S / (Km + S (1 + I/Ki))."""
    s, i = x[0], x[1]
    return Vmax * s / (Km + s * (1 + i / Ki))


def noncompetitive(x, Vmax, Km, Ki):
    """Noncompetitive (pure) inhibition: v = Vmax S / ((Km + S)(1 + I/Ki))."""
    s, i = x[0], x[1]
    return Vmax * s / ((Km + s) * (1 + i / Ki))


def mixed(x, Vmax, Km, Ki, Kiu):
    """Mixed inhibition: v = Vmax S / (Km (1 + I/Ki) + S (1 + I/Kiu)); alpha = Kiu / Ki."""
    s, i = x[0], x[1]
    return Vmax * s / (Km * (1 + i / Ki) + s * (1 + i / Kiu))


def logistic4(i, v_free, v_floor, IC50, n):
    """Four-parameter logistic dose response: v = v_floor + (v_free - v_floor) / (1 + (I/IC50)^n).

    ``v_free`` is the rate without inhibitor, ``v_floor`` the rate at saturating inhibitor.
    """
    r = np.power(np.maximum(i, 0.0) / IC50, n)
    return v_floor + (v_free - v_floor) / (1 + r)


def _guess_mm(x, y):
    vmax, km = _mm_start(np.asarray(x, float), np.asarray(y, float))
    return {"Vmax": vmax, "Km": km}


def _guess_specificity(x, y):
    s, v = np.asarray(x, float), np.asarray(y, float)
    vmax, km = _mm_start(s, v)
    return {"Vmax/Km": vmax / km, "1/Km": 1 / km}


def _guess_hill(x, y):
    vmax, km = _mm_start(np.asarray(x, float), np.asarray(y, float))
    return {"Vmax": vmax, "S50": km, "n": 1.0}


def _guess_si(x, y):
    s, v = np.asarray(x, float), np.asarray(y, float)
    k = int(np.nanargmax(v))
    low = s <= s[k]
    vmax, km = _mm_start(s[low], v[low]) if low.sum() >= 3 else _mm_start(s, v)
    s_opt = max(s[k], 1e-300)
    return {"Vmax": vmax * 1.5, "Km": km, "Ksi": max(s_opt**2 / km, s_opt)}


def _inhibitor_levels(i):
    lv = np.unique(i[np.isfinite(i)])
    return lv[lv > 0]


def _guess_inhib(x, y, extra=False):
    s, i = np.asarray(x[0], float), np.asarray(x[1], float)
    v = np.asarray(y, float)
    base = i == np.nanmin(i)
    vmax, km = _mm_start(s[base], v[base]) if base.sum() >= 2 else _mm_start(s, v)
    lv = _inhibitor_levels(i)
    ki = float(np.median(lv)) if lv.size else 1.0
    out = {"Vmax": vmax, "Km": km, "Ki": ki}
    if extra:
        out["Kiu"] = ki
    return out


def _guess_ic50(x, y):
    i, v = np.asarray(x, float), np.asarray(y, float)
    zero = i == np.nanmin(i)
    v_free = float(np.nanmean(v[zero]))
    hi = i == np.nanmax(i)
    v_floor = float(np.nanmean(v[hi]))
    half = (v_free + v_floor) / 2
    pos = i > 0
    order = np.argsort(i[pos])
    ip, vp = i[pos][order], v[pos][order]
    ic50 = float(np.exp(np.median(np.log(ip)))) if ip.size else 1.0
    for k in range(len(vp) - 1):
        if (vp[k] - half) * (vp[k + 1] - half) <= 0 and vp[k] != vp[k + 1]:
            f = (half - vp[k]) / (vp[k + 1] - vp[k])
            ic50 = float(np.exp(np.log(ip[k]) + f * (np.log(ip[k + 1]) - np.log(ip[k]))))
            break
    n = 1.0 if v_free >= v_floor else -1.0
    return {"v_free": v_free, "v_floor": v_floor, "IC50": ic50, "n": n}


_POS = 1e-12
SATURATION = {
    "mm": Model("mm", mm, ("Vmax", "Km"), _guess_mm, {"Vmax": 0, "Km": _POS}, {},
                {"Vmax": "y", "Km": "x"}, "v = Vmax S / (Km + S)", "Michaelis & Menten (1913)"),
    "hill": Model("hill", hill, ("Vmax", "S50", "n"), _guess_hill,
                  {"Vmax": 0, "S50": _POS, "n": 0.05}, {"n": 20},
                  {"Vmax": "y", "S50": "x", "n": "1"}, "v = Vmax S^n / (S50^n + S^n)",
                  "Hill (1910)"),
    "substrate-inhibition": Model(
        "substrate-inhibition", substrate_inhibition, ("Vmax", "Km", "Ksi"), _guess_si,
        {"Vmax": 0, "Km": _POS, "Ksi": _POS}, {}, {"Vmax": "y", "Km": "x", "Ksi": "x"},
        "v = Vmax S / (Km + S (1 + S/Ksi))", "Haldane (1930)"),
    "competitive": Model("competitive", competitive, ("Vmax", "Km", "Ki"), _guess_inhib,
                         {"Vmax": 0, "Km": _POS, "Ki": _POS}, {},
                         {"Vmax": "y", "Km": "x", "Ki": "i"}, "v = Vmax S / (Km (1 + I/Ki) + S)"),
    "uncompetitive": Model("uncompetitive", uncompetitive, ("Vmax", "Km", "Ki"), _guess_inhib,
                           {"Vmax": 0, "Km": _POS, "Ki": _POS}, {},
                           {"Vmax": "y", "Km": "x", "Ki": "i"},
                           "v = Vmax S / (Km + S (1 + I/Ki))"),
    "noncompetitive": Model("noncompetitive", noncompetitive, ("Vmax", "Km", "Ki"), _guess_inhib,
                            {"Vmax": 0, "Km": _POS, "Ki": _POS}, {},
                            {"Vmax": "y", "Km": "x", "Ki": "i"},
                            "v = Vmax S / ((Km + S)(1 + I/Ki))"),
    "mixed": Model("mixed", mixed, ("Vmax", "Km", "Ki", "Kiu"),
                   lambda x, y: _guess_inhib(x, y, extra=True),
                   {"Vmax": 0, "Km": _POS, "Ki": _POS, "Kiu": _POS}, {},
                   {"Vmax": "y", "Km": "x", "Ki": "i", "Kiu": "i"},
                   "v = Vmax S / (Km (1 + I/Ki) + S (1 + I/Kiu))"),
    "ic50": Model("ic50", logistic4, ("v_free", "v_floor", "IC50", "n"), _guess_ic50,
                  {"IC50": _POS}, {}, {"v_free": "y", "v_floor": "y", "IC50": "i", "n": "1"},
                  "v = v_floor + (v_free - v_floor) / (1 + (I/IC50)^n)",
                  "four-parameter logistic, e.g. DeLean, Munson & Rodbard (1978)"),
}

#: Michaelis–Menten in Vmax/Km and 1/Km, fitted beside ``mm`` for the specificity constant (not
#: a candidate of its own: the same curves). Unit kinds: ``spec`` is set by the caller.
MM_SPECIFICITY = Model("mm", mm_specificity, ("Vmax/Km", "1/Km"), _guess_specificity,
                       {"Vmax/Km": 0, "1/Km": 0}, {}, {"Vmax/Km": "spec", "1/Km": "1/x"},
                       "v = (Vmax/Km) S / (1 + S/Km)", "Michaelis & Menten (1913)",
                       offsets=("1/Km",))

#: Models of one variable (substrate) and of two (substrate, inhibitor).
SUBSTRATE_MODELS = ("mm", "hill", "substrate-inhibition")
INHIBITION_MODELS = ("competitive", "uncompetitive", "noncompetitive", "mixed")

#: Nested pairs (simpler, more general) for extra-sum-of-squares F-tests.
NESTED = [("mm", "hill"), ("mm", "substrate-inhibition"), ("competitive", "mixed"),
          ("uncompetitive", "mixed"), ("noncompetitive", "mixed")]


# --------------------------------------------------------------------------- time origin

#: Where the integrated rate laws (``ratelaw``, ``completion``, ``grade``) and the integrated
#: Michaelis–Menten curves (``progress``) count time from, in words (:func:`time_origin`).
TIME_ORIGIN = ("the file's own time zero, or the first usable reading where that lies more "
               "than the run's span after it")


def time_origin(t) -> tuple[np.ndarray, float]:
    """Times counted from the origin the integrated laws use, and that origin in the file's
    own times (s).

    The file's zero stays the origin while the first usable reading lies within one observed
    span of it (a dead time before the first reading: A0, S0 or a fixed A0 then refer to the
    moment the file calls zero, as in the published BOD data of Bates & Watts 1988, y = 0 at
    t = 0). Further out the zero is a clock's midnight, an epoch or an instrument's start, not
    the reaction's: exp(-k t) at t ~ 3e4 s underflows or leaves A0 and k undetermined, so
    times are counted from the first usable reading (as ``rates`` does). Rates and durations
    (k, a half-life, the time to a conversion from the origin) do not depend on the shift."""
    t = np.asarray(t, float)
    if not t.size:
        return t, 0.0
    first = float(np.min(t))
    t0 = first if first > float(np.max(t)) - first else 0.0
    return t - t0, t0


# --------------------------------------------------------------------------- rate laws
# Integrated rate laws written for absorbance: A(t) = Ainf + (A0 - Ainf) f(t), where f is the
# fraction of reactant left. Absorbance is linear in the extent of reaction whichever species
# absorb (reactant, product or both), so the same forms serve all cases; the concentration
# scale enters only through delta-epsilon * pathlength when results are converted.


def order0(t, A0, k):
    """Zero order: A = A0 + k t (k in absorbance per second, signed)."""
    return A0 + k * t


def order1(t, A0, Ainf, k):
    """First order: A = Ainf + (A0 - Ainf) exp(-k t)."""
    return Ainf + (A0 - Ainf) * np.exp(-k * t)


def order2(t, A0, Ainf, k):
    """Second order (rate = k[A]^2) in absorbance units: A = Ainf + d / (1 + k |d| t), d = A0 - Ainf.

    Here k is per absorbance unit per second: k = k_conc / (|delta-epsilon| b).
    """
    d = A0 - Ainf
    return Ainf + d / (1 + k * np.abs(d) * t)


def mixed2(t, A0, Ainf, k, a0=1.0, b0=2.0):
    """Mixed second order A + B -> P with [A]0 = a0, [B]0 = b0 (mol/L, unequal); k in L/(mol s).

    Extent x(t) = a0 b0 (e^{(b0-a0)kt} - 1) / (b0 e^{(b0-a0)kt} - a0); A = A0 + (Ainf - A0) x/x_end.
    """
    e = np.exp((b0 - a0) * k * t)
    x = a0 * b0 * (e - 1) / (b0 * e - a0)
    return A0 + (Ainf - A0) * x / min(a0, b0)


def line(x, intercept, slope):
    """Straight line: y = intercept + slope x (Arrhenius, Eyring and kobs-vs-concentration fits)."""
    return intercept + slope * x


def _guess_order0(t, y):
    b, a = np.polyfit(t, y, 1)
    return {"A0": float(a), "k": float(b)}


def _rough_decay(t, y, order):
    """Rough A0, Ainf, k from the head, the tail and the time to half the change."""
    n = y.size
    tail = y[-max(2, n // 10):]
    head = y[:max(2, n // 10)]
    a0 = float(np.mean(head[:2]))
    # the end value: a bit beyond the last readings, in the direction of travel
    drift = float(np.mean(tail) - a0)
    ainf = float(np.mean(tail)) + 0.05 * drift
    d = a0 - ainf
    frac = np.clip((y - ainf) / d, 1e-3, 1) if d != 0 else np.ones_like(y)
    half = np.argmax(frac <= 0.5) if np.any(frac <= 0.5) else n - 1
    t_half = max(float(t[half] - t[0]), float(t[-1] - t[0]) / 4, 1e-9)
    if order == 1:
        k = np.log(2) / t_half
    else:
        k = 1.0 / (t_half * abs(d)) if d else 1.0 / t_half
    return {"A0": a0, "Ainf": ainf, "k": float(k)}


def decay_shape(order: int, theta, t):
    """The fraction of the change still to come: exp(-theta t) (first order) or
    1/(1 + theta t) (second order, theta = k |A0 - Ainf|, the initial first-order rate)."""
    return np.exp(-theta * t) if order == 1 else 1.0 / (1.0 + theta * t)


def guess_decay(t, y, order, drift: bool = False):
    """Starting A0, Ainf and k (and a drift) of a first- or second-order approach to an end value.

    For a given rate the law is linear in A0, Ainf (and the drift), so the best of them follow
    by least squares and the residual depends on the rate alone (variable projection, Golub &
    Pereyra 1973); the rate is found by a bounded one-dimensional search on its logarithm,
    from 1/1000 to 1000 times the rough rate of the time to half the change. The start is then
    the optimum (or close to it) whatever the conversion, which keeps the solver from wandering.
    """
    from scipy.optimize import minimize_scalar

    t, y = np.asarray(t, float), np.asarray(y, float)
    rough = _rough_decay(t, y, order)
    theta0 = rough["k"] * (abs(rough["A0"] - rough["Ainf"]) if order == 2 else 1.0)
    if not (np.isfinite(theta0) and theta0 > 0) or y.size < 4:
        return {**rough, "drift": 0.0} if drift else rough

    def solve(u):
        f = decay_shape(order, np.exp(u), t)
        cols = [f, 1 - f] + ([t] if drift else [])
        B = np.column_stack(cols)
        c, *_ = np.linalg.lstsq(B, y, rcond=None)
        r = y - B @ c
        return float(r @ r), c

    u0 = np.log(theta0)
    best = minimize_scalar(lambda u: solve(u)[0], bounds=(u0 - 7, u0 + 7), method="bounded",
                           options={"xatol": 1e-6})
    _, c = solve(best.x)
    a0, ainf = float(c[0]), float(c[1])
    theta = float(np.exp(best.x))
    k = theta / abs(a0 - ainf) if order == 2 and a0 != ainf else theta
    out = {"A0": a0, "Ainf": ainf, "k": k}
    return {**out, "drift": float(c[2])} if drift else out


def delayed(model: Model) -> Model:
    """``model`` starting late: A = A0 until the delay ``td`` (s), then the law in t - td.

    An induction period (an initiator or catalyst that must first form, a reagent added late,
    a cell not yet at temperature) leaves the trace flat for a while; the law then runs in the
    time since ``td``. The start is the best of a grid of delays (the readings' own times up to
    two thirds of the run), each with the law's own guess for the readings after it."""
    base = model.func

    def func(t, *p):
        return base(np.maximum(t - p[-1], 0.0), *p[:-1])

    def guess(t, y):
        t, y = np.asarray(t, float), np.asarray(y, float)
        best = None
        limit = t[0] + 2 * (t[-1] - t[0]) / 3
        for td in np.unique(t[(t >= t[0]) & (t <= limit)])[:: max(1, t.size // 40)]:
            after = t >= td
            if after.sum() < 4:
                continue
            g = model.guess(t[after] - td, y[after])
            with np.errstate(all="ignore"):
                r = y - func(t, *[g[nm] for nm in model.params], td)
            rss = float(r @ r)
            if np.isfinite(rss) and (best is None or rss < best[0]):
                best = (rss, {**g, "td": float(td)})
        return best[1] if best else {**model.guess(t, y), "td": 0.0}

    return Model(f"{model.name} delayed", func, model.params + ("td",), guess,
                 {**model.lower, "td": 0.0}, dict(model.upper), {**model.units, "td": "s"},
                 f"{model.equation}, with t - td for t > td and A = A0 before",
                 model.source, model.offsets)


def decaying_first_order(t, A0, Aend, k, kd):
    """First order whose rate constant decays at first order, k exp(-kd t) (a catalyst or an
    enzyme that dies as it works): ln([A]/[A]0) = -(k/kd)(1 - exp(-kd t)), so the reaction
    levels off at the fraction 1 - exp(-k/kd) of the change towards ``Aend`` (integrated by
    hand from d ln[A]/dt = -k exp(-kd t); common practice)."""
    with np.errstate(all="ignore"):
        kd_safe = np.where(kd > 0, kd, 1.0)
        a = np.where(kd > 0, k * -np.expm1(-kd_safe * t) / kd_safe, k * t)
    return Aend + (A0 - Aend) * np.exp(-a)


def _guess_decaying(t, y):
    """Start of :func:`decaying_first_order`: the first-order guess read as a stall that
    levels off at one of a few fractions of its change (the best of them by RSS)."""
    g = guess_decay(t, y, 1)
    best = None
    for frac in (0.95, 0.8, 0.6, 0.4, 0.2):
        alpha = -np.log(1 - frac)
        for scale in (0.5, 1.0):
            kd = g["k"] * scale
            p = {"A0": g["A0"], "Aend": g["A0"] - (g["A0"] - g["Ainf"]) / frac,
                 "k": alpha * kd, "kd": kd}
            r = y - decaying_first_order(t, **p)
            rss = float(r @ r)
            if np.isfinite(rss) and (best is None or rss < best[0]):
                best = (rss, p)
    return best[1] if best else {"A0": g["A0"], "Aend": g["Ainf"], "k": g["k"], "kd": 0.0}


#: First order with a rate constant that decays (a reaction that stalls short of its charge).
DECAYING_FIRST_ORDER = Model(
    "1 stalling", decaying_first_order, ("A0", "Aend", "k", "kd"), _guess_decaying,
    {"k": 0.0, "kd": 0.0}, {}, {"A0": "AU", "Aend": "AU", "k": "1/s", "kd": "1/s"},
    "A = Aend + (A0 - Aend) exp(-(k/kd)(1 - exp(-kd t)))", "common practice",
    ("A0", "Aend"))


RATE_LAWS = {
    "0": Model("0", order0, ("A0", "k"), _guess_order0, {}, {}, {"A0": "AU", "k": "AU/s"},
               "A = A0 + k t", "Atkins, Physical Chemistry", ("A0",)),
    "1": Model("1", order1, ("A0", "Ainf", "k"), lambda t, y: guess_decay(t, y, 1),
               {"k": 0.0}, {}, {"A0": "AU", "Ainf": "AU", "k": "1/s"},
               "A = Ainf + (A0 - Ainf) exp(-k t)", "Atkins, Physical Chemistry",
               ("A0", "Ainf")),
    "2": Model("2", order2, ("A0", "Ainf", "k"), lambda t, y: guess_decay(t, y, 2),
               {"k": 0.0}, {}, {"A0": "AU", "Ainf": "AU", "k": "1/(AU s)"},
               "A = Ainf + (A0 - Ainf) / (1 + k |A0 - Ainf| t)", "Atkins, Physical Chemistry",
               ("A0", "Ainf")),
}

LINE = Model("line", line, ("intercept", "slope"),
             lambda x, y: dict(zip(("slope", "intercept"), np.polyfit(x, y, 1), strict=True)),
             units={"intercept": "y", "slope": "y/x"}, equation="y = intercept + slope x")
