"""Generate the sample runs (invented scenario, simulated from known parameters).

Scenario: the Enzymology Core of the (invented) Kestrel Bay Institute studies KbDH1, a
NADH-dependent dehydrogenase from the (invented) marine bacterium *Kestrelia borealis*, and an
inhibitor candidate called KB-17. Everything here is simulated; the true parameters are written
beside each generator so that tests and the demo can check what the tool recovers.

Run ``python sample_runs/generate.py``: it rewrites the files in ``sample_runs/`` and the
identical copies shipped in ``rateabs/data/samples/``. Seed: 20261202.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np

SEED = 20261202
HERE = Path(__file__).resolve().parent
PACKAGE = HERE.parent / "rateabs" / "data" / "samples"

# True parameters of the simulated plate (written here so a reader can check the tool)
KBDH1 = {"Vmax_uM_per_min": 9.0, "Km_uM": 120.0, "Ki_uM": 4.0, "mode": "competitive",
         "K_NADH_uM": 8.0}
EPS_NADH = 6220.0
PATH_96_200UL = 0.625   # cm, 200 uL in a typical 96-well well (0.32 cm2)


def _simulate_nadh_well(t_s, s0_uM, i_uM, vmax, nadh0_uM=200.0, lag_s=0.0, decay_per_s=0.0):
    """Euler-integrate substrate and NADH use for one well; returns NADH (uM) at t_s."""
    dt = 0.5
    grid = np.arange(0.0, t_s[-1] + dt, dt)
    s, n = s0_uM, nadh0_uM
    out = np.empty_like(grid)
    for i, t in enumerate(grid):
        out[i] = n
        act = np.exp(-decay_per_s * t) * (1 - np.exp(-t / lag_s) if lag_s > 0 else 1.0)
        km_app = KBDH1["Km_uM"] * (1 + i_uM / KBDH1["Ki_uM"])
        v = vmax / 60.0 * act * s / (km_app + s) * n / (KBDH1["K_NADH_uM"] + n)
        step = min(v * dt, s, n)
        s -= step
        n -= step
    return np.interp(t_s, grid, out)


def plate(rng) -> None:
    """96-well kinetic read at 340 nm: substrate x inhibitor grid, controls, lysate samples."""
    t = np.arange(0, 601, 20.0)                       # 31 reads, 20 s apart, 10 min
    subs = [15, 30, 60, 120, 240, 480, 960, 1920]      # uM, columns 1-8
    inhib = {"A": 0, "B": 0, "C": 2, "D": 2, "E": 5, "F": 5, "G": 10, "H": 10}
    wells, traces, mapping = [], [], []
    background = 0.045
    for row in "ABCDEFGH":
        for col in range(1, 13):
            well = f"{row}{col}"
            s0, i0, vmax, role, sample, dil = 0.0, 0.0, KBDH1["Vmax_uM_per_min"], "", "", 1
            enzyme = "1 nM"
            if col <= 8:
                s0, i0, role, sample = subs[col - 1], inhib[row], "sample", "KbDH1"
            elif col == 9:
                s0, vmax, role, sample, enzyme = 1920, 0.0, "blank", "no enzyme", ""
            elif col == 10:
                s0, role, sample = 1920, "positive", "KbDH1 full"
            elif col == 11:
                s0, i0, role, sample = 1920, 500.0, "negative", "KbDH1 + 500 uM KB-17"
            else:
                s0, role = 1920, "sample"
                lys = {"A": ("lysate L1", 10), "B": ("lysate L1", 10), "C": ("lysate L2", 20),
                       "D": ("lysate L2", 20), "E": ("lysate L3", 50), "F": ("lysate L3", 50),
                       "G": ("lysate L4", 5), "H": ("lysate L4", 5)}[row]
                sample, dil = lys
                vmax = {"lysate L1": 6.0, "lysate L2": 3.1, "lysate L3": 1.2,
                        "lysate L4": 7.4}[sample]
                enzyme = ""
            nadh = _simulate_nadh_well(t, s0, i0, vmax)
            a = EPS_NADH * PATH_96_200UL * nadh * 1e-6 + background
            a = a - 1.5e-6 * t                          # slow drift of the whole plate
            a = a + rng.normal(0, 0.0025, t.size)
            cells = [f"{x:.4f}" for x in a]
            if well == "H12":
                # a well with a bubble/debris that saturates the detector
                cells = ["OVER"] * 4 + [f"{3.2 + 0.01 * k:.4f}" for k in range(len(t) - 4)]
            wells.append(well)
            traces.append(cells)
            mapping.append((well, role, sample, s0 if s0 else "", i0 if col <= 8 or col == 11 else 0,
                            enzyme, dil, f"{sample}|S{s0:g}|I{i0:g}" if role == "sample" else role))
    temp = 30.0 + rng.normal(0, 0.05, t.size)
    lines = [
        "Kestrel Bay Institute - Enzymology Core",
        "Assay: KbDH1 substrate x KB-17 grid, NADH consumption",
        "Operator: R. Okonkwo-Lind",
        "Wavelength: 340 nm",
        "Read interval: 20 s",
        "Plate: 96 flat, 200 uL per well",
        "",
        "Time," + "Temp (C)," + ",".join(wells),
    ]
    for k, ts in enumerate(t):
        h, rem = divmod(int(ts), 3600)
        m, s = divmod(rem, 60)
        lines.append(f"{h}:{m:02d}:{s:02d},{temp[k]:.1f}," + ",".join(tr[k] for tr in traces))
    _write("plate_kbdh_340nm.csv", "\n".join(lines) + "\n")
    maplines = ["well,role,sample,substrate_uM,inhibitor_uM,enzyme,dilution,group"]
    for w, role, sample, s0, i0, enz, dil, grp in mapping:
        maplines.append(f"{w},{role},{sample},{s0},{i0},{enz},{dil},{grp}")
    _write("plate_kbdh_map.csv", "\n".join(maplines) + "\n")


def messy(rng) -> None:
    """A semicolon, decimal-comma cuvette export with mm:ss times and an overflow marker.

    KbAP (an invented phosphatase) on p-nitrophenyl phosphate at 405 nm, six cuvettes,
    increasing absorbance; cuvette 6 runs over the detector range near the end.
    """
    t = np.arange(0, 301, 15.0)
    rates = [0.010, 0.021, 0.039, 0.060, 0.082, 0.31]   # A/min
    lines = ["\ufeffKestrel Bay Institute; teaching annex", "Instrument mode; Absorbance",
             "Wavelength; 405 nm", "Temperature; 25,0 °C", "", "Zeit;T [°C];K1;K2;K3;K4;K5;K6"]
    for ts in t:
        m, s = divmod(int(ts), 60)
        vals = []
        for j, r in enumerate(rates):
            a = 0.062 + r * ts / 60 * (1 - 0.02 * ts / 60) + rng.normal(0, 0.002)
            if j == 5 and a > 1.1:
                vals.append(">3,5" if a > 1.3 else f"{a:.4f}".replace(".", ","))
            else:
                vals.append(f"{a:.4f}".replace(".", ","))
        temp = f"{25.0 + rng.normal(0, 0.05):.2f}".replace(".", ",")
        lines.append(f"{m:02d}:{s:02d};{temp};" + ";".join(vals))
    _write("cuvettes_kbap_405nm_messy.csv", "\r\n".join(lines) + "\r\n")


def transposed(rng) -> None:
    """A tab-separated transposed export of raw intensities with a reference row (TNB, 412 nm)."""
    t = np.arange(0, 241, 30.0)
    i0 = 52000.0
    lines = ["Thiol release by KbDH1 cysteine labelling (DTNB), 412 nm", "Detector: raw counts",
             "", "Time [min]\t" + "\t".join(f"{x / 60:g}" for x in t)]
    lines.append("I0\t" + "\t".join(f"{i0 * (1 + rng.normal(0, 0.001)):.0f}" for _ in t))
    for name, rate in (("tube 1", 0.05), ("tube 2", 0.10), ("tube 3", 0.15)):
        a = 0.08 + rate * t / 60
        counts = i0 * 10 ** (-a) * (1 + rng.normal(0, 0.002, t.size))
        lines.append(f"{name}\t" + "\t".join(f"{c:.0f}" for c in counts))
    _write("tubes_tnb_412nm_counts.tsv", "\n".join(lines) + "\n")


def inhibitor_series(rng) -> None:
    """Initial rates of KbDH1 on a substrate x KB-17 grid, triplicates (a plain rates table)."""
    lines = ["# KbDH1 initial rates, 30 C, 1 nM enzyme; KB-17 series (simulated)",
             "substrate_uM,inhibitor_uM,rate_uM_per_min"]
    for i in (0, 2, 5, 10, 20):
        for s in (15, 30, 60, 120, 240, 480, 960, 1920):
            km_app = KBDH1["Km_uM"] * (1 + i / KBDH1["Ki_uM"])
            v = KBDH1["Vmax_uM_per_min"] * s / (km_app + s)
            for _ in range(3):
                lines.append(f"{s},{i},{v * (1 + rng.normal(0, 0.04)) + rng.normal(0, 0.05):.4f}")
    _write("inhibition_kbdh_rates.csv", "\n".join(lines) + "\n")


PROCESS = {"k_per_s": 8.0e-4, "A0": 1.25, "Ainf": 0.06, "Ea_kJ_per_mol": 65.0}


def process_run(rng) -> None:
    """In-line probe at 520 nm during the hydrolysis of an invented dye (Kestrel Red) in a pilot
    reactor: first order, read every 30 s for 45 min, still running when exported."""
    t = np.arange(0, 45 * 60 + 1, 30.0)
    a = PROCESS["Ainf"] + (PROCESS["A0"] - PROCESS["Ainf"]) * np.exp(-PROCESS["k_per_s"] * t)
    a = a + rng.normal(0, 0.004, t.size)
    lines = ["Probe: in-line fibre dip probe, 5 mm gap", "Vessel: pilot reactor R-2, batch 26-118",
             "Wavelength: 520 nm", "Temperature: 25.0 C", "",
             "elapsed (min),A520,jacket temp (C)"]
    for tt, aa in zip(t, a, strict=True):
        lines.append(f"{tt / 60:.2f},{aa:.4f},{25 + rng.normal(0, 0.05):.2f}")
    _write("process_kestrel_red_probe.csv", "\n".join(lines) + "\n")


def temperature_series(rng) -> None:
    """First-order k of the same hydrolysis at six temperatures (Ea 65 kJ/mol)."""
    R = 8.314462618
    ea = PROCESS["Ea_kJ_per_mol"] * 1e3
    A = PROCESS["k_per_s"] / np.exp(-ea / (R * 298.15))
    lines = ["# Kestrel Red hydrolysis, k from ratelaw runs at each temperature (simulated)",
             "T (C),k (1/s),k_se"]
    for tc in (15, 20, 25, 30, 35, 40):
        k = A * np.exp(-ea / (R * (tc + 273.15)))
        ko = k * (1 + rng.normal(0, 0.025))
        lines.append(f"{tc},{ko:.5e},{0.025 * ko:.2e}")
    _write("temperature_kestrel_red.csv", "\n".join(lines) + "\n")


def pseudo_series(rng) -> None:
    """Dye fading in excess hydroxide at five concentrations: kobs = k2 [OH-] + k0."""
    k2, k0 = 0.42, 1.5e-4                              # L/(mol s), 1/s
    oh = [0.002, 0.004, 0.008, 0.012, 0.016]            # mol/L
    t = np.arange(0, 1201, 20.0)
    cols = []
    for c in oh:
        k = k2 * c + k0
        cols.append(0.03 + 0.85 * np.exp(-k * t) + rng.normal(0, 0.003, t.size))
    names = [f"run {i + 1}" for i in range(len(oh))]
    lines = ["Kestrel Red fading in excess NaOH, 25 C, 1 cm cuvettes", "Time (s)," + ",".join(names)]
    for j, tt in enumerate(t):
        lines.append(f"{tt:g}," + ",".join(f"{c[j]:.4f}" for c in cols))
    _write("pseudo_first_order_runs.csv", "\n".join(lines) + "\n")
    _write("pseudo_first_order_excess.csv", "trace,conc (mM)\n" + "".join(
        f"{n},{c * 1e3:g}\n" for n, c in zip(names, oh, strict=True)))


KBAP = {"Km_uM": 60.0, "Vmax_uM_per_min_per_nM": 3.0, "eps_405": 18000.0}


def _progress(t, s0, e_nM, kd=0.0):
    from scipy.integrate import solve_ivp

    vmax = KBAP["Vmax_uM_per_min_per_nM"] * e_nM / 60.0          # uM/s

    def rhs(tt, y):
        return [-vmax * np.exp(-kd * tt) * y[0] / (KBAP["Km_uM"] + y[0])]

    sol = solve_ivp(rhs, (0, t[-1]), [s0], t_eval=t, rtol=1e-10, atol=1e-12)
    return s0 - sol.y[0]                                         # product, uM


def progress_sets(rng) -> None:
    """KbAP progress curves at 405 nm (p-nitrophenolate, 1 cm): four S0 at 1 nM enzyme and two
    more enzyme amounts at S0 = 100 uM (a Selwyn set); a second set whose enzyme decays."""
    t = np.arange(0, 30 * 60 + 1, 20.0)
    for name, kd in (("progress_kbap_405nm.csv", 0.0), ("progress_kbap_unstable.csv", 1.2e-3)):
        lines = ["KbAP progress curves, 405 nm, 1 cm cuvettes, 25 C (simulated)",
                 "curve,S0 (uM),enzyme (nM),time (s),A405"]
        sets = [(20, 1.0), (50, 1.0), (100, 1.0), (200, 1.0), (100, 0.5), (100, 2.0)]
        for k, (s0, e) in enumerate(sets):
            a = 0.04 + KBAP["eps_405"] * 1e-6 * _progress(t, s0, e, kd)
            a = a + rng.normal(0, 0.003, t.size)
            for tt, aa in zip(t, a, strict=True):
                lines.append(f"c{k + 1},{s0},{e},{tt:g},{aa:.4f}")
        _write(name, "\n".join(lines) + "\n")


CLASS = "class_kestrel_red"


def class_runs(rng) -> None:
    """A teaching lab's runs: each student followed Kestrel Red fading at 520 nm (first order,
    k about 8.0e-4 1/s at 25 C) and reported k in 1/s. Mistakes are planted (see the roster's
    'planted' column, which only the generator and the tests read)."""
    t = np.arange(0, 40 * 60 + 1, 30.0)
    students = [
        ("Ada Brennholt", "sound", "s"), ("Bo Lindqvist", "sound", "min"),
        ("Chidi Okafor", "minutes", "s"), ("Dana Ruiz", "log10", "clock"),
        ("Elin Sato", "half-life", "s"), ("Farid Haddad", "sign", "min"),
        ("Greta Nilsen", "recorded-%T", "s"), ("Hugo Marais", "analysed-%T", "s"),
        ("Ines Kowalczyk", "time-constant", "min"), ("Jonah Pike", "noisy", "s"),
        ("Kira Vance", "warm-bath", "s"), ("Liam O'Shea", "missing-file", "s"),
        ("Mara Quist", "path-escape", "s"), ("<b>Nils</b> & <script>x</script>", "sound", "s"),
        ("Oona Fenwick", "minutes+log10", "s"),
    ]
    from rateabs.models import order1
    from rateabs.ratelaws import fit_trace

    roster = ["student,file,reported,bench,planted"]
    for i, (name, slip, tstyle) in enumerate(students):
        k = 8.0e-4 * (1 + rng.normal(0, 0.01))
        if slip == "warm-bath":
            k *= 1.35
        noise = 0.03 if slip == "noisy" else 0.004
        a = order1(t, 1.2 + rng.normal(0, 0.05), 0.05, k) + rng.normal(0, noise, t.size)
        fname = f"run_{i + 1:02d}.csv"
        if slip in ("recorded-%T", "analysed-%T"):
            vals = 100 * 10 ** (-a)
            header = "Absorbance" if slip == "recorded-%T" else "%T"
        else:
            vals = a
            header = "A520"
        tcol = {"s": ("time (s)", t), "min": ("time (min)", t / 60)}.get(tstyle)
        lines = [f"Student: {name}", "Instrument: bench spectrophotometer, 520 nm", ""]
        if tstyle == "clock":
            lines.append(f"Time,{header}")
            for tt, v in zip(t, vals, strict=True):
                lines.append(f"{int(tt) // 60:02d}:{int(tt) % 60:02d},{v:.4f}")
        else:
            lines.append(f"{tcol[0]},{header}")
            for tt, v in zip(tcol[1], vals, strict=True):
                lines.append(f"{tt:g},{v:.4f}")
        k_fit = fit_trace(t, a, order="1", ci="asymptotic").fit.params["k"].value
        reported = {"sound": k_fit, "noisy": k_fit, "warm-bath": k_fit,
                    "minutes": k_fit * 60, "log10": k_fit / np.log(10),
                    "half-life": np.log(2) / k_fit, "sign": -k_fit,
                    "recorded-%T": k_fit, "time-constant": 1 / k_fit / 60,
                    "minutes+log10": k_fit * 60 / np.log(10), "missing-file": k_fit,
                    "path-escape": k_fit}.get(slip, k_fit)
        if slip == "analysed-%T":
            reported = fit_trace(t, vals, order="1", ci="asymptotic").fit.params["k"].value
        reported *= 1 + rng.normal(0, 0.005)
        if slip == "missing-file":
            fname = "run_lost.csv"
        elif slip == "path-escape":
            fname = "../../outside.csv"
        else:
            _write(f"{CLASS}/{fname}", "\n".join(lines) + "\n")
        cell = f'"{name}"' if "," in name else name
        roster.append(f"{cell},{fname},{reported:.4g},{1 + i % 4},{slip}")
    _write(f"{CLASS}/roster.csv", "\n".join(roster) + "\n")
    _write(f"{CLASS}/rubric.toml", '''# Rubric of the Kestrel Red fading practical (format: docs/formats.md)
[assignment]
title = "Fading of Kestrel Red in base"
quantity = "k"
model = "first-order"
unit = "1/s"
reference = 8.0e-4
tolerance_pct = 5

[weights]
data = 20
report = 50
reference = 30
''')


def _write(name: str, text: str) -> None:
    for folder in (HERE, PACKAGE):
        (folder / name).parent.mkdir(parents=True, exist_ok=True)
        (folder / name).write_bytes(text.encode("utf-8"))


def main() -> None:
    rng = np.random.default_rng(SEED)
    plate(rng)
    messy(rng)
    transposed(rng)
    inhibitor_series(rng)
    process_run(rng)
    temperature_series(rng)
    pseudo_series(rng)
    progress_sets(rng)
    class_runs(rng)
    for extra in ("README.md",):
        src = HERE / extra
        if src.exists():
            shutil.copy(src, PACKAGE / extra)


if __name__ == "__main__":
    main()
