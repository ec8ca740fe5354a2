"""What the reader found in a file, per trace and for the file (the ``inspect`` command)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .io import read_traces
from .options import DEFAULT_LINEAR_LIMIT
from .traces import TraceSet


@dataclass(frozen=True)
class Inspection:
    """Per-trace rows, file-level settings and warnings of one inspected file."""

    traces: TraceSet
    results: list[dict]
    settings: dict
    warnings: list[str]


def summarize(ts: TraceSet, linear_limit: float | None = None) -> Inspection:
    """Summarise a TraceSet: usable points, time span, first/last absorbance, flags."""
    limit = DEFAULT_LINEAR_LIMIT if linear_limit is None else float(linear_limit)
    ts = ts.mask_above(limit)
    g = ts.grid()
    flags = ts.reading_flags()
    rows = []
    for i, name in enumerate(g.names):
        ok = g.usable[i]
        t, v = g.times[i][ok], g.values[i][ok]
        f = list(flags[name])
        if ok.sum() == 0:
            f.append("no-data")
        elif ok.sum() < 3:
            f.append("few-points")
        rows.append({
            "trace": name, "n_points": int(ok.sum()),
            "t_start_s": float(t[0]) if t.size else None,
            "t_end_s": float(t[-1]) if t.size else None,
            "signal": ts.signal, "A_first": float(v[0]) if v.size else None,
            "A_last": float(v[-1]) if v.size else None, "flags": f,
        })
    info = ts.info
    settings = {k: info.get(k) for k in (
        "format", "delimiter", "decimal", "encoding", "layout", "header_row", "time_column",
        "time_unit", "time_unit_source", "time_unit_header", "time_looks_like", "clock_reading",
        "clock_reading_source", "clock_reading_why", "signal_kind",
        "signal_source", "plate_format", "plate_format_source", "metadata", "metadata_facts",
        "set_aside", "dropped_rows", "few_readings", "file_ends_mid_line")}
    settings["extra_columns"] = {k: _describe(v) for k, v in info.get("extra_columns", {}).items()}
    settings["linear_limit"] = limit
    for key in ("wavelength_nm", "temperature_K", "read_interval_s", "pathlength_cm", "i0",
                "i0_source"):
        if key in info:
            settings[key] = info[key]
    warnings = list(info.get("warnings", []))
    n_over = sum("overflow" in r["flags"] for r in rows)
    if n_over:
        warnings.append(f"{n_over} trace(s) hold overflow readings; they are masked, not fitted")
    n_lin = sum("past-linear" in r["flags"] for r in rows)
    if n_lin:
        warnings.append(f"{n_lin} trace(s) pass A = {limit:g}, where stray light and bandwidth "
                        "bend Beer–Lambert; those readings are masked")
    return Inspection(ts, rows, settings, warnings)


def _describe(values) -> str:
    arr = np.asarray(values, dtype=float)
    if not np.isfinite(arr).any():
        return "no numbers"
    return f"{np.nanmin(arr):g} to {np.nanmax(arr):g}"


def inspect_file(path, *, time_unit=None, signal=None, i0=None, sheet=None,
                 linear_limit=None) -> Inspection:
    """Read ``path`` and summarise it (see :func:`summarize`)."""
    ts = read_traces(path, time_unit=time_unit, signal=signal, i0=i0, sheet=sheet)
    return summarize(ts, linear_limit)
