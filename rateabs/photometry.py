"""Photometry: transmittance to absorbance, Beer–Lambert, chromophores and microplate pathlength.

Definitions (IUPAC Compendium of Chemical Terminology, "absorbance" and "molar absorption
coefficient"): decadic absorbance A = -log10(T) = log10(I0/I), and A = epsilon * b * c with
epsilon in L mol^-1 cm^-1, b in cm and c in mol/L.

Beer–Lambert holds for monochromatic light in a dilute, non-scattering sample. Real instruments
have a finite bandwidth and some stray light, which bend the response at high absorbance; readings
above a linear limit (``rateabs.options.DEFAULT_LINEAR_LIMIT`` unless the user sets one) are
therefore flagged and kept out of fits.

>>> round(float(absorbance_from_percent_t(50.0)), 5)
0.30103
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import UsageError
from .units import parse_epsilon, parse_volume

#: Water's absorbance difference A(977 nm) - A(900 nm) per cm of pathlength at room temperature
#: (common practice, from memory), used to measure the liquid height in a microplate well.
WATER_PEAK_PER_CM = 0.18

LN10 = float(np.log(10.0))  # 2.302585...: ln x = LN10 * log10 x


def absorbance_from_transmittance(t):
    """A = -log10(T) for T as a fraction (0 < T <= 1). Non-positive T gives NaN."""
    t = np.asarray(t, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(t > 0, -np.log10(np.where(t > 0, t, 1.0)), np.nan)


def absorbance_from_percent_t(pct):
    """A = 2 - log10(%T), i.e. -log10(%T / 100)."""
    return absorbance_from_transmittance(np.asarray(pct, dtype=float) / 100.0)


def absorbance_from_intensity(i, i0):
    """A = log10(I0 / I) from a sample intensity I and a reference intensity I0."""
    i = np.asarray(i, dtype=float)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        t = i / np.asarray(i0, dtype=float)
    return absorbance_from_transmittance(np.where(np.isfinite(t), t, np.nan))   # no reading


def transmittance_from_absorbance(a):
    """T = 10^-A, as a fraction."""
    return 10.0 ** (-np.asarray(a, dtype=float))


def concentration(absorbance, epsilon: float, pathlength_cm: float):
    """Beer–Lambert solved for c (mol/L): c = A / (epsilon * b)."""
    return np.asarray(absorbance, dtype=float) / (epsilon * pathlength_cm)


def absorbance(conc_molar, epsilon: float, pathlength_cm: float):
    """Beer–Lambert: A = epsilon * b * c."""
    return np.asarray(conc_molar, dtype=float) * epsilon * pathlength_cm


@dataclass(frozen=True)
class Chromophore:
    """A light-absorbing species with its molar absorptivity at one wavelength."""

    name: str
    wavelength_nm: float
    epsilon: float          # L mol^-1 cm^-1
    note: str
    source: str


#: Chromophores people follow in kinetic assays. Values from the literature as cited; check them
#: against your own buffer, pH and instrument before relying on an absolute rate.
CHROMOPHORES: dict[str, Chromophore] = {
    c.name: c for c in (
        Chromophore("NADH", 340, 6220, "reduced nicotinamide; the oxidised form does not absorb "
                    "at 340 nm", "Horecker & Kornberg (1948) J. Biol. Chem. 175:385"),
        Chromophore("NADPH", 340, 6220, "as NADH", "Horecker & Kornberg (1948) J. Biol. Chem. "
                    "175:385"),
        Chromophore("TNB", 412, 14150, "2-nitro-5-thiobenzoate dianion from DTNB (thiol assays), "
                    "pH 7.3-8", "Riddles, Blakeley & Zerner (1979) Anal. Biochem. 94:75"),
        Chromophore("p-nitrophenolate", 405, 18000, "fully ionised only in alkaline buffer "
                    "(pH > 9); lower at neutral pH: measure it in your buffer",
                    "common practice (18000-18500 reported)"),
    )
}
_ALIASES = {"pnp": "p-nitrophenolate", "p-nitrophenol": "p-nitrophenolate",
            "4-nitrophenolate": "p-nitrophenolate", "dtnb": "TNB", "tnb2-": "TNB"}


def chromophore(name: str) -> Chromophore:
    """Look up a chromophore by name (case-insensitive, common aliases allowed)."""
    key = name.strip().lower()
    key = _ALIASES.get(key, key)
    for c in CHROMOPHORES.values():
        if c.name.lower() == key.lower():
            return c
    raise UsageError(f"unknown chromophore {name!r}",
                     f"use one of {', '.join(CHROMOPHORES)} or give --epsilon")


#: Molar absorptivities of the chromophores followed for rates are in the thousands of
#: M^-1 cm^-1 (the table above: 6220 to 18000; common practice): one under this is most likely a
#: value in mM^-1 cm^-1 written without its unit, which makes every concentration 1000 times high.
PLAUSIBLE_EPSILON_MIN = 100.0


def epsilon_doubt(epsilon: float | None, flag: str = "--epsilon") -> str | None:
    """The warning for an implausibly small molar absorptivity (L mol^-1 cm^-1, as ``flag``
    gave it), naming the likely slip, else None. A warning, not a refusal: a weak absorber
    can be meant."""
    if epsilon is None or epsilon >= PLAUSIBLE_EPSILON_MIN:
        return None
    return (f"{flag} {epsilon:g} M^-1 cm^-1 is below {PLAUSIBLE_EPSILON_MIN:g} M^-1 cm^-1, far "
            f"under the chromophores followed for rates (thousands): {epsilon:g} looks like "
            f"mM^-1 cm^-1, which makes every concentration here 1000 times high; write "
            f"'{epsilon:g} mM^-1 cm^-1' or {epsilon * 1000:g}")


#: A file's wavelength this far (nm) from a chromophore's tabulated one is another measurement.
WAVELENGTH_TOLERANCE_NM = 10.0


def wavelength_mismatch(name: str | None, wavelength_nm: float | None) -> str | None:
    """The warning when the wavelength a file states is not the one the chosen chromophore's
    epsilon belongs to (epsilon is a property of one wavelength), else None."""
    if not name or wavelength_nm is None:
        return None
    c = chromophore(name)
    if abs(wavelength_nm - c.wavelength_nm) <= WAVELENGTH_TOLERANCE_NM:
        return None
    return (f"the file was read at {wavelength_nm:g} nm, but the epsilon of {c.name} "
            f"(--chromophore) is for {c.wavelength_nm:g} nm: it does not apply; check the "
            "chromophore or give --epsilon for this wavelength")


@dataclass(frozen=True)
class PlateGeometry:
    """Well geometry of a flat-bottomed microplate, used to turn a volume into a liquid height."""

    wells: int
    bottom_area_cm2: float
    capacity_L: float
    source: str


#: Typical flat-bottomed polystyrene plates (from memory: a 96-well well is about 6.4 mm across at
#: the bottom, area 0.32 cm2, and holds about 0.36 mL; a 384-well well is about 3.2 mm square,
#: 0.10 cm2, and holds about 0.11 mL). Well walls taper, so this is an estimate: measure your
#: plate (water peak) where the absolute rate matters.
PLATES = {
    96: PlateGeometry(96, 0.32, 0.36e-3, "typical 96-well flat-bottom well, 6.4 mm diameter, "
                      "about 0.36 mL (from memory)"),
    384: PlateGeometry(384, 0.10, 0.11e-3, "typical 384-well flat-bottom well, 3.2 mm square, "
                       "about 0.11 mL (from memory)"),
}


def _ul(volume_l: float) -> str:
    return f"{volume_l * 1e6:.4g} uL"


def pathlength_from_volume(volume: str | float, wells: int = 96,
                           bottom_area_cm2: float | None = None) -> float:
    """Liquid height (cm) of ``volume`` in a flat-bottomed well: b = V / area.

    ``volume`` in L or as a string ("200 uL"); the area defaults to :data:`PLATES`. A volume
    beyond the well's capacity is refused.

    >>> round(pathlength_from_volume("200 uL", 96), 4)
    0.625
    """
    v_l = parse_volume(volume) if isinstance(volume, str) else float(volume)
    if not (v_l > 0 and np.isfinite(v_l)):
        raise UsageError(f"well volume {volume!r} must be a positive volume",
                         "give the liquid volume per well, e.g. '200 uL'")
    if bottom_area_cm2 is None:
        if wells not in PLATES:
            raise UsageError(f"no well geometry for a {wells}-well plate",
                             "give --plate 96 or 384 if it is one of those, or a pathlength "
                             "(--pathlength)")
        plate = PLATES[wells]
        if v_l > plate.capacity_L:
            raise UsageError(f"a well volume of {_ul(v_l)} does not fit a {wells}-well well, "
                             f"which holds about {_ul(plate.capacity_L)} (typical value, from "
                             "memory)", f"give the liquid volume in one well, e.g. "
                             f"'{plate.capacity_L * 0.5e6:.0f} uL', and the plate format with "
                             "--plate")
        bottom_area_cm2 = plate.bottom_area_cm2
    if bottom_area_cm2 <= 0:
        raise UsageError("the well bottom area must be positive", "check the area you gave")
    return v_l * 1000.0 / bottom_area_cm2   # L -> cm3 (mL), / cm2 -> cm


def pathlength_from_water_peak(a977, a900, per_cm: float = WATER_PEAK_PER_CM):
    """Pathlength (cm) from the water absorbance pair: b = (A977 - A900) / 0.18."""
    b = (np.asarray(a977, dtype=float) - np.asarray(a900, dtype=float)) / per_cm
    if np.any(b <= 0):
        raise UsageError("A977 - A900 is not positive",
                         "read the water peak on wells that hold aqueous liquid")
    return b


def resolve_epsilon(epsilon: str | float | None, chromophore_name: str | None) -> float | None:
    """epsilon from ``--epsilon`` or ``--chromophore`` (exactly one may be given)."""
    if epsilon is not None and chromophore_name is not None:
        raise UsageError("both --epsilon and --chromophore given", "give only one of them")
    if chromophore_name is not None:
        return chromophore(chromophore_name).epsilon
    if epsilon is not None:
        return parse_epsilon(epsilon)
    return None
