"""Rate laws, completion and temperature: published data, formulas, seeded simulations, CLI."""

import json
import math
import threading
import time
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import (
    R_GAS,
    beer_lambert,
    eyring_k,
    first_order_decay,
    mixed_second_order_product,
    reversible_first_order,
    second_order_decay,
)
from scipy import stats

from rateabs.cli import main
from rateabs.completion import assess
from rateabs.errors import AnalysisError
from rateabs.fitting import Param
from rateabs.ratelaws import Photometry, fit_trace, guggenheim, mixed_model, pseudo_first_order
from rateabs.temperature import R, analyse

SAMPLES = Path(__file__).resolve().parents[1] / "sample_runs"


def test_bod_marske_bates_watts():
    # published: Marske (1967) BOD data as fitted in Bates & Watts (1988):
    # theta1 = 19.143 (2.496), theta2 = 0.5311 (0.2035) for y = theta1 (1 - exp(-theta2 t))
    t = np.array([1, 2, 3, 4, 5, 7.0])
    y = np.array([8.3, 10.3, 19.0, 16.0, 15.6, 19.8])
    r = fit_trace(t, y, "bod", order="1", fix={"A0": 0.0}, ci="asymptotic").fit
    assert round(r.params["Ainf"].value, 3) == 19.143
    assert round(r.params["Ainf"].se, 3) == 2.496
    assert round(r.params["k"].value, 4) == 0.5311
    # the shared references give SE 0.2035; scipy.optimize.curve_fit (reference library) gives
    # 0.20307 on the same data, as this engine does: agree with both within 0.0005
    assert r.params["k"].se == pytest.approx(0.2035, abs=5e-4)
    from scipy.optimize import curve_fit
    _, cov = curve_fit(lambda t, a, b: a * (1 - np.exp(-b * t)), t, y, p0=[20, 0.5])
    assert r.params["k"].se == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-4)


def test_gas_constant_is_the_codata_value():
    # published: CODATA 2018 (exact since the 2019 SI), R = 8.314462618... J mol^-1 K^-1
    assert R == pytest.approx(8.314462618, rel=1e-10)


def _noisy(y, seed, sd=0.003):
    return y + np.random.default_rng(seed).normal(0, sd, y.size)


T = np.arange(0, 3600, 30.0)
EPS = 1e4            # L mol^-1 cm^-1, 1 cm: absorbance = 1e4 x concentration (Beer-Lambert)


def _decay_trace(order, k_conc, c0=8e-5, base=0.1):
    """Absorbance of a reactant A (eps 1e4, product transparent) lost by a mechanism integrated
    with solve_ivp: A -> P (order 1) or loss at k[A]^2 (order 2), on a baseline."""
    c = first_order_decay(T, c0, k_conc) if order == "1" else second_order_decay(T, c0, k_conc)
    return base + beer_lambert(c, EPS)


@pytest.mark.parametrize("order,k_conc", [("0", 2e-8), ("1", 8e-4), ("2", 25.0)])
def test_each_order_recovered_and_half_life_formula(order, k_conc):
    # published formulas (Atkins, Physical Chemistry): t1/2 = [A]0/(2k), ln2/k, 1/(k [A]0)
    c0 = 8e-5
    if order == "0":            # zero order: [A] falls linearly at k mol/(L s)
        t = T[:60]
        y = 0.1 + beer_lambert(c0 - k_conc * t, EPS)
    else:
        t, y = T, _decay_trace(order, k_conc, c0)
    law = fit_trace(t, _noisy(y, 1), order=order, photometry=Photometry(epsilon=EPS, c0_M=c0))
    kc = law.k_conc
    bound = stats.t.ppf(1 - 5e-5, law.fit.dof)       # two-sided tail 1e-4
    assert abs(kc.value - k_conc) < bound * kc.se, kc
    truth_half = {"0": c0 / (2 * k_conc), "1": math.log(2) / k_conc, "2": 1 / (k_conc * c0)}[order]
    h = law.half_life
    assert h.ci_low < truth_half < h.ci_high or abs(h.value - truth_half) < bound * h.se
    if order == "1":
        assert h.value == pytest.approx(math.log(2) / kc.value, rel=1e-9)
    elif order == "0":
        assert h.value == pytest.approx(c0 / (2 * kc.value), rel=1e-9)


# Hit rate of the automatic order choice on these two designs, measured by
# benchmarks/order_choice.py over 200 other seeds each (1000-1199): 400 of 400. The binomial
# 97.5 % lower bound of 400/400 is 0.991; use 0.99.
ORDER_HIT_RATE = 0.99


