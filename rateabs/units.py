"""Quantities with units at the boundary of the program.

Inside rateabs every quantity is in one base unit: time in s, concentration in mol/L, volume in L,
pathlength in cm, molar absorptivity in L mol^-1 cm^-1, temperature in K, mass concentration in
mg/mL. Users write quantities as strings ("6.22 mM^-1 cm^-1", "200 uL", "30 s", "25 C"); the
parsers here turn them into base-unit floats. A bare number takes the documented default unit.

:func:`quantity` only converts; the ``parse_*`` functions add the physical limits of their kind
(a pathlength and a molar absorptivity are positive, a temperature is above absolute zero). The
ranges of command options are checked in :mod:`rateabs.options`.

>>> parse_time("2 min")
120.0
>>> parse_epsilon("6.22 mM^-1 cm^-1")
6220.0
>>> quantity("2 mL", "volume")
0.002
"""

from __future__ import annotations

import math
import re

from .errors import UnitError

_NUMBER = r"[-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?|[-+]?(?:nan|inf(?:inity)?)"
_QUANTITY = re.compile(rf"^\s*(?P<num>{_NUMBER})\s*(?P<unit>.*?)\s*$", re.IGNORECASE)

#: SI-style prefixes in the spellings people type (u and µ and μ for micro).
PREFIX = {"": 1.0, "k": 1e3, "m": 1e-3, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "n": 1e-9, "p": 1e-12}

TIME_UNITS = {
    "s": 1.0, "sec": 1.0, "secs": 1.0, "second": 1.0, "seconds": 1.0,
    "ms": 1e-3, "min": 60.0, "mins": 60.0, "minute": 60.0, "minutes": 60.0, "m": 60.0,
    "h": 3600.0, "hr": 3600.0, "hrs": 3600.0, "hour": 3600.0, "hours": 3600.0,
    "d": 86400.0, "day": 86400.0, "days": 86400.0,
}

#: 0 °C in kelvin, exact by the definition of the Celsius scale (BIPM, The International System
#: of Units, SI Brochure, 9th edition 2019, section 2.3.1).
ZERO_CELSIUS_K = 273.15

EXAMPLES = {
    "time": "30 s", "volume": "200 uL", "concentration": "50 uM", "pathlength": "1 cm",
    "molar absorptivity": "6220 M^-1 cm^-1", "temperature": "25 C",
    "mass concentration": "0.5 mg/mL",
}

#: The default unit of a bare number, per kind of quantity.
DEFAULT_UNITS = {
    "time": "s", "volume": "uL", "concentration": "uM", "pathlength": "cm",
    "molar absorptivity": "M^-1 cm^-1", "temperature": "C", "mass concentration": "mg/mL",
}


def celsius_to_kelvin(t_c):
    """Temperature in kelvin from degrees Celsius (works on numbers and arrays)."""
    return t_c + ZERO_CELSIUS_K


def kelvin_to_celsius(t_k):
    """Temperature in degrees Celsius from kelvin (works on numbers and arrays)."""
    return t_k - ZERO_CELSIUS_K


#: The Fahrenheit scale: 32 °F is 0 °C and a degree Fahrenheit is 5/9 of a kelvin (exact, by
#: definition; common practice).
FAHRENHEIT_ZERO_C = 32.0
FAHRENHEIT_DEGREE_K = 5.0 / 9.0
#: The temperature units a column or an option may be in, in words.
TEMPERATURE_NAMES = {"K": "kelvin", "C": "degrees Celsius", "F": "degrees Fahrenheit"}
#: The conversion in words, for the output of whatever converts.
FAHRENHEIT_RULE = "T_K = (T_F - 32) x 5/9 + 273.15"


def fahrenheit_to_kelvin(t_f):
    """Temperature in kelvin from degrees Fahrenheit (works on numbers and arrays)."""
    return celsius_to_kelvin((t_f - FAHRENHEIT_ZERO_C) * FAHRENHEIT_DEGREE_K)


