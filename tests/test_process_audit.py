"""``ratelaw`` and ``completion`` as a process chemist uses them, on runs of known truth.

Every trace here is written from its closed-form solution, computed in this file (hand
calculation of the textbook integrated laws, not rateabs's own models): first order
A = Ainf + (A0 - Ainf) exp(-k t), time to conversion x t = -ln(1 - x) / k; zero order
A = A0 - z t. Noise is seeded white noise of 3 mAU.
"""

import csv
import io
import json
import math

import numpy as np
from click.testing import CliRunner

from rateabs.cli import main

T = np.arange(0, 2700 + 1, 30.0)          # every 30 s for 45 min
SD = 0.003


def first(t, a0, ainf, k):
    """Closed-form first order (hand calculation)."""
    return ainf + (a0 - ainf) * np.exp(-k * np.asarray(t, float))


def noisy(y, seed):
    return y + np.random.default_rng(seed).normal(0, SD, np.size(y))


def write(path, t, cols: dict, time_header="time (s)"):
    lines = [",".join([time_header, *cols])]
    lines += [",".join([f"{ti:g}"] + [f"{cols[c][i]:.5f}" for c in cols])
              for i, ti in enumerate(t)]
    path.write_text("\n".join(lines) + "\n")
    return path


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def doc_of(res):
    assert res.exit_code == 0, res.output
    return json.loads(res.output)


# 5 % conversion at 45 min: 1 - exp(-k 2700) = 0.05 (hand calculation)
K_SHORT = -math.log(0.95) / T[-1]


def test_forced_first_order_at_five_percent_gives_no_forecast_not_an_internal_error(tmp_path):
    """A first-order run at 5 % conversion (truth k = 1.90e-5 1/s, t99 = ln 100 / k = 67 h)
    with --order 1: the rate's interval reaches 0, and t* = -ln(1 - x)/k at k = 0 ended in
    'internal error (ZeroDivisionError)'. Now: no headline forecast, and the conversion the
    data hardly determine is stated with its interval ('covered 0 %' was said of a 5 % run)."""
    f = write(tmp_path / "short.csv", T, {"A": noisy(first(T, 1.2, 0.1, K_SHORT), 5)})
    res = run("completion", f, "--order", "1", "--format", "json")
    d = doc_of(res)
    r = d["results"][0]
    assert r["t_target_s"]["value"] is None and not r["complete"]
    covered = next(w for w in d["warnings"] if "the run has covered" in w)
    lo, hi = r["conversion"]["ci_low"], r["conversion"]["ci_high"]
    assert lo <= 0.05 <= hi                              # the truth, 5 %, inside
    assert f"[{100 * lo:.0f}, {100 * hi:.0f}] %" in covered or "undetermined" in covered


def test_a_straight_trace_says_its_order_was_not_determined(tmp_path):
    """The same 5 % first-order run with --order auto: orders 1 and 2 cannot be fitted with a
    free end point, so order 0 was printed with AICc weight 1 and no flag; without the charge
    it carries order_not_determined. With the charge (c0 110 uM x 1e4 M^-1 cm^-1 = 1.1 AU, the
    run's own full change) the end point is known, so orders 1 and 2 are fitted with it held
    there and compared on the evidence: the straight line alone forecast 99 % at about 14.5 h,
    an earliest time, where the truth (first order) is ln 100 / k = 67.3 h (hand calculation);
    now the headline interval spans the orders that carry weight, the truth inside it, and
    the first-order forecast covers the truth by itself."""
    f = write(tmp_path / "short.csv", T, {"A": noisy(first(T, 1.2, 0.1, K_SHORT), 5)})
    law = doc_of(run("ratelaw", f, "--format", "json", "--no-plots"))["results"][0]
    assert law["order"] == "0" and "order_not_determined" in law["flags"]
    bare = doc_of(run("completion", f, "--format", "json"))["results"][0]
    assert "order_not_determined" in bare["flags"]
    d = doc_of(run("completion", f, "--c0", "110", "--epsilon", "1e4", "--format", "json"))
    r = d["results"][0]
    assert "order_not_determined" not in r["flags"] and "orders_not_told_apart" in r["flags"]
    truth = math.log(100) / K_SHORT
    assert r["t_target_s"]["ci_low"] < truth < r["t_target_s"]["ci_high"]
    one = next(x for x in r["forecasts"] if x["model"] == "1+charge")["t_target_s"]
    assert one["ci_low"] < truth < one["ci_high"]


