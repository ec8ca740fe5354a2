"""temperature: units the values contradict, extrapolation named, every column accounted for;
and the rate-law figures keep their boxes and legends off the data."""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import eyring_k
from process_truth import absorbance, first_order, noisy

from rateabs.cli import main

# k from the Eyring equation (Eyring 1935; typed in tests/kinetics_truth.py) with
# dH = 62.5 kJ/mol and dS = -40 J/(mol K) at 20-60 C, 1 % noise (seeded)
T_C = np.array([20.0, 30, 40, 50, 60])
K = eyring_k(T_C + 273.15, 62.5e3, -40.0) * (1 + 0.01 * np.random.default_rng(5).normal(size=5))


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def _table(path, header, temps, extra=""):
    path.write_text(f"{header},k (1/s){',note' if extra else ''}\n" + "".join(
        f"{t:g},{k:.6g}{',' + extra if extra else ''}\n" for t, k in zip(temps, K, strict=True)))
    return path


def test_kelvin_values_under_a_celsius_header_are_refused(tmp_path):
    """Issue 17: a 'T (C)' column holding 293-333 gave Ea = 241 kJ/mol instead of 65."""
    f = _table(tmp_path / "t.csv", "T (C)", T_C + 273.15)
    r = run("temperature", f)
    assert r.exit_code == 3
    assert "look like kelvin" in r.stderr and "--temp-unit K" in r.stderr
    ok = json.loads(run("temperature", f, "--temp-unit", "K", "--format", "json").stdout)
    good = json.loads(run("temperature", _table(tmp_path / "c.csv", "T (C)", T_C),
                          "--format", "json").stdout)
    assert ok["results"][0]["params"]["Ea"]["value"] == pytest.approx(
        good["results"][0]["params"]["Ea"]["value"], rel=1e-9)
    assert ok["settings"]["columns"]["temp_unit_source"] == "--temp-unit"


def test_celsius_values_under_a_kelvin_header_are_refused(tmp_path):
    r = run("temperature", _table(tmp_path / "k.csv", "T (K)", T_C))
    assert r.exit_code == 3 and "look like degrees Celsius" in r.stderr


def test_prediction_outside_the_measured_range_is_flagged(tmp_path):
    """Issue 12: --at '150 C' from 20-60 C data was given without a word."""
    f = _table(tmp_path / "c.csv", "T (C)", T_C, extra="batch 7")
    r = run("temperature", f, "--at", "150 C", "--at", "45 C", "--format", "json")
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    far, inside = d["results"][-1]["predictions"]
    assert far["extrapolated"] and far["beyond_K"] == pytest.approx(90.0)
    # distance in 1/T as a multiple of the measured span: |1/423.15 - 1/333.15| / (1/293.15 -
    # 1/333.15)
    span = 1 / 293.15 - 1 / 333.15
    assert far["multiple_of_span"] == pytest.approx((1 / 333.15 - 1 / 423.15) / span)
    assert not inside["extrapolated"] and inside["multiple_of_span"] == 0
    assert any("extrapolated" in w for w in d["warnings"])
    table = run("temperature", f, "--at", "150 C").stdout
    assert "EXTRAPOLATED" in table and "columns not used: 'note'" in table
    assert "warning: k at 150.0 C is extrapolated" in table


# --------------------------------------------------------------------------- figures


def _captured(monkeypatch):
    """Figures drawn by plots.laws, kept open instead of being saved."""
    import rateabs.plots.laws as laws

    figs = []

    def keep(fig, path):
        figs.append(fig)
        return path

    monkeypatch.setattr(laws, "save", keep)
    return figs


def _inside(ax, artist, xy) -> int:
    """How many data points (in data coordinates) fall inside an artist's box on screen."""
    fig = ax.figure
    fig.canvas.draw()
    box = artist.get_window_extent(fig.canvas.get_renderer())
    pts = ax.transData.transform(np.column_stack(xy))
    return int(sum(box.contains(px, py) for px, py in pts))