def test_auto_recovers_order_over_seeds():
    """Small seeded version of benchmarks/order_choice.py (mechanisms by solve_ivp)."""
    first, second = _decay_trace("1", 8e-4), _decay_trace("2", 40.0)
    hits = 0
    # the order is chosen before any interval is computed: asymptotic intervals spare the
    # profile's refits (0.15 s a trace), the choice is the same
    for seed in range(10):
        hits += fit_trace(T, _noisy(first, seed), ci="asymptotic").order == "1"
        hits += fit_trace(T, _noisy(second, seed), ci="asymptotic").order == "2"
    # accept down to the 0.1 % binomial quantile of 20 trials at the measured rate
    assert hits >= stats.binom.ppf(0.001, 20, ORDER_HIT_RATE)


def test_reversible_first_order_relaxes_at_kf_plus_kr():
    # A <-> B (solve_ivp): the approach to equilibrium is first order with k = kf + kr and ends
    # at [A]eq = [A]0 kr/(kf + kr) (Atkins, relaxation of a reversible first-order reaction)
    kf, kr, c0 = 6e-4, 2e-4, 1e-4
    y = _noisy(0.05 + beer_lambert(reversible_first_order(T, c0, kf, kr), EPS), 2, 0.002)
    law = fit_trace(T, y, order="1", ci="asymptotic")       # values and SEs only: no profile
    k, ainf = law.fit.params["k"], law.fit.params["Ainf"]
    bound = stats.t.ppf(1 - 5e-5, law.fit.dof)
    assert abs(k.value - (kf + kr)) < bound * k.se
    assert abs(ainf.value - (0.05 + EPS * c0 * kr / (kf + kr))) < bound * ainf.se


def test_mixed_second_order_recovered():
    a0, b0, k = 5e-5, 1.5e-4, 40.0
    # product P absorbs (eps 15000 L mol^-1 cm^-1, 1 cm) on a baseline of 0.05; A + B -> P by
    # solve_ivp
    y = _noisy(0.05 + beer_lambert(mixed_second_order_product(T, a0, b0, k), 15000), 3, 0.002)
    law = fit_trace(T, y, order="mixed", a0=a0, b0=b0, ci="asymptotic")     # values and SEs
    p = law.fit.params["k"]
    assert p.unit == "L/(mol s)" and set(mixed_model(a0, b0).params) == set(law.fit.params)
    assert abs(p.value - k) < stats.t.ppf(1 - 5e-5, law.fit.dof) * p.se


def test_two_absorbing_species():
    # reactant eps 8000, product eps 2000 (1 cm); 2A -> P lost at k[A]^2, k = 15 L/(mol s),
    # [A]0 = 1e-4 M: A = 0.2 + 8000 [A] + 2000 ([A]0 - [A]), delta A = 0.6
    c0, kc = 1e-4, 15.0
    c = second_order_decay(T, c0, kc)
    y = _noisy(0.2 + beer_lambert(c, 8000) + beer_lambert(c0 - c, 2000), 4, 0.002)
    law = fit_trace(T, y, order="2", photometry=Photometry(epsilon=8000, epsilon_product=2000),
                    ci="asymptotic")                        # values and SEs: no profile
    bound = stats.t.ppf(1 - 5e-5, law.fit.dof)
    assert abs(law.c0.value - c0) < bound * law.c0.se
    assert abs(law.k_conc.value - kc) < bound * law.k_conc.se


def test_guggenheim_without_end_value():
    # Guggenheim (1926), Phil. Mag. 2:538: ln(A(t) - A(t + delta)) is linear in t with slope -k
    y = _noisy(_decay_trace("1", 8e-4), 5, 0.001)
    g = guggenheim(T, y)
    assert g["method"].startswith("Guggenheim (1926)")
    assert abs(g["k"].value - 8e-4) < stats.t.ppf(1 - 5e-5, g["n_pairs"] - 2) * g["k"].se
    assert g["half_life"].value == pytest.approx(math.log(2) / g["k"].value)


def test_guggenheim_on_a_run_with_an_unknown_end_point():
    # Guggenheim (1926), Phil. Mag. 2:538: the method needs no end value, so a run stopped at
    # 60 % conversion on a baseline nobody knows gives k all the same. The run (solve_ivp,
    # first order, k = 3e-4 1/s, 50 min) sits on an undisclosed 0.37 AU; delta = 25 min is a
    # whole number of readings, so the pairs need no interpolation and the method is typed here
    # with numpy.polyfit (reference library) on ln|A(t) - A(t + delta)|.
    t = np.arange(0, 50 * 60 + 1, 30.0)
    k = 3e-4
    y = _noisy(0.37 + beer_lambert(first_order_decay(t, 8e-5, k), EPS), 6, 0.001)
    g = guggenheim(t, y, delta=25 * 60.0)
    step = 50                                               # 25 min of 30-s readings
    slope = np.polyfit(t[:-step], np.log(np.abs(y[:-step] - y[step:])), 1)[0]
    assert g["k"].value == pytest.approx(-slope, rel=1e-9)
    assert abs(g["k"].value - k) < stats.t.ppf(1 - 5e-5, g["n_pairs"] - 2) * g["k"].se
    # the integrated law with a free end value on the same run agrees with it
    law = fit_trace(t, y, order="1", ci="asymptotic")       # value and SE: no profile
    assert abs(law.fit.value("k") - g["k"].value) < 3 * math.hypot(law.fit.params["k"].se,
                                                                   g["k"].se)


