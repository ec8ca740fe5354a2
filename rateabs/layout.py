"""Plate maps: which well holds what.

A plate map is a CSV (or TSV/.xlsx) with one row per well. Columns (case-insensitive; only
``well`` and ``role`` are required):

=============  ==============================================================================
``well``       well or trace name as it appears in the data (A1, B12, "cuvette 3", ...)
``role``       ``sample``, ``blank``, ``standard``, ``positive`` (full-signal control) or
               ``negative`` (no-signal control); ``buffer`` and ``background`` mean blank,
               ``unknown`` means sample, ``positive control``/``negative control`` the controls
``sample``     sample name (free text)
``substrate``  substrate concentration; unit in the header (``substrate_uM``, ``substrate mM``,
               ``substrate (mM)``, ``[S] (mM)``) or in the cell (``50 uM``); bare numbers are µM
``inhibitor``  inhibitor concentration, same rules
``standard``   known concentration of the absorbing species in a ``standard`` well (a standard
               curve calibrates absorbance when no epsilon is given)
``enzyme``     enzyme concentration in the well, e.g. ``1 nM`` (gives v/[E], and kcat)
``dilution``   dilution factor of the sample before it was added; an empty cell (or no column)
               takes ``--dilution``, else 1
``protein``    protein concentration of the undiluted sample, e.g. ``0.8 mg/mL``; unit in the
               header (``protein_ug_per_mL``, ``protein (ug/mL)``) or the cell; bare mg/mL
``group``      replicate group; an empty cell (or no column) takes the default group, sample +
               substrate + inhibitor
``exclude``    ``yes`` (y, true, 1, x) to leave the well out of every analysis; ``no`` (n, false, 0,
               -) or empty keeps it; any other word is refused
``window``     the well's own window, ``START-END`` (bare numbers are s; ``1.5-5 min``) or ``auto``
``skip``       readings to leave out, by time: ``120`` or ``120; 240`` (bare numbers are s)
=============  ==============================================================================

Lines starting with ``#`` are comments. ``read_layout`` records in ``attrs["columns"]`` which
optional columns the map has, so that the analysis can say where each value came from, and in
``attrs["units"]`` each concentration column's header and the unit it names, as written.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from .errors import InputError, UnitError, UsageError
from .io import read_table
from .rules import Window
from .units import (
    parse_concentration,
    parse_mass_concentration,
    quantity,
    strip_header_unit,
    unit_from_header,
)
from .wells import well_key

ROLES = ("sample", "blank", "standard", "positive", "negative")
#: Other words of the trade for the same roles (common practice).
_ROLE_ALIASES = {"buffer": "blank", "background": "blank", "unknown": "sample",
                 "positive control": "positive", "negative control": "negative"}
_YES = ("yes", "y", "true", "1", "x")
_NO = ("no", "n", "false", "0", "-")


def conc_column(df, stem: str):
    """The column that names ``stem`` (substrate, inhibitor, enzyme...) with at most a unit and
    a word for concentration after it (``substrate``, ``substrate (mM)``, ``substrate_uM``,
    ``Substrate conc (uM)``), or None. A header that only starts with the stem
    (``standard deviation``, ``inhibitor name``, ``substrate lot``) is not that column: it is
    left to the look-alike rules of :func:`_unread_columns`, never read as concentrations."""
    written = df.attrs.get("headers", {})         # units are read in the case they were given
    for c in df.columns:
        if names_quantity(written.get(c, str(c)), stem):
            return c
    return None


#: Words a header may put between a quantity's name and its unit ('substrate conc (uM)').
_CONC_WORDS = ("", "conc", "conc.", "concentration", "final", "final conc", "final conc.",
               "final concentration")


#: The symbols the trade writes for a concentration column (common practice: [S] for the
#: substrate, [I] the inhibitor, [E] the enzyme; a 0 for "initial").
_SYMBOLS = {"substrate": ("[s]", "[s]0", "[s]₀", "s0", "[s0]"),
            "inhibitor": ("[i]", "[i]0", "[i]₀", "i0", "[i0]"),
            "enzyme": ("[e]", "[e]0", "[e]₀", "e0", "[e0]", "[e]t", "[e]total")}


def names_quantity(header: str, stem: str) -> bool:
    """Whether ``header`` is ``stem`` followed by nothing but a unit and a word for
    concentration (:data:`_CONC_WORDS`), in any case, or the quantity's symbol with at most a
    unit (``[S] (mM)``, :data:`_SYMBOLS`)."""
    h, symbols = header.strip(), _SYMBOLS.get(stem, ())
    if _bare_symbol(h):                             # '[S]': its brackets are not a unit
        return _bare_symbol(h) in symbols
    name = strip_header_unit(h)
    if name.strip().lower() in symbols:
        return True
    if not re.match(rf"^{re.escape(stem)}([\s_(\[]|$)", h, re.I):
        return False
    return re.sub(r"[\s_]+", " ", name[len(stem):]).strip().lower() in _CONC_WORDS


def header_unit(df, col: str | None) -> str:
    """The unit a map column's header names as written (``enzyme (uM)``, ``substrate_mM``: the
    columns are matched in lower case, their units read in the case they were given), or ""
    (a bare symbol such as ``[S]`` names none)."""
    if not col:
        return ""
    header = df.attrs.get("headers", {}).get(col, col)
    return "" if _bare_symbol(header) else unit_from_header(header)


def _bare_symbol(header: str) -> str:
    """The header in lower case where it is a quantity's symbol alone (``[S]``), else ""."""
    h = header.strip().lower()
    return h if any(h in symbols for symbols in _SYMBOLS.values()) else ""