def test_rate_law_figure_keeps_text_and_legend_off_a_rising_trace(tmp_path, monkeypatch):
    """Issue 12/14: the parameter box covered the plateau of rising traces."""
    from rateabs.io import read_traces
    from rateabs.plots.laws import ratelaw_plots
    from rateabs.ratelaws import fit_trace

    t = np.arange(0, 60 * 60 + 1, 30.0)
    y = 1.3 - noisy(absorbance(first_order(t, 1.5e-3)), 3) + 0.06   # a rise to a plateau
    f = tmp_path / "rise.csv"
    f.write_text("time (s),A1\n" + "".join(f"{a:g},{b:.5f}\n" for a, b in
                                            zip(t, y, strict=True)))
    ts = read_traces(f)
    law = fit_trace(t, y, "A1", drift="auto")
    figs = _captured(monkeypatch)
    ratelaw_plots({"traces": ts, "laws": {"A1": law}}, tmp_path)
    ax = figs[0].axes[0]
    assert not ax.texts                                   # no box drawn inside the axes
    legend = ax.get_legend()
    assert _inside(ax, legend, (t / 60, y)) == 0
    assert "k = " in ax.get_title()                       # the parameters sit above the axes
    labels = [a.get_ylabel() for a in figs[0].axes]
    assert "residual (mAU)" in labels and "absorbance (AU)" in labels
    assert all("mA)" not in lab for lab in labels)


# --------------------------------------------------------------------------- units of T and k
# Truth for the unit checks, computed here without rateabs: R, kB, h from scipy.constants
# (reference library); k from Eyring's equation k = (kB T/h) exp(dS/R) exp(-dH/(R T)) with
# dH = 52.4 kJ/mol, dS = -129.7 J/(mol K) at 15-40 C, 3 % noise (seeded); the reference fits
# are numpy.polyfit of ln k (Arrhenius) and ln(k/T) (Eyring) on 1/T (reference library).

def _eyring_truth():
    from scipy.constants import R, h
    from scipy.constants import k as kB

    t_c = np.array([15.0, 20, 25, 30, 35, 40])
    t_k = t_c + 273.15
    k = kB * t_k / h * np.exp(-129.7 / R) * np.exp(-52.4e3 / (R * t_k))
    k = k * np.exp(np.random.default_rng(1).normal(0, 0.03, t_c.size))
    return t_c, t_k, k, R, kB, h


def _write(path, header, rows):
    path.write_text(header + "\n" + "".join(",".join(f"{v:.10g}" for v in r) + "\n"
                                            for r in rows))
    return path


def _reference(t_k, k, w=None):
    """Ea (kJ/mol), A (1/s), dH (kJ/mol), dS (J/(mol K)) by numpy.polyfit (w = 1/SE(ln k))."""
    _, _, _, R, kB, h = _eyring_truth()
    slope, icpt = np.polyfit(1 / t_k, np.log(k), 1, w=w)
    es, ei = np.polyfit(1 / t_k, np.log(k / t_k), 1, w=w)
    return {"Ea": -slope * R / 1000, "A": np.exp(icpt), "dH": -es * R / 1000,
            "dS": R * (ei - np.log(kB / h))}


def _doc(*args):
    r = run("temperature", *args, "--format", "json", "--no-plots")
    assert r.exit_code == 0, r.output
    return json.loads(r.stdout)


def _assert_params(d, truth, rel=1e-6):
    p = {**d["results"][0]["params"], **d["results"][1]["params"]}
    for name, value in truth.items():
        assert p[name]["value"] == pytest.approx(value, rel=rel), name


