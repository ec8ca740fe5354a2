"""Calibration of the trace flags on simulated plates with known truth.

Each plate mixes the conditions a bench scientist meets: enzyme wells converting 1 % to 80 % of
their substrate by the last reading (S0 from Km/5 to 5 Km), hysteretic lags, a straight
baseline drift, a baseline that settles in the first minute, single-reading spikes, three
ordinary noise levels (0.001, 0.002, 0.005 A) and a few very noisy wells (0.02 A), flat blanks
and near-zero controls. The truth is the initial rate of the fully active enzyme, from
Michaelis–Menten turnover integrated with scipy.integrate.solve_ivp (tests/kinetics_truth.py,
independent of the package), plus the straight drift where there is one: a straight drift is
part of the trace's own initial slope, and taking it out is the plate's business (the blanks'
slope, rates.py), not something one trace can tell from its readings. Every plate is seeded.

The rule: a well **needs a look** when its reported rate is off the truth by more than 5 % of
the truth AND by more than 3 of its reported SEs; every other well is **good**. For each flag
the benchmark prints how many wells carry it, its precision (the share of them that need a
look) and its recall (the share of the wells that need a look that carry it), then the two goals
of the flags: among good wells at most 10 % carry any flag; among wells that need a look at
least 90 % carry one.

    python benchmarks/flag_calibration.py [n_plates] [first_seed]

The plates are scored twice: the estimator alone (no map: a depletion within a straight
window can only be seen in the trace's bend), and the whole ``rates`` analysis with a plate map
that gives each well's role and [S]0 (--epsilon 6220, 1 cm), as a user with a map runs it.

The rules were tuned on seeds 0..19; seeds from 20 on are plates they have not seen (e.g.
``python benchmarks/flag_calibration.py 40 20``).
"""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]
from kinetics_truth import mm_progress  # noqa: E402

from rateabs.slopes import TRACE_FLAGS, find_windows  # noqa: E402
from rateabs.traces import TraceSet  # noqa: E402

#: The conditions of a plate and how many wells of 96 each gets.
CONDITIONS = {"clean": 40, "lag": 10, "drift": 8, "settle": 8, "spikes": 10, "very-noisy": 4,
              "blank": 10, "near-zero": 6}
TIMES = np.arange(0.0, 601.0, 10.0)
#: The absorptivity the map run converts with (M^-1 cm^-1, pathlength 1 cm): the signal's full
#: change is the substrate, so S0 = change / EPSILON.
EPSILON = 6220.0
#: Roles of the conditions in the plate map of :func:`calibrate_with_map`.
ROLES = {"blank": "blank", "near-zero": "negative"}


@dataclass(frozen=True)
class Plate:
    """A simulated plate: its traces, the true initial rates (A/s), each well's condition, and
    the fraction of substrate the fully active enzyme converts by the last reading."""

    traces: TraceSet
    truth: np.ndarray
    condition: np.ndarray
    depletion: np.ndarray
    s0_uM: np.ndarray = None        # the substrate a plate map would give (EPSILON, 1 cm)


def simulate_plate(seed: int, times=TIMES) -> Plate:
    """One seeded 96-well plate of :data:`CONDITIONS` (module docstring)."""
    rng = np.random.default_rng(seed)
    cond = np.repeat(list(CONDITIONS), list(CONDITIONS.values()))
    ys, truth, conv, s0 = [], [], [], []
    for c in cond:
        depletion = np.exp(rng.uniform(np.log(0.01), np.log(0.8)))
        s0_km = np.exp(rng.uniform(np.log(0.2), np.log(5.0)))
        v0 = rng.uniform(0.5, 3.0) * 1e-4 if c != "near-zero" else rng.uniform(2, 6) * 1e-6
        v0 = 0.0 if c == "blank" else v0
        lag = rng.uniform(20, 150) if c == "lag" else 0.0
        noise = rng.choice([0.001, 0.002, 0.005]) if c != "very-noisy" else 0.02
        kappa = 1.0 / s0_km
        u = (depletion - kappa * np.log1p(-depletion)) / times[-1]     # V/S0 reaching it
        x = mm_progress(times, u, kappa, lag)
        y = 0.2 + v0 / (u / (1 + kappa)) * x if v0 else np.full(times.size, 0.2)
        s0.append(v0 / (u / (1 + kappa)) / EPSILON * 1e6 if v0 else np.nan)   # full change, uM
        if c == "drift":
            drift = rng.choice([-1, 1]) * rng.uniform(0.05, 0.3) * v0
            y = y + drift * times
            v0 = v0 + drift
        if c == "settle":
            y = y + rng.choice([-1, 1]) * rng.uniform(0.005, 0.03) * np.exp(-times / 40.0)
        y = y + rng.normal(0, noise, times.size)
        if c == "spikes":
            at = rng.choice(times.size, size=rng.integers(1, 3), replace=False)
            y[at] += rng.choice([-1, 1], at.size) * rng.uniform(10, 30, at.size) * noise
        ys.append(y)
        truth.append(v0)
        conv.append(depletion * (c not in ("blank", "near-zero")))
    names = [f"{chr(65 + i // 12)}{i % 12 + 1}" for i in range(cond.size)]
    return Plate(TraceSet.from_arrays(names, times, np.array(ys)), np.array(truth), cond,
                 np.array(conv), np.array(s0))


