"""Ground-truth simulations from known parameters, for tests, benchmarks and teaching.

Nothing here is a measurement: each function draws seeded noise around a known model so that a
method's answer can be checked against the truth.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .models import order1
from .traces import TraceSet

TRACE_KINDS = ("linear", "lag", "depletion")


def rate_traces(kind: str, n: int, seed: int, reads: int = 61, noise: float = 0.002):
    """``n`` absorbance traces over 10 min with known initial slopes (A/s), and those slopes.

    ``linear``: straight lines; ``lag``: a hysteretic lag, y = b (t - tau (1 - e^(-t/tau)));
    ``depletion``: a first-order approach to a plateau, initial slope b.
    """
    if kind not in TRACE_KINDS:
        raise ValueError(f"kind must be one of {TRACE_KINDS}")
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 600, reads)
    ys, truth = [], []
    for _ in range(n):
        b = rng.uniform(0.5, 3) * 1e-4 * rng.choice([-1, 1])
        if kind == "linear":
            y = 0.3 + b * t
        elif kind == "lag":
            tau = rng.uniform(60, 120)
            y = 0.3 + b * (t - tau * (1 - np.exp(-t / tau)))
        else:
            k = rng.uniform(1.5, 3) / 600
            y = 0.3 + b / k * (1 - np.exp(-k * t))
        ys.append(y + rng.normal(0, noise, reads))
        truth.append(b)
    return TraceSet.from_arrays([f"w{i}" for i in range(n)], t, np.array(ys)), np.array(truth)


@dataclass(frozen=True)
class EnzymeWells:
    """What :func:`enzyme_traces` simulates, one value per well (scalars broadcast).

    ``v0``: the true initial slope in signal units per s (fully active enzyme at the initial
    substrate; 0 for a blank); ``depletion``: the fraction of the substrate the fully active
    enzyme would convert by the last reading; ``s0_over_km``: initial substrate over Km;
    ``lag_s``: time constant of a hysteretic activation (0: none); ``noise``: SD of the readings;
    ``drift``: a straight baseline drift (signal units per s, not part of the rate);
    ``settle``: amplitude of a baseline that settles exponentially (time constant
    ``settle_s``) at the start of the read; ``spikes``: how many single readings are hit by a
    spike of 10 to 30 noise SDs; ``baseline``: the signal at time zero.
    """

    v0: object = 1e-4
    depletion: object = 0.01
    s0_over_km: object = 1.0
    lag_s: object = 0.0
    noise: object = 0.002
    drift: object = 0.0
    settle: object = 0.0
    settle_s: object = 60.0
    spikes: object = 0
    baseline: object = 0.2


def product_fraction(t, depletion, s0_over_km, lag_s):
    """Fraction of the substrate converted at times ``t`` (wells x times), by solve_ivp.

    The mechanism, integrated numerically: Michaelis–Menten turnover of a depleting substrate,
    dx/dt = a (V/S0) (1 - x) / (Km/S0 + 1 - x), with the active fraction of the enzyme ``a``
    rising by a first-order hysteretic activation, da/dt = (1 - a)/lag_s (Frieden 1970, J. Biol.
    Chem. 245:5788; a = 1 throughout without a lag). V/S0 is chosen so that the fully active
    enzyme converts ``depletion`` of the substrate by the last reading (from the integrated
    equation, V t = P + Km ln(S0/(S0 - P))).
    """
    from scipy.integrate import solve_ivp

    t = np.asarray(t, float)
    f, r, lag = (np.asarray(x, float) for x in np.broadcast_arrays(depletion, s0_over_km, lag_s))
    f = np.clip(f, 1e-9, 1 - 1e-9)
    kappa = 1.0 / r
    u = (f - kappa * np.log1p(-f)) / t[-1]                     # V/S0, per s
    has_lag = lag > 0
    tau = np.where(has_lag, lag, 1.0)
    n = f.size

    def rhs(_, y):
        x, a = y[:n], y[n:]
        return np.concatenate([a * u * (1 - x) / (kappa + 1 - x),
                               np.where(has_lag, (1 - a) / tau, 0.0)])

    y0 = np.concatenate([np.zeros(n), np.where(has_lag, 0.0, 1.0)])
    sol = solve_ivp(rhs, (0.0, float(t[-1])), y0, t_eval=t, method="LSODA", rtol=1e-10,
                    atol=1e-13)
    return sol.y[:n]


def enzyme_traces(times, wells: EnzymeWells, seed: int, names: list | None = None):
    """Seeded absorbance traces of enzyme wells from the mechanism, with their true initial
    slopes (signal units per s); see :class:`EnzymeWells` and :func:`product_fraction`.
    ``names`` (default w0, w1, ...) may set the number of wells when every field is a scalar.

    The signal change at full conversion is chosen so that the initial slope is ``v0``:
    v0 = D (V/S0) (S0/(Km + S0)). Times start at the first entry of ``times`` (the reaction
    starts at time zero, which may lie before the first reading).
    """
    rng = np.random.default_rng(seed)
    t = np.asarray(times, float)
    p = {k: np.asarray(getattr(wells, k), float) for k in EnzymeWells.__dataclass_fields__}
    shape = np.broadcast_shapes(*(v.shape for v in p.values()), (len(names),) if names else ())
    p = {k: np.broadcast_to(v, shape).ravel() for k, v in p.items()}
    n = p["v0"].size
    full = np.concatenate([[0.0], t]) if t[0] > 0 else t
    x = product_fraction(full, p["depletion"], p["s0_over_km"], p["lag_s"])[:, -t.size:]
    f = np.clip(p["depletion"], 1e-9, 1 - 1e-9)
    kappa = 1.0 / p["s0_over_km"]
    u = (f - kappa * np.log1p(-f)) / full[-1]
    amplitude = p["v0"] / (u / (1 + kappa))
    y = p["baseline"][:, None] + amplitude[:, None] * x + p["drift"][:, None] * t
    y = y + p["settle"][:, None] * np.exp(-t / p["settle_s"][:, None])
    y = y + rng.normal(0.0, 1.0, y.shape) * p["noise"][:, None]
    for i in np.nonzero(p["spikes"] > 0)[0]:
        at = rng.choice(t.size, size=int(p["spikes"][i]), replace=False)
        y[i, at] += rng.choice([-1, 1], at.size) * rng.uniform(10, 30, at.size) * p["noise"][i]
    names = names if names is not None else [f"w{i}" for i in range(n)]
    return TraceSet.from_arrays(names, t, y), p["v0"].copy()


def first_order_class(folder: str | Path, n: int, seed: int = 0, k: float = 8e-4,
                      spread: float = 0.01, minutes_slip_every: int = 0) -> Path:
    """A class folder (roster.csv, rubric.toml, one first-order run per student).

    Every ``minutes_slip_every``-th student (if set) reports k per minute as per second.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    t = np.arange(0, 2401, 30.0)
    rows = ["student,file,reported"]
    for i in range(n):
        ki = k * (1 + rng.normal(0, spread))
        a = order1(t, 1.1, 0.05, ki) + rng.normal(0, 0.004, t.size)
        (folder / f"r{i}.csv").write_text("time (s),A\n" + "".join(
            f"{tt:g},{v:.4f}\n" for tt, v in zip(t, a, strict=True)))
        slip = 60 if minutes_slip_every and i % minutes_slip_every == 0 else 1
        rows.append(f"s{i:03d},r{i}.csv,{ki * slip:.4g}")
    (folder / "roster.csv").write_text("\n".join(rows) + "\n")
    (folder / "rubric.toml").write_text(f'[assignment]\nquantity = "k"\nunit = "1/s"\n'
                                        f'reference = {k:g}\ntolerance_pct = 5\n')
    return folder