def test_a_curved_run_keeps_its_order_without_the_new_flag(tmp_path):
    """A first-order run at 93 % (k = 1e-3 1/s, hand calculation 1 - exp(-2.7)) is fitted
    as order 1 and is not flagged order_not_determined."""
    f = write(tmp_path / "first.csv", T, {"A": noisy(first(T, 1.25, 0.08, 1e-3), 6)})
    law = doc_of(run("ratelaw", f, "--format", "json", "--no-plots"))["results"][0]
    assert law["order"] == "1" and "order_not_determined" not in law["flags"]
    k = law["params"]["k"]
    assert k["ci_low"] < 1e-3 < k["ci_high"]


def test_readings_left_out_of_the_fit_are_said_with_their_times(tmp_path):
    """A first-order run (k = 1e-3 1/s) with an empty cell at 300 s, NaN at 330 s and an
    overflow marker at 600 s: the fit uses the other 88 readings (k still within its interval
    of the truth) and says which three it left out. ratelaw and completion dropped them in
    silence (design: masked readings are flagged, never silently dropped)."""
    y = noisy(first(T, 1.25, 0.08, 1e-3), 7)
    rows = [f"{t:g},{a:.5f}" for t, a in zip(T, y, strict=True)]
    rows[10], rows[11], rows[20] = "300,", "330,NaN", "600,OVER"
    f = tmp_path / "gaps.csv"
    f.write_text("time (s),A\n" + "\n".join(rows) + "\n")
    for command in ("ratelaw", "completion"):
        d = doc_of(run(command, f, "--format", "json", "--no-plots"))
        r = d["results"][0]
        assert r["readings_not_fitted"] == {"missing": 2, "overflow": 1}, command
        said = [w for w in d["warnings"] if "not fitted" in w]
        assert said == ["A: 3 readings not fitted: 1 overflow (at 600 s); 2 missing "
                        "(at 300 s, 330 s)"], command
    k = doc_of(run("ratelaw", f, "--format", "json", "--no-plots"))["results"][0]["params"]["k"]
    assert k["ci_low"] < 1e-3 < k["ci_high"]
    table = run("completion", f).output
    assert "warning: A: 3 readings not fitted" in table


def test_guggenheim_k_is_shown_in_the_table_and_csv_not_only_json(tmp_path):
    """--guggenheim was accepted and its k printed only into the JSON: the table and the CSV
    a person reads did not show it. First-order run, truth k = 1e-3 1/s (hand calculation of
    ln|A(t) - A(t + delta)| = const - k t), interval 10 min."""
    f = write(tmp_path / "first.csv", T, {"A": noisy(first(T, 1.25, 0.08, 1e-3), 8)})
    table = run("ratelaw", f, "--guggenheim", "10 min", "--no-plots")
    assert table.exit_code == 0 and "A: Guggenheim (interval 600 s" in table.output
    csv_text = run("ratelaw", f, "--guggenheim", "10 min", "--no-plots", "--format", "csv").output
    row = next(csv.DictReader(io.StringIO(csv_text)))
    assert float(row["guggenheim_delta_s"]) == 600
    assert float(row["guggenheim_k_ci_low"]) < 1e-3 < float(row["guggenheim_k_ci_high"])


def test_completion_with_epsilon_shows_k_in_concentration_units(tmp_path):
    """--epsilon alone is documented to give k in concentration units, but the table printed
    k in 1/(AU s) only. Second order at equal concentrations, written from the closed form
    [A] = c0 / (1 + k c0 t) (hand calculation) with k = 10 L/(mol s), c0 = 100 uM,
    epsilon 1e4 L/(mol cm), 1 cm, 0.05 AU of background."""
    c = 1e-4 / (1 + 10.0 * 1e-4 * T)
    f = write(tmp_path / "second.csv", T, {"A": noisy(0.05 + 1e4 * c, 9)})
    res = run("completion", f, "--epsilon", "1e4")
    assert res.exit_code == 0, res.output
    line = next(ln for ln in res.output.splitlines() if "k (concentration units)" in ln)
    assert "L/(mol s)" in line
    lo, hi = (float(x) for x in line.rsplit("[", 1)[1].rstrip("]").split(","))
    assert lo < 10.0 < hi
    row = next(csv.DictReader(io.StringIO(run("completion", f, "--epsilon", "1e4", "--format",
                                              "csv").output)))
    assert row["k_conc_unit"] == "L/(mol s)" and abs(float(row["k_conc"]) - 10) < 0.5


