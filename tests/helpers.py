"""Test helpers: write a TraceSet in every layout, delimiter, decimal mark, encoding and time
format the reader claims to support, so that reading it back can be compared."""

from __future__ import annotations

import numpy as np


def fmt_value(x: float, decimal: str) -> str:
    s = repr(float(x))
    return s.replace(".", ",") if decimal == "," else s


def fmt_time(seconds: float, style: str, decimal: str) -> str:
    if style == "s":
        return fmt_value(seconds, decimal)
    if style == "min":
        return fmt_value(seconds / 60.0, decimal)
    if style == "h":
        return fmt_value(seconds / 3600.0, decimal)
    if style == "hms":
        h, rem = divmod(int(round(seconds)), 3600)
        m, s = divmod(rem, 60)
        return f"{h}:{m:02d}:{s:02d}"
    if style == "ms":
        m, s = divmod(int(round(seconds)), 60)
        return f"{m:02d}:{s:02d}"
    raise ValueError(style)


TIME_HEADER = {"s": "Time (s)", "min": "time_min", "h": "Time [h]", "hms": "Time", "ms": "Time"}


def write_table(names, times, values, *, layout="wide", delimiter=",", decimal=".",
                time_style="s", preamble=(), newline="\n") -> str:
    """Text of a table in the requested shape (values: traces x times, NaN written empty)."""
    def v(x):
        return "" if not np.isfinite(x) else fmt_value(x, decimal)

    lines = list(preamble)
    th = TIME_HEADER[time_style]
    if layout == "wide":
        lines.append(delimiter.join([th, *names]))
        for j, t in enumerate(times):
            lines.append(delimiter.join([fmt_time(t, time_style, decimal)]
                                        + [v(values[i, j]) for i in range(len(names))]))
    elif layout == "long":
        lines.append(delimiter.join(["well", th, "absorbance"]))
        for i, n in enumerate(names):
            for j, t in enumerate(times):
                lines.append(delimiter.join([n, fmt_time(t, time_style, decimal), v(values[i, j])]))
    elif layout == "transposed":
        lines.append(delimiter.join([th] + [fmt_time(t, time_style, decimal) for t in times]))
        for i, n in enumerate(names):
            lines.append(delimiter.join([n] + [v(values[i, j]) for j in range(len(times))]))
    else:
        raise ValueError(layout)
    return newline.join(lines) + newline
