"""Ground truths for the tests, computed without rateabs.

Two kinds, each with its source beside it:

* rate equations typed here from the book or paper that states them (not imported from
  ``rateabs.models``), so that a wrong equation in the package cannot agree with its own truth;
* mechanisms integrated with ``scipy.integrate.solve_ivp`` (reference library): the rate the
  tests expect emerges from mass action, not from any closed form.

Nothing in this module imports rateabs.
"""

from __future__ import annotations

from functools import cache

import numpy as np
from scipy.integrate import solve_ivp

# Exact SI values (BIPM, SI brochure 9th edn, 2019); R = N_A k_B = 8.314462618... J mol^-1 K^-1
# (CODATA 2018).
K_B = 1.380649e-23          # J/K
H_PLANCK = 6.62607015e-34   # J s
N_A = 6.02214076e23         # 1/mol
R_GAS = N_A * K_B           # J/(mol K)


# --------------------------------------------------------------------------- rate equations
# Reversible inhibition, as written in Cornish-Bowden, Fundamentals of Enzyme Kinetics, 4th edn
# (Wiley-Blackwell, 2012), chapter 6 (chapter number from memory): with a = [S], i = [I],
# V the limiting rate, Kic the competitive and Kiu the uncompetitive inhibition constant,
#     mixed           v = V a / (Km (1 + i/Kic) + a (1 + i/Kiu))
#     competitive     Kiu -> infinity:  v = V a / (Km (1 + i/Kic) + a)
#     uncompetitive   Kic -> infinity:  v = V a / (Km + a (1 + i/Kiu))
#     pure noncompetitive, Kic = Kiu = Ki: v = (V / (1 + i/Ki)) a / (Km + a)


def v_mixed(a, i, V, Km, Kic, Kiu):
    """Mixed inhibition (Cornish-Bowden 2012, 4th edn)."""
    return V * a / (Km * (1 + i / Kic) + a * (1 + i / Kiu))


def v_competitive(a, i, V, Km, Kic):
    """Competitive inhibition (Cornish-Bowden 2012, 4th edn)."""
    return V * a / (Km * (1 + i / Kic) + a)


def v_uncompetitive(a, i, V, Km, Kiu):
    """Uncompetitive inhibition (Cornish-Bowden 2012, 4th edn)."""
    return V * a / (Km + a * (1 + i / Kiu))


def v_noncompetitive(a, i, V, Km, Ki):
    """Pure noncompetitive inhibition, Kic = Kiu (Cornish-Bowden 2012, 4th edn)."""
    return (V / (1 + i / Ki)) * a / (Km + a)


def v_substrate_inhibition(a, V, Km, Ksi):
    """Haldane (1930), Enzymes (Longmans): v = V a / (Km + a + a^2/Ksi)."""
    return V * a / (Km + a + a * a / Ksi)


def hill_1910(x, K, n):
    """Hill (1910), J. Physiol. 40:iv-vii, as he wrote it: y = K x^n / (1 + K x^n).

    The fraction y of the maximum; the package's S50 (x at y = 1/2) is K^(-1/n).
    """
    kx = K * np.power(x, n)
    return kx / (1 + kx)


def v_hill(a, V, S50, n):
    """Rate from Hill's 1910 form with the conversion K = S50^-n made explicit."""
    return V * hill_1910(a, S50 ** (-n), n)


def log_logistic4(x, b, c, d, e):
    """Four-parameter log-logistic as in Ritz, Baty, Streibig & Gerhard (2015), PLoS ONE
    10:e0146021 (R package drc, LL.4): f(x) = c + (d - c) / (1 + exp(b (log x - log e))).

    In the package's words d = v_free, c = v_floor, e = IC50, b = n. At x = 0 the exponential
    term is 0 for b > 0, so f(0) = d.
    """
    x = np.asarray(x, float)
    with np.errstate(divide="ignore"):
        z = np.where(x > 0, np.exp(b * (np.log(np.where(x > 0, x, 1.0)) - np.log(e))), 0.0)
    return c + (d - c) / (1 + z)


def eyring_k(T, dH, dS):
    """Eyring (1935), J. Chem. Phys. 3:107, transmission coefficient 1:
    k = (k_B T / h) exp(dS/R) exp(-dH/(R T)); dH in J/mol, dS in J/(mol K)."""
    return K_B * T / H_PLANCK * np.exp(dS / R_GAS) * np.exp(-dH / (R_GAS * T))


# --------------------------------------------------------------------------- mechanisms