def _split(text: str | float | int, what: str) -> tuple[float, str]:
    if isinstance(text, (int, float)):
        return float(text), ""
    m = _QUANTITY.match(str(text))
    if not m:
        raise UnitError(f"cannot read {what} {text!r}: no number found",
                        f"write it as a number with a unit, e.g. {EXAMPLES[what]!r}")
    return float(m.group("num").replace(",", ".")), m.group("unit").strip()


def written_unit(text: str) -> str:
    """The unit written after the number of a quantity string: ``"5 min"`` -> ``"min"``, ``""``
    for a bare number (or text that is not a quantity)."""
    m = _QUANTITY.match(str(text))
    return m.group("unit").strip() if m else ""


def _fail(what: str, text: str, unit: str, known: str) -> UnitError:
    return UnitError(f"unknown {what} unit {unit!r} in {text!r}",
                     f"use one of {known}, e.g. {EXAMPLES[what]!r}")


def _prefixed(unit: str, base: str) -> float | None:
    """Factor of a prefixed unit such as ``uL`` relative to ``base`` (``L``), or None."""
    if not unit.endswith(base):
        return None
    return PREFIX.get(unit[: -len(base)])


def time_factor(unit: str) -> float | None:
    """Seconds per ``unit`` (s, min, h, d and their spellings), or None."""
    return TIME_UNITS.get(unit.lower())


def volume_factor(unit: str) -> float | None:
    """Litres per ``unit`` (L, mL, uL, nL), or None."""
    unit = unit.replace("l", "L") if unit.lower().endswith("l") else unit
    return _prefixed(unit, "L")


def concentration_factor(unit: str, text: str | None = None) -> float:
    """Factor turning a concentration in ``unit`` (M, mM, uM, nM, mol/L, mmol/L...) into mol/L."""
    u = unit.strip().replace(" ", "")
    m = re.fullmatch(r"([kmuµμnp]?)mol/L", u, flags=re.IGNORECASE) or re.fullmatch(
        r"([kmuµμnp]?)mol/l", u)
    if m:
        return PREFIX[m.group(1).replace("M", "m")]
    m = re.fullmatch(r"([kmuµμnp]?)M", u)
    if m:
        return PREFIX[m.group(1)]
    raise _fail("concentration", text or unit, unit, "M, mM, uM, nM")


def pathlength_factor(unit: str) -> float | None:
    """Centimetres per ``unit`` (cm, mm, m, um), or None."""
    return {"cm": 1.0, "mm": 0.1, "m": 100.0, "um": 1e-4, "µm": 1e-4}.get(unit)


#: A factor of a molar-absorptivity unit: M (mol/L), mol and L with a prefix, cm, or the 1 of
#: "1/(M cm)"; then an optional exponent ("^-1", "-1", "^(-1)").
_EPS_ATOM = re.compile(r"(?P<atom>(?P<prefix>[kmunp]?)(?P<base>M|mol|L|l)|cm|1)"
                       r"(?:\^\(?(?P<exp>[-+]?\d+)\)?|(?P<neg>-\d+))?")
#: Exponents of litre, mole and centimetre in L mol^-1 cm^-1.
_EPS_DIMENSION = {"L": 1, "mol": -1, "cm": -1}


