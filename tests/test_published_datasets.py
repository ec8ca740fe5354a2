"""rateabs against published and open datasets with their published fits (tests/data/README.md).

Every check names its source and the tolerance it allows, with the reason for it.
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import H_PLANCK, K_B, R_GAS, v_competitive, v_noncompetitive, v_uncompetitive
from scipy import optimize, stats

from rateabs.cli import main
from rateabs.fitting import fit
from rateabs.models import RATE_LAWS, SATURATION
from rateabs.ratelaws import fit_trace
from rateabs.saturation import SaturationData, analyse

DATA = Path(__file__).parent / "data"


def _columns(name):
    return np.loadtxt(DATA / name, delimiter=",", comments="#", skiprows=2, unpack=True)


# --------------------------------------------------------------------------- dose response


# published: drc reference manual, example of dataset `ryegrass` (Inderjit, Streibig &
# Olofsdotter 2002), four-parameter log-logistic f(x) = c + (d - c)/(1 + exp(b (ln x - ln e))):
#   b 2.98222 (SE 0.46506), c 0.48141 (0.21219), d 7.79296 (0.18857), e 3.05795 (0.18573);
#   residual standard error 0.5196256 on 20 degrees of freedom.
# In rateabs's parameterisation v = v_floor + (v_free - v_floor)/(1 + (I/IC50)^n):
#   (x/e)^b = exp(b (ln x - ln e)), so v_free = d, v_floor = c, IC50 = e, n = b.
RYEGRASS_LL4 = {"v_free": (7.79296, 0.18857), "v_floor": (0.48141, 0.21219),
                "IC50": (3.05795, 0.18573), "n": (2.98222, 0.46506)}


def _rss_hessian_se(model, x, y, values, names):
    """SEs from the full Hessian of the RSS (observed information) by central differences:
    cov = 2 s^2 H^-1, the estimator drc reports."""
    p = np.array([values[n] for n in names])

    def rss(q):
        return float(np.sum((y - model.func(x, *q)) ** 2))

    h = 1e-4 * np.abs(p)
    k = p.size
    H = np.zeros((k, k))
    for i in range(k):
        for j in range(k):
            ei, ej = np.eye(k)[i] * h[i], np.eye(k)[j] * h[j]
            H[i, j] = (rss(p + ei + ej) - rss(p + ei - ej) - rss(p - ei + ej)
                       + rss(p - ei - ej)) / (4 * h[i] * h[j])
    s2 = rss(p) / (y.size - k)
    return dict(zip(names, np.sqrt(np.diag(2 * s2 * np.linalg.inv(H))), strict=True))


def test_ryegrass_ic50_matches_the_published_log_logistic_fit():
    conc, root = _columns("ryegrass_ferulic_acid.csv")
    r = fit(SATURATION["ic50"], conc, root)
    assert r.success and r.dof == 20
    assert r.sigma == pytest.approx(0.5196256, abs=5e-7)          # to the published digits
    for name, (value, se) in RYEGRASS_LL4.items():
        # drc prints 5 decimals; two optimisers stopping on the same flat minimum differ in the
        # last one by at most 1 (here IC50 3.0579552 vs 3.05795)
        assert r.params[name].value == pytest.approx(value, abs=1e-5), name
        # rateabs's SEs come from J'J (Gauss-Newton, as in Bates & Watts 1988); drc's from the
        # full Hessian of the RSS. The full Hessian at our optimum reproduces drc's SEs to the
        # printed digits, so the two fits agree; J'J differs by the residual-curvature term,
        # here 0.1 to 1.5 %, so it is held to 3 %.
        assert r.params[name].se == pytest.approx(se, rel=0.03), name
    full = _rss_hessian_se(SATURATION["ic50"], conc, root, r.values(), SATURATION["ic50"].params)
    for name, (_, se) in RYEGRASS_LL4.items():
        assert full[name] == pytest.approx(se, abs=1.5e-5), name


def test_ryegrass_through_the_cli(tmp_path):
    r = CliRunner().invoke(main, ["saturation", str(DATA / "ryegrass_ferulic_acid.csv"),
                                  "--model", "ic50", "--inhibitor", "ferulic_acid_mM", "--rate",
                                  "root_length_cm", "--format", "json", "--no-plots"])
    assert r.exit_code == 0, r.output
    p = json.loads(r.stdout)["results"][0]["params"]
    assert p["IC50"]["value"] == pytest.approx(3.05795, abs=1e-5)
    assert p["IC50"]["unit"] == "mM"
    assert p["IC50"]["ci_low"] < 3.05795 < p["IC50"]["ci_high"]


# --------------------------------------------------------------------------- inhibition


def test_vmkmki_inhibition_fits_equal_scipy_curve_fit():
    # open dataset: nlstools `vmkmki` (INRA UMR1233). The nlstools manual fits its competitive
    # model v = S/(S + Km (1 + I/Ki)) Vmax but prints no estimates, so the reference here is
    # scipy.optimize.curve_fit (reference library) on the Cornish-Bowden equations typed in
    # tests/kinetics_truth.py. Both minimise the same RSS with a J'J covariance. Km and Ki of
    # the competitive fit lie along a flat valley (correlation 0.9), where two optimisers stop
    # a little apart: values agree to 1e-3 of their SE, SEs to 1e-3 and the RSS to 1e-8.
    s, i, v = _columns("vmkmki_inhibition.csv")
    typed = {"competitive": v_competitive, "uncompetitive": v_uncompetitive,
             "noncompetitive": v_noncompetitive}
    a = analyse(SaturationData(s, v, i, None, "", "", "", {}))
    rss = {}
    for mode, f in typed.items():
        popt, pcov = optimize.curve_fit(lambda x, V, Km, K, f=f: f(x[0], x[1], V, Km, K),
                                        np.vstack([s, i]), v, p0=[20, 20, 20])
        r = a.fits[mode]
        got = np.array([r.params[n].value for n in ("Vmax", "Km", "Ki")])
        se = np.sqrt(np.diag(pcov))
        assert np.all(np.abs(got - popt) < 1e-3 * se), (mode, got, popt)
        np.testing.assert_allclose([r.params[n].se for n in ("Vmax", "Km", "Ki")], se, rtol=1e-3)
        rss[mode] = float(np.sum((v - f(s, i, *popt)) ** 2))
        assert r.rss == pytest.approx(rss[mode], rel=1e-8)
    # the three modes have the same number of parameters, so AICc ranks them as RSS does:
    # these data are described best as uncompetitive (RSS 42.1 vs 55.0 and 177.3)
    assert a.chosen == min(rss, key=rss.get) == "uncompetitive"


# --------------------------------------------------------------------------- Hill

def _severinghaus_saturation(p_mmhg):
    """Human blood O2 saturation (fraction) at pO2 in mmHg, pH 7.40, 37 °C: the standard
    dissociation curve of Severinghaus (1979), J Appl Physiol 46:599-602, equation 1,
    S = 1 / (23400 / (P^3 + 150 P) + 1), typed from the paper."""
    return 1.0 / (23400.0 / (p_mmhg ** 3 + 150.0 * p_mmhg) + 1.0)


def test_hill_fit_of_the_standard_oxygen_dissociation_curve():
    # published: the standard human P50 is 26.8 mmHg (Severinghaus 1979; Dash, Korman &
    # Bassingthwaighte 2016, Eur J Appl Physiol 116:97, Table 1), and the Hill coefficient at
    # P50 is n = 2.82 - 1.20 * 10^(-P50/29.25) = 2.67 (Dash et al. 2016, Table 1, their fit of
    # a Hill equation with pO2-dependent n to the same standard curve).
    p = np.arange(15.0, 45.5, 1.0)        # saturations 25 % to 82 %, around P50
    sat = 100.0 * _severinghaus_saturation(p)
    r = fit(SATURATION["hill"], p, sat, fix={"Vmax": 100.0})
    assert r.success
    # a constant-n Hill equation approximates the curve over 15-45 mmHg to within 1.4 %
    # saturation, so P50 is held to the published one decimal (± 0.3 mmHg) and n to ± 0.1
    assert np.max(np.abs(sat - SATURATION["hill"].func(p, **r.values()))) < 1.5
    assert r.params["S50"].value == pytest.approx(26.8, abs=0.3)
    n_at_p50 = 2.82 - 1.20 * 10 ** (-26.8 / 29.25)
    assert n_at_p50 == pytest.approx(2.67, abs=0.005)
    assert r.params["n"].value == pytest.approx(n_at_p50, abs=0.1)
    # the same fit with a wrong model family (no cooperativity, n = 1) misses by far
    r1 = fit(SATURATION["hill"], p, sat, fix={"Vmax": 100.0, "n": 1.0})
    assert r1.rss > 100 * r.rss


# --------------------------------------------------------------------------- NIST BoxBOD

# published: NIST StRD, BoxBOD, certified values (11 significant digits)
BOXBOD = {"Ainf": (2.1380940889e02, 1.2354515176e01), "k": (5.4723748542e-01, 1.0455993237e-01)}
BOXBOD_RSS = 1.1680088766e03


@pytest.mark.parametrize("start", [{"Ainf": 1.0, "k": 1.0}, {"Ainf": 100.0, "k": 0.75}],
                         ids=["start1", "start2"])
def test_boxbod_from_the_nist_starting_values(start):
    # y = b1 (1 - exp(-b2 x)) is the first-order law A = Ainf + (A0 - Ainf) exp(-k t) with
    # A0 = 0: b1 = Ainf, b2 = k. By default the solver stops on BoxBOD's flat valley at about
    # 8 significant digits; asked for tol=1e-13 the engine polishes the optimum (Gauss-Newton,
    # Richardson-extrapolated Jacobian) and reproduces every certified digit, from both starts.
    x, y = _columns("boxbod_nist.csv")
    r = fit(RATE_LAWS["1"], x, y, fix={"A0": 0.0}, p0=start)
    assert r.success
    for name, (value, sd) in BOXBOD.items():
        assert r.params[name].value == pytest.approx(value, rel=1e-8), name
        assert r.params[name].se == pytest.approx(sd, rel=1e-8), name
    tight = fit(RATE_LAWS["1"], x, y, fix={"A0": 0.0}, p0=start, tol=1e-13)
    for name, (value, sd) in BOXBOD.items():          # 11 significant digits, as certified
        assert f"{tight.params[name].value:.10e}" == f"{value:.10e}", name
        assert f"{tight.params[name].se:.10e}" == f"{sd:.10e}", name
    assert f"{tight.rss:.10e}" == f"{BOXBOD_RSS:.10e}"
    assert r.dof == tight.dof == 4


# --------------------------------------------------------------------------- second order


def test_butadiene_dimerization_is_second_order_as_the_textbook_concludes():
    # published: OpenStax, Chemistry: Atoms First (2016), p. 916: ln[C4H6] vs t is curved and
    # 1/[C4H6] vs t is straight, so the dimerization is second order. rateabs, given the
    # concentrations with the end value 0 (the dimer does not absorb here), chooses order 2.
    t, c = _columns("butadiene_dimerization.csv")
    law = fit_trace(t, c, fix={"Ainf": 0.0})
    assert law.order == "2"
    rows = {row["model"]: row["delta_aicc"] for row in law.comparison.rows}
    assert rows["1"] > 10 and rows["0"] > 10            # decisive against orders 1 and 0
    # the book's graphical method is the slope of 1/[A] vs t (scipy.stats.linregress, reference
    # library): the two estimates weight the same five points differently and agree within
    # 3 combined SEs
    k = law.fit.params["k"]
    lr = stats.linregress(t, 1 / c)
    assert abs(k.value - lr.slope) < 3 * math.hypot(k.se, lr.stderr)
    assert k.value == pytest.approx(0.0615, abs=0.0002)          # L mol^-1 s^-1
    # half-life of a second-order loss, 1/(k [A]0) (Atkins)
    assert law.half_life.value == pytest.approx(1 / (k.value * 1.00e-2), rel=1e-3)


def test_second_order_worked_example():
    # published (from memory): OpenStax Chemistry 2e, section 12.4, worked example: butadiene,
    # second order with k = 5.76e-2 L mol^-1 min^-1 and [C4H6]0 = 0.200 M; after 10.0 min
    # 1/[A] = 1/0.200 + 5.76e-2 x 10.0 = 5.576, [A] = 0.179 M. The package's integrated law
    # with the end value 0: A = Ainf + d/(1 + k d t), d = A0 - Ainf.
    assert RATE_LAWS["2"].func(10.0, 0.200, 0.0, 5.76e-2) == pytest.approx(0.179, abs=5e-4)


# --------------------------------------------------------------------------- Eyring, Arrhenius

# published: Lente, Fabian & Poe (2005), New J. Chem. 29:759, Supplementary Information: the
# linearised Eyring equation ln(k/T) = ln(kB/h) + dS/R - dH/(R T), unweighted, gives
# dH = 120.27 +- 0.15 kJ/mol and dS = 11.33 +- 0.45 J mol^-1 K^-1 (standard state 1 M).
LENTE_DH = (120.27, 0.15)
LENTE_DS = (11.33, 0.45)


def test_dithionate_eyring_parameters_as_published():
    r = CliRunner().invoke(main, ["temperature", str(DATA / "dithionate_eyring.csv"),
                                  "--format", "json", "--no-plots"])
    assert r.exit_code == 0, r.output
    doc = json.loads(r.stdout)
    arr, ey = doc["results"][0]["params"], doc["results"][1]["params"]
    assert doc["settings"]["columns"]["temp_unit"] == "C"         # 50.0 C -> 323.15 K
    assert round(ey["dH"]["value"], 2) == LENTE_DH[0] and round(ey["dH"]["se"], 2) == LENTE_DH[1]
    assert round(ey["dS"]["value"], 2) == LENTE_DS[0] and round(ey["dS"]["se"], 2) == LENTE_DS[1]
    # k here is in M^-1 s^-1: the output says dS refers to the standard state 1 mol/L
    assert any("standard state 1 mol/L" in w for w in doc["warnings"])
    # Arrhenius parameters from the published Eyring ones (Atkins, Physical Chemistry, for a
    # reaction in solution; from memory): Ea = dH + R Tm and A = e (kB Tm/h) exp(dS/R), Tm the
    # inverted mean of 1/T. The published dS carries +-0.005 (0.06 % in A) and the two lines
    # differ by ln T, curved over 323-363 K; allow 0.2 % in A and 0.02 kJ/mol in Ea.
    T = _columns("dithionate_eyring.csv")[0] + 273.15
    tm = 1 / np.mean(1 / T)
    assert arr["Ea"]["value"] == pytest.approx(LENTE_DH[0] + R_GAS * tm / 1000, abs=0.02)
    a_published = math.e * K_B * tm / H_PLANCK * math.exp(LENTE_DS[0] / R_GAS)
    assert arr["A"]["value"] == pytest.approx(a_published, rel=2e-3)    # 7.58e13 M^-1 s^-1
    assert arr["A"]["unit"] == "M^-1 s^-1"
    # Arrhenius A and Ea as numbers against scipy.stats.linregress of ln k on 1/T (reference
    # library) and scipy.constants.R: the same unweighted line
    T_K, k = T, _columns("dithionate_eyring.csv")[1]
    lr = stats.linregress(1 / T_K, np.log(k))
    assert arr["A"]["value"] == pytest.approx(math.exp(lr.intercept), rel=1e-9)
    assert arr["Ea"]["value"] == pytest.approx(-lr.slope * R_GAS / 1000, rel=1e-9)


# published: the same Supplementary Information fits the untransformed Eyring equation,
# k = (kB T/h) exp(dS/R) exp(-dH/(R T)) (Eyring 1935, J. Chem. Phys. 3:107), by nonlinear least
# squares: "Eq. (1), no weighing" dH = 118.80 +- 0.41 kJ/mol, dS = 7.2 +- 1.1 J/(mol K);
# "Eq. (1), proportional weighing" (weights 1/k^2) dH = 120.27 +- 0.16, dS = 11.33 +- 0.46.
LENTE_EQ1 = {"none": {"dH": (118.80, 0.41), "dS": (7.2, 1.1)},
             "relative": {"dH": (120.27, 0.16), "dS": (11.33, 0.46)}}


@pytest.mark.parametrize("weighting", ["none", "relative"])
def test_dithionate_untransformed_eyring_through_the_engine(weighting):
    # the Eyring equation typed here with the exact SI constants (tests/kinetics_truth.py) and
    # fitted by the shared engine; relative weighting is the paper's proportional weighting.
    # Values agree to every published digit. The published SEs are 3-7 % larger than the
    # engine's J'J ones (0.39 vs 0.41, 0.153 vs 0.16, 0.446 vs 0.46): the paper does not say
    # how its SEs were computed, so they are held to 8 %.
    from rateabs.models import Model

    T = _columns("dithionate_eyring.csv")[0] + 273.15
    k = _columns("dithionate_eyring.csv")[1]

    def eyring(T, dH, dS):
        return K_B * T / H_PLANCK * np.exp(dS / R_GAS) * np.exp(-dH * 1e3 / (R_GAS * T))

    r = fit(Model("eyring", eyring, ("dH", "dS"), lambda x, y: {"dH": 100.0, "dS": 0.0}), T, k,
            weighting=weighting)
    for name, (value, se) in LENTE_EQ1[weighting].items():
        digits = 1 if name == "dS" and weighting == "none" else 2
        assert round(r.params[name].value, digits) == value, name
        assert r.params[name].se == pytest.approx(se, rel=0.08), name
