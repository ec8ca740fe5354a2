"""``read_traces``: an export file in, a :class:`~rateabs.traces.TraceSet` of absorbance traces
out, with every decision the reader took recorded in ``TraceSet.info`` as fields."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError, UsageError
from ..traces import TraceSet
from ..units import TIME_UNITS, fahrenheit_to_kelvin
from .blocks import read_blocks
from .body import RowLog
from .headers import temperature_unit
from .locate import locate
from .metadata import choose_plate, file_facts, plate_format, preamble, stated_plate
from .parsed import Parsed
from .signal import (
    SIGNAL_KINDS,
    check_magnitude,
    decide_kind,
    plausibility,
    to_absorbance,
    unit_in_header,
    unit_in_names,
)
from .sniffing import sniff_decimal
from .source import Source
from .times import MIN_TIME_POINTS
from .transposed import label_rows_above, read_transposed
from .wide import read_normal


def read_traces(path: str | Path, *, time_unit: str | None = None, signal: str | None = None,
                i0: float | None = None, sheet: str | None = None,
                partial: bool = False) -> TraceSet:
    """Read a kinetic export into a :class:`TraceSet` of absorbance traces.

    Parameters: ``time_unit`` overrides the detected unit of a numeric time column (s, min, h);
    ``signal`` overrides the detected signal kind (absorbance, transmittance, percent,
    intensity); ``i0`` is the reference intensity for raw intensities when the file has no
    ``I0`` trace or metadata line; ``sheet`` picks an .xlsx sheet; ``partial`` leaves out an
    unfinished last line (a file an instrument is still appending to). A half-written last line
    is left out in every mode, with a warning.

    Raises :class:`~rateabs.errors.InputError` with file, row and column for anything it cannot
    read. Input files are only read, never written. ``TraceSet.info`` records how each thing
    was decided (``time_unit`` and ``time_unit_source``, ``signal_kind`` and
    ``signal_source``, ``set_aside``, ``dropped_rows``, ``plate_format``...).

    >>> ts = read_traces("plate.csv")            # doctest: +SKIP
    >>> ts.info["layout"], ts.names[:3]          # doctest: +SKIP
    ('wide', ['A1', 'A2', 'A3'])
    """
    path = str(path)
    if time_unit is not None and time_unit not in TIME_UNITS:
        raise UsageError(f"unknown time unit {time_unit!r}", "use s, min or h")
    if signal is not None and signal not in SIGNAL_KINDS:
        raise UsageError(f"unknown signal kind {signal!r}", f"use one of {', '.join(SIGNAL_KINDS)}")
    try:
        with Source(path, sheet) as src:
            return _read(src, time_unit, signal, i0, partial)
    except (InputError, UsageError) as exc:
        raise exc.located(path) from None


def _read(src: Source, time_unit, signal, i0, partial) -> TraceSet:
    decimal = sniff_decimal(src.head, src.delimiter)
    loc = locate(src.head, decimal)
    log = RowLog()
    if loc.shape == "blocks":
        parsed = read_blocks(src, loc.index, decimal, time_unit, log, partial)
        top = max(loc.index - 1, 0)
    elif loc.shape == "transposed":
        parsed = read_transposed(src, loc.index, decimal, time_unit, log, partial)
        top = label_rows_above(src, loc.index, decimal)
    else:
        parsed = read_normal(src, loc.index, decimal, time_unit, log, partial)
        top = loc.index
    if not parsed.names:
        raise InputError("no trace columns were found next to the time column",
                         "export one column (or row) of readings per well or sample")
    meta = preamble(src.head, top, src.delimiter)
    kind, kind_source = decide_kind(signal, parsed.header_words, meta)
    unit_notes, scale = _name_unit(parsed, signal)
    if unit_notes:
        kind, kind_source = unit_notes[0]
    warnings, looks_like = plausibility(kind, parsed.values, signal is not None)
    conv = to_absorbance(kind, parsed.names, parsed.values, parsed.flags, meta, i0)
    check_magnitude(conv.values, conv.names, looks_like)
    facts, said = file_facts(meta)
    times = interval_check(parsed, facts.get("read_interval_s"))
    refuse_plate_minutes(parsed, times, len(conv.names))
    ts = TraceSet.from_arrays(conv.names, times, conv.values, flags=conv.flags)
    few = _few_readings(conv.names, ts.grid().usable)
    guess = parsed.plate if parsed.plate[0] else plate_format(conv.names)
    stated = stated_plate(meta)
    plate = choose_plate(guess, stated)
    ts.info.update(
        source=src.path, format=src.fmt, delimiter=src.delimiter, decimal=decimal,
        encoding=src.encoding, layout=parsed.layout, header_row=src.head_nos[loc.index],
        time_column=parsed.time.label, time_unit=parsed.time.unit,
        time_unit_source=parsed.time.source, time_unit_header=parsed.time.header_unit,
        clock_reading=parsed.time.reading, clock_reading_source=parsed.time.reading_source,
        clock_reading_why=parsed.time.reading_why or None,
        time_looks_like=parsed.time.looks_like, signal_kind=kind, signal_source=kind_source,
        signal_unit_note=unit_notes[1] if len(unit_notes) > 1 else None, **scale,
        looks_like=looks_like, plate_format=plate[0], plate_format_source=plate[1],
        plate_guess=list(guess) if guess[0] else None,
        plate_stated=list(stated) if stated else None,
        metadata=meta, metadata_facts=said, set_aside=parsed.set_aside,
        extra_columns=parsed.extra, dropped_rows=log.summary(), few_readings=few,
        file_ends_mid_line=not src.terminated, **{k: v for k, v in conv.facts.items()},
        warnings=(src.notes + parsed.time.warnings + parsed.notes + unit_notes[1:] + warnings
                  + log.warnings()
                  + _few_warning(few) + ([plate[2]] if plate[2] else [])),
    )
    _trace_meta(ts, parsed, facts)
    return ts


def _name_unit(parsed: Parsed, signal: str | None) -> tuple[list, dict]:
    """Where every trace name carries a signal unit in brackets (``A1 (mAU)``): the names
    without it (so that they are wells again), the readings on the kind's own scale (mAU
    divided by 1000) and, first in the list, the kind and where it was learnt; then a note of
    what was done; beside the list, the unit as written and the factor the readings were
    multiplied by (``signal_unit_as_read``, ``signal_factor``). --signal, where given, decides
    the kind and the unit only renames."""
    scale = {"signal_unit_as_read": None, "signal_factor": 1.0}
    found = unit_in_names(parsed.names)
    said = f"the unit '({found.unit})' after every trace name" if found else ""
    if found is None and parsed.layout.startswith("long"):
        found = unit_in_header(parsed.header_words)
        said = f"the unit '({found.unit})' of the readings' column" if found else ""
    if found is None:
        return [], scale
    parsed.names = found.names or parsed.names
    scale["signal_unit_as_read"] = found.unit
    if signal is not None and signal != found.kind:
        return [(signal, "option"), f"--signal {signal} is used, though {said} names "
                f"{found.kind}; the unit was taken off the names only"], scale
    if found.factor != 1.0:
        parsed.values = parsed.values * found.factor
        scale["signal_factor"] = found.factor
    scaled = (f": the readings were divided by {1 / found.factor:g} to {found.kind}"
              if found.factor != 1.0 else "")
    renamed = (f"; the names are used without it ({parsed.names[0]}, ...)" if found.names
               else "")
    return [(found.kind, f"header unit '{found.unit}'"),
            f"{said} was read as {found.kind}{scaled}{renamed}"], scale


#: A bare time column that looks like minutes (:func:`~rateabs.io.times.looks_like_minutes`)
#: is refused as seconds where this many traces or more share it: a plate reader takes seconds,
#: not tenths of one, to read a plate's wells once (common practice), so a plate cannot step
#: by 0.25 s. A trial file in minutes, read as seconds with only a warning, gave every rate
#: 60x high with exit 0. A few cuvettes keep the warning.
PLATE_TRACES = 8
#: ... and so is any bare time column of a plate that steps by a second or less and ends within
#: a minute (0, 0.3333, 0.6667, ... or 0, 1, 2, ... 10): read as seconds, a whole kinetic read
#: of a plate in under a minute, at a second a read. An audit's plate in minutes with 20-s
#: reads (0.3333-min steps) and one with 1-min steps were read as seconds, 60x high.
PLATE_FASTEST_STEP_S, PLATE_SHORTEST_READ_S = 1.0, 60.0


def refuse_plate_minutes(parsed: Parsed, times: np.ndarray, n_traces: int) -> None:
    """Stop where a plate's bare time column, read as seconds, looks like minutes."""
    tu = parsed.time
    if tu.source != "assumed" or n_traces < PLATE_TRACES:
        return
    finite = times[np.isfinite(times)]
    if finite.size < 3:
        return
    step = float(np.median(np.diff(finite)))
    fast = 0 < step <= PLATE_FASTEST_STEP_S and finite[-1] - finite[0] < PLATE_SHORTEST_READ_S
    if tu.looks_like != "min" and not fast:
        return
    raise InputError(
        f"the time column {tu.label!r} names no unit, and read as seconds its {finite.size} "
        f"readings of {n_traces} wells would be {step:g} s apart: no plate reader reads a plate "
        "that fast, so they look like minutes",
        "give --time-unit min (or --time-unit s if they are seconds), or name the unit in the "
        "header, e.g. 'Time (min)'", column=tu.label)