@pytest.mark.parametrize("header", ["T (F)", "T (°F)", "T_F", "temperature (Fahrenheit)"])
def test_a_fahrenheit_header_is_converted_to_kelvin(tmp_path, header):
    """Audit: 'T (F)' at 59-104 F was read as Celsius (Ea 42.31 kJ/mol for 54.87)."""
    t_c, t_k, k, *_ = _eyring_truth()
    t_f = t_c * 9 / 5 + 32                         # the Fahrenheit scale (common practice)
    f = _write(tmp_path / "f.csv", f"{header},k (1/s)", zip(t_f, k, strict=True))
    d = _doc(f)
    _assert_params(d, _reference(t_k, k))
    assert d["settings"]["columns"]["temp_unit"] == "F"
    assert any("T_K = (T_F - 32) x 5/9 + 273.15" in w for w in d["warnings"])
    text = run("temperature", f, "--no-plots").stdout
    assert "in degrees Fahrenheit, converted to kelvin (from the header)" in text
    assert "(15.0 to 40.0 C)" in text
    # a --temp-unit against the Fahrenheit header is refused in one line naming both
    for unit in ("K", "C"):
        r = run("temperature", f, "--temp-unit", unit, "--no-plots")
        assert r.exit_code == 2 and r.stdout == "" and len(r.stderr.strip().splitlines()) == 1
        assert f"--temp-unit {unit} contradicts the column {header!r}" in r.stderr
        assert "degrees Fahrenheit" in r.stderr


def test_fahrenheit_by_option_and_kelvin_values_under_a_fahrenheit_header(tmp_path):
    t_c, t_k, k, *_ = _eyring_truth()
    bare = _write(tmp_path / "bare.csv", "temperature,k (1/s)", zip(t_c * 9 / 5 + 32, k,
                                                                   strict=True))
    as_c = run("temperature", bare, "--no-plots").stdout
    assert "read as degrees Celsius (give --temp-unit if they are not" in as_c
    _assert_params(_doc(bare, "--temp-unit", "F"), _reference(t_k, k))
    # --at in degrees Fahrenheit: 77 F is 25 C, 298.15 K
    pred = _doc(bare, "--temp-unit", "F", "--at", "77 F")["results"][-1]["predictions"][0]
    assert pred["T_K"] == pytest.approx(298.15, abs=1e-9)
    wrong = _write(tmp_path / "k.csv", "T (F),k (1/s)", zip(t_k, k, strict=True))
    r = run("temperature", wrong, "--no-plots")
    assert r.exit_code == 3 and "look like kelvin" in r.stderr and "--temp-unit K" in r.stderr
    _assert_params(_doc(wrong, "--temp-unit", "K"), _reference(t_k, k))


@pytest.mark.parametrize("header,per_s", [
    ("k (1/min)", 60.0), ("k per minute", 60.0), ("k (min^-1)", 60.0), ("kobs [min-1]", 60.0),
    ("k (h-1)", 3600.0), ("k_per_s", 1.0), ("k (s⁻¹)", 1.0)])
def test_k_is_converted_to_1_per_s_from_the_unit_its_header_states(tmp_path, header, per_s):
    """Audit: 'k per minute' and 'k (1/min)' were fitted as 1/s: A 1.72e8 for 2.9e6 1/s, dS
    -95.6 for -129.7 J/(mol K) (R ln 60 apart)."""
    t_c, t_k, k, *_ = _eyring_truth()
    f = _write(tmp_path / "k.csv", f"T (C),{header}", zip(t_c, k * per_s, strict=True))
    d = _doc(f)
    _assert_params(d, _reference(t_k, k))
    assert d["results"][0]["params"]["A"]["unit"] == "1/s"
    converted = [w for w in d["warnings"] if "k converted from" in w]
    assert len(converted) == (per_s != 1.0)
    if per_s != 1.0:
        assert f"divided by {per_s:g}" in converted[0]
        assert "converted to 1/s" in run("temperature", f, "--no-plots").stdout


