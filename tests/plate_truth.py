"""Simulated plates with a known truth, for the plate tests and trials (nothing here imports
rateabs).

Every well is the Michaelis–Menten mechanism's substrate balance, d[S]/dt = -V [S] / (Km + [S]),
integrated with ``scipy.integrate.solve_ivp`` (reference library) for all wells at once; the
product is read at 405 nm as p-nitrophenolate (epsilon 18000 M^-1 cm^-1, common practice, from
memory) with A = epsilon b [P] (Beer–Lambert, IUPAC Compendium). V is set so that the initial
rate (the right-hand side at t = 0) is the well's true initial rate, so the truth of each well
is a number, not a model the package shares. Activity in U/mL of the undiluted sample follows
the enzyme unit (1 U = 1 umol/min, NC-IUB 1979):
    v0 (uM/min) = activity (U/mL) x 1000 x V_sample / V_total / dilution.
Seeded noise: reading noise and a pipetting scatter of the enzyme per well.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

EPS_PNP = 18000.0       # M^-1 cm^-1, p-nitrophenolate at 405 nm (common practice, from memory)
KM_UM = 100.0
S0_UM = 500.0
V_TOTAL_UL = 200.0
V_SAMPLE_UL = 20.0
DILUTIONS = (5, 10, 20, 40)
#: True activities of the ten lysates (U/mL of undiluted sample, initial rate at S0).
ACTIVITY = {f"L{k:02d}": a for k, a in enumerate(
    (0.20, 0.15, 0.12, 0.18, 0.10, 0.16, 0.08, 0.14, 0.11, 0.13), start=1)}
TRENDING = "L10"        # an inhibitor in this lysate is diluted out: activity rises with dilution
PROTEIN = {"L01": 1.5, "L02": 0.8}        # mg/mL of the undiluted lysate
KCAT_PER_S = 30.0       # the purified enzyme's kcat
ENZYME_NM = 2.0


def wells(rows: int, cols: int) -> list[str]:
    """A1..P24 style well names, row by row."""
    return [f"{chr(65 + r)}{c + 1}" for r in range(rows) for c in range(cols)]


def product_uM(t_s: np.ndarray, v0_uM_per_min: np.ndarray, s0_uM: float = S0_UM,
               km_uM: float = KM_UM) -> np.ndarray:
    """Product (uM) at ``t_s`` of every well, d[S]/dt = -V[S]/(Km+[S]) with V from v0, by
    solve_ivp."""
    v0 = np.asarray(v0_uM_per_min, float) / 60.0
    vmax = v0 * (km_uM + s0_uM) / s0_uM
    sol = solve_ivp(lambda _, s: -vmax * s / (km_uM + s), (0.0, float(t_s[-1])),
                    np.full(v0.size, s0_uM), t_eval=t_s, rtol=1e-10, atol=1e-9)
    return s0_uM - sol.y


@dataclass
class Plate:
    """A written plate, its map and the truth of every well and sample."""

    data: Path
    layout: Path
    v0: dict = field(default_factory=dict)            # well -> true initial rate, uM/min
    activity: dict = field(default_factory=dict)      # sample -> U/mL (undiluted), flat samples
    apparent: dict = field(default_factory=dict)      # (sample, dilution) -> U/mL as measured
    outlier: str = ""
    masked_start: list = field(default_factory=list)
    pathlength_cm: float = 0.0
    roles: dict = field(default_factory=dict)


def _design():
    """Roles, samples, dilutions and true v0 (uM/min) of the 384 wells."""
    names = wells(16, 24)
    design = {}
    for n in names:
        r, c = ord(n[0]) - 65, int(n[1:])
        if c == 1:
            design[n] = ("blank", "buffer", 1, 0.0)
        elif c == 2:
            pos = r < 8
            design[n] = ("positive" if pos else "negative", "control", 1, 3.0 if pos else 0.3)
        elif c <= 22:
            sample = f"L{(c - 3) // 2 + 1:02d}"
            dil = DILUTIONS[r // 4]
            act = ACTIVITY[sample] * (1 / (1 + 2 / dil) if sample == TRENDING else 1.0)
            design[n] = ("sample", sample, dil, act * 1000 * V_SAMPLE_UL / V_TOTAL_UL / dil)
        else:
            v0 = KCAT_PER_S * ENZYME_NM * 1e-3 * 60 * S0_UM / (KM_UM + S0_UM)     # uM/min
            design[n] = ("sample", "pure KbX", 1, v0)
    return names, design


def plate_384(folder: Path, seed: int = 7, minutes: bool = True, noise: float = 0.0015,
              pathlength_cm: float = 0.28) -> Plate:
    """A messy 384-well kinetic read: times in minutes under a bare 'Time' header, the
    pathlength in a header line, a dilution series per lysate (some map cells left empty for
    --dilution), a partly filled group column, one pipetting outlier, two wells whose first
    readings are over range."""
    rng = np.random.default_rng(seed)
    names, design = _design()
    t = np.arange(0, 10.01, 0.25) * 60.0                           # 41 reads over 10 min
    v0 = np.array([design[n][3] for n in names])
    pip = 1 + rng.normal(0, 0.02, v0.size)
    outlier = "F7"                                                 # L03 at 1:10, 30 % extra
    pip[names.index(outlier)] = 1.30
    v_true = v0 * pip
    a = EPS_PNP * pathlength_cm * product_uM(t, v_true) * 1e-6 + 0.05
    a += rng.normal(0, noise, a.shape)
    cells = np.array([[f"{x:.4f}" for x in row] for row in a], dtype=object)
    masked = ["P23", "O24"]
    for n in masked:
        cells[names.index(n), :2] = "OVER"
    folder.mkdir(parents=True, exist_ok=True)
    data = folder / "plate384.csv"
    times = t / 60.0 if minutes else t
    lines = ["Kestrel Bay Institute - screening core", "Wavelength: 405 nm",
             f"Pathlength: {pathlength_cm} cm", "", "Time," + ",".join(names)]
    lines += [f"{tt:g}," + ",".join(cells[:, j]) for j, tt in enumerate(times)]
    data.write_text("\n".join(lines) + "\n")
    layout = folder / "map384.csv"
    layout.write_text(_map_text(names, design))
    truth = Plate(data, layout, outlier=outlier, masked_start=masked,
                  pathlength_cm=pathlength_cm)
    truth.v0 = {n: float(v) for n, v in zip(names, v_true, strict=True)}
    truth.roles = {n: design[n][0] for n in names}
    truth.activity = {s: v for s, v in ACTIVITY.items() if s != TRENDING}
    truth.apparent = {(s, d): ACTIVITY[s] * (1 / (1 + 2 / d) if s == TRENDING else 1.0)
                      for s in ACTIVITY for d in DILUTIONS}
    return truth


def _map_text(names, design) -> str:
    """The plate map: L05's 1:10 dilution cells left empty (for --dilution 10); the group
    column filled for L01 only."""
    rows = ["well,role,sample,substrate_uM,enzyme,dilution,protein,group"]
    for n in names:
        role, sample, dil, _ = design[n]
        enzyme = f"{ENZYME_NM:g} nM" if sample == "pure KbX" else ""
        dcell = "" if (sample == "L05" and dil == 10) else (f"{dil:g}" if role == "sample" else "")
        prot = f"{PROTEIN[sample]} mg/mL" if sample in PROTEIN else ""
        group = f"L01 at 1:{dil}" if sample == "L01" else ""
        rows.append(f"{n},{role},{sample},{S0_UM:g},{enzyme},{dcell},{prot},{group}")
    return "\n".join(rows) + "\n"