def parse_conc_cells(df, col: str, path: str, lines) -> np.ndarray:
    """Concentrations (mol/L) of a column; unit from the header (as written: mM is not Mm) or
    each cell, bare numbers µM."""
    header = df.attrs.get("headers", {}).get(col, col)
    unit = header_unit(df, col) or "uM"
    out = np.full(len(df), np.nan)
    for k, cell in enumerate(df[col].tolist()):
        c = str(cell).strip()
        if not c:
            continue
        try:
            out[k] = parse_concentration(c, default=unit)
        except UnitError as exc:
            raise InputError(exc.problem, exc.fix, file=path, row=lines[k],
                             column=header) from None
        if out[k] < 0:
            raise InputError(f"negative concentration {c!r}", "concentrations cannot be negative",
                             file=path, row=lines[k], column=col)
    return out


class _MapCells:
    """The cells of one plate map with the file and line numbers for error messages."""

    def __init__(self, df: pd.DataFrame, path: str) -> None:
        self.df, self.path = df, path
        self.lines = df.attrs.get("lines", list(range(2, len(df) + 2)))

    def fail(self, k: int, column: str, problem: str, fix: str) -> InputError:
        """The one-line error for row ``k`` of ``column``."""
        return InputError(problem, fix, file=self.path, row=self.lines[k], column=column)

    def cells(self, col: str | None):
        """(row index, stripped text) of every non-empty cell of ``col`` (none without it)."""
        if col is None or col not in self.df.columns:
            return []
        return [(k, str(c).strip()) for k, c in enumerate(self.df[col]) if str(c).strip()]


