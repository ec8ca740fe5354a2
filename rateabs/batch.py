"""Many files in one run: which files a command's FILE arguments name, and each plate's map.

The FILE arguments of ``rateabs rates FILE...`` are taken in the order given:

* **a file**: itself (a name that does not exist is kept: its row will say it cannot be read);
* **a folder**: its data files (``.csv .tsv .txt .xlsx .xlsm .xls``), not its subfolders nor
  hidden files, in natural name order (``plate2`` before ``plate10``);
* **a glob pattern** (``*``, ``?``, ``[...]``; ``**`` for any depth) that is not itself an
  existing path: the files it matches, in natural name order. Quote it so that rateabs, not
  the shell, expands it (``'plates/*.csv'``); an unquoted one reaches rateabs as many files.

From a folder or a pattern, files named like a plate map (``NAME_map.EXT``) and the files an
earlier rateabs run wrote there (listed in its manifest, :mod:`rateabs.files`) are left out, and
said so. A file named twice is analysed once, at its first place. Names stay as they were given
(a folder's files as ``FOLDER/NAME``), so each row of the combined table names its file the way
the user wrote it.

Plate maps (``--layout``) follow one rule:

* ``--layout FILE``: the one map of every plate;
* ``--layout FOLDER``: each plate's own map ``STEM_map.csv`` (or ``.tsv .txt .xlsx .xlsm``) in
  that folder, where STEM is the plate's file name without its extension: plate
  ``runs/P07.csv`` takes ``FOLDER/P07_map.csv``. A plate without its map fails alone (its row
  says which name was looked for); two maps for one plate (``P07_map.csv`` and
  ``P07_map.xlsx``) or two plates of one STEM are ambiguous and refused before anything runs.

Layer: low (paths only; no file is opened here except a folder's manifest).
"""

from __future__ import annotations

import glob
import os
import re
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError, UsageError
from .files import read_manifest

#: Extensions of the data files a folder contributes.
DATA_EXTENSIONS = (".csv", ".tsv", ".txt", ".xlsx", ".xlsm", ".xls")
#: Extensions a plate's own map may have, and the suffix of its stem.
MAP_EXTENSIONS = (".csv", ".tsv", ".txt", ".xlsx", ".xlsm")
MAP_SUFFIX = "_map"
_MAGIC = re.compile(r"[*?[]")


def natural_key(name: str) -> tuple:
    """Sort key that puts ``plate2`` before ``plate10`` (digits compared as numbers)."""
    parts = re.split(r"(\d+)", name)
    return tuple(int(p) if k % 2 else p.lower() for k, p in enumerate(parts)) + (name,)


def is_pattern(arg: str) -> bool:
    """Whether an argument is a glob pattern (has ``*``, ``?`` or ``[`` and is no existing path)."""
    return bool(_MAGIC.search(arg)) and not os.path.exists(arg)


def is_map_name(path: str | Path) -> bool:
    """Whether a file is named like a plate map (``NAME_map.EXT``)."""
    return Path(path).stem.lower().endswith(MAP_SUFFIX)


def names_many(args: tuple[str, ...] | list[str]) -> bool:
    """Whether FILE arguments ask for a many-file run: several, a folder or a pattern."""
    return len(args) > 1 or any(os.path.isdir(a) or is_pattern(a) for a in args)


@dataclass(frozen=True)
class Inputs:
    """The files of a run, in order, with what was left out and why."""

    files: tuple[str, ...]
    left_out: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()


def _from_folder(folder: str) -> tuple[list[str], list[str]]:
    """A folder's data files (natural order) and the names left out, with why."""
    earlier = {e.get("name") for e in (read_manifest(folder) or {}).get("files", [])
               if isinstance(e, dict)}
    taken, left = [], []
    for entry in sorted(os.scandir(folder), key=lambda e: natural_key(e.name)):
        if entry.name.startswith(".") or not entry.is_file():
            continue
        why = _why_left_out(entry.name, earlier)
        if why is None and Path(entry.name).suffix.lower() not in DATA_EXTENSIONS:
            why = "not a data file (" + ", ".join(DATA_EXTENSIONS) + ")"
        path = os.path.join(folder, entry.name)
        if why:
            left.append(f"{path} ({why})")
        else:
            taken.append(path)
    return taken, left