def _eps_factor_term(unit: str, i: int, sign: int, out: dict) -> tuple[float, int]:
    """Read factors from ``unit[i:]`` up to ``)`` or the end, raising each to ``sign`` (``/``
    divides what follows it: one factor, or a bracket); adds exponents to ``out``; returns the
    scale and where reading stopped."""
    scale, divide = 1.0, False
    while i < len(unit) and unit[i] != ")":
        c = unit[i]
        if c in " *.·":
            i += 1
            continue
        if c == "/":
            divide, i = True, i + 1
            continue
        s = -sign if divide else sign
        divide = False
        if c == "(":
            f, i = _eps_factor_term(unit, i + 1, s, out)
            if i >= len(unit) or unit[i] != ")":
                raise ValueError(unit)
            scale, i = scale * f, i + 1
            continue
        m = _EPS_ATOM.match(unit, i)
        if not m:
            raise ValueError(unit)
        e = s * int(m.group("exp") or m.group("neg") or 1)
        base = m.group("base")
        if base:
            scale *= PREFIX[m.group("prefix")] ** e
            for key, per in {"M": (("mol", 1), ("L", -1)), "mol": (("mol", 1),),   # M: mol/L
                             "L": (("L", 1),), "l": (("L", 1),)}[base]:
                out[key] = out.get(key, 0) + per * e
        elif m.group("atom") == "cm":
            out["cm"] = out.get("cm", 0) + e
        i = m.end()
    return scale, i


def epsilon_factor(unit: str) -> float | None:
    """L mol^-1 cm^-1 per ``unit``, or None: "M^-1 cm^-1", "M-1 cm-1", "mM^-1 cm^-1",
    "L mol-1 cm-1", "L/(mol cm)", "L/(mol*cm)", "1/(mM*cm)", "/M/cm", "cm^-1 M^-1", ... (any
    product and quotient of prefixed M, mol or L and cm that comes to L mol^-1 cm^-1)."""
    u = (unit.strip().replace("⁻¹", "^-1").replace("⁻", "^-").replace("¹", "1")
         .replace("−", "-").replace("**", "^").replace("µ", "u").replace("μ", "u"))
    dims: dict = {}
    try:
        scale, end = _eps_factor_term(u, 0, 1, dims)
    except ValueError:
        return None
    if end != len(u) or {k: v for k, v in dims.items() if v} != _EPS_DIMENSION:
        return None
    return scale


def mass_concentration_factor(unit: str) -> float | None:
    """mg/mL per ``unit`` (mg/mL, ug/mL, g/L...), or None."""
    u = unit.replace(" ", "")
    m = re.fullmatch(r"([kmuµμn]?)g/([mun]?)L", u) or re.fullmatch(r"([kmuµμn]?)g/([mun]?)l", u)
    if not m:
        return None
    return (PREFIX[m.group(1)] / 1e-3) / (PREFIX[m.group(2)] / 1e-3)


def _temperature_k(value: float, unit: str, text: str) -> float:
    u = unit.replace("°", "").replace("deg", "").strip().upper()
    if u in ("C", "CELSIUS"):
        return celsius_to_kelvin(value)
    if u in ("K", "KELVIN"):
        return value
    if u in ("F", "FAHRENHEIT"):
        return fahrenheit_to_kelvin(value)
    raise _fail("temperature", text, unit, "C, K or F")


_FACTORS = {"time": (time_factor, "s, min, h"), "volume": (volume_factor, "L, mL, uL, nL"),
            "pathlength": (pathlength_factor, "cm, mm"),
            "molar absorptivity": (epsilon_factor, "M^-1 cm^-1 or mM^-1 cm^-1"),
            "mass concentration": (mass_concentration_factor, "mg/mL, ug/mL, g/L")}