def test_readings_before_the_files_zero_are_said(tmp_path):
    """Times from -300 s to 2400 s, the reaction (k = 1e-3 1/s) running from the first
    reading: conversion counted from the file's zero is 1 - exp(-2.4) = 90.9 % (hand
    calculation), from the first reading 1 - exp(-2.7) = 93.3 %. completion gives the first
    and said nothing about the ten readings before zero; now it says where it counts from."""
    y = noisy(first(T, 1.25, 0.08, 1e-3), 10)
    f = write(tmp_path / "neg.csv", T - 300, {"A": y})
    d = doc_of(run("completion", f, "--format", "json"))
    conv = d["results"][0]["conversion"]
    assert conv["ci_low"] - 0.005 < 1 - math.exp(-2.4) < conv["ci_high"] + 0.005
    assert any("10 readings lie before the file's time zero (from -300 s)" in w
               for w in d["warnings"])
    law = doc_of(run("ratelaw", f, "--format", "json", "--no-plots"))
    assert any("before the file's time zero" in w for w in law["warnings"])


def test_a_target_already_passed_is_said_to_be_passed(tmp_path):
    """A first-order run at 99.9 % by 45 min (k = ln 1000 / 2700 s): 99 % was reached at
    ln 100 / k = 30.0 min (hand calculation), 15 min before the last reading. The table said
    '0.0 min after the last reading'."""
    k = math.log(1000) / T[-1]
    f = write(tmp_path / "done.csv", T, {"A": noisy(first(T, 1.2, 0.1, k), 11)})
    res = run("completion", f)
    line = next(ln for ln in res.output.splitlines() if "time to 99 %" in ln)
    assert "passed 1" in line and "before the last reading" in line
    assert "0.0 min after" not in line
    t = doc_of(run("completion", f, "--format", "json"))["results"][0]["t_target_s"]
    assert t["ci_low"] < math.log(100) / k < t["ci_high"]


# --------------------------------------------------------------------------- induction period

T60 = np.arange(0, 3600 + 1, 30.0)        # every 30 s for an hour
DELAY, K_LATE = 600.0, 2e-3


def late_first(t):
    """Nothing for 600 s, then first order k = 2e-3 1/s from 1.06 to 0.06 AU (hand calculation
    of the closed form in the time since the start, A = 0.06 + exp(-k (t - 600)))."""
    return 0.06 + np.exp(-K_LATE * np.clip(np.asarray(t, float) - DELAY, 0, None))


def test_an_induction_period_is_named_with_the_option_that_starts_the_fit_later(tmp_path):
    """The run was flagged misfit (k 8.5e-4 against a true 2e-3 1/s, 134 % of the charge
    converted) and nothing named the delay: now it is flagged delayed_start, the note gives the
    start (the truth, 600 s, inside its interval), the delayed law's k and the option."""
    f = write(tmp_path / "late.csv", T60, {"A": noisy(late_first(T60), 12)})
    d = doc_of(run("ratelaw", f, "--format", "json", "--no-plots"))
    r = d["results"][0]
    assert "delayed_start" in r["flags"]
    td = r["other_shape"]["td_s"]
    assert td["ci_low"] - 30 < DELAY < td["ci_high"] + 30     # within a reading interval
    said = next(w for w in d["warnings"] if "DELAYED START" in w)
    assert "--fit-from 600 s" in said
    k = r["other_shape"]["params"]["k"]
    assert k["ci_low"] < K_LATE < k["ci_high"]
    c = doc_of(run("completion", f, "--format", "json"))["results"][0]
    assert "delayed_start" in c["flags"] and not c["complete"] and "--fit-from" in c["verdict"]