def test_pseudo_first_order_series():
    # kobs = k2 [B] + k0 exactly (hand-made, no noise): the line returns k2 and k0
    conc = np.array([1, 2, 4, 6, 8.0]) * 1e-3
    kobs = [Param("k", 0.42 * c + 1.5e-4, 2e-6, 0, 0, "asymptotic") for c in conc]
    s = pseudo_first_order(kobs, conc)
    assert s["k2"].value == pytest.approx(0.42, rel=1e-6)
    assert s["k0"].value == pytest.approx(1.5e-4, rel=1e-4)


def test_eyring_and_arrhenius_recover_the_activation_parameters():
    # Eyring (1935), J. Chem. Phys. 3:107: k from dH = 62.5 kJ/mol and dS = -40 J/(mol K),
    # typed with the exact SI constants (tests/kinetics_truth.py), 2 % noise. Arrhenius over
    # the range: Ea = dH + R Tm, A = e (kB Tm / h) exp(dS/R), Tm the mean of 1/T inverted
    # (Atkins, Physical Chemistry, activation parameters; from memory).
    Tk = np.array([288.15, 293.15, 298.15, 303.15, 308.15, 313.15])
    dH, dS = 62.5e3, -40.0
    k = eyring_k(Tk, dH, dS) * (1 + np.random.default_rng(0).normal(0, 0.02, 6))
    a = analyse(Tk, k)
    tm = 1 / np.mean(1 / Tk)
    bound = stats.t.ppf(1 - 5e-5, a.eyring.dof)
    for name, truth in (("dH", dH / 1000), ("dS", dS), ("Ea", (dH + R_GAS * tm) / 1000)):
        p = a.params[name]
        assert abs(p.value - truth) < bound * p.se, (name, p)
    A_truth = math.e * eyring_k(tm, 0.0, dS)                 # e (kB Tm/h) exp(dS/R)
    A = a.params["A"]
    assert abs(math.log(A.value / A_truth)) < bound * A.se / A.value      # SE of ln A
    p = a.predict(333.15)
    assert p.ci_low < eyring_k(333.15, dH, dS) < p.ci_high


def test_completion_interval_covers_truth():
    """Small seeded version of benchmarks/completion_coverage.py (95 % intervals)."""
    k, t = 8e-4, np.arange(0, 45 * 60 + 1, 30.0)
    truth = -math.log(0.01) / k                # 99 % conversion of a first-order loss
    trace = 0.06 + beer_lambert(first_order_decay(t, 1.19e-4, k), EPS)   # A 1.25 -> 0.06
    covered = 0
    n = 40
    for seed in range(n):
        c = assess(t, _noisy(trace, seed, 0.01), target=0.99)
        covered += c.t_target.ci_low <= truth <= c.t_target.ci_high
    # nominal 95 %: accept down to the lower 0.1 % binomial quantile of 40 simulations,
    # scipy.stats.binom.ppf(0.001, 40, 0.95) = 33
    assert stats.binom.ppf(0.001, n, 0.95) == 33
    assert covered >= 33


def test_completion_sample_run_cli(tmp_path):
    r = CliRunner().invoke(main, ["completion", str(SAMPLES / "process_kestrel_red_probe.csv"),
                                  "--target", "99", "--format", "json", "--out", str(tmp_path)])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    res = doc["results"][0]
    assert {"trace", "conversion", "target", "t_target_s", "complete"} <= set(res)
    assert res["complete"] is False and res["target"] == 0.99
    t99 = -math.log(0.01) / 8e-4          # simulated truth (sample_runs/generate.py)
    assert res["t_target_s"]["ci_low"] < t99 < res["t_target_s"]["ci_high"]
    assert any("process-safety" in w for w in doc["warnings"])
    assert (tmp_path / "completion_A520.png").exists()