def needs_a_look(slope, se, truth) -> np.ndarray:
    """The rule of the module docstring: off by more than 5 % and more than 3 SE (a rate that
    is missing needs a look too)."""
    err = np.abs(slope - truth)
    with np.errstate(invalid="ignore"):
        return ~np.isfinite(slope) | ((err > 0.05 * np.abs(truth)) & (err > 3 * se))


@dataclass(frozen=True)
class Calibration:
    """Per-flag counts, precision and recall, and the two goal figures."""

    per_flag: dict
    n_good: int
    n_bad: int
    good_flagged: float
    bad_flagged: float
    by_condition: dict


def calibrate(plates: list[Plate]) -> Calibration:
    """Run the auto estimator on every plate and score its flags (module docstring)."""
    bad, flags, cond = [], [], []
    for p in plates:
        w = find_windows(p.traces.grid())
        bad.append(needs_a_look(w.slope, w.slope_se, p.truth))
        flags.extend(w.flags)
        cond.append(p.condition)
    return _score(np.concatenate(bad), flags, np.concatenate(cond), TRACE_FLAGS)


def _score(bad: np.ndarray, flags: list, cond: np.ndarray, words) -> Calibration:
    """Per-flag counts, precision and recall, and the goal figures of wells ``bad`` (need a
    look) with their ``flags`` and conditions."""
    flagged = np.array([bool(f) for f in flags])
    per_flag = {}
    for word in words:
        has = np.array([word in f for f in flags])
        per_flag[word] = (int(has.sum()), float(np.mean(bad[has])) if has.any() else np.nan,
                          float(np.mean(has[bad])) if bad.any() else np.nan)
    by_condition = {c: (int(np.sum(cond == c)), int(np.sum(bad & (cond == c))),
                        int(np.sum(flagged & (cond == c))),
                        int(np.sum(flagged & bad & (cond == c)))) for c in CONDITIONS}
    return Calibration(per_flag, int((~bad).sum()), int(bad.sum()),
                       float(np.mean(flagged[~bad])) if (~bad).any() else 0.0,
                       float(np.mean(flagged[bad])) if bad.any() else 1.0, by_condition)


def calibrate_with_map(plates: list[Plate]) -> Calibration:
    """The same plates through the whole ``rates`` analysis with a plate map that gives each
    well's role and substrate (and --epsilon 6220, 1 cm), as a user with a map runs it: blanks
    subtracted, straight windows that used over 10 % of the map's [S]0 replaced by the whole
    curve, plate flags added. Scored like :func:`calibrate`, on the per-well table."""
    import tempfile

    from rateabs.layout import read_layout
    from rateabs.options import RateSettings
    from rateabs.rates import FLAGS, analyse_plate

    st = RateSettings(epsilon=EPSILON, pathlength_cm=1.0)
    bad, flags, cond = [], [], []
    with tempfile.TemporaryDirectory() as d:
        for k, p in enumerate(plates):
            path = Path(d) / f"map{k}.csv"
            rows = ["well,role,sample,substrate (uM)"]
            for name, c, s0 in zip(p.traces.names, p.condition, p.s0_uM, strict=True):
                role = ROLES.get(c, "sample")
                rows.append(f"{name},{role},{c},{'' if role == 'blank' else f'{s0:.6g}'}")
            path.write_text("\n".join(rows) + "\n")
            t = analyse_plate(p.traces, read_layout(str(path)), st).table.set_index("trace")
            t = t.loc[p.traces.names]
            slope = t["slope_A_per_min"].to_numpy(float) / 60
            se = t["slope_A_per_min_se"].to_numpy(float) / 60
            bad.append(needs_a_look(slope, se, p.truth))
            flags.extend(t["flags"])
            cond.append(p.condition)
    return _score(np.concatenate(bad), flags, np.concatenate(cond), FLAGS)