#: Steps and a stated read interval agree when within this share of the interval.
INTERVAL_MATCH = 0.02


def interval_check(parsed: Parsed, interval_s: float | None) -> np.ndarray:
    """The times (s), with a bare time column's unit decided by the read interval the file's
    header states where its steps match it in minutes (they were read as seconds), and a
    warning where a stated unit's steps contradict that interval."""
    tu, t = parsed.time, parsed.times
    if not interval_s or interval_s <= 0 or np.ndim(t) != 1:
        return t
    finite = t[np.isfinite(t)]
    if finite.size < 3:
        return t
    step = float(np.median(np.diff(finite)))

    def close(a: float) -> bool:
        return abs(a - interval_s) <= INTERVAL_MATCH * interval_s

    if tu.source == "clock":
        return _clock_interval(tu, t, step, interval_s, close)
    if tu.source == "assumed" and (close(step * 60) or close(step)):
        minutes = close(step * 60)
        tu.warnings[:] = [w for w in tu.warnings if "names no unit" not in w]
        tu.warnings.append(
            f"the time column {tu.label!r} names no unit: read as "
            f"{'minutes' if minutes else 'seconds'}, as its steps of {step:g} match the read "
            f"interval of {interval_s:g} s in the file header; give --time-unit to override")
        tu.source, tu.looks_like = "interval", None
        if minutes:
            tu.unit = "min"
            return t * 60.0
    elif not close(step):
        tu.warnings.append(f"the file header states a read interval of {interval_s:g} s, but "
                           f"the readings in {tu.label!r} are {step:g} s apart; check the "
                           "time unit (--time-unit) and the export")
    return t