def test_noise_free_eyring_k_in_per_minute_gives_back_dh_and_ds(tmp_path):
    from scipy.constants import R, h
    from scipy.constants import k as kB

    t_k = np.array([288.15, 298.15, 308.15, 318.15])
    k = kB * t_k / h * np.exp(-129.7 / R) * np.exp(-52.4e3 / (R * t_k))   # 1/s, no noise
    d = _doc(_write(tmp_path / "m.csv", "T (K),k (1/min)", zip(t_k, 60 * k, strict=True)))
    ey = d["results"][1]["params"]
    assert ey["dH"]["value"] == pytest.approx(52.4, rel=1e-7)
    assert ey["dS"]["value"] == pytest.approx(-129.7, rel=1e-7)


def test_a_k_header_without_a_unit_is_said_to_be_taken_as_1_per_s(tmp_path):
    t_c, t_k, k, *_ = _eyring_truth()
    f = _write(tmp_path / "k.csv", "T (C),k", zip(t_c, k, strict=True))
    d = _doc(f)
    _assert_params(d, _reference(t_k, k))
    assert d["settings"]["columns"]["k_unit_source"] == "assumed"
    assert any("names no unit of k: taken as 1/s" in w and "A and dS do" in w
               for w in d["warnings"])
    assert "in 1/s (unit assumed: the header names none)" in run("temperature", f).stdout
    r = run("temperature", _write(tmp_path / "x.csv", "T (C),k (AU)", zip(t_c, k, strict=True)))
    assert r.exit_code == 3 and len(r.stderr.strip().splitlines()) == 1
    assert "'AU', which is not a rate-constant unit" in r.stderr


def test_second_order_k_and_its_se_are_converted_to_per_molar_per_second(tmp_path):
    t_c, t_k, k, *_ = _eyring_truth()           # read here as M^-1 s^-1
    rel = np.array([0.02, 0.05, 0.03, 0.08, 0.04, 0.03])
    # mM^-1 min^-1 = 1000 M^-1 / 60 s: k in M^-1 s^-1 is k(mM^-1 min^-1) x 1000 / 60
    f = _write(tmp_path / "k2.csv", "T (C),k (mM^-1 min^-1),se (mM^-1 min^-1)",
               zip(t_c, k * 60 / 1000, rel * k * 60 / 1000, strict=True))
    d = _doc(f)
    _assert_params(d, _reference(t_k, k, w=1 / rel))
    assert d["results"][0]["params"]["A"]["unit"] == "M^-1 s^-1"
    assert d["settings"]["weighting"] == "sd"
    assert any("standard state 1 mol/L" in w for w in d["warnings"])


def test_se_in_another_time_unit_than_k_is_converted_on_its_own(tmp_path):
    t_c, t_k, k, *_ = _eyring_truth()
    rel = np.array([0.02, 0.05, 0.03, 0.08, 0.04, 0.03])
    f = _write(tmp_path / "se.csv", "T (C),k (1/min),se (1/s)",
               zip(t_c, 60 * k, rel * k, strict=True))
    _assert_params(_doc(f), _reference(t_k, k, w=1 / rel))       # weights 1/SE(ln k)
    r = run("temperature", _write(tmp_path / "bad.csv", "T (C),k (1/min),se (M^-1 s^-1)",
                                  zip(t_c, 60 * k, rel * k, strict=True)))
    assert r.exit_code == 3 and "not a unit of k" in r.stderr


# --------------------------------------------------------------------------- SEs and counts


@pytest.mark.parametrize("bad", ["0", "", "-1e-5"])
def test_an_empty_or_zero_se_is_refused_naming_its_rows(tmp_path, bad):
    """Audit: one SE of 0 or blank gave the unweighted fit while the table said 'weights
    1/SE(ln k)^2'."""
    t_c, t_k, k, *_ = _eyring_truth()
    se = [f"{0.03 * x:.6g}" for x in k]
    se[1] = se[3] = bad
    f = tmp_path / "se.csv"
    f.write_text("T (C),k (1/s),se\n" + "".join(f"{t:g},{x:.6g},{s}\n"
                                                 for t, x, s in zip(t_c, k, se, strict=True)))
    r = run("temperature", f, "--no-plots")
    assert r.exit_code == 3 and r.stdout == "" and len(r.stderr.strip().splitlines()) == 1
    assert "in rows 3, 5" in r.stderr and "delete the column 'se'" in r.stderr


