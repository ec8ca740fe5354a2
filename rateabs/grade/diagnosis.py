"""Naming a student's slip only when it explains the discrepancy far better than chance.

Each candidate slip predicts the number the student would have reported from the value of their
own data: a factor from a definition (60 s per min, 3600 s per h, ln 10 = 2.302585 for log10
used as ln, 10 mm per cm, 1000 between concentration units, Beer–Lambert A = epsilon b c), a
different quantity (the half-life ln 2 / k or the time constant 1 / k, in any time unit), the
fit of %T numbers taken as absorbance (A = 2 - log10 %T, IUPAC "absorbance"), or two factors
together.

The judgement, in log ratios (a factor is as far above 1 as its inverse is below):

* the spread expected of an honest report is ``s = sqrt((tolerance/2)^2 + sigma^2)``, sigma
  being the relative SE of the value from the student's own fit (with the rounding of the
  reported number);
* a report within the tolerance agrees; otherwise a candidate explains it when it lies within
  2 s of the report (z <= 2);
* it is named only when the report is at least 6 s from agreement (an honest difference that
  large has odds below 1 in 10^8 under a normal spread, while the candidate's odds are e^16
  times better) and it is at least 20 times as likely as the next candidate
  ((z2^2 - z1^2)/2 >= ln 20), two slips together counting as 100 times less likely a priori
  than one (:data:`PAIR_PRIOR`);
* anything else is reported as a difference of so many percent, cause not identified.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .rubric import CONC_UM, NAMES, TIME_S, Unit

#: ln 10 and ln 2, from the definition of the natural logarithm.
LN10 = math.log(10.0)
LN2 = math.log(2.0)
#: z within which a candidate explains a report, and the distance (in s) a report must keep
#: from agreement before any cause is named; the odds a named cause must have over the next.
MATCH_Z = 2.0
AWAY_S = 6.0
ODDS = 20.0
#: How much less likely, before the numbers are looked at, two slips together are than one
#: (each slip is taken to be rarer than 1 report in 10: common-practice judgement). Where one
#: slip and a pair give nearly the same factor (epsilon near 10^4 M^-1 cm^-1 makes "not
#: converted to concentration" 0.0098 beside "mM and a pathlength in mm", 0.01), the one slip
#: is named.
PAIR_PRIOR = 100.0

#: Families whose factors may combine into two slips at once.
FACTOR_FAMILIES = ("time-unit", "log10", "conc-unit", "pathlength", "not-converted",
                   "converted")
TIME_WORDS = {"s": "seconds", "min": "minutes", "h": "hours"}


@dataclass(frozen=True)
class Candidate:
    """One possible slip: what the student would have reported, and what to tell them."""

    kind: str
    value: float
    what: str
    fix: str
    spread: float = 0.0
    factor: float | None = None         # reported / own, for factor slips (None otherwise)


@dataclass(frozen=True)
class Verdict:
    """The judgement of a report: ``status`` agrees, slip, unexplained or sign; ``slip`` the
    kind of the named slip (None when none is named); ``finding`` one sentence."""

    status: str
    slip: str | None
    finding: str


@dataclass(frozen=True)
class Context:
    """What the candidates are built from: the quantity, its unit, the own value and facts."""

    quantity: str
    unit: Unit
    value: float
    epsilon: float | None = None
    pathlength_cm: float = 1.0
    alt: float | None = None            # from the recorded %T/T numbers, in the rubric unit
    alt_spread: float = 0.0
    signal: str | None = None
    other_reading: tuple | None = None  # (value, unit read, unit not read) of a bare time column
    falling: bool = False


def _g(x: float) -> str:
    return f"{x:.4g}"


def _times(r: float) -> str:
    return f"{r:.3g} times" if r >= 1 else f"1/{1 / r:.3g} of"


# --------------------------------------------------------------------------- candidates


def candidates(c: Context) -> list[Candidate]:
    """Every candidate slip for the quantity, single and in pairs."""
    singles = _time_units(c) + _log10(c) + _other_quantity(c) + _concentration(c) + \
        _photometry(c) + _recorded(c) + _unstated_time(c)
    return singles + _pairs(c, singles)


def _factor(c: Context, kind: str, f: float, what: str, fix: str) -> Candidate:
    return Candidate(kind, c.value * f, what, fix, factor=f)


def _time_units(c: Context) -> list[Candidate]:
    u = c.unit.time
    if u is None:
        return []
    power = 1 if c.quantity == "half_life" else -1          # half-life is a time, the rest /time
    out = []
    for t in TIME_S:
        if t == u:
            continue
        f = (TIME_S[u] / TIME_S[t]) ** power
        unit = t if power == 1 else f"per {t}"
        asked = u if power == 1 else f"per {u}"
        out.append(_factor(c, "time-unit", f, f"the value was given {unit} where {asked} was "
                           "asked", f"convert before reporting: 1 {t} = "
                           f"{_g(TIME_S[t] / TIME_S[u])} {u}"))
    return out


def _log10(c: Context) -> list[Candidate]:
    if c.quantity not in ("k", "half_life"):
        return []
    f = 1 / LN10 if c.quantity == "k" else LN10
    return [_factor(c, "log10", f, "a factor of ln 10 = 2.303: the slope of log10(A) was used "
                    "where the natural log belongs", "first-order plots use ln(A - Ainf); a "
                    "log10 slope times ln 10 = 2.303 gives k")]


def _other_quantity(c: Context) -> list[Candidate]:
    """The half-life or time constant reported for k, and the reverse, in any time unit."""
    u = c.unit.time
    out = []
    if c.quantity == "k":
        k_s = c.value / TIME_S[u]
        for t in TIME_S:
            out.append(Candidate("half-life", LN2 / k_s / TIME_S[t], f"the half-life in {t} "
                                 f"(ln 2 / k = {_g(LN2 / k_s / TIME_S[t])} {t}) was reported "
                                 "instead of the rate constant", "k = ln 2 / half-life"))
            out.append(Candidate("time-constant", 1 / k_s / TIME_S[t], f"the time constant in "
                                 f"{t} (1 / k = {_g(1 / k_s / TIME_S[t])} {t}) was reported "
                                 "instead of the rate constant", "k = 1 / time constant"))
    elif c.quantity == "half_life":
        half_s = c.value * TIME_S[u]
        for t in TIME_S:
            k_t = LN2 / half_s * TIME_S[t]
            out.append(Candidate("rate-constant", k_t, f"the rate constant in 1/{t} "
                                 f"(ln 2 / half-life = {_g(k_t)} 1/{t}) was reported instead of "
                                 "the half-life", "half-life = ln 2 / k"))
            tau = half_s / LN2 / TIME_S[t]
            out.append(Candidate("time-constant", tau, f"the time constant 1/k in {t} "
                                 f"({_g(tau)} {t}) was reported instead of the half-life",
                                 "half-life = ln 2 x time constant"))
    return out


def _concentration(c: Context) -> list[Candidate]:
    u = c.unit.conc
    if u not in CONC_UM:
        return []
    out = []
    for other in CONC_UM:
        if other == u:
            continue
        f = CONC_UM[u] / CONC_UM[other]
        also = " (or epsilon in mM^-1 cm^-1 was taken as M^-1 cm^-1)" if (
            c.quantity == "v0" and math.isclose(f, 1000)) else ""
        out.append(_factor(c, "conc-unit", f, f"the value was given in {other} where {u} was "
                           f"asked{also}", "carry concentration units through every step: "
                           "1 M = 1000 mM = 10^6 uM"))
    return out


def _photometry(c: Context) -> list[Candidate]:
    """Beer–Lambert slips of a v0: pathlength in mm, no conversion, or a needless one."""
    if c.quantity != "v0":
        return []
    t = c.unit.time
    if c.unit.conc in CONC_UM and c.epsilon:
        to_a = c.epsilon * c.pathlength_cm * 1e-6 * CONC_UM[c.unit.conc]
        return [_factor(c, "pathlength", 1 / 10, "a factor of 10: the pathlength was taken in "
                        "mm where cm belongs", "use b in cm in A = epsilon b c (10 mm = 1 cm)"),
                _factor(c, "pathlength", 10, "a factor of 10: the pathlength was taken in cm "
                        "where mm was meant", "use b in cm in A = epsilon b c (1 mm = 0.1 cm)"),
                _factor(c, "not-converted", to_a, f"the change of absorbance per {t} was "
                        "reported without converting it to concentration",
                        "divide by epsilon b (Beer–Lambert, A = epsilon b c)")]
    if c.unit.conc == "A" and c.epsilon:
        return [_factor(c, "converted", 1e6 / (c.epsilon * c.pathlength_cm), "the rate was "
                        f"converted to uM/{t} where the change of absorbance per {t} was asked",
                        "report the slope in A per time, as asked")]
    return []


def _recorded(c: Context) -> list[Candidate]:
    if c.alt is None or not (c.alt > 0 and math.isfinite(c.alt)):
        return []
    pt = c.signal == "percent"
    conv = "A = 2 - log10(%T)" if pt else "A = -log10(T)"
    return [Candidate("percent-T" if pt else "transmittance", c.alt,
                      f"the {'%T' if pt else 'transmittance'} numbers were analysed as if they "
                      f"were absorbance (they give {_g(c.alt)} {c.unit.text})",
                      f"convert the readings to absorbance first: {conv}", c.alt_spread)]


def _unstated_time(c: Context) -> list[Candidate]:
    if c.other_reading is None:
        return []
    value, read, other = c.other_reading
    return [Candidate("time-unit-unstated", value, f"your time column names no unit; the "
                      f"grader read it in {TIME_WORDS[read]}, and your number is what the "
                      f"readings give in {TIME_WORDS[other]} ({_g(value)} {c.unit.text})",
                      f"write the unit in the time column's header, e.g. 'time ({other})'; "
                      "the grader's reading may be the wrong one")]


def _pairs(c: Context, singles: list[Candidate]) -> list[Candidate]:
    """Two factor slips of different kinds together (a factor no single slip gives)."""
    factors = [x for x in singles if x.factor is not None and x.kind in FACTOR_FAMILIES]
    known = [math.log(x.factor) for x in factors]
    out = []
    for i, a in enumerate(factors):
        for b in factors[i + 1:]:
            if a.kind == b.kind:
                continue
            f = a.factor * b.factor
            if any(abs(math.log(f) - k) < 0.01 for k in known) or abs(math.log(f)) < 0.01:
                continue
            out.append(Candidate(f"{a.kind}+{b.kind}", c.value * f, f"two slips together (a "
                                 f"factor of {_g(f)}): {a.what}, and {b.what}",
                                 f"{a.fix}; {b.fix}", factor=f))
    return out


# --------------------------------------------------------------------------- the judgement


def spread(tolerance_pct: float, sigma: float) -> float:
    """The log-ratio spread expected of an honest report."""
    return math.hypot(tolerance_pct / 200.0, sigma)


def judge(reported: float, c: Context, tolerance_pct: float, sigma: float) -> Verdict:
    """The verdict on a non-zero reported value against the own value ``c.value``."""
    name, unit = NAMES[c.quantity], c.unit.text
    x, v = abs(reported), c.value
    s = spread(tolerance_pct, sigma)
    tol = tolerance_pct / 100
    negative = reported < 0
    if abs(x / v - 1) <= tol:
        if negative:
            return Verdict("slip", "sign", _sign_text(c, reported))
        return Verdict("agrees", None, f"your reported {name} agrees with your own data "
                       f"({_g(reported)} vs {_g(v)} {unit}, {100 * (x / v - 1):+.1f} %): "
                       "no slip found")
    # each candidate with its z and its weight of evidence against it (z^2 / 2, plus the
    # prior odds against two slips together), best first
    scored = sorted(((z, k, z * z / 2 + (math.log(PAIR_PRIOR) if "+" in k.kind else 0.0))
                     for z, k in ((abs(math.log(x / k.value)) / math.hypot(s, k.spread), k)
                                  for k in candidates(c)
                                  if k.value > 0 and math.isfinite(k.value))),
                    key=lambda p: p[2])
    far = abs(math.log(x / v)) >= AWAY_S * s
    best = scored[0] if scored and scored[0][0] <= MATCH_Z and far else None
    runner = scored[1][2] if best and len(scored) > 1 else math.inf
    sign = (_sign_text(c, reported) + "; besides, ") if negative else ""
    if best and runner - best[2] >= math.log(ODDS):
        k = best[1]
        slip = f"sign+{k.kind}" if negative else k.kind
        if k.factor:
            told = f"your {_g(x)} {unit} is {_times(x / v)} what your data give ({_g(v)} {unit})"
        else:
            told = (f"you reported {_g(x)}, which matches {_g(k.value)}, while your data give "
                    f"{_g(v)} {unit}")
        return Verdict("slip", slip, f"{sign}{k.what}: {told}; {k.fix}")
    both = ""
    if best:
        close = [k.what for z, k, _ in scored if z <= MATCH_Z][:2]
        both = f"; it could be either of: {close[0]}; or {close[1]}" if len(close) > 1 else ""
    return Verdict("sign" if negative else "unexplained", "sign" if negative else None,
                   f"{sign}a difference of {_difference(x / v)} between your reported {name} "
                   f"({_g(x)} {unit}) and what your data give ({_g(v)} {unit}); cause not "
                   f"identified{both}: recheck your fit (the readings used, the end value) and "
                   "the arithmetic")


def _difference(r: float) -> str:
    return f"{100 * (r - 1):+.1f} %" if 0.5 <= r <= 2 else f"a factor of {r:.3g}"


def _sign_text(c: Context, reported: float) -> str:
    name, unit = NAMES[c.quantity], c.unit.text
    if c.quantity == "v0" and c.falling:
        return (f"the sign is wrong: your absorbance falls, so its slope is negative, but the "
                f"initial rate is given as a positive number ({_g(abs(reported))} {unit}, not "
                f"{_g(reported)})")
    return (f"the sign is wrong: you reported {_g(reported)} {unit}; a {name} is a positive "
            "number")
