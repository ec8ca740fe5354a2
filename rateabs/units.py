"""Quantities with units at the boundary of the program.

Inside rateabs every quantity is in one base unit: time in s, concentration in mol/L, volume in L,
pathlength in cm, molar absorptivity in L mol^-1 cm^-1, temperature in K, mass concentration in
mg/mL. Users write quantities as strings ("6.22 mM^-1 cm^-1", "200 uL", "30 s", "25 C"); the
parsers here turn them into base-unit floats. A bare number takes the documented default unit.

>>> parse_time("2 min")
120.0
>>> parse_epsilon("6.22 mM^-1 cm^-1")
6220.0
"""

from __future__ import annotations

import re

from .errors import UnitError

_NUMBER = r"[-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?"
_QUANTITY = re.compile(rf"^\s*(?P<num>{_NUMBER})\s*(?P<unit>.*?)\s*$")

#: SI-style prefixes in the spellings people type (u and µ and μ for micro).
PREFIX = {"": 1.0, "k": 1e3, "m": 1e-3, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "n": 1e-9, "p": 1e-12}

TIME_UNITS = {
    "s": 1.0, "sec": 1.0, "secs": 1.0, "second": 1.0, "seconds": 1.0,
    "ms": 1e-3, "min": 60.0, "mins": 60.0, "minute": 60.0, "minutes": 60.0, "m": 60.0,
    "h": 3600.0, "hr": 3600.0, "hrs": 3600.0, "hour": 3600.0, "hours": 3600.0,
    "d": 86400.0, "day": 86400.0, "days": 86400.0,
}


def _split(text: str | float | int, what: str) -> tuple[float, str]:
    if isinstance(text, (int, float)):
        return float(text), ""
    m = _QUANTITY.match(str(text))
    if not m:
        raise UnitError(f"cannot read {what} {text!r}: no number found",
                        f"write it as a number with a unit, e.g. {EXAMPLES[what]!r}")
    return float(m.group("num").replace(",", ".")), m.group("unit").strip()


EXAMPLES = {
    "time": "30 s", "volume": "200 uL", "concentration": "50 uM", "pathlength": "1 cm",
    "molar absorptivity": "6220 M^-1 cm^-1", "temperature": "25 C",
    "mass concentration": "0.5 mg/mL", "amount": "10 nM",
}


def _fail(what: str, text: str, unit: str, known: str) -> UnitError:
    return UnitError(f"unknown {what} unit {unit!r} in {text!r}",
                     f"use one of {known}, e.g. {EXAMPLES[what]!r}")


def parse_time(text: str | float, default: str = "s") -> float:
    """Parse a duration such as ``"30 s"``, ``"2 min"``, ``"1.5 h"``; returns seconds."""
    value, unit = _split(text, "time")
    unit = (unit or default).lower()
    if unit not in TIME_UNITS:
        raise _fail("time", str(text), unit, "s, min, h")
    return value * TIME_UNITS[unit]


def _prefixed(unit: str, base: str) -> float | None:
    """Factor of a prefixed unit such as ``uL`` relative to ``base`` (``L``), or None."""
    if not unit.endswith(base):
        return None
    prefix = unit[: -len(base)]
    return PREFIX.get(prefix)


def parse_volume(text: str | float, default: str = "uL") -> float:
    """Parse a volume such as ``"200 uL"`` or ``"1 mL"``; returns litres."""
    value, unit = _split(text, "volume")
    unit = unit or default
    unit = unit.replace("l", "L") if unit.lower().endswith("l") else unit
    factor = _prefixed(unit, "L")
    if factor is None:
        raise _fail("volume", str(text), unit, "L, mL, uL, nL")
    return value * factor


def parse_concentration(text: str | float, default: str = "uM") -> float:
    """Parse a molar concentration such as ``"50 uM"``, ``"1 mM"``, ``"2 mol/L"``; returns mol/L."""
    value, unit = _split(text, "concentration")
    return value * concentration_factor(unit or default, str(text))


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


def parse_pathlength(text: str | float, default: str = "cm") -> float:
    """Parse a pathlength such as ``"1"``, ``"1 cm"``, ``"10 mm"``; returns cm."""
    value, unit = _split(text, "pathlength")
    unit = unit or default
    factors = {"cm": 1.0, "mm": 0.1, "m": 100.0, "um": 1e-4, "µm": 1e-4}
    if unit not in factors:
        raise _fail("pathlength", str(text), unit, "cm, mm")
    if value <= 0:
        raise UnitError(f"pathlength {text!r} must be positive", "give it in cm, e.g. '1 cm'")
    return value * factors[unit]