def test_fit_from_counts_conversion_and_times_from_the_given_start(tmp_path):
    """--fit-from 10 min: the 20 readings before it are not fitted; k covers 2e-3 1/s; with the
    charge (100 uM x 1e4 M^-1 cm^-1 = 1 AU, hand calculation) the conversion at the last
    reading covers 1 - exp(-k 3000 s) = 99.75 % and the time to 99 % covers ln 100 / k =
    2303 s, both counted from the start, which the header, settings and results say."""
    f = write(tmp_path / "late.csv", T60, {"A": noisy(late_first(T60), 16)})
    law = doc_of(run("ratelaw", f, "--fit-from", "10 min", "--format", "json", "--no-plots"))
    r = law["results"][0]
    assert r["time_origin_s"] == 600 and r["fit_from_s"] == 600 and r["n"] == 101
    assert r["params"]["k"]["ci_low"] < K_LATE < r["params"]["k"]["ci_high"]
    assert "delayed_start" not in r["flags"] and "misfit" not in r["flags"]
    assert law["settings"]["fit_from_s"] == 600
    assert any("20 earlier readings, 0 to 570 s, not fitted" in w for w in law["warnings"])
    args = ("completion", f, "--fit-from", "600", "--c0", "100", "--epsilon", "1e4")
    c = doc_of(run(*args, "--format", "json"))["results"][0]
    conv, tt = c["conversion"], c["t_target_s"]
    assert conv["ci_low"] < 1 - math.exp(-K_LATE * 3000) < conv["ci_high"]
    assert tt["ci_low"] < math.log(100) / K_LATE < tt["ci_high"]
    assert c["t_now_s"] == 3000 and c["time_origin_s"] == 600
    table = run(*args).output
    assert "time origin: --fit-from 600 s in the file" in table
    assert "at 2" in table and "s in the file's times" in table


def test_fit_from_is_refused_where_it_cannot_be_used(tmp_path):
    """One line, exit 2, the option named: too few readings left (4 where comparing orders
    needs 6: AICc with k = 4 needs n > 5, Hurvich & Tsai 1989), a time before the first
    reading, a value that is not a time (refused by the settings object)."""
    import pytest

    from rateabs.errors import UsageError
    from rateabs.options import CompletionOptions

    f = write(tmp_path / "late.csv", T60, {"A": noisy(late_first(T60), 14)})
    for value, words in (("3500", "leaves 4 readings"), ("-60", "before the first reading")):
        for command in ("ratelaw", "completion"):
            res = run(command, f, "--fit-from", value, "--no-plots")
            assert res.exit_code == 2, res.output
            err = res.stderr.strip()
            assert len(err.splitlines()) == 1 and "--fit-from" in err and words in err
            assert "late.csv" in err and "Traceback" not in res.output
    with pytest.raises(UsageError, match="--fit-from"):
        CompletionOptions(str(f), fit_from="ten minutes")
    assert CompletionOptions(str(f), fit_from="10 min").fit_from == 600


# --------------------------------------------------------------------------- zero order, charge


def test_zero_order_with_the_charge_compares_the_orders_on_evidence(tmp_path):
    """A true zero-order run, 67 % of a 100 uM charge used in an hour (hand calculation:
    A = 1.06 - 0.67 t / 3600 AU with epsilon 1e4, 1 cm), got order_not_determined because
    orders 1 and 2 could not be fitted; with the charge their end point is known
    (A0 - 1 AU), so they are fitted with it and lose on the evidence. The time to 99 % covers
    0.99 / 0.67 x 3600 s = 5319 s."""
    y = noisy(1.06 - 0.67 * T60 / 3600, 15)
    f = write(tmp_path / "zero.csv", T60, {"A": y})
    charge = ("--c0", "100", "--epsilon", "1e4")
    law = doc_of(run("ratelaw", f, *charge, "--format", "json", "--no-plots"))["results"][0]
    assert law["order"] == "0" and "order_not_determined" not in law["flags"]
    rows = {x["model"]: x for x in law["evidence"]["aicc_table"]}
    assert set(rows) == {"0", "1+charge", "2+charge"}
    assert rows["1+charge"]["delta_aicc"] > 10 and rows["2+charge"]["delta_aicc"] > 10
    d = doc_of(run("completion", f, *charge, "--format", "json"))
    c = d["results"][0]
    assert "order_not_determined" not in c["flags"] and c["model"] == "0"
    assert c["t_target_s"]["ci_low"] < 0.99 / 0.67 * 3600 < c["t_target_s"]["ci_high"]
    assert not any("earliest time" in w for w in d["warnings"])
    assert any("fitted with the end held there (1+charge, 2+charge)" in w
               for w in d["warnings"])
    # without the charge nothing gives the end point: the flag stays
    bare = doc_of(run("ratelaw", f, "--format", "json", "--no-plots"))["results"][0]
    assert "order_not_determined" in bare["flags"]
