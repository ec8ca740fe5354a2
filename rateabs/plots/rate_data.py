"""What the ``rates`` figures draw, as plain arrays and lists: no pandas, no analysis objects.

A drawing process that takes in this, rather than the analysis, needs neither pandas nor the
readers: it can be started before the command loads them, and load matplotlib while they load
(:mod:`rateabs.views.drawing`). On a 96-well plate that takes the wait for a warm drawing
process off the command's time. The analysis side makes it (:func:`rate_drawing`); the figures
in :mod:`rateabs.plots.rates` read it (and make it themselves when given an analysis).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: The per-well columns of the rates table that the figures read (a rate column joins them
#: when the rates are converted).
COLUMNS = ("trace", "role", "method", "flags", "window_start_s", "window_end_s",
           "slope_A_per_min")


@dataclass(frozen=True)
class RateDrawing:
    """The readings (one row per well, as the analysis's grid: any blank already taken out),
    the table's columns the figures need, the plate, the blank mode, the whole-curve fit where
    it is drawn, and the replicate groups.

    ``curve_start`` is, for wells whose slope comes from the whole curve, the curve's value at
    the first usable reading (NaN elsewhere); ``curve_lines`` maps a well to its fitted curve
    (times s, values) for the wells drawn on single-well pages."""

    names: list[str]
    times: np.ndarray
    values: np.ndarray
    usable: np.ndarray
    table: dict[str, np.ndarray | list]
    plate_format: int | None = None
    left_out: list[str] = field(default_factory=list)
    blank_mode: str = ""
    curve_start: np.ndarray | None = None
    curve_lines: dict[str, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)
    replicates: dict[str, list] | None = None

    @property
    def rate_column(self) -> str:
        """The column the map and the replicates show: the rate where converted, else the
        slope."""
        return "rate_uM_per_min" if "rate_uM_per_min" in self.table else "slope_A_per_min"

    def row(self, name: str) -> dict:
        """One well's entries of the table, by column."""
        k = self.names.index(name)
        return {c: v[k] for c, v in self.table.items()}


def rate_drawing(analysis, wells: list[str] = ()) -> RateDrawing:
    """The figures' data from a rates analysis; ``wells`` are those drawn on single-well pages
    (their whole-curve fits are evaluated here)."""
    g = analysis.traces.grid()
    t = analysis.table
    cols = [c for c in (*COLUMNS, "rate_uM_per_min") if c in t.columns]
    table = {c: (t[c].to_numpy(float) if c.endswith(("_s", "_min"))
                 else np.array([str(x) for x in t[c]])) for c in cols if c != "flags"}
    table["flags"] = [tuple(f) for f in t["flags"]]
    setup = analysis.setup
    return RateDrawing(
        names=list(g.names), times=np.asarray(g.times, float), values=np.asarray(g.values, float),
        usable=np.asarray(g.usable, bool), table=table,
        plate_format=setup.plate_format if setup is not None else None,
        left_out=list(setup.skipped_wells) if setup is not None else [],
        blank_mode=(analysis.blank_info or {}).get("mode", ""),
        curve_start=_curve_start(analysis.windows, g, table["method"]),
        curve_lines={n: line for n in wells if (line := _curve_line(analysis.windows, g, n))},
        replicates=_replicates(analysis.replicates))


def _curve_start(w, g, method) -> np.ndarray:
    """The whole-curve fit's value at each well's first usable reading, where the well's slope
    comes from it (NaN elsewhere)."""
    out = np.full(len(g.names), np.nan)
    ok = g.usable & np.isfinite(g.times)
    curve = np.nonzero((method == "curve") & ok.any(axis=1))[0]
    if curve.size:
        first = g.times[curve, np.argmax(ok[curve], axis=1)]
        out[curve] = w.curve_values(curve, first[:, None])[:, 0]
    return out


def _curve_line(w, g, name: str):
    """The whole-curve fit of one well as (times s, values) over its usable readings, or None
    (no curve)."""
    i = g.names.index(name)
    ok = g.usable[i]
    if not np.isfinite(w.curve_slope[i]) or not ok.any():
        return None
    tt = np.linspace(float(np.nanmin(g.times[i][ok])), float(np.nanmax(g.times[i][ok])), 60)
    return tt, np.asarray(w.curve_values(i, tt), float)


def _replicates(reps) -> dict[str, list] | None:
    """The replicate groups as lists: group, dilution, wells, mean, sd, the wells left out of
    each mean with the reason, and the unit."""
    if reps is None or reps.empty:
        return None
    return {"group": [str(x) for x in reps["group"]],
            "dilution": [float(x) for x in reps["dilution"]],
            "wells": [list(x) for x in reps["wells"]],
            "mean": reps["mean"].to_numpy(float), "sd": reps["sd"].to_numpy(float),
            "left_out": [list(x) for x in reps["left_out"]], "unit": str(reps["unit"].iloc[0])}
