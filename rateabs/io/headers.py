"""What a header (or the label of a row) means: named rules, each a small test on the header's
words.

A header is cut into lower-case words (letters, digits, ``%`` and ``°`` apart), so that
``Temp. [°C]`` reads as ``temp . ° c`` and ``time_min`` as ``time min``. The rules:

========================  ===============================================================
rule                      matches
========================  ===============================================================
``temperature``           ``Temperature``, ``Temp (C)``, ``T [°C]``, ``T (K)``, ``deg C``
``time``                  a time word (``Time (s)``, ``Zeit``, ``elapsed``) or a bare ``t``
``time-unit-word``        a header that is only a unit of time: ``seconds``, ``min``, ``h``
``index``                 a counter: ``Cycle``, ``Read #``, ``Index``, ``Step``, ``n``
``trace-name``            the column naming the trace of each reading: ``Well``, ``Sample``
``value``                 the column of readings: ``Absorbance``, ``OD``, ``A340``, ``counts``
========================  ===============================================================

``time-unit-word`` and ``index`` are weak: a trace may well be called ``second`` or
``Step``; the shape readers accept the meaning only when the column's position and values agree
(see :mod:`rateabs.io.wide`).

>>> [rule.name for rule in RULES if rule("Temp. [°C]")]
['temperature']
>>> time_unit_from_header("time_min"), time_unit_from_header("Zeit [s]")
('min', 's')
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

_WORD = re.compile(r"[^\W\d_]+|\d+|%|°")

TIME_WORDS = frozenset({"time", "zeit", "tiempo", "temps", "tempo", "elapsed", "tijd"})
UNIT_WORDS = {
    "ms": "ms",
    "s": "s", "sec": "s", "secs": "s", "second": "s", "seconds": "s",
    "m": "min", "min": "min", "mins": "min", "minute": "min", "minutes": "min",
    "h": "h", "hr": "h", "hrs": "h", "hour": "h", "hours": "h",
}
SPELLED_UNITS = frozenset({"seconds", "minutes", "hours", "secs", "mins", "hrs"})
TEMPERATURE_WORDS = frozenset({"temp", "temperature", "temperatur", "température", "celsius",
                               "kelvin", "°"})
INDEX_HEADERS = frozenset({"cycle", "cycle no", "cycle nr", "cycle #", "read", "read no",
                           "read #", "kinetic read", "index", "no", "nr", "#", "point", "scan",
                           "step", "n"})
TRACE_HEADERS = frozenset({"well", "trace", "sample", "id", "name", "cuvette", "run", "channel",
                           "position", "pos", "sample id", "well id", "curve", "series"})
VALUE_WORDS = frozenset({"abs", "absorbance", "a", "od", "value", "signal", "reading",
                         "transmittance", "transmission", "trans", "intensity", "counts", "i",
                         "y", "raw"})


def words(header: str) -> list[str]:
    """The header's words, lower case: ``"Temp. [°C]"`` -> ``["temp", "°", "c"]``."""
    return _WORD.findall(header.lower())


def _bracketed(header: str) -> list[str]:
    """Words written in brackets or after a slash: the unit part of ``Time (s)``, ``t/min``."""
    return [w for part in re.findall(r"[(\[]([^)\]]*)[)\]]|/\s*(\S+)", header.lower())
            for w in words(" ".join(part))]


def is_temperature(header: str) -> bool:
    """A temperature: a temperature word, a degree sign, ``deg C``, or a lone C or K unit."""
    w = words(header)
    if TEMPERATURE_WORDS.intersection(w) or any(x.startswith("temperat") for x in w):
        return True
    if " ".join(w[-2:]) == "deg c":
        return True
    return _bracketed(header) in (["c"], ["k"])