def test_weighting_is_the_same_in_table_json_and_fit(tmp_path):
    t_c, t_k, k, *_ = _eyring_truth()
    rel = np.array([0.02, 0.05, 0.03, 0.08, 0.04, 0.03])
    f = _write(tmp_path / "w.csv", "T (C),k (1/s),se", zip(t_c, k, rel * k, strict=True))
    d = _doc(f)
    assert d["settings"]["weighting"] == "sd"
    _assert_params(d, _reference(t_k, k, w=1 / rel))
    assert "SE 'se' (weights 1/SE(ln k)^2)" in run("temperature", f, "--no-plots").stdout
    plain = _write(tmp_path / "p.csv", "T (C),k (1/s)", zip(t_c, k, strict=True))
    assert _doc(plain)["settings"]["weighting"] == "none"
    assert ", unweighted" in run("temperature", plain, "--no-plots").stdout


def test_a_repeated_temperature_is_counted_once(tmp_path):
    """Audit: 7 rate constants at 6 temperatures were reported 'from 7 temperatures'."""
    t_c, t_k, k, *_ = _eyring_truth()
    rows = [*zip(t_c, k, strict=True), (25.0, 1.1 * k[2])]
    f = _write(tmp_path / "d.csv", "T (C),k (1/s)", rows)
    assert "from 7 rate constants at 6 temperatures" in run("temperature", f, "--no-plots").stdout
    d = _doc(f)
    assert d["settings"]["n"] == 7 and d["settings"]["n_temperatures"] == 6
    _assert_params(d, _reference(np.append(t_k, 298.15), np.append(k, 1.1 * k[2])))
    assert "from 6 temperatures" in run("temperature", _write(
        tmp_path / "s.csv", "T (C),k (1/s)", zip(t_c, k, strict=True)), "--no-plots").stdout


def test_a_workbook_sheet_is_chosen_said_and_refused_for_a_csv(tmp_path):
    """--sheet picks the sheet of temperature and saturation tables; without it the first sheet
    with data is read and a warning names it; --sheet on a CSV is refused. Truths: Arrhenius
    Ea = 50 kJ/mol (scipy.constants.R) and Michaelis–Menten Km = 50 uM, Vmax = 10 uM/min."""
    import json

    import openpyxl
    from click.testing import CliRunner
    from scipy import constants

    from rateabs.cli import main

    wb = openpyxl.Workbook()
    wb.active.title = "cover"
    ws = wb.create_sheet("kinetics")
    ws.append(["T (C)", "k (1/s)"])
    for t in (15, 20, 25, 30, 35, 40):
        ws.append([t, 1e6 * np.exp(-50e3 / (constants.R * (t + 273.15)))])
    ws = wb.create_sheet("sat")
    ws.append(["S (uM)", "v (uM/min)"])
    for s in (5, 10, 20, 40, 80, 160, 320):
        ws.append([s, 10 * s / (50 + s)])
    book = tmp_path / "lab.xlsx"
    wb.save(book)
    run = CliRunner().invoke
    doc = json.loads(run(main, ["temperature", str(book), "--format", "json"]).stdout)
    arrhenius = next(r for r in doc["results"] if r["model"] == "arrhenius")
    assert arrhenius["params"]["Ea"]["value"] == pytest.approx(50.0, rel=1e-9)
    assert any("sheet 'kinetics' was read" in w for w in doc["warnings"])
    r = run(main, ["saturation", str(book), "--sheet", "sat", "--model", "mm", "--format", "json"])
    assert r.exit_code == 0, r.output
    assert "Km" in r.stdout and not any("sheets" in w for w in json.loads(r.stdout)["warnings"])
    (tmp_path / "t.csv").write_text("T (C),k (1/s)\n20,0.001\n30,0.002\n40,0.004\n")
    r = run(main, ["temperature", str(tmp_path / "t.csv"), "--sheet", "x"])
    assert r.exit_code == 2 and "--sheet applies to .xlsx workbooks only" in r.output