def parse_epsilon(text: str | float, default: str = "M^-1 cm^-1") -> float:
    """Parse a molar absorptivity; returns L mol^-1 cm^-1.

    Accepted spellings: ``"6220"``, ``"6220 M^-1 cm^-1"``, ``"6.22 mM^-1 cm^-1"``,
    ``"6220 L/(mol*cm)"``, ``"6.22 /mM/cm"``.
    """
    value, unit = _split(text, "molar absorptivity")
    u = (unit or default).replace(" ", "").replace("⁻¹", "^-1").replace("−", "-")
    u = u.replace("**", "^")
    forms = {
        "M^-1cm^-1": 1.0, "1/(M*cm)": 1.0, "/M/cm": 1.0, "L/(mol*cm)": 1.0, "Lmol^-1cm^-1": 1.0,
        "L/mol/cm": 1.0, "mM^-1cm^-1": 1e3, "1/(mM*cm)": 1e3, "/mM/cm": 1e3,
        "uM^-1cm^-1": 1e6, "/uM/cm": 1e6, "cm^-1M^-1": 1.0, "cm^-1mM^-1": 1e3,
    }
    if u not in forms:
        raise _fail("molar absorptivity", str(text), unit, "M^-1 cm^-1 or mM^-1 cm^-1")
    if value <= 0:
        raise UnitError(f"molar absorptivity {text!r} must be positive",
                        "give it in M^-1 cm^-1, e.g. '6220 M^-1 cm^-1'")
    return value * forms[u]


def parse_temperature(text: str | float, default: str = "C") -> float:
    """Parse a temperature such as ``"25 C"``, ``"25 °C"``, ``"298.15 K"``; returns kelvin."""
    value, unit = _split(text, "temperature")
    u = (unit or default).replace("°", "").replace("deg", "").strip().upper()
    if u in ("C", "CELSIUS"):
        kelvin = value + 273.15
    elif u in ("K", "KELVIN"):
        kelvin = value
    else:
        raise _fail("temperature", str(text), unit, "C or K")
    if kelvin <= 0:
        raise UnitError(f"temperature {text!r} is not above absolute zero",
                        "give it in C or K, e.g. '25 C'")
    return kelvin


def parse_mass_concentration(text: str | float, default: str = "mg/mL") -> float:
    """Parse a protein concentration such as ``"0.5 mg/mL"``, ``"200 ug/mL"``; returns mg/mL."""
    value, unit = _split(text, "mass concentration")
    u = (unit or default).replace(" ", "")
    m = re.fullmatch(r"([kmuµμn]?)g/([mun]?)L", u, flags=0) or re.fullmatch(
        r"([kmuµμn]?)g/([mun]?)l", u)
    if not m:
        raise _fail("mass concentration", str(text), unit, "mg/mL, ug/mL, g/L")
    mass = PREFIX[m.group(1)] / 1e-3       # in mg
    vol = PREFIX[m.group(2)] / 1e-3        # in mL
    return value * mass / vol


def parse_number(text: str | float, what: str = "number") -> float:
    """Parse a plain number (decimal point or comma)."""
    try:
        return float(str(text).strip().replace(",", "."))
    except ValueError:
        raise UnitError(f"cannot read {what} {text!r} as a number", "write a plain number") from None


def unit_from_header(header: str) -> str:
    """Unit named in a column header: ``"[S] (mM)"`` -> ``mM``; ``rate_uM_per_min`` -> ``uM/min``."""
    h = header.strip()
    m = re.search(r"[(\[]\s*([^)\]]+?)\s*[)\]]\s*$", h)
    if m:
        return m.group(1).replace(" per ", "/")
    m = re.search(r"_((?:[munpµk]?M|A|AU|ppm|nmol|umol)(?:_per_(?:s|min|h))?)$", h)
    if m:
        return m.group(1).replace("_per_", "/")
    return ""


#: Display names and factors of concentration units for output, base mol/L.
CONC_DISPLAY = {"M": 1.0, "mM": 1e-3, "uM": 1e-6, "nM": 1e-9}
