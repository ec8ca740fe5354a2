"""The data model: a :class:`TraceSet` holds many kinetic traces.

The readings are stored once, as traces x times arrays (a :class:`Grid`): ``times`` in seconds
(a read-only broadcast of one row when every trace was read at the same times), ``value``
(absorbance unless converted), ``usable`` (False for readings that must not be fitted) and a
reading flag (why a reading is unusable: ``overflow``, ``missing``, ``past-linear``) stored as
small integer codes. The tidy frame of design note 3, one row per reading with columns
``trace``, ``time_s``, ``value``, ``usable`` and ``flag``, is derived from the arrays when first
asked for (:attr:`TraceSet.data`), so that a large export costs its numbers once. Per-trace
metadata (role, substrate and inhibitor concentration, enzyme amount, temperature, ...) sit in
``meta``, indexed by trace name. Vectorised analyses call :meth:`TraceSet.grid`, which costs
nothing.

>>> ts = TraceSet.from_arrays(["A1"], [0.0, 30.0, 60.0], [[0.10, 0.12, 0.14]])
>>> ts.grid().values.shape
(1, 3)
>>> ts.data["time_s"].tolist()
[0.0, 30.0, 60.0]
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np
import pandas as pd

#: Reading-level flags (why a reading is not used).
READING_FLAGS = {
    "overflow": "the instrument marked the reading as over its range",
    "missing": "no reading (empty cell or NaN)",
    "past-linear": "absorbance above the linear limit of Beer–Lambert",
    "skipped": "left out by the user (--skip-reading or the plate map's skip column)",
}

#: Flag of each integer code stored in :attr:`Grid.flags` (code 0: no flag).
FLAG_NAMES = ("", "overflow", "missing", "past-linear", "skipped")
FLAG_CODE = {name: code for code, name in enumerate(FLAG_NAMES)}


def flag_codes(flags, shape: tuple[int, ...]) -> np.ndarray:
    """Reading flags as int8 codes of :data:`FLAG_NAMES`, from names or codes."""
    arr = np.asarray(flags)
    if arr.dtype.kind in "iu":
        return np.broadcast_to(arr.astype(np.int8, copy=False), shape)
    out = np.zeros(arr.shape, dtype=np.int8)
    for name, code in FLAG_CODE.items():
        if code:
            out[arr == name] = code
    unknown = (out == 0) & (arr != "")
    if unknown.any():
        raise ValueError(f"unknown reading flag {arr[unknown].flat[0]!r}; use one of "
                         f"{', '.join(FLAG_NAMES[1:])}")
    return np.broadcast_to(out, shape)


def _frozen(a: np.ndarray) -> np.ndarray:
    view = a.view()
    view.flags.writeable = False
    return view


@dataclass(frozen=True)
class Grid:
    """Traces x times arrays for vectorised work; padded with NaN where a trace is shorter.

    The arrays of a TraceSet's grid are read-only: derive new arrays instead of writing.
    """

    names: list[str]
    times: np.ndarray      # (n_traces, n_times) seconds
    values: np.ndarray     # (n_traces, n_times)
    usable: np.ndarray     # (n_traces, n_times) bool; False for padding and masked readings
    flags: np.ndarray | None = None   # (n_traces, n_times) int8 codes of FLAG_NAMES

    @property
    def shared_times(self) -> bool:
        """True when every trace was read at the same times."""
        t = self.times
        if t.ndim == 2 and t.strides[0] == 0:
            return True
        return bool(np.all(np.isclose(t, t[:1], equal_nan=True)))


@dataclass(eq=False)
class TraceSet:
    """Many traces of one measurement: readings as arrays, per-trace metadata as a frame.

    Attributes: ``readings`` (a :class:`Grid`), ``meta`` (per-trace metadata, index = trace),
    ``signal`` ("absorbance" or "concentration"), ``unit`` ("A" or "M"), ``info`` (what the
    reader found and how it decided: layout, delimiter, time unit and its source, columns set
    aside, rows left out, warnings). :attr:`data` is the same readings as a tidy frame.
    """

    readings: Grid
    meta: pd.DataFrame
    signal: str = "absorbance"
    unit: str = "A"
    info: dict = field(default_factory=dict)

    @classmethod
    def from_arrays(cls, names, times, values, usable=None, flags=None, **kw) -> TraceSet:
        """Build from a shared time vector (or a traces x times array) and a values array.

        ``flags`` are names (``"overflow"``...) or codes of :data:`FLAG_NAMES`; without them a
        reading that is not usable is flagged ``missing``. The arrays are not copied where
        their type allows.
        """
        values = np.atleast_2d(np.asarray(values, dtype=float))
        times = np.asarray(times, dtype=float)
        if times.ndim == 1:
            times = np.broadcast_to(times, values.shape)
        finite = np.isfinite(values)
        usable = finite if usable is None else (
            np.broadcast_to(np.asarray(usable, dtype=bool), values.shape) & finite)
        if flags is None:
            flags = np.where(usable, 0, FLAG_CODE["missing"]).astype(np.int8)
        codes = flag_codes(flags, values.shape)
        names = [str(n) for n in names]
        grid = Grid(names, _frozen(times), _frozen(values), _frozen(usable), _frozen(codes))
        meta = pd.DataFrame(index=pd.Index(names, name="trace"))
        return cls(readings=grid, meta=meta, **kw)

    @cached_property
    def data(self) -> pd.DataFrame:
        """The readings as a tidy frame, one row per reading (derived on first use)."""
        g = self.readings
        n, m = g.values.shape
        keep = np.isfinite(g.times).ravel()
        codes = g.flags if g.flags is not None else np.where(g.usable, 0, 2).astype(np.int8)
        return pd.DataFrame({
            "trace": np.repeat(np.asarray(g.names, dtype=object), m)[keep],
            "time_s": g.times.ravel()[keep],
            "value": g.values.ravel()[keep],
            "usable": g.usable.ravel()[keep],
            "flag": np.asarray(FLAG_NAMES, dtype=object)[codes.ravel()[keep]],
        })

    @property
    def names(self) -> list[str]:
        """Trace names in their original order."""
        return list(self.readings.names)

    def __len__(self) -> int:
        return len(self.readings.names)

    def grid(self) -> Grid:
        """The traces x times arrays (NaN padding, ``usable`` False there); no copy."""
        return self.readings

    def trace(self, name: str) -> pd.DataFrame:
        """The readings of one trace, as a tidy frame."""
        g = self.readings
        i = g.names.index(name)
        keep = np.isfinite(g.times[i])
        return pd.DataFrame({
            "trace": name, "time_s": g.times[i][keep], "value": g.values[i][keep],
            "usable": g.usable[i][keep],
            "flag": np.asarray(FLAG_NAMES, dtype=object)[g.flags[i][keep]]})

    def reading_flags(self) -> dict[str, list[str]]:
        """Per trace, the sorted distinct reading flags (e.g. ``["overflow"]``)."""
        g = self.readings
        has = {name: (g.flags == code).any(axis=1) for code, name in enumerate(FLAG_NAMES)
               if code}
        return {n: sorted(f for f, hit in has.items() if hit[i]) for i, n in enumerate(g.names)}

    def select(self, names) -> TraceSet:
        """A TraceSet with only the named traces."""
        g = self.readings
        rows = [g.names.index(n) for n in names if n in g.names]
        shared = g.times.ndim == 2 and g.times.strides[0] == 0 and len(g.names) > 0
        times = np.broadcast_to(g.times[0], (len(rows), g.times.shape[1])) if shared else (
            g.times[rows])
        sub = Grid([g.names[i] for i in rows], _frozen(times), _frozen(g.values[rows]),
                   _frozen(g.usable[rows]), _frozen(g.flags[rows]))
        meta = self.meta.loc[[n for n in self.meta.index if n in sub.names]]
        return replace(self, readings=sub, meta=meta)

    def mask_above(self, limit: float) -> TraceSet:
        """Mark readings with value above ``limit`` as unusable (flag ``past-linear``)."""
        g = self.readings
        with np.errstate(invalid="ignore"):
            hit = g.usable & (g.values > limit)
        if not hit.any():
            return replace(self)
        usable = g.usable & ~hit
        codes = np.where(hit, np.int8(FLAG_CODE["past-linear"]), g.flags)
        return replace(self, readings=replace(g, usable=_frozen(usable), flags=_frozen(codes)))

    def mask_readings(self, where: np.ndarray, flag: str = "skipped") -> TraceSet:
        """Mark the readings where ``where`` (traces x times, bool) is True as unusable, with the
        reading flag ``flag`` (a name of :data:`READING_FLAGS`)."""
        g = self.readings
        hit = g.usable & np.asarray(where, dtype=bool)
        if not hit.any():
            return replace(self)
        codes = np.where(hit, np.int8(FLAG_CODE[flag]), g.flags)
        return replace(self, readings=replace(g, usable=_frozen(g.usable & ~hit),
                                              flags=_frozen(codes)))

    def with_values(self, values: np.ndarray) -> TraceSet:
        """The same traces with new values (traces x times); non-finite ones become unusable."""
        g = self.readings
        values = np.asarray(values, dtype=float)
        if values.shape != g.values.shape:
            raise ValueError(f"values of shape {values.shape} for a grid of {g.values.shape}")
        usable = g.usable & np.isfinite(values)
        return replace(self, readings=replace(g, values=_frozen(values), usable=_frozen(usable)))

    def to_concentration(self, epsilon: float, pathlength_cm: float) -> TraceSet:
        """Beer–Lambert: value / (epsilon * b), in mol/L (signal ``concentration``)."""
        if self.signal != "absorbance":
            raise ValueError("only absorbance traces can be converted to concentration")
        out = self.with_values(self.readings.values / (epsilon * pathlength_cm))
        info = dict(self.info, epsilon=epsilon, pathlength_cm=pathlength_cm)
        return replace(out, signal="concentration", unit="M", info=info)

    def with_meta(self, extra: pd.DataFrame) -> TraceSet:
        """Join per-trace metadata (index = trace name); new columns win."""
        meta = self.meta.drop(columns=[c for c in extra.columns if c in self.meta.columns])
        meta = meta.join(extra, how="left")
        return replace(self, meta=meta)