def temperature_unit(header: str) -> str | None:
    """The temperature unit a header names, ``"K"``, ``"C"`` or ``"F"``, or None (the one home
    of this rule: the reader's temperature columns and ``rateabs temperature``).

    >>> [temperature_unit(h) for h in ("T (K)", "Temp. [°C]", "T_F", "Kelvin", "Temperature")]
    ['K', 'C', 'F', 'K', None]
    """
    h = header.lower()
    if re.search(r"°\s*f|º\s*f|\(f\)|\[f\]|_f$|fahrenheit|\bdeg\s*f\b|\bf\b", h):
        return "F"
    if re.search(r"\(k\)|\[k\]|_k$|kelvin|\bk\b", h):
        return "K"
    if re.search(r"°|º|\(c\)|\[c\]|_c$|celsius|\bc\b", h):
        return "C"
    return None


def is_time(header: str) -> bool:
    """A time header: a time word (``Time (s)``, ``Zeit``, ``elapsed``), a spelled-out unit
    with more words (``minutes since mixing``) or ``t`` with an optional unit (``t``,
    ``t [min]``, ``t/s``); never a temperature."""
    w = words(header)
    if not w or is_temperature(header):
        return False
    if TIME_WORDS.intersection(w) or (len(w) > 1 and w[0] in SPELLED_UNITS):
        return True
    return w[0] == "t" and (len(w) == 1 or (len(w) == 2 and w[1] in UNIT_WORDS))


def is_time_unit_word(header: str) -> bool:
    """A header that is only a unit of time (``seconds``, ``min``, ``(h)``): weak evidence."""
    w = words(header)
    return len(w) == 1 and w[0] in UNIT_WORDS


def is_index(header: str) -> bool:
    """A counter of reads: ``Cycle``, ``Cycle Nr.``, ``Read #``, ``Index``, ``Step``, ``n``."""
    h = re.sub(r"\s+", " ", header.strip().lower().rstrip("."))
    h = re.sub(r"\s*(no\.?|nr\.?|#)$", lambda m: " " + m.group(1).rstrip("."), h).strip()
    return h in INDEX_HEADERS


def is_trace_name(header: str) -> bool:
    """The column naming each reading's trace in a long table: ``Well``, ``Sample ID``..."""
    return " ".join(words(header)) in TRACE_HEADERS


def is_value(header: str) -> bool:
    """The column of readings in a long table: ``Absorbance``, ``OD``, ``A340``, ``%T``..."""
    w = words(header)
    if VALUE_WORDS.intersection(w) or "%" in w:
        return True
    return bool(re.match(r"^(a|od)\s*\d{3}\b", header.strip().lower()))


@dataclass(frozen=True)
class Rule:
    """A named rule of header meaning; call it with a header."""

    name: str
    test: Callable[[str], bool]

    def __call__(self, header: str) -> bool:
        return self.test(header)


RULES = (
    Rule("temperature", is_temperature),
    Rule("time", is_time),
    Rule("time-unit-word", is_time_unit_word),
    Rule("index", is_index),
    Rule("trace-name", is_trace_name),
    Rule("value", is_value),
)


def time_unit_from_header(header: str) -> str | None:
    """The time unit a header names: ``Time (min)`` -> ``min``; None if it names none."""
    for w in reversed(words(header)):
        if w in UNIT_WORDS:
            return UNIT_WORDS[w]
    return None


SIGNAL_RULES = (
    ("percent", re.compile(r"%\s*t\b|percent\s*trans|%\s*trans|\bt\s*%|\(%\)")),
    ("intensity", re.compile(r"\bi0\b|\bi_0\b|intensit|\bcounts\b")),
    ("transmittance", re.compile(r"transmit|transmission|\btrans\b|^t$|\(t\)")),
    ("absorbance", re.compile(r"absorb|\babs\b|\bod\b|\bod\d{3}|\ba\d{3}\b|\bextinction")),
)


def detect_signal(text: str) -> str | None:
    """Signal kind named by header or metadata words (the first rule that matches), or None.

    >>> detect_signal("Mode: %T"), detect_signal("A340 well B2"), detect_signal("tube 1")
    ('percent', 'absorbance', None)
    """
    w = text.lower()
    return next((kind for kind, pattern in SIGNAL_RULES if pattern.search(w)), None)