@cache
def _steady_state_rate(a, i, k1, km1, kcat, k3, km3, k4, km4, e0=1e-3):
    """kcat [ES] at steady state of E+S <-> ES -> E+P, E+I <-> EI, ES+I <-> ESI (dead ends).

    [S] and [I] are held constant (initial-rate conditions, enzyme far below substrate); the
    enzyme species are integrated with solve_ivp until nothing changes. k3 = 0 removes EI
    (uncompetitive), k4 = 0 removes ESI (competitive).
    """
    def rhs(_, y):
        e, es, ei, esi = y
        f1 = k1 * e * a - km1 * es
        f3 = k3 * e * i - km3 * ei
        f4 = k4 * es * i - km4 * esi
        return [-f1 + kcat * es - f3, f1 - kcat * es - f4, f3, f4]

    slowest = min(r for r in (k1 * a + km1 + kcat, k3 * i + km3, k4 * i + km4, km1 + kcat)
                  if r > 0)
    sol = solve_ivp(rhs, (0, 400 / slowest), [e0, 0, 0, 0], method="LSODA", rtol=1e-10,
                    atol=1e-16)
    return kcat * sol.y[1, -1]


def mechanism_rates(a, i, *, V, Km, Kic=np.inf, Kiu=np.inf, e0=1e-3):
    """Initial rates from the dead-end inhibition mechanism, by solve_ivp (one per point).

    Rate constants are chosen to give the requested constants: kcat = V/e0, k-1 = kcat and
    k1 = (k-1 + kcat)/Km, so Km = (k-1 + kcat)/k1 (Briggs & Haldane 1925); Kic = k-3/k3 and
    Kiu = k-4/k4 with fast binding. An infinite constant removes that complex.
    """
    kcat = V / e0
    km1 = kcat
    k1 = (km1 + kcat) / Km
    k3, km3 = (0.0, 1.0) if not np.isfinite(Kic) else (1e3 * kcat / Kic, 1e3 * kcat)
    k4, km4 = (0.0, 1.0) if not np.isfinite(Kiu) else (1e3 * kcat / Kiu, 1e3 * kcat)
    return np.array([_steady_state_rate(float(s), float(c), k1, km1, kcat, k3, km3, k4, km4, e0)
                     for s, c in zip(np.ravel(a), np.ravel(i), strict=True)])


def first_order_decay(t, a0, k):
    """[A](t) for A -> P, d[A]/dt = -k[A], by solve_ivp."""
    sol = solve_ivp(lambda _, y: [-k * y[0]], (0, t[-1]), [a0], t_eval=t, rtol=1e-11,
                    atol=1e-14 * a0)
    return sol.y[0]


def reversible_first_order(t, a0, kf, kr):
    """[A](t) for A <-> B (forward kf, back kr), by solve_ivp. The approach to equilibrium is
    first order with k = kf + kr (Atkins, Physical Chemistry, relaxation of A <-> B)."""
    sol = solve_ivp(lambda _, y: [-kf * y[0] + kr * y[1], kf * y[0] - kr * y[1]], (0, t[-1]),
                    [a0, 0.0], t_eval=t, rtol=1e-11, atol=1e-14 * a0)
    return sol.y[0]


def second_order_decay(t, a0, k):
    """[A](t) for the loss of A at rate k[A]^2 (d[A]/dt = -k[A]^2; half-life 1/(k[A]0), as in
    the shared references), by solve_ivp."""
    sol = solve_ivp(lambda _, y: [-k * y[0] ** 2], (0, t[-1]), [a0], t_eval=t, rtol=1e-11,
                    atol=1e-14 * a0)
    return sol.y[0]


def mixed_second_order_product(t, a0, b0, k):
    """[P](t) for A + B -> P, d[P]/dt = k[A][B], by solve_ivp."""
    sol = solve_ivp(lambda _, y: [k * (a0 - y[0]) * (b0 - y[0])], (0, t[-1]), [0.0], t_eval=t,
                    rtol=1e-11, atol=1e-14 * min(a0, b0))
    return sol.y[0]


def beer_lambert(c, epsilon, pathlength_cm=1.0):
    """A = epsilon b c (IUPAC Compendium, "molar absorption coefficient")."""
    return epsilon * pathlength_cm * np.asarray(c, float)


def mm_progress(t, v_over_s0, km_over_s0, lag_s=0.0):
    """Fraction of the substrate converted at times ``t`` (from the reaction's start), by
    solve_ivp on Michaelis–Menten turnover of a depleting substrate (Briggs & Haldane 1925):
    dx/dt = a (V/S0) (1 - x) / (Km/S0 + 1 - x), x = P/S0, with the enzyme's active fraction
    ``a`` switched on by a first-order hysteretic activation da/dt = (1 - a)/lag_s (Frieden
    1970, J. Biol. Chem. 245:5788); a = 1 throughout without a lag. The initial rate of the
    fully active enzyme is dx/dt = (V/S0) / (Km/S0 + 1)."""
    t = np.asarray(t, float)

    def rhs(_, y):
        x, a = y
        return [a * v_over_s0 * (1 - x) / (km_over_s0 + 1 - x),
                (1 - a) / lag_s if lag_s > 0 else 0.0]

    sol = solve_ivp(rhs, (0.0, float(t[-1])), [0.0, 0.0 if lag_s > 0 else 1.0], t_eval=t,
                    method="LSODA", rtol=1e-10, atol=1e-13)
    return sol.y[0]