# --------------------------------------------------------------------------- a physical chemist's
# audit: truth from Arrhenius' and Eyring's equations with CODATA constants (scipy.constants),
# references by scipy.stats.linregress and numpy.polyfit (reference library)


def test_ln_a_is_given_with_the_intercepts_se_and_interval(tmp_path, monkeypatch):
    """Only A was printed, as '2.36e+10 ± 4.2e+09', an SE that means little for a quantity
    whose interval is exp of a symmetric one. ln A (the intercept) is now given with its SE and
    interval, equal to scipy.stats.linregress's intercept and intercept_stderr (t interval,
    scipy.stats.t); A keeps the mapped interval without a ±; the figure's title gives ln A."""
    from scipy import stats

    from rateabs.options import TemperatureOptions
    from rateabs.plots.laws import arrhenius_plot
    from rateabs.views.temperature import compute_temperature

    t_c, t_k, k, *_ = _eyring_truth()
    f = _write(tmp_path / "k.csv", "T (C),k (1/s)", zip(t_c, k, strict=True))
    lnA = _doc(f)["results"][0]["params"]["lnA"]
    ref = stats.linregress(1 / t_k, np.log(k))
    half = stats.t.ppf(0.975, t_k.size - 2) * ref.intercept_stderr
    assert lnA["value"] == pytest.approx(ref.intercept, rel=1e-9)
    assert lnA["se"] == pytest.approx(ref.intercept_stderr, rel=1e-6)
    assert lnA["ci_low"] == pytest.approx(ref.intercept - half, rel=1e-6)
    assert lnA["ci_high"] == pytest.approx(ref.intercept + half, rel=1e-6)
    table = run("temperature", f, "--no-plots").stdout
    row = next(ln for ln in table.splitlines() if ln.startswith("ln A "))
    assert f"{ref.intercept:.2f}" in row and "ln of A in 1/s" in row
    a_row = next(ln for ln in table.splitlines() if ln.startswith("A "))
    assert "±" not in a_row and "(see ln A)" in a_row
    figs = _captured(monkeypatch)
    arrhenius_plot(compute_temperature(TemperatureOptions(str(f))).analysis, tmp_path / "a.png")
    assert "ln A = " in figs[0].axes[0].get_title()


def test_eyring_states_its_assumptions_and_the_standard_state_of_a_second_order_k(
        tmp_path, monkeypatch):
    """A second-order k makes dS depend on the standard-state concentration (k = (kB T/h)
    (c°)^-1 exp(dS/R) exp(-dH/(R T)), c° = 1 mol/L; Eyring 1935): the head of the table and
    the settings now state it with the transmission coefficient, and the Eyring figure's axis
    carries k's unit (it read ln((k/T) / (1/(s K))) for k in M^-1 s^-1)."""
    from rateabs.options import TemperatureOptions
    from rateabs.plots.laws import arrhenius_plot
    from rateabs.views.temperature import compute_temperature

    t_c, t_k, k, *_ = _eyring_truth()
    second = _write(tmp_path / "k2.csv", "T (C),k (L mol^-1 s^-1)", zip(t_c, k, strict=True))
    first = _write(tmp_path / "k1.csv", "T (C),k (1/s)", zip(t_c, k, strict=True))
    d2, d1 = _doc(second), _doc(first)
    _assert_params(d2, _reference(t_k, k))          # the same numbers, M^-1 s^-1 as a number
    assert d2["settings"]["eyring"] == {"transmission_coefficient": 1.0,
                                        "standard_state_mol_per_L": 1.0}
    assert d2["results"][1]["standard_state_mol_per_L"] == 1.0
    assert d1["settings"]["eyring"]["standard_state_mol_per_L"] is None
    head2 = run("temperature", second, "--no-plots").stdout.splitlines()[2]
    assert "transmission coefficient 1" in head2 and "c° = 1 mol/L" in head2
    assert "c°" not in run("temperature", first, "--no-plots").stdout
    figs = _captured(monkeypatch)
    arrhenius_plot(compute_temperature(TemperatureOptions(str(second))).analysis,
                   tmp_path / "a.png")
    assert figs[0].axes[1].get_ylabel() == "ln((k/T) / (M^-1 s^-1 K^-1))"