def quantity(text: str | float, kind: str, default: str | None = None) -> float:
    """A quantity string of ``kind`` (a key of :data:`EXAMPLES`) in its base unit, unchecked.

    A Python number is returned as it is (taken to be in the base unit already); a bare number in
    a string takes ``default`` (else the kind's :data:`DEFAULT_UNITS`).
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        return float(text)
    value, unit = _split(text, kind)
    unit = unit or default or DEFAULT_UNITS[kind]
    if kind == "temperature":
        return _temperature_k(value, unit, str(text))
    if kind == "concentration":
        return value * concentration_factor(unit, str(text))
    factor_of, known = _FACTORS[kind]
    factor = factor_of(unit)
    if factor is None:
        raise _fail(kind, str(text), unit, known)
    return value * factor


def _positive(value: float, what: str, text, fix: str) -> float:
    if not value > 0:
        raise UnitError(f"{what} {text!r} must be positive", fix)
    return value


def parse_time(text: str | float, default: str = "s") -> float:
    """Parse a duration such as ``"30 s"``, ``"2 min"``, ``"1.5 h"``; returns seconds."""
    return quantity(text, "time", default)


def parse_volume(text: str | float, default: str = "uL") -> float:
    """Parse a volume such as ``"200 uL"`` or ``"1 mL"``; returns litres."""
    return quantity(text, "volume", default)


def parse_concentration(text: str | float, default: str = "uM") -> float:
    """Parse a molar concentration such as ``"50 uM"``, ``"1 mM"``, ``"2 mol/L"``; returns mol/L."""
    return quantity(text, "concentration", default)


def parse_pathlength(text: str | float, default: str = "cm") -> float:
    """Parse a pathlength such as ``"1"``, ``"1 cm"``, ``"10 mm"``; returns cm (positive)."""
    return _positive(quantity(text, "pathlength", default), "pathlength", text,
                     "give it in cm, e.g. '1 cm'")


def parse_epsilon(text: str | float, default: str = "M^-1 cm^-1") -> float:
    """Parse a molar absorptivity; returns L mol^-1 cm^-1 (positive).

    Accepted spellings: ``"6220"``, ``"6220 M^-1 cm^-1"``, ``"6220 M-1 cm-1"``,
    ``"6.22 mM^-1 cm^-1"``, ``"6220 L mol-1 cm-1"``, ``"6220 L/(mol cm)"``, ``"6.22 /mM/cm"``
    (:func:`epsilon_factor`).
    """
    return _positive(quantity(text, "molar absorptivity", default), "molar absorptivity", text,
                     "give it in M^-1 cm^-1, e.g. '6220 M^-1 cm^-1'")


def parse_temperature(text: str | float, default: str = "C") -> float:
    """Parse a temperature such as ``"25 C"``, ``"25 °C"``, ``"298.15 K"``, ``"77 F"``; returns
    kelvin."""
    kelvin = quantity(text, "temperature", default)
    if not kelvin > 0:
        raise UnitError(f"temperature {text!r} is not above absolute zero",
                        "give it in C, K or F, e.g. '25 C'")
    return kelvin


def parse_mass_concentration(text: str | float, default: str = "mg/mL") -> float:
    """Parse a protein concentration such as ``"0.5 mg/mL"``, ``"200 ug/mL"``; returns mg/mL."""
    return quantity(text, "mass concentration", default)


def rate_unit_factors(unit: str) -> tuple[float, float] | None:
    """(factor to mol/L, seconds per time unit) of a rate unit such as ``uM/min``, or None."""
    m = re.fullmatch(r"\s*([^/]+?)\s*/\s*([A-Za-z]+)\s*", unit or "")
    if not m:
        return None
    try:
        cf = concentration_factor(m.group(1))
    except UnitError:
        return None
    t = time_factor(m.group(2))
    return (cf, t) if t else None


def _unit_key(unit: str) -> tuple:
    """What a concentration or rate unit means, for comparing spellings ("uM", "µM", "umol/L")."""
    u = unit.strip().replace("μ", "u").replace("µ", "u")
    rate = rate_unit_factors(u)
    if rate is not None:
        return ("rate", *rate)
    try:
        return ("concentration", concentration_factor(u))
    except UnitError:
        return ("text", re.sub(r"\bAU\b", "A", u.replace(" ", "")))


def same_unit(a: str, b: str) -> bool:
    """Whether two spellings name the same concentration or rate unit (``uM`` and ``µM``,
    ``mM`` and ``mmol/L``, ``uM/min`` and ``µM/min``); other units must be spelled alike."""
    ka, kb = _unit_key(a), _unit_key(b)
    return ka[0] == kb[0] and all(
        x == y if isinstance(x, str) else math.isclose(x, y, rel_tol=1e-12)
        for x, y in zip(ka[1:], kb[1:], strict=True))


def unit_from_header(header: str) -> str:
    """Unit named in a column header: ``"[S] (mM)"`` -> ``mM``; ``rate_uM_per_min`` -> ``uM/min``."""
    m = _header_unit_match(header.strip())
    if m is None:
        return ""
    return m.group(1).replace(" per ", "/").replace("_per_", "/")


def strip_header_unit(header: str) -> str:
    """The header without the unit :func:`unit_from_header` reads from it (``substrate (mM)``
    -> ``substrate``), as written."""
    h = header.strip()
    m = _header_unit_match(h)
    return h[:m.start()].rstrip() if m else h


def _header_unit_match(h: str):
    """The match of the unit at the end of header ``h`` (bracketed, ``_uM`` or after a space),
    or None; group 1 is the unit as written."""
    return (re.search(r"[(\[]\s*([^)\]]+?)\s*[)\]]\s*$", h)
            or re.search(r"_((?:[munpµk]?M|A|AU|ppm|nmol|umol)(?:_per_(?:s|min|h))?)$", h)
            or re.search(_TRAILING_CONCENTRATION, h))      # "substrate mM", "protein_ug_per_mL"


#: A concentration unit at the end of a header after a space or underscore, without brackets:
#: molar (``substrate mM``) or mass (``protein ug/mL``, ``protein_ug_per_mL``).
_TRAILING_CONCENTRATION = (r"[\s_]((?:[munpµμ]?M|[munpµμ]?g(?:/|_per_)[munµμ]?[lL])"
                           r"(?:(?:/|_per_)(?:s|min|h))?)$")


#: A rate-constant unit as headers write it: a time unit to the power -1 (first order: 1/s,
#: /min, min^-1, s-1, per minute), optionally after a concentration unit to the power -1
#: (second order: M^-1 s^-1, 1/(mM min), L mol^-1 s^-1, L/(mol s)).
_INV = r"\s*(?:\^\s*\(?\s*-\s*1\s*\)?|-1)"
_RATE_CONSTANT = (
    (1, re.compile(r"(?:1\s*)?/\s*\(?\s*(?P<t>[a-z]+)\s*\)?", re.I)),
    (1, re.compile(rf"(?P<t>[a-z]+){_INV}", re.I)),
    (2, re.compile(r"(?:1\s*)?/\s*\(\s*(?P<c>[a-zµμ]+)\s+(?P<t>[a-z]+)\s*\)", re.I)),
    (2, re.compile(r"(?:1\s*)?/\s*(?P<c>[a-zµμ]+)\s*/\s*(?P<t>[a-z]+)", re.I)),
    (2, re.compile(rf"(?P<c>[a-zµμ]+){_INV}\s*(?P<t>[a-z]+){_INV}", re.I)),
    (2, re.compile(r"(?P<c>[a-zµμ]*l)\s*/\s*\(\s*(?P<m>[a-zµμ]*mol)\s+(?P<t>[a-z]+)\s*\)", re.I)),
    (2, re.compile(rf"(?P<c>[a-zµμ]*l)\s*(?P<m>[a-zµμ]*mol){_INV}\s*(?P<t>[a-z]+){_INV}", re.I)),
)


def _per_molar(m: re.Match) -> float | None:
    """Factor to M^-1 of the concentration part of a second-order unit, or None."""
    if m.groupdict().get("m"):                     # litre / mole: (L per mol)
        litre = volume_factor(m.group("c"))
        mol = PREFIX.get(m.group("m")[:-3])
        return None if litre is None or mol is None else litre / mol
    try:
        return 1.0 / concentration_factor(m.group("c"))
    except UnitError:
        return None


#: Superscript characters as headers write powers (s⁻¹, dm³, 10⁻³).
_SUPERSCRIPT = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺", "0123456789-+")
#: A power of ten in front of a unit ("10^-3 s^-1", "1e-3 s^-1"): the values are in units of
#: that multiple (quantity calculus, IUPAC Green Book, section 1.3).
_POWER_OF_TEN = re.compile(r"(?:10\s*\^\s*\(?\s*(?P<e>[-+]?\d+)\s*\)?|1e(?P<f>[-+]?\d+))\s*(?:x\s*)?")


def _normal_unit(unit: str) -> str:
    """A unit written the ways tables write it, in one spelling: superscripts and the minus
    sign (U+2212) as ASCII powers, dm3 as L and cm3 as mL, 'per' as '/', single spaces."""
    u = unit.strip().replace("−", "-").replace("·", " ").replace("*", " ").replace("_", " ")
    u = re.sub(r"([⁻⁺]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+)", lambda m: "^" + m.group(1).translate(_SUPERSCRIPT), u)
    u = re.sub(r"\bdm\s*\^?\s*3\b", "L", u)
    u = re.sub(r"\bcm\s*\^?\s*3\b", "mL", u)
    u = re.sub(r"^per\s+", "/", re.sub(r"\s+per\s+", "/", u))
    return re.sub(r"\s+", " ", u)


def rate_constant_unit(unit: str) -> tuple[int, float] | None:
    """(order, factor) of a rate-constant unit: ``1/min`` -> (1, 1/60) turns k into 1/s;
    ``mM^-1 s^-1`` -> (2, 1000) turns k into M^-1 s^-1; ``dm3 mol-1 s-1`` is L mol^-1 s^-1;
    ``10^-3 s^-1`` -> (1, 0.001). None for anything else (:func:`rate_constant_order` tells
    zero- and third-order units apart for a message)."""
    u = _normal_unit(unit)
    scale = 1.0
    p = _POWER_OF_TEN.match(u)
    if p and p.end() < len(u):
        scale = 10.0 ** int(p.group("e") or p.group("f"))
        u = u[p.end():]
    for order, pattern in _RATE_CONSTANT:
        m = pattern.fullmatch(u)
        if not m:
            continue
        seconds = time_factor(m.group("t"))
        per_molar = _per_molar(m) if order == 2 else 1.0
        if seconds is not None and per_molar is not None:
            return order, scale * per_molar / seconds
    return None


#: Zero-order (a concentration per time) and third-order (M^-2 per time) rate-constant units.
_OTHER_ORDER = (
    (0, re.compile(rf"[kmuµμnp]?M\s*(?:/\s*(?P<t>[a-z]+)|\s+(?P<u>[a-z]+){_INV})", re.I)),
    (0, re.compile(rf"[kmuµμnp]?mol\s*(?:/\s*L|\s*L{_INV})\s*(?:/\s*(?P<t>[a-z]+)|"
                   rf"\s+(?P<u>[a-z]+){_INV})", re.I)),
    (0, re.compile(r"[kmuµμnp]?mol\s*/\s*\(\s*L\s+(?P<t>[a-z]+)\s*\)", re.I)),
    (3, re.compile(rf"[kmuµμnp]?M\s*(?:\^\s*)?-\s*2\s+(?P<t>[a-z]+){_INV}", re.I)),
    (3, re.compile(r"(?:1\s*)?/\s*\(\s*[kmuµμnp]?M\s*\^?\s*2\s+(?P<t>[a-z]+)\s*\)", re.I)),
    (3, re.compile(rf"L\s*\^?\s*2\s+[kmuµμnp]?mol\s*\^?\s*-\s*2\s+(?P<t>[a-z]+){_INV}",
                   re.I)),
)


def rate_constant_order(unit: str) -> int | None:
    """0 or 3 for a zero-order (M/s, mol L^-1 s^-1) or third-order (M^-2 s^-1) rate-constant
    unit, else None (first and second order: :func:`rate_constant_unit`)."""
    u = _normal_unit(unit)
    for order, pattern in _OTHER_ORDER:
        m = pattern.fullmatch(u)
        if m and time_factor(m.groupdict().get("t") or m.groupdict().get("u") or "") is not None:
            return order
    return None