def simulate_triplicates(seed: int, heavy: int | None = None):
    """32 samples x 3 wells whose enzyme differs by 3 % from well to well (pipetting), S0 from
    Km/5 to 5 Km, 1-80 % converted, noise 0.001-0.005 A; well ``heavy`` gets 35 % more enzyme.
    Each well's rate is its own and right; what the outlier flag should find is the heavy well,
    whose replicates' mean it would pull off. Returns (traces, [S]0 in uM, replicate keys)."""
    rng = np.random.default_rng(seed)
    ys, s0s, keys = [], [], []
    for smp in range(32):
        depletion = np.exp(rng.uniform(np.log(0.01), np.log(0.8)))
        kappa = 1 / np.exp(rng.uniform(np.log(0.2), np.log(5.0)))          # Km / S0
        v0 = rng.uniform(0.05, 3.0) * 1e-4                                   # A/s
        noise = rng.choice([0.001, 0.002, 0.005])
        for _ in range(3):
            f = (1 + rng.normal(0, 0.03)) * (1.35 if len(ys) == heavy else 1.0)
            u = f * (depletion - kappa * np.log1p(-depletion)) / TIMES[-1]  # V/S0, 1/s
            scale = v0 * f / (u / (1 + kappa))                               # full change, A
            ys.append(0.2 + scale * mm_progress(TIMES, u, kappa)
                      + rng.normal(0, noise, TIMES.size))
            s0s.append(scale / EPSILON * 1e6)
            keys.append(f"s{smp}")
    names = [f"{chr(65 + i // 12)}{i % 12 + 1}" for i in range(96)]
    return TraceSet.from_arrays(names, TIMES, np.array(ys)), s0s, keys


def triplicate_outliers(traces, s0s, keys, folder: Path) -> list[str]:
    """The wells ``rates`` flags as replicate outliers, with a map of sample and [S]0."""
    from rateabs.layout import read_layout
    from rateabs.options import RateSettings
    from rateabs.rates import analyse_plate

    rows = ["well,role,sample,substrate (uM)"]
    rows += [f"{n},sample,{k},{s:.6g}" for n, k, s in zip(traces.names, keys, s0s, strict=True)]
    (folder / "map.csv").write_text("\n".join(rows) + "\n")
    table = analyse_plate(traces, read_layout(str(folder / "map.csv")),
                          RateSettings(epsilon=EPSILON, pathlength_cm=1.0)).table
    return [w for w, f in zip(table["trace"], table["flags"], strict=True) if "outlier" in f]


def calibrate_outliers(seeds) -> tuple[int, int, int, int]:
    """Per seed, a triplicate plate with one heavy well (in a random sample): returns (wells
    flagged that are not heavy, ordinary wells, heavy wells flagged, heavy wells)."""
    import tempfile

    false, caught = 0, 0
    with tempfile.TemporaryDirectory() as d:
        for seed in seeds:
            heavy = int(np.random.default_rng(10_000 + seed).integers(96))
            traces, s0s, keys = simulate_triplicates(seed, heavy)
            flagged = triplicate_outliers(traces, s0s, keys, Path(d))
            caught += traces.names[heavy] in flagged
            false += sum(w != traces.names[heavy] for w in flagged)
    n = len(seeds)
    return false, 95 * n, caught, n


def report(cal: Calibration) -> None:
    """Print one calibration: per flag, per condition, and the two goals."""
    print(f"{'flag':<12} {'count':>6} {'precision':>10} {'recall':>8}")
    for word, (count, prec, rec) in cal.per_flag.items():
        if count or word in TRACE_FLAGS:
            print(f"{word:<12} {count:6d} {prec:10.2f} {rec:8.2f}")
    print(f"{'condition':<12} {'wells':>6} {'need look':>10} {'flagged':>8} {'both':>6}")
    for c, (n, nb, nf, both) in cal.by_condition.items():
        print(f"{c:<12} {n:6d} {nb:10d} {nf:8d} {both:6d}")
    print(f"good wells: {cal.n_good}, flagged {cal.good_flagged:.1%} (goal: at most 10 %)")
    print(f"wells that need a look: {cal.n_bad}, flagged {cal.bad_flagged:.1%} "
          f"(goal: at least 90 %)")


def main(n_plates: int = 20, first_seed: int = 0) -> None:
    """Print the calibration figures over ``n_plates`` seeded plates."""
    seeds = range(first_seed, first_seed + n_plates)
    plates = [simulate_plate(seed) for seed in seeds]
    t0 = time.perf_counter()
    cal = calibrate(plates)
    t_auto = time.perf_counter() - t0
    t0 = time.perf_counter()
    for p in plates:
        find_windows(p.traces.grid(), curve=False)
    t_window = time.perf_counter() - t0
    print(f"{n_plates} plates x 96 wells, 61 readings over 10 min, seeds {seeds[0]}..{seeds[-1]}")
    print("needs a look: off the truth by more than 5 % AND more than 3 SE")
    print("\n-- the estimator alone (no plate map: depletion judged from each trace's bend)")
    report(cal)
    print("\n-- rates with a plate map giving roles and [S]0 (--epsilon 6220, 1 cm)")
    report(calibrate_with_map(plates))
    false, ordinary, caught, heavy = calibrate_outliers(list(seeds))
    print("\n-- replicate outliers: triplicate plates (3 % pipetting scatter), one well 35 % heavy")
    print(f"outlier on ordinary wells: {false} of {ordinary} ({false / ordinary:.2%}); "
          f"on the heavy well: {caught} of {heavy} ({caught / heavy:.0%})")
    print(f"time: auto estimator {t_auto:.2f} s, straight window alone {t_window:.2f} s "
          f"(ratio {t_auto / max(t_window, 1e-9):.1f})")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