def read_layout(path: str) -> pd.DataFrame:
    """Read and check a plate map; returns a frame indexed by well with normalised columns.

    Columns of the result: role, sample, substrate_M, inhibitor_M, standard_M, enzyme,
    enzyme_M, dilution (NaN where the map gives none), protein_mg_per_mL, group, exclude,
    window (None, ``"auto"`` or a (start_s, end_s) pair) and skip (times in s, a tuple).
    """
    df = read_table(path)
    headers = {str(c).strip().lower(): str(c).strip() for c in df.columns}
    df = df.rename(columns={c: str(c).strip().lower() for c in df.columns})
    df.attrs["headers"] = headers              # as written: units in headers keep their case
    for req in ("well", "role"):
        if req not in df.columns:
            raise InputError(f"the plate map has no {req!r} column",
                             "add columns 'well' and 'role' (see docs/formats.md)", file=path,
                             row=df.attrs.get("header_line"))
    m = _MapCells(df, path)
    wells = _wells(m)
    out = pd.DataFrame(index=pd.Index(wells, name="trace"))
    out["role"] = _roles(m, wells)
    out["sample"] = [str(x).strip() for x in df["sample"]] if "sample" in df.columns else ""
    for stem in ("substrate", "inhibitor", "standard"):
        col = conc_column(df, stem)
        out[f"{stem}_M"] = parse_conc_cells(df, col, path, m.lines) if col else np.nan
    out["enzyme"], out["enzyme_M"] = _enzyme(m)
    out["dilution"] = _dilutions(m)
    out["protein_mg_per_mL"] = _protein(m)
    out["group"] = _groups(m, out)
    out["exclude"] = _excludes(m)
    out["window"] = _windows(m)
    out["skip"] = _skips(m)
    out.attrs["source"] = path
    out.attrs["units"] = {stem: (headers.get(col, col), header_unit(df, col))
                          for stem in _BY_STEM if (col := conc_column(df, stem))}
    out.attrs["notes"] = (name_variants(m, list(out["role"])) + _enzyme_note(out)
                          + _unread_columns(df, path))
    out.attrs["columns"] = sorted(c for c in ("dilution", "protein", "group", "window", "skip",
                                              "exclude", "enzyme")
                                  if c in df.columns or (c in ("protein", "enzyme")
                                                         and conc_column(df, c)))
    return out


#: The columns a plate map may have (module docstring); concentration columns are matched by
#: their name with a unit after it (``substrate (mM)``).
MAP_COLUMNS = ("well", "role", "sample", "substrate", "inhibitor", "standard", "enzyme",
               "dilution", "protein", "group", "exclude", "window", "skip")
#: The columns matched by their name with a unit after it (:func:`names_quantity`); the others
#: only by their exact name.
_BY_STEM = ("substrate", "inhibitor", "standard", "enzyme", "protein")
#: Columns of free text that a map may carry for people, read by no one and said nothing of.
_FREE_TEXT = ("note", "notes", "comment", "comments", "description", "remark", "remarks")


#: Map columns whose values change the numbers, not just add one: a look-alike of one of these
#: (``dilutoin``, ``dilution factor``, ``substrat_uM``) where the map lacks it stops the run, as
#: its values would otherwise be left out in silence (a lysate's U/mL 8x low, six substrate
#: levels averaged into one activity). A look-alike of another column is named in a warning.
_MUST_READ = ("sample", "substrate", "inhibitor", "standard", "dilution")
#: Words of an identifier: a note beside a concentration ('inhibitor name'), but the sample
#: column itself under another header ('Sample ID', 'sample name').
_IDENTIFIERS = {"name", "id", "label", "code"}
#: Words that make a look-alike a person's note ('dilution note', 'substrate lot', 'inhibitor
#: name', 'standard deviation'): named in the warning, and a stop only where it is a note
#: (:data:`_FREE_TEXT`) of a column the map lacks whose cells are all numbers ('dilution note'
#: holding 1, 4, 10 is a dilution under another name). Identifiers (lot, name, id...) never stop.
_NOTE_WORDS = set(_FREE_TEXT) | {"lot", "batch", "supplier", "vendor", "source", "type",
                                 "deviation", "dev", "sd", "error", "catalog", "cas"} | _IDENTIFIERS
#: Short forms of map columns that a typing-slip match cannot reach (common practice).
_SHORT_FORMS = {"diln": "dilution", "dil": "dilution", "df": "dilution", "subs": "substrate",
                "subst": "substrate", "inhib": "inhibitor", "inh": "inhibitor", "std": "standard",
                "prot": "protein", "enz": "enzyme", "grp": "group"}