@pytest.mark.parametrize("t_header,k_header,in_kelvin,to_base", [
    ("T/K", "k/s-1", True, 1.0),                       # quantity calculus (IUPAC Green Book)
    ("θ/°C", "k/min-1", False, 1 / 60),
    ("T (K)", "k (dm3 mol-1 s-1)", True, 1.0),         # 1 dm3 = 1 L
    ("T (K)", "k (cm3 mol-1 s-1)", True, 1e-3),        # 1 cm3 = 1 mL
    ("T (K)", "k (M−1 s−1)", True, 1.0),               # U+2212, the minus sign
    ("T (K)", "k (10^-3 s^-1)", True, 1e-3),           # values in units of 10^-3 s^-1
    ("T (K)", "k (10⁻³ s⁻¹)", True, 1e-3)])
def test_table_headers_as_physical_chemists_write_them_are_read(tmp_path, t_header, k_header,
                                                                 in_kelvin, to_base):
    """'T/K' and 'θ/°C' found no temperature column; 'k/s-1', 'dm3 mol-1 s-1', 'M−1 s−1' and
    'k (10^-3 s^-1)' were refused as 'not a rate-constant unit'. Each now gives the numbers
    numpy.polyfit gives for k in 1/s or M^-1 s^-1 (hand conversion: to_base)."""
    t_c, t_k, k, *_ = _eyring_truth()
    temps = t_k if in_kelvin else t_c
    f = _write(tmp_path / "q.csv", f"{t_header},{k_header}", zip(temps, k / to_base,
                                                                  strict=True))
    _assert_params(_doc(f), _reference(t_k, k))


@pytest.mark.parametrize("unit,order", [("M/s", "zero"), ("mol L^-1 min^-1", "zero"),
                                        ("M^-2 s^-1", "third")])
def test_a_zero_or_third_order_k_is_refused_as_such(tmp_path, unit, order):
    """'k (M/s)' was refused as 'not a rate-constant unit', which it is; the line now says
    which order its unit belongs to and what the command takes."""
    t_c, _, k, *_ = _eyring_truth()
    r = run("temperature", _write(tmp_path / "z.csv", f"T (C),k ({unit})",
                                  zip(t_c, k, strict=True)))
    assert r.exit_code == 3 and len(r.stderr.strip().splitlines()) == 1
    assert f"the unit of a {order}-order rate constant" in r.stderr and "M^-1 s^-1" in r.stderr


def test_one_rate_constant_off_the_line_is_named_with_ea_without_it(tmp_path):
    """One k three times too large (row 5, 30 C) moved Ea without a word. Now the warning names
    the row, the factor (3.0 against the line through the others) and Ea without it, equal to
    numpy.polyfit of the other five; the fit itself keeps every point. A straight set is not
    flagged."""
    t_c, t_k, k, *_ = _eyring_truth()
    bad = k.copy()
    bad[3] *= 3
    d = _doc(_write(tmp_path / "o.csv", "T (C),k (1/s)", zip(t_c, bad, strict=True)))
    out = d["results"][0]["checks"]["outlier"]
    keep = np.arange(t_c.size) != 3
    ref = _reference(t_k[keep], k[keep])["Ea"]
    assert out["row"] == 5 and out["Ea_without_kJ_per_mol"] == pytest.approx(ref, rel=1e-6)
    assert out["k_over_line"] == pytest.approx(3.0, rel=0.1)
    said = next(w for w in d["warnings"] if "lies off the Arrhenius line" in w)
    assert said.startswith("row 5 (30.0 C)") and "it is kept in the fit" in said
    _assert_params(d, _reference(t_k, bad))
    clean = _doc(_write(tmp_path / "c.csv", "T (C),k (1/s)", zip(t_c, k, strict=True)))
    assert clean["results"][0]["checks"]["outlier"] is None