def _clock_interval(tu, t: np.ndarray, step: float, interval_s: float, close) -> np.ndarray:
    """Two-part clock times read as m:ss by default whose steps match the stated read
    interval as h:mm (then read so) or as m:ss (then kept, with the interval as the reason)."""
    if tu.reading_source != "default" or not tu.only_two_part:
        return t
    hours = close(step * 60)
    if not (hours or close(step)):
        return t
    tu.warnings[:] = [w for w in tu.warnings if "have two parts" not in w]
    tu.reading, tu.reading_source = ("h:mm" if hours else "m:ss"), "interval"
    tu.reading_why = (f"their steps of {step * (60 if hours else 1):g} s match the read "
                      f"interval of {interval_s:g} s in the file header")
    return t * 60.0 if hours else t


def _few_readings(names: list[str], usable: np.ndarray) -> list[str]:
    """Traces with fewer usable readings than a slope with an uncertainty needs."""
    counts = usable.sum(axis=1)
    if not usable.any():
        raise InputError("no usable readings: every value is missing or over range",
                         "export the readings again")
    return [n for n, c in zip(names, counts, strict=True) if c < MIN_TIME_POINTS]


def _few_warning(few: list[str]) -> list[str]:
    if not few:
        return []
    shown = ", ".join(few[:8]) + (", ..." if len(few) > 8 else "")
    return [f"{len(few)} trace(s) have fewer than {MIN_TIME_POINTS} usable readings ({shown}): "
            "flagged, no rate can be trusted from them"]


def _trace_meta(ts: TraceSet, parsed: Parsed, facts: dict[str, float]) -> None:
    """Per-trace columns, file facts and the mean of a temperature column into ``meta``."""
    for col, vals in parsed.per_trace.items():
        ts.meta[col] = [vals.get(n) for n in ts.meta.index]
    ts.info["per_trace_columns"] = list(parsed.per_trace)
    ts.info.update(facts)
    for key, val in facts.items():
        ts.meta[key] = val
    for col, role in parsed.set_aside.items():
        arr = parsed.extra.get(col)
        if role != "temperature" or arr is None or not np.isfinite(arr).any():
            continue
        kelvin, note = _kelvin(col, float(np.nanmean(arr)))
        ts.meta["temperature_K"] = kelvin
        ts.info["temperature_K"] = kelvin
        if note:
            ts.info["warnings"].append(note)


def _kelvin(col: str, mean: float) -> tuple[float, str | None]:
    """The mean of a temperature column in K; values that contradict the header's unit are read
    in the unit they fit, with a warning."""
    said = temperature_unit(col) or "C"        # a plate reader's bare 'Temperature': °C
    if said == "F":
        return fahrenheit_to_kelvin(mean), None
    fits = "K" if mean > 200 else "C" if mean < 150 else said
    if fits == said:
        return (mean if said == "K" else mean + 273.15), None
    name = {"K": "kelvin", "C": "degrees Celsius"}
    note = (f"the temperature column {col!r} names {name[said]} but its values (mean {mean:.4g}) "
            f"are only plausible in {name[fits]}; read as {name[fits]}")
    return (mean if fits == "K" else mean + 273.15), note
