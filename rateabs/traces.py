"""The data model: a :class:`TraceSet` holds many kinetic traces as one tidy frame.

One row per reading: ``trace`` (well or column name), ``time_s`` (seconds), ``value``
(absorbance unless converted), ``usable`` (False for readings that must not be fitted) and
``flag`` (why a reading is unusable: ``overflow``, ``missing``, ``past-linear``...). Per-trace
metadata (role, substrate and inhibitor concentration, enzyme amount, temperature, ...) sit in
``meta``, indexed by trace name. Vectorised analyses call :meth:`TraceSet.grid` once to get
traces x times arrays.

>>> ts = TraceSet.from_arrays(["A1"], [0.0, 30.0, 60.0], [[0.10, 0.12, 0.14]])
>>> ts.grid().values.shape
(1, 3)
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

#: Reading-level flags (why a reading is not used).
READING_FLAGS = {
    "overflow": "the instrument marked the reading as over its range",
    "missing": "no reading (empty cell or NaN)",
    "past-linear": "absorbance above the linear limit of Beer–Lambert",
}


@dataclass(frozen=True)
class Grid:
    """Traces x times arrays for vectorised work; padded with NaN where a trace is shorter."""

    names: list[str]
    times: np.ndarray      # (n_traces, n_times) seconds
    values: np.ndarray     # (n_traces, n_times)
    usable: np.ndarray     # (n_traces, n_times) bool; False for padding and masked readings

    @property
    def shared_times(self) -> bool:
        """True when every trace was read at the same times."""
        t = self.times
        return bool(np.all(np.isclose(t, t[:1], equal_nan=True)))


@dataclass
class TraceSet:
    """Many traces of one measurement, as a tidy frame plus per-trace metadata.

    Attributes: ``data`` (tidy readings), ``meta`` (per-trace metadata, index = trace),
    ``signal`` ("absorbance" or "concentration"), ``unit`` ("A" or "M"), ``info`` (what the
    reader found: layout, delimiter, time unit, file metadata, warnings).
    """

    data: pd.DataFrame
    meta: pd.DataFrame
    signal: str = "absorbance"
    unit: str = "A"
    info: dict = field(default_factory=dict)

    @classmethod
    def from_arrays(cls, names, times, values, usable=None, flags=None, **kw) -> TraceSet:
        """Build from a shared time vector (or a traces x times array) and a values array."""
        values = np.atleast_2d(np.asarray(values, dtype=float))
        times = np.asarray(times, dtype=float)
        if times.ndim == 1:
            times = np.broadcast_to(times, values.shape)
        if usable is None:
            usable = np.isfinite(values)
        usable = np.broadcast_to(np.asarray(usable, dtype=bool), values.shape)
        if flags is None:
            flags = np.where(usable, "", "missing")
        n, m = values.shape
        data = pd.DataFrame({
            "trace": np.repeat(np.asarray(names, dtype=object), m),
            "time_s": times.ravel(),
            "value": values.ravel(),
            "usable": usable.ravel(),
            "flag": np.asarray(flags, dtype=object).ravel(),
        })
        data = data[np.isfinite(data["time_s"].to_numpy())].reset_index(drop=True)
        meta = pd.DataFrame(index=pd.Index(list(names), name="trace"))
        return cls(data=data, meta=meta, **kw)

    @property
    def names(self) -> list[str]:
        """Trace names in their original order."""
        return list(pd.unique(self.data["trace"]))

    def __len__(self) -> int:
        return len(self.names)

    def grid(self) -> Grid:
        """Pivot once to traces x times arrays (NaN padding, ``usable`` False there)."""
        names = self.names
        d = self.data
        order = pd.Categorical(d["trace"], categories=names, ordered=True)
        pos = d.groupby(order, observed=True).cumcount().to_numpy()
        row = order.codes
        n, m = len(names), (int(pos.max()) + 1 if len(d) else 0)
        times = np.full((n, m), np.nan)
        values = np.full((n, m), np.nan)
        usable = np.zeros((n, m), dtype=bool)
        times[row, pos] = d["time_s"].to_numpy(dtype=float)
        values[row, pos] = d["value"].to_numpy(dtype=float)
        usable[row, pos] = d["usable"].to_numpy(dtype=bool) & np.isfinite(values[row, pos])
        return Grid(names, times, values, usable)

    def trace(self, name: str) -> pd.DataFrame:
        """The readings of one trace."""
        return self.data[self.data["trace"] == name]

    def reading_flags(self) -> dict[str, list[str]]:
        """Per trace, the sorted distinct reading flags (e.g. ``["overflow"]``)."""
        flagged = self.data[self.data["flag"] != ""]
        found = flagged.groupby("trace", sort=False)["flag"].unique().to_dict() if len(
            flagged) else {}
        return {name: sorted(found.get(name, [])) for name in self.names}

    def select(self, names) -> TraceSet:
        """A TraceSet with only the named traces."""
        names = list(names)
        data = self.data[self.data["trace"].isin(names)].reset_index(drop=True)
        meta = self.meta.loc[[n for n in self.meta.index if n in names]]
        return replace(self, data=data, meta=meta)

    def mask_above(self, limit: float) -> TraceSet:
        """Mark readings with value above ``limit`` as unusable (flag ``past-linear``)."""
        d = self.data.copy()
        hit = d["usable"] & (d["value"] > limit)
        d.loc[hit, "usable"] = False
        d.loc[hit, "flag"] = "past-linear"
        return replace(self, data=d)

    def to_concentration(self, epsilon: float, pathlength_cm: float) -> TraceSet:
        """Beer–Lambert: value / (epsilon * b), in mol/L (signal ``concentration``)."""
        if self.signal != "absorbance":
            raise ValueError("only absorbance traces can be converted to concentration")
        d = self.data.copy()
        d["value"] = d["value"] / (epsilon * pathlength_cm)
        info = dict(self.info, epsilon=epsilon, pathlength_cm=pathlength_cm)
        return replace(self, data=d, signal="concentration", unit="M", info=info)

    def with_meta(self, extra: pd.DataFrame) -> TraceSet:
        """Join per-trace metadata (index = trace name); new columns win."""
        meta = self.meta.drop(columns=[c for c in extra.columns if c in self.meta.columns])
        meta = meta.join(extra, how="left")
        return replace(self, meta=meta)