def _looks_like(header: str) -> str | None:
    """The map column a header not read most likely means: a word of it (units in brackets
    left out) that is a map column's name, or within a typing slip of one (difflib ratio 0.8:
    ``dilutoin``, ``substrat``), else None."""
    import difflib

    every = re.findall(r"[a-z]+", re.sub(r"[(\[].*?[)\]]", " ", header.lower()))
    for w in every:
        if w in MAP_COLUMNS or w in _SHORT_FORMS:
            return _SHORT_FORMS.get(w, w)
    words = [w for w in every if len(w) >= 4]
    for w in words:
        close = difflib.get_close_matches(w, MAP_COLUMNS, n=1, cutoff=0.8)
        if close:
            return close[0]
    return None


def _unread_columns(df: pd.DataFrame, path: str) -> list[str]:
    """A note naming the map's columns that are not read ('total protein (mg/mL)'), with the
    column each most likely means, so that a value meant for the analysis is never left out in
    silence; a look-alike of a column of :data:`_MUST_READ` that the map lacks stops the run."""
    read = {c: (conc_column(df, c) if c in _BY_STEM else None) or c for c in MAP_COLUMNS}
    known = set(read.values())
    unread = [c for c in df.columns
              if c not in known and c not in _FREE_TEXT and not str(c).startswith("unnamed")]
    if not unread:
        return []
    have = {c for c, col in read.items() if col in df.columns}
    said = []
    for c in unread:
        header, like = df.attrs["headers"].get(c, c), _looks_like(c)
        words = set(re.findall(r"[a-z]+", c))
        note = bool(_NOTE_WORDS & words) and not (like == "sample" and words & _IDENTIFIERS)
        numbers = (note and not (_NOTE_WORDS - set(_FREE_TEXT)) & words
                   and _all_numbers(df[c]))
        if _per_well_volumes(c, df[c]):
            raise InputError(
                f"the plate map's column {header!r} gives the wells different volumes, and "
                "volumes are not read from the map: every activity would use the one "
                "--total-volume and --sample-volume",
                "analyse the wells of each volume on their own (a map per volume, with the "
                "options for it), or remove the column if it is only a record",
                file=path, row=df.attrs.get("header_line"), column=header)
        if like in _MUST_READ and like not in have and (not note or numbers):
            unit = f" with its unit, e.g. '{like} (uM)'" if like in _BY_STEM else ""
            raise InputError(
                f"the plate map's column {header!r} looks like {like!r}, which the map does not "
                "have, and is not read: its values would be left out of every number",
                f"rename it {like!r}{unit}, or 'note' if it is not meant for the analysis",
                file=path, row=df.attrs.get("header_line"), column=header)
        hint = ("" if not like or note and like not in have
                else f" (beside the {like!r} column, which is read)" if like in have
                else f" (meant as {like!r}? rename it so)")
        said.append(f"{header!r}{hint}")
    return [f"the plate map's column(s) {', '.join(said)} are not read; the columns read are "
            f"{', '.join(MAP_COLUMNS)} (units in the header, e.g. 'protein (mg/mL)'; see "
            "docs/formats.md)"]


def _per_well_volumes(column: str, cells) -> bool:
    """Whether an unread column headed with 'volume' (or 'vol') holds numbers that differ
    between wells: volumes that change the activity well by well, which the map cannot carry."""
    if not {"volume", "vol"} & set(re.findall(r"[a-z]+", column)) or not _all_numbers(cells):
        return False
    return len({float(x) for x in (str(c).strip() for c in cells) if x}) > 1


def _all_numbers(cells) -> bool:
    """Whether a column has cells and every non-empty one is a number ('4', '1:10' is not)."""
    text = [str(x).strip() for x in cells if str(x).strip()]
    try:
        return bool(text) and all(np.isfinite(float(x)) for x in text)
    except ValueError:
        return False


def _wells(m: _MapCells) -> list[str]:
    wells = [str(w).strip() for w in m.df["well"]]
    seen: dict[str, int] = {}
    for k, w in enumerate(wells):
        if not w:
            raise m.fail(k, "well", "empty well name", "name every well")
        if w in seen:
            raise m.fail(k, "well", f"well {w} appears twice (also on row {seen[w]})",
                         "give each well one row")
        seen[w] = m.lines[k]
    return wells


