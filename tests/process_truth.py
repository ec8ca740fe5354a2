"""Process runs from known mechanisms, for the completion tests and benchmark.

Each run is a mechanism integrated with ``scipy.integrate.solve_ivp`` (reference library) and
turned into absorbance by Beer–Lambert (IUPAC Compendium, "molar absorption coefficient"),
then seeded noise; nothing here imports rateabs, so a wrong model in the package cannot agree
with its own truth. Concentrations in mol/L, times in s, epsilon in L mol^-1 cm^-1, 1 cm.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import solve_ivp

EPS = 1.0e4            # molar absorptivity of the reactant (product transparent)
BASE = 0.06            # absorbance of everything else in the cell
C0 = 1.19e-4           # charge: 1.19 AU of reactant at the start


def _solve(rhs, y0, t):
    sol = solve_ivp(rhs, (0, t[-1]), y0, t_eval=t, method="LSODA", rtol=1e-10,
                    atol=1e-16)
    return sol.y


def first_order(t, k, c0=C0):
    """[A] for A -> P at k[A]."""
    return _solve(lambda _, y: [-k * y[0]], [c0], t)[0]


def second_order(t, k, c0=C0):
    """[A] for loss of A at k[A]^2 (L mol^-1 s^-1)."""
    return _solve(lambda _, y: [-k * y[0] ** 2], [c0], t)[0]


def stalled(t, k_cat, k_dead, c0=C0, cat0=1.0):
    """[A] for A -> P catalysed at k_cat[Cat][A] by a catalyst that dies at k_dead[Cat]: the
    conversion levels off at 1 - exp(-k_cat cat0 / k_dead)."""
    return _solve(lambda _, y: [-k_cat * y[1] * y[0], -k_dead * y[1]], [c0, cat0], t)[0]


def consecutive(t, k1, k2, c0=C0):
    """[B] for A -> B -> C (first order steps): an intermediate that forms and decays."""
    return _solve(lambda _, y: [-k1 * y[0], k1 * y[0] - k2 * y[1]], [c0, 0.0], t)[1]


def absorbance(c, eps=EPS, base=BASE, drift=0.0, t=None):
    """base + eps b c (+ drift t, a baseline that creeps at ``drift`` AU/s)."""
    a = base + eps * np.asarray(c, float)
    return a + drift * t if drift else a


def k_for_conversion(order: str, x: float, t_end: float, c0=C0) -> float:
    """The rate constant that brings the reaction to conversion x at t_end (Atkins: first order
    x = 1 - exp(-k t); second order 1/[A] = 1/[A]0 + k t)."""
    if order == "1":
        return -math.log(1 - x) / t_end
    return x / ((1 - x) * c0 * t_end)


def time_to(order: str, x: float, k: float, c0=C0) -> float:
    """True time to conversion x of the charge (the same textbook relations, solved for t)."""
    if order == "1":
        return -math.log(1 - x) / k
    return x / ((1 - x) * c0 * k)


def noisy(y, seed, sd=0.004):
    """Readings with seeded white noise."""
    return y + np.random.default_rng(seed).normal(0, sd, np.size(y))


def stall_time_to(x: float, k_cat: float, k_dead: float, cat0: float = 1.0) -> float:
    """Time at which a stalling run reaches the fraction x of its own final change.

    Integrating d ln[A]/dt = -k_cat cat0 exp(-k_dead t) gives ln([A]/[A]0) =
    -alpha (1 - exp(-k_dead t)), alpha = k_cat cat0 / k_dead, so the final conversion is
    1 - exp(-alpha) and x of it is reached at t = -ln(1 - L/alpha)/k_dead with
    L = -ln(1 - x (1 - exp(-alpha))).
    """
    alpha = k_cat * cat0 / k_dead
    big_l = -math.log(1 - x * (1 - math.exp(-alpha)))
    return -math.log(1 - big_l / alpha) / k_dead
