"""Photometry and units against published definitions (see shared references)."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from rateabs import photometry as ph
from rateabs import units
from rateabs.errors import UnitError, UsageError


# published: IUPAC Compendium of Chemical Terminology, "absorbance": A = -log10(T)
def test_iupac_absorbance_from_transmittance():
    assert ph.absorbance_from_transmittance(0.10) == pytest.approx(1.000, abs=1e-12)
    assert ph.absorbance_from_percent_t(50.0) == pytest.approx(0.30103, abs=5e-6)
    assert ph.absorbance_from_intensity(25.0, 100.0) == pytest.approx(math.log10(4))


def test_nonpositive_transmittance_is_nan_not_a_number():
    assert np.isnan(ph.absorbance_from_transmittance(0.0))
    assert np.isnan(ph.absorbance_from_transmittance(-0.1))


# mathematical identity: ln x = 2.302585 * log10 x
def test_ln10_factor():
    assert ph.LN10 == pytest.approx(2.302585, abs=1e-6)


# published: IUPAC Compendium, "molar absorption coefficient": A = eps * b * c
def test_beer_lambert_both_ways():
    c = ph.concentration(0.622, 6220, 1.0)
    assert c == pytest.approx(1e-4)
    assert ph.absorbance(c, 6220, 1.0) == pytest.approx(0.622)
    assert ph.transmittance_from_absorbance(1.0) == pytest.approx(0.1)


# published: Horecker & Kornberg (1948) NADH 6220 at 340 nm; Riddles, Blakeley & Zerner (1979)
# TNB 14150 at 412 nm (both from memory, as in the shared references)
def test_chromophore_table():
    assert ph.chromophore("NADH").epsilon == 6220
    assert ph.chromophore("nadph").wavelength_nm == 340
    assert ph.chromophore("TNB").epsilon == 14150
    assert 18000 <= ph.chromophore("pnp").epsilon <= 18500   # common practice, from memory
    for c in ph.CHROMOPHORES.values():
        assert c.source and c.note
    with pytest.raises(UsageError):
        ph.chromophore("unobtainium")


@pytest.mark.parametrize("text,expected", [
    ("6220", 6220.0), ("6220 M^-1 cm^-1", 6220.0), ("6.22 mM^-1 cm^-1", 6220.0),
    ("6,22 mM^-1 cm^-1", 6220.0), ("6220 L/(mol*cm)", 6220.0), ("6.22 /mM/cm", 6220.0),
])
def test_epsilon_units(text, expected):
    assert units.parse_epsilon(text) == pytest.approx(expected)


@pytest.mark.parametrize("text,expected", [("1", 1.0), ("1 cm", 1.0), ("10 mm", 1.0),
                                           ("0.5cm", 0.5)])
def test_pathlength_units(text, expected):
    assert units.parse_pathlength(text) == pytest.approx(expected)


def test_other_units():
    assert units.parse_time("2 min") == 120.0
    assert units.parse_time("1.5 h") == 5400.0
    assert units.parse_time("30") == 30.0
    assert units.parse_volume("200 uL") == pytest.approx(200e-6)
    assert units.parse_volume("1 mL") == pytest.approx(1e-3)
    assert units.parse_volume("50 µl") == pytest.approx(50e-6)
    assert units.parse_concentration("50 uM") == pytest.approx(50e-6)
    assert units.parse_concentration("1 mM") == pytest.approx(1e-3)
    assert units.parse_concentration("2 mmol/L") == pytest.approx(2e-3)
    assert units.parse_temperature("25 C") == pytest.approx(298.15)
    assert units.parse_temperature("25 °C") == pytest.approx(298.15)
    assert units.parse_temperature("310 K") == 310
    assert units.parse_mass_concentration("0.5 mg/mL") == pytest.approx(0.5)
    assert units.parse_mass_concentration("200 ug/mL") == pytest.approx(0.2)
    assert units.parse_mass_concentration("1 g/L") == pytest.approx(1.0)


@pytest.mark.parametrize("fn,text", [
    (units.parse_epsilon, "6220 furlongs"), (units.parse_time, "3 fortnights"),
    (units.parse_volume, "abc"), (units.parse_temperature, "-300 C"),
    (units.parse_pathlength, "0 cm"), (units.parse_epsilon, "-5"),
])
def test_bad_quantities_say_what_to_write(fn, text):
    with pytest.raises(UnitError) as e:
        fn(text)
    assert "e.g." in str(e.value)


# hand geometry: 200 uL in a cylinder of 0.32 cm2 bottom area stands 0.2 cm3/0.32 cm2 = 0.625 cm
def test_pathlength_from_volume_by_hand_geometry():
    assert ph.pathlength_from_volume("200 uL", 96) == pytest.approx(0.2 / 0.32)
    assert ph.pathlength_from_volume(50e-6, 384) == pytest.approx(0.05 / 0.10)
    r = 0.35  # cm, a well 7 mm across
    assert ph.pathlength_from_volume("100 uL", bottom_area_cm2=math.pi * r**2) == pytest.approx(
        0.1 / (math.pi * r**2))
    with pytest.raises(UsageError):
        ph.pathlength_from_volume("100 uL", 1536)


# common practice (from memory): water A977 - A900 is about 0.18 per cm
def test_pathlength_from_water_peak():
    assert ph.pathlength_from_water_peak(0.14, 0.05) == pytest.approx(0.5)
    with pytest.raises(UsageError):
        ph.pathlength_from_water_peak(0.05, 0.06)


def test_resolve_epsilon():
    assert ph.resolve_epsilon(None, "NADH") == 6220
    assert ph.resolve_epsilon("14.15 mM^-1 cm^-1", None) == pytest.approx(14150)
    assert ph.resolve_epsilon(None, None) is None
    with pytest.raises(UsageError):
        ph.resolve_epsilon("6220", "NADH")


# property-based round trips of the conversions (hypothesis)


@given(st.floats(1e-6, 1.0))
def test_transmittance_round_trip(t):
    assert ph.transmittance_from_absorbance(ph.absorbance_from_transmittance(t)) == \
        pytest.approx(t, rel=1e-12)
    assert ph.absorbance_from_percent_t(100 * t) == pytest.approx(
        float(ph.absorbance_from_transmittance(t)), abs=1e-12)


@given(st.floats(1e-9, 1e-2), st.floats(10, 1e5), st.floats(0.01, 10))
def test_beer_lambert_round_trip(c, eps, b):
    assert ph.concentration(ph.absorbance(c, eps, b), eps, b) == pytest.approx(c, rel=1e-12)


@given(st.floats(1e-3, 1e4, allow_nan=False), st.sampled_from(
    [("s", 1), ("min", 60), ("h", 3600), ("ms", 1e-3)]))
def test_time_units_scale(x, unit):
    name, factor = unit
    assert units.parse_time(f"{x!r} {name}") == pytest.approx(x * factor, rel=1e-12)


@given(st.floats(1e-3, 1e4), st.sampled_from([("M", 1), ("mM", 1e-3), ("uM", 1e-6),
                                             ("nM", 1e-9), ("µM", 1e-6)]))
def test_concentration_units_scale(x, unit):
    name, factor = unit
    assert units.parse_concentration(f"{x!r} {name}") == pytest.approx(x * factor, rel=1e-12)


@given(st.floats(1, 1e5))
def test_epsilon_spellings_agree(x):
    a = units.parse_epsilon(f"{x!r} M^-1 cm^-1")
    assert units.parse_epsilon(f"{x / 1000!r} mM^-1 cm^-1") == pytest.approx(a, rel=1e-12)
    assert units.parse_epsilon(f"{x!r} L/(mol*cm)") == pytest.approx(a, rel=1e-12)


#: SI prefixes (BIPM, SI Brochure, 9th edition 2019, table 7) a concentration is written with.
SI = {"": 1.0, "m": 1e-3, "u": 1e-6, "µ": 1e-6, "n": 1e-9}
#: Ways molar absorptivity is written: each a template of the concentration prefix p (of M, or
#: of mol with the litre prefix q) and separator s, with the exponents (L, mol) it stands for.
EPSILON_FORMS = ["{p}M^-1{s}cm^-1", "{p}M-1{s}cm-1", "{p}M⁻¹{s}cm⁻¹", "cm-1{s}{p}M-1",
                 "1/({p}M{s}cm)", "/{p}M/cm", "{q}L{s}{p}mol-1{s}cm-1", "{q}L/({p}mol{s}cm)",
                 "{q}L/({p}mol*cm)", "{q}L{s}{p}mol^-1{s}cm^-1", "{q}L/{p}mol/cm"]


@given(st.floats(1e-3, 1e6), st.sampled_from(EPSILON_FORMS), st.sampled_from(sorted(SI)),
       st.sampled_from(["", "m"]), st.sampled_from([" ", "", "*", "·", "  "]))
def test_every_common_spelling_of_molar_absorptivity_is_read(x, form, p, q, s):
    unit = form.format(p=p, q=q if "{q}" in form else "", s=s)
    # by hand: x (q L) / (p mol cm) = x q / p L mol^-1 cm^-1 (M is mol/L: no litre prefix)
    expected = x * (SI[q] if "{q}" in form else 1.0) / SI[p]
    assert units.parse_epsilon(f"{x!r} {unit}") == pytest.approx(expected, rel=1e-12), unit


@given(st.text(alphabet="LlMmolcu^-1/()* ·⁻¹kn.", max_size=14))
def test_an_epsilon_unit_is_read_or_refused_in_words_never_crashes(unit):
    f = units.epsilon_factor(unit)
    assert f is None or f > 0
    if f is None and unit.strip():
        with pytest.raises(UnitError):
            units.parse_epsilon(f"6220 {unit}")


@pytest.mark.parametrize("unit", ["M^-1", "L/mol", "cm", "mM", "M cm", "L/(mol cm",
                                  "mm^-1 cm^-1"])
def test_what_is_not_a_molar_absorptivity_is_refused(unit):
    with pytest.raises(UnitError):
        units.parse_epsilon(f"6220 {unit}")


def test_an_implausibly_small_epsilon_names_the_likely_slip():
    # molar absorptivities of chromophores for rates are in the thousands (common practice)
    assert ph.epsilon_doubt(6220) is None and ph.epsilon_doubt(None) is None
    said = ph.epsilon_doubt(6.22)
    assert "6.22 looks like mM^-1 cm^-1" in said and "'6.22 mM^-1 cm^-1' or 6220" in said


def test_an_intensity_ratio_beyond_floating_point_is_no_reading_and_no_warning():
    # found by benchmarks/fuzz_reader.py: I = 1e308 over I0 = 1e-5 overflowed with a
    # RuntimeWarning on the user's terminal; A = log10(I0/I) (IUPAC, absorbance) of 50 in 100 is
    # log10 2, and a zero intensity has no absorbance
    import warnings

    from rateabs.photometry import absorbance_from_intensity

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        a = absorbance_from_intensity([1e308, 50.0, 0.0], [1e-5, 100.0, 100.0])
    assert np.isnan(a[0]) and a[1] == pytest.approx(np.log10(2), rel=1e-12) and np.isnan(a[2])


def test_a_chromophore_at_another_wavelength_than_the_file_is_said():
    # epsilon is a property of one wavelength (IUPAC, molar absorption coefficient): NADH's
    # 6220 M^-1 cm^-1 is at 340 nm (Horecker & Kornberg 1948), not at 405 nm
    assert "405 nm" in ph.wavelength_mismatch("NADH", 405.0)
    assert ph.wavelength_mismatch("NADH", 340.0) is None
    assert ph.wavelength_mismatch(None, 405.0) is None