def _why_left_out(name: str, earlier: set) -> str | None:
    if is_map_name(name):
        return "a plate map by its name"
    if name in earlier:
        return "written by an earlier rateabs run"
    return None


def _from_pattern(pattern: str) -> tuple[list[str], list[str]]:
    """The files a glob pattern matches (natural order) and those left out, with why."""
    taken, left, earlier = [], [], {}
    for path in sorted(glob.glob(pattern, recursive=True), key=natural_key):
        if not os.path.isfile(path):
            continue
        folder = os.path.dirname(path) or "."
        if folder not in earlier:
            earlier[folder] = {e.get("name") for e in (read_manifest(folder) or {}).get(
                "files", []) if isinstance(e, dict)}
        why = _why_left_out(os.path.basename(path), earlier[folder])
        (left if why else taken).append(f"{path} ({why})" if why else path)
    return taken, left


def expand(args: tuple[str, ...] | list[str]) -> Inputs:
    """The files named by FILE arguments (files, folders, patterns), in a stable order.

    A folder without data files or a pattern that matches none is refused: it is surely a slip.
    """
    files, left, notes, seen = [], [], [], {}
    for arg in args:
        if os.path.isdir(arg):
            taken, out = _from_folder(arg)
            what = "folder"
        elif is_pattern(arg):
            taken, out = _from_pattern(arg)
            what = "pattern"
        else:
            taken, out, what = [arg], [], "file"
        if what != "file" and not taken:
            raise UsageError(f"the {what} {arg} names no data file"
                             + (f" (left out: {'; '.join(out[:3])})" if out else ""),
                             "give files, a folder of exports or a pattern that matches them, "
                             "e.g. 'plates/*.csv'")
        left += out
        for path in taken:
            key = os.path.realpath(path)
            if key in seen:
                notes.append(f"{path} is named again (as {seen[key]}): analysed once")
                continue
            seen[key] = path
            files.append(path)
    return Inputs(tuple(files), tuple(left), tuple(notes))


def maps_for(files: tuple[str, ...], layout: str | None) -> tuple[list, list[str]]:
    """Each plate's map by the rule of the module, and notes on maps that match no plate.

    Returns one entry per file: the map's path, None (no map asked for) or an
    :class:`~rateabs.errors.InputError` saying which map is missing (that plate fails alone).
    Two maps for one plate, or two plates of one stem, raise :class:`UsageError`.
    """
    if layout is None:
        return [None] * len(files), []
    if not os.path.isdir(layout):
        return [layout] * len(files), []
    stems: dict[str, str] = {}
    out = []
    for path in files:
        stem = Path(path).stem
        if stem in stems and os.path.realpath(stems[stem]) != os.path.realpath(path):
            raise UsageError(f"the plates {stems[stem]} and {path} have the same name {stem}, "
                             f"so one map in {layout} would serve both",
                             "rename one of them, or run them in separate commands")
        stems[stem] = path
        found = [os.path.join(layout, stem + MAP_SUFFIX + ext) for ext in MAP_EXTENSIONS
                 if os.path.isfile(os.path.join(layout, stem + MAP_SUFFIX + ext))]
        if len(found) > 1:
            raise UsageError(f"plate {path} has {len(found)} maps in {layout}: "
                             + " and ".join(found), "keep one of them")
        out.append(found[0] if found else InputError(
            f"no plate map {stem}{MAP_SUFFIX}.csv (or .tsv/.txt/.xlsx) for it in {layout}",
            f"add {os.path.join(layout, stem + MAP_SUFFIX + '.csv')}, or give --layout one "
            "map for every plate", file=path))
    used = {os.path.realpath(m) for m in out if isinstance(m, str)}
    spare = [e.name for e in sorted(os.scandir(layout), key=lambda e: natural_key(e.name))
             if e.is_file() and is_map_name(e.name) and
             Path(e.name).suffix.lower() in MAP_EXTENSIONS and
             os.path.realpath(e.path) not in used]
    notes = [f"{len(spare)} map(s) in {layout} match no plate: {', '.join(spare[:5])}"
             + (" ..." if len(spare) > 5 else "")] if spare else []
    return out, notes
