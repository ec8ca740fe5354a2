"""Plate maps: which well holds what.

A plate map is a CSV (or TSV/.xlsx) with one row per well. Columns (case-insensitive; only
``well`` and ``role`` are required):

=============  ==============================================================================
``well``       well or trace name as it appears in the data (A1, B12, "cuvette 3", ...)
``role``       ``sample``, ``blank``, ``standard``, ``positive`` (full-signal control) or
               ``negative`` (no-signal control); ``buffer`` and ``background`` mean blank,
               ``unknown`` means sample, ``positive control``/``negative control`` the controls
``sample``     sample name (free text)
``substrate``  substrate concentration; unit in the header (``substrate_uM``,
               ``substrate (mM)``) or in the cell (``50 uM``); bare numbers are µM
``inhibitor``  inhibitor concentration, same rules
``standard``   known concentration of the absorbing species in a ``standard`` well (a standard
               curve calibrates absorbance when no epsilon is given)
``enzyme``     enzyme amount in the well, e.g. ``1 nM`` (kept for kcat)
``dilution``   dilution factor of the sample before it was added (default 1)
``protein``    protein concentration of the undiluted sample, e.g. ``0.8 mg/mL``
``group``      replicate group (default: sample + substrate + inhibitor)
``exclude``    ``yes`` to leave the well out of every analysis
=============  ==============================================================================

Lines starting with ``#`` are comments.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from .errors import InputError, UnitError
from .io import read_table
from .units import parse_concentration, parse_mass_concentration, unit_from_header

ROLES = ("sample", "blank", "standard", "positive", "negative")
#: Other words of the trade for the same roles (common practice).
_ROLE_ALIASES = {"buffer": "blank", "background": "blank", "unknown": "sample",
                 "positive control": "positive", "negative control": "negative"}


def conc_column(df, stem: str):
    """The column whose header starts with ``stem`` (substrate, inhibitor, enzyme...), or None."""
    for c in df.columns:
        if re.match(rf"^{stem}([\s_(\[]|$)", str(c), re.I):
            return c
    return None


def parse_conc_cells(df, col: str, path: str, lines) -> np.ndarray:
    """Concentrations (mol/L) of a column; unit from the header or each cell, bare numbers µM."""
    unit = unit_from_header(col) or "uM"
    out = np.full(len(df), np.nan)
    for k, cell in enumerate(df[col].tolist()):
        c = str(cell).strip()
        if not c:
            continue
        try:
            out[k] = parse_concentration(c, default=unit)
        except UnitError as exc:
            raise InputError(exc.problem, exc.fix, file=path, row=lines[k], column=col) from None
        if out[k] < 0:
            raise InputError(f"negative concentration {c!r}", "concentrations cannot be negative",
                             file=path, row=lines[k], column=col)
    return out


def read_layout(path: str) -> pd.DataFrame:
    """Read and check a plate map; returns a frame indexed by well with normalised columns.

    Columns of the result: role, sample, substrate_M, inhibitor_M, enzyme_M, enzyme, dilution,
    protein_mg_per_mL, group, exclude.
    """
    df = read_table(path)
    lines = df.attrs.get("lines", list(range(2, len(df) + 2)))
    lower = {c: str(c).strip().lower() for c in df.columns}
    df = df.rename(columns=lower)
    for req in ("well", "role"):
        if req not in df.columns:
            raise InputError(f"the plate map has no {req!r} column",
                             "add columns 'well' and 'role' (see docs/formats.md)", file=path,
                             row=df.attrs.get("header_line"))
    wells = [str(w).strip() for w in df["well"]]
    seen = {}
    for k, w in enumerate(wells):
        if not w:
            raise InputError("empty well name", "name every well", file=path, row=lines[k],
                             column="well")
        if w in seen:
            raise InputError(f"well {w} appears twice (also on row {seen[w]})",
                             "give each well one row", file=path, row=lines[k], column="well")
        seen[w] = lines[k]
    roles = []
    for k, r in enumerate(df["role"]):
        r0 = str(r).strip().lower()
        r1 = _ROLE_ALIASES.get(r0, r0)
        if r1 not in ROLES:
            raise InputError(f"unknown role {str(r).strip()!r} for well {wells[k]}",
                             f"use one of {', '.join(ROLES)}", file=path, row=lines[k],
                             column="role")
        roles.append(r1)
    out = pd.DataFrame(index=pd.Index(wells, name="trace"))
    out["role"] = roles
    out["sample"] = [str(x).strip() for x in df["sample"]] if "sample" in df.columns else ""
    for stem in ("substrate", "inhibitor", "standard"):
        col = conc_column(df, stem)
        out[f"{stem}_M"] = parse_conc_cells(df, col, path, lines) if col else np.nan
    enz = conc_column(df, "enzyme")
    out["enzyme"] = [str(x).strip() for x in df[enz]] if enz else ""
    enz_m = np.full(len(df), np.nan)
    if enz:
        for k, c in enumerate(out["enzyme"]):
            try:
                enz_m[k] = parse_concentration(c, default="nM") if c else np.nan
            except UnitError:
                enz_m[k] = np.nan          # an amount that is not molar ("2 ug") is kept as text
    out["enzyme_M"] = enz_m
    dil = np.ones(len(df))
    if "dilution" in df.columns:
        for k, c in enumerate(df["dilution"]):
            c = str(c).strip()
            if not c:
                continue
            try:
                dil[k] = float(c)
            except ValueError:
                raise InputError(f"dilution {c!r} is not a number", "write e.g. 10 for 1:10",
                                 file=path, row=lines[k], column="dilution") from None
            if dil[k] <= 0:
                raise InputError(f"dilution {c!r} must be positive", "write e.g. 10 for 1:10",
                                 file=path, row=lines[k], column="dilution")
    out["dilution"] = dil
    prot = np.full(len(df), np.nan)
    pcol = conc_column(df, "protein")
    if pcol:
        for k, c in enumerate(df[pcol]):
            c = str(c).strip()
            if c:
                try:
                    prot[k] = parse_mass_concentration(c)
                except UnitError as exc:
                    raise InputError(exc.problem, exc.fix, file=path, row=lines[k],
                                     column=pcol) from None
    out["protein_mg_per_mL"] = prot
    if "group" in df.columns and any(str(g).strip() for g in df["group"]):
        out["group"] = [str(g).strip() or w for g, w in zip(df["group"], wells, strict=True)]
    else:
        out["group"] = [
            f"{s or r}|S={_fmt(sub)}|I={_fmt(inh)}" if r == "sample" else r
            for s, r, sub, inh in zip(out["sample"], out["role"], out["substrate_M"],
                                      out["inhibitor_M"], strict=True)]
    out["exclude"] = ([str(x).strip().lower() in ("yes", "y", "true", "1", "x")
                       for x in df["exclude"]] if "exclude" in df.columns else False)
    out.attrs["source"] = path
    return out


def _fmt(m):
    return "-" if not np.isfinite(m) else f"{m * 1e6:g}uM"


def check_against(layout: pd.DataFrame, names: list[str], data_path: str) -> list[str]:
    """Check the map's wells against the data's traces; returns warnings for unmapped traces."""
    missing = [w for w in layout.index if w not in set(names)]
    if missing:
        more = f" and {len(missing) - 1} more" if len(missing) > 1 else ""
        raise InputError(f"the plate map names well {missing[0]}{more}, which the data "
                         f"({data_path}) do not have", "fix the map or give the matching data "
                         "file", file=layout.attrs.get("source"))
    unmapped = [n for n in names if n not in layout.index]
    if unmapped:
        return [f"{len(unmapped)} trace(s) are not in the plate map and are treated as samples: "
                + ", ".join(unmapped[:8]) + (" ..." if len(unmapped) > 8 else "")]
    return []