def _roles(m: _MapCells, wells: list[str]) -> list[str]:
    roles = []
    for k, r in enumerate(m.df["role"]):
        r0 = str(r).strip().lower()
        r1 = _ROLE_ALIASES.get(r0, r0)
        if r1 not in ROLES:
            raise m.fail(k, "role", f"unknown role {str(r).strip()!r} for well {wells[k]}",
                         f"use one of {', '.join(ROLES)}")
        roles.append(r1)
    return roles


def _enzyme(m: _MapCells) -> tuple[list[str], np.ndarray]:
    """The enzyme cells as written, and as mol/L where they are molar (else NaN: an amount
    such as "2 ug" is kept as text)."""
    col = conc_column(m.df, "enzyme")
    text = [str(x).strip() for x in m.df[col]] if col else [""] * len(m.df)
    molar = np.full(len(m.df), np.nan)
    unit = header_unit(m.df, col) or "nM"
    for k, c in m.cells(col):
        try:
            molar[k] = parse_concentration(c, default=unit)
        except UnitError:
            continue
    return text, molar


def _enzyme_note(out: pd.DataFrame) -> list[str]:
    """A note where enzyme cells are written but not as molar concentrations ("2 ug",
    "0.5 ug/mL"): they are kept as text and give no v/[E]."""
    text = [t for t, molar in zip(out["enzyme"], out["enzyme_M"], strict=True)
            if t and not np.isfinite(molar)]
    if not text:
        return []
    return [f"{len(text)} enzyme cell(s) of the plate map are not molar concentrations (e.g. "
            f"{text[0]!r}) and give no v/[E]; write them in nM or uM (e.g. 10 nM) for turnover"]


def _dilutions(m: _MapCells) -> np.ndarray:
    dil = np.full(len(m.df), np.nan)
    for k, c in m.cells("dilution"):
        try:
            dil[k] = float(c)
        except ValueError:
            raise m.fail(k, "dilution", f"dilution {c!r} is not a number",
                         "write e.g. 10 for 1:10") from None
        if not (np.isfinite(dil[k]) and dil[k] >= 1):
            raise m.fail(k, "dilution", f"dilution {c!r} is below 1",
                         "write the fold dilution, 1 or more (10 for 1:10), as --dilution takes")
    return dil


def _protein(m: _MapCells) -> np.ndarray:
    col = conc_column(m.df, "protein")
    prot = np.full(len(m.df), np.nan)
    unit = header_unit(m.df, col) or "mg/mL"
    for k, c in m.cells(col):
        try:
            prot[k] = parse_mass_concentration(c, default=unit)
        except UnitError as exc:
            raise m.fail(k, col, exc.problem, exc.fix) from None
    return prot


def _groups(m: _MapCells, out: pd.DataFrame) -> list[str]:
    """The map's group where its cell is filled, else the default: sample + substrate +
    inhibitor for samples, the role for controls and blanks."""
    has_s, has_i = bool(np.isfinite(out["substrate_M"]).any()), bool(
        np.isfinite(out["inhibitor_M"]).any())      # a map without a column names no part of it
    default = [f"{s or r}" + (f"|S={_fmt(sub)}" if has_s else "")
               + (f"|I={_fmt(inh)}" if has_i else "") if r == "sample" else r
               for s, r, sub, inh in zip(out["sample"], out["role"], out["substrate_M"],
                                         out["inhibitor_M"], strict=True)]
    given = dict(m.cells("group"))
    return [given.get(k, d) for k, d in enumerate(default)]


def _excludes(m: _MapCells) -> list[bool]:
    """The exclude column: yes or no per well (an empty cell is no); any other word is refused,
    so that a well meant to be left out is never kept in silence."""
    out = [False] * len(m.df)
    for k, c in m.cells("exclude"):
        if c.lower() not in _YES + _NO:
            raise m.fail(k, "exclude", f"exclude {c!r} is neither yes nor no",
                         f"write yes ({', '.join(_YES)}) to leave the well out, or no or nothing "
                         "to keep it")
        out[k] = c.lower() in _YES
    return out