def test_a_curved_arrhenius_plot_is_said_with_ea_at_each_end(tmp_path):
    """Two parallel paths, k = A1 exp(-Ea1/RT) + A2 exp(-Ea2/RT) with 40 and 120 kJ/mol at
    0-90 C (hand calculation; the apparent Ea rises from about 40 to 118 kJ/mol), gave one Ea,
    71 kJ/mol, without a word. The F-test of a (1/T)^2 term now finds the curve, and Ea over
    the lower and the upper half of the temperatures equals numpy.polyfit of those halves. A
    straight set is not called curved."""
    from scipy.constants import R

    t_k = np.linspace(0, 90, 10) + 273.15
    k = 1e4 * np.exp(-40e3 / (R * t_k)) + 1e17 * np.exp(-120e3 / (R * t_k))
    k = k * np.exp(np.random.default_rng(3).normal(0, 0.01, t_k.size))
    d = _doc(_write(tmp_path / "c.csv", "T (K),k (1/s)", zip(t_k, k, strict=True)))
    cv = d["results"][0]["checks"]["curvature"]
    assert cv["p"] < 1e-3
    for half, idx in (("lower", slice(0, 5)), ("upper", slice(5, 10))):
        ref = -np.polyfit(1 / t_k[idx], np.log(k[idx]), 1)[0] * R / 1000
        assert cv[half]["Ea_kJ_per_mol"] == pytest.approx(ref, rel=1e-6)
    assert cv["lower"]["Ea_kJ_per_mol"] < 60 < 90 < cv["upper"]["Ea_kJ_per_mol"]
    assert any("the Arrhenius plot is curved" in w for w in d["warnings"])
    t_c, t_k6, k6, *_ = _eyring_truth()
    straight = _doc(_write(tmp_path / "s.csv", "T (C),k (1/s)", zip(t_c, k6, strict=True)))
    assert not any("curved" in w for w in straight["warnings"])


def test_a_narrow_temperature_range_is_said(tmp_path):
    """24-26 C: Ea 79 ± 8 kJ/mol and A over nine decades were printed without a word. The
    warning gives the span (2 K) and how far beyond the data ln A is read: mean(1/T) /
    span(1/T) = 149 (hand calculation); a 25 K span is not flagged."""
    from scipy.constants import R

    t_k = np.array([24.0, 24.5, 25, 25.5, 26]) + 273.15
    k = 3e10 * np.exp(-75e3 / (R * t_k)) * np.exp(np.random.default_rng(4).normal(0, .03, 5))
    d = _doc(_write(tmp_path / "n.csv", "T (K),k (1/s)", zip(t_k, k, strict=True)))
    said = next(w for w in d["warnings"] if "temperatures span only" in w)
    far = np.mean(1 / t_k) / (1 / t_k.min() - 1 / t_k.max())
    assert "only 2 K" in said and f"{far:.3g} times" in said
    assert d["results"][0]["checks"]["span_K"] == pytest.approx(2.0)
    t_c, _, k6, *_ = _eyring_truth()
    wide = _doc(_write(tmp_path / "w.csv", "T (C),k (1/s)", zip(t_c, k6, strict=True)))
    assert not any("span only" in w for w in wide["warnings"])