def test_complete_when_finished():
    t = np.arange(0, 4 * 3600, 60.0)
    c = assess(t, _noisy(0.05 + beer_lambert(first_order_decay(t, 1.15e-4, 8e-4), EPS), 2),
               target=0.95)
    assert c.complete


def test_ratelaw_cli_json_fields():
    r = CliRunner().invoke(main, ["ratelaw", str(SAMPLES / "process_kestrel_red_probe.csv"),
                                  "--format", "json", "--no-plots"])
    assert r.exit_code == 0, r.output
    res = json.loads(r.stdout)["results"][0]
    assert res["order"] == "1" and set(res["params"]) == {"A0", "Ainf", "k"}
    assert res["half_life_s"]["unit"] == "s"
    assert res["params"]["k"]["ci_low"] < 8e-4 < res["params"]["k"]["ci_high"]


def test_temperature_cli(tmp_path):
    r = CliRunner().invoke(main, ["temperature", str(SAMPLES / "temperature_kestrel_red.csv"),
                                  "--at", "60C", "--format", "json", "--out", str(tmp_path)])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    arr = doc["results"][0]["params"]
    assert arr["Ea"]["unit"] == "kJ/mol" and arr["Ea"]["ci_low"] < 65 < arr["Ea"]["ci_high"]
    assert "dS" in doc["results"][1]["params"]
    assert doc["results"][2]["predictions"][0]["k"]["value"] > 0
    assert (tmp_path / "temperature_arrhenius.png").exists()


def test_follow_reads_a_growing_file_with_a_torn_line(tmp_path):
    path = tmp_path / "live.csv"
    t = np.arange(0, 90 * 60, 30.0)
    y = _noisy(0.05 + beer_lambert(first_order_decay(t, 1.15e-4, 1.2e-3), EPS), 9)
    # the first 30 readings are there before the follower starts, so that a slow writer on a
    # loaded machine cannot leave it with too few readings when its updates run out
    path.write_text("time_min,A520\n" + "".join(f"{tt / 60:.2f},{yy:.4f}\n"
                                                  for tt, yy in zip(t[:30], y[:30], strict=True)))
    stop = threading.Event()

    def writer():
        with open(path, "a") as fh:
            for k, (tt, yy) in enumerate(zip(t[30:], y[30:], strict=True), start=30):
                if stop.is_set():
                    return
                line = f"{tt / 60:.2f},{yy:.4f}\n"
                if k % 7 == 3:                      # a torn write: half a line, then the rest
                    fh.write(line[:4])
                    fh.flush()
                    time.sleep(0.002)
                fh.write(line[4:] if k % 7 == 3 else line)
                fh.flush()
                time.sleep(0.001)

    th = threading.Thread(target=writer)
    th.start()
    try:
        r = CliRunner().invoke(main, ["completion", str(path), "--follow", "0.05", "--target", "95",
                                      "--max-updates", "60", "--no-plots"])
    finally:
        stop.set()
        th.join()
    assert r.exit_code == 0, r.output
    assert "final summary" in r.output and "following" in r.output
    assert "%" in r.output and "Traceback" not in r.output


@pytest.mark.parametrize("content,args,words", [
    ("Time (s),A1\n" + "".join(f"{i * 10},0.5\n" for i in range(20)), [], "flat"),
    ("Time (s),A1\n" + "".join(f"{i * 10},{0.1 + 0.02 * i}\n" for i in range(20)),
     ["--expect", "decay"], "rises"),
    ("Time (s),A1\n0,0.9\n10,0.5\n20,0.3\n", [], "usable readings"),
])
def test_ratelaw_bad_input(tmp_path, content, args, words):
    f = tmp_path / "x.csv"
    f.write_text(content)
    r = CliRunner().invoke(main, ["ratelaw", str(f), *args, "--no-plots"])
    assert r.exit_code == 4, r.output
    assert words in r.output and len(r.output.strip().splitlines()) == 1


def test_temperature_bad_input(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("T (K),k\n-5,0.1\n300,0.2\n310,0.3\n")
    r = CliRunner().invoke(main, ["temperature", str(f)])
    assert r.exit_code == 3 and "absolute zero" in r.output
    f.write_text("T (K),k\n290,0.1\n300,0\n310,0.3\n")
    r = CliRunner().invoke(main, ["temperature", str(f)])
    assert r.exit_code == 3 and "not positive" in r.output
    f.write_text("T (K),k\n290,0.1\n300,0.2\n")
    r = CliRunner().invoke(main, ["temperature", str(f)])
    assert r.exit_code == 4 and "temperatures" in r.output


def test_flat_trace_raises_analysis_error():
    with pytest.raises(AnalysisError):
        fit_trace(T, np.full(T.size, 0.4) + np.random.default_rng(0).normal(0, 0.001, T.size))