def _windows(m: _MapCells) -> list:
    wins: list = [None] * len(m.df)
    for k, c in m.cells("window"):
        try:
            wins[k] = Window().check(c, "window")
        except UsageError:
            raise m.fail(k, "window", f"window {c!r} is neither 'auto' nor START-END",
                         "write e.g. 60-300 (seconds) or auto") from None
    return wins


def _skips(m: _MapCells) -> list[tuple]:
    skips: list[tuple] = [()] * len(m.df)
    for k, c in m.cells("skip"):
        times = []
        for part_ in re.split(r"[;|]", c):
            if not part_.strip():
                continue
            try:
                t = quantity(part_.strip(), "time", "s")
            except UnitError:
                raise m.fail(k, "skip", f"{part_.strip()!r} is not a time", "write the times of "
                             "the readings to leave out, e.g. 120; 240 (seconds)") from None
            if not (np.isfinite(t) and t >= 0):
                raise m.fail(k, "skip", f"{part_.strip()!r} is not a time of a reading",
                             "write times at or after 0, e.g. 120; 240 (seconds)")
            times.append(t)
        skips[k] = tuple(times)
    return skips


def _fmt(m):
    return "-" if not np.isfinite(m) else f"{m * 1e6:g}uM"


def match_wells(layout: pd.DataFrame, names: list[str]) -> tuple[pd.DataFrame, list[str]]:
    """The map with its well names written as the data writes them where they differ only in
    zero padding or case (A01 and A1 are one well), and a note saying so."""
    data = {k: n for n in names if (k := well_key(n)) is not None}
    taken = set(layout.index)
    renamed = {w: data[k] for w in layout.index if w not in set(names)
               and (k := well_key(w)) is not None and k in data and data[k] not in taken}
    if not renamed:
        return layout, []
    out = layout.rename(index=renamed)
    out.attrs.update(layout.attrs)
    first = next(iter(renamed.items()))
    return out, [f"{len(renamed)} well name(s) of the plate map were matched to the data's by row "
                 f"and column ({first[0]} is {first[1]})"]


def check_against(layout: pd.DataFrame, names: list[str],
                  data_path: str) -> tuple[pd.DataFrame, list[str]]:
    """Check the map's wells against the data's traces (names that differ only in zero padding
    or case matched, :func:`match_wells`); returns the map and warnings for unmapped traces."""
    layout, notes = match_wells(layout, names)
    missing = [w for w in layout.index if w not in set(names)]
    if missing:
        more = f" and {len(missing) - 1} more" if len(missing) > 1 else ""
        raise InputError(f"the plate map names well {missing[0]}{more}, which the data "
                         f"({data_path}) do not have", "fix the map or give the matching data "
                         "file", file=layout.attrs.get("source"))
    notes += layout.attrs.get("notes", [])
    unmapped = [n for n in names if n not in layout.index]
    if unmapped:
        notes.append(f"{len(unmapped)} trace(s) are not in the plate map and are treated as "
                     "samples: " + ", ".join(unmapped[:8]) + (" ..." if len(unmapped) > 8 else ""))
    return layout, notes


def name_variants(m: _MapCells, roles: list[str]) -> list[str]:
    """A note for each set of sample names (of wells that are not blanks) or group names (as the
    map writes them) that differ only in case or spacing ("Lysate A", "lysate a", "Lysate  A"):
    they are kept apart, as written, and said so."""
    notes = []
    for col in ("sample", "group"):
        seen: dict[str, list[str]] = {}
        for k, name in m.cells(col):
            if roles[k] != "blank" and name not in seen.get(key := " ".join(name.split())
                                                             .casefold(), []):
                seen.setdefault(key, []).append(name)
        for spellings in (v for v in seen.values() if len(v) > 1):
            notes.append(f"{col} names {' and '.join(repr(x) for x in spellings[:3])} differ only "
                         "in case or spacing and are kept apart (separate replicates and "
                         f"activities); write them alike in the plate map if they are one {col}")
    return notes
