"""Output: the JSON document, tidy CSV, aligned tables for a person, atomic file writes.

The JSON document has the fixed shape ``{"rateabs_version", "command", "inputs", "settings",
"results", "warnings"}``; a fitted parameter is ``{"value", "se", "ci_low", "ci_high",
"ci_method", "unit"}``.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Sequence
from json.encoder import encode_basestring
from pathlib import Path

from . import __version__
from .files import write_atomic


def _short(x: float) -> float | None:
    """A finite float to 15 significant digits (119.99999999999999 from 0.12 mM in uM, or
    0.00019999999999999998 L from 200 uL, is 120 and 0.0002), else None."""
    return float(f"{x:.15g}") if math.isfinite(x) else None


def _clean(obj):
    """JSON-safe copy: NaN/inf become null, numpy scalars become Python numbers, floats keep
    15 significant digits (:func:`_short`)."""
    kind = type(obj)
    if kind is float:                       # the common cases first, by their exact type
        return _short(obj)
    if kind is str or kind is int or kind is bool or obj is None:
        return obj
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item") and not isinstance(obj, (str, bytes)):
        try:
            obj = obj.item()
        except (ValueError, AttributeError):
            return str(obj)
    if isinstance(obj, float):
        return _short(obj)
    if isinstance(obj, (str, int, bool)) or obj is None:
        return obj
    return str(obj)


def document(command: str, inputs, settings: dict, results: list, warnings: list) -> dict:
    """The JSON document every analysis command prints with ``--format json``."""
    return _clean({"rateabs_version": __version__, "command": command,
                   "inputs": list(inputs) if isinstance(inputs, (list, tuple)) else [inputs],
                   "settings": settings, "results": results, "warnings": list(warnings)})


def to_json(doc: dict) -> str:
    """The document as indented JSON text: the text ``json.dumps(doc, indent=2,
    ensure_ascii=False)`` writes, built without the standard encoder's generators (a plate's
    document holds tens of thousands of values); anything but JSON's own types goes to
    ``json.dumps`` itself."""
    try:
        return _json_text(doc, "") + "\n"
    except _NotPlain:
        return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"


class _NotPlain(Exception):
    """A value :func:`_json_text` leaves to ``json.dumps``."""


def _json_float(x: float) -> str:
    if x != x or x in (math.inf, -math.inf):
        return "NaN" if x != x else ("Infinity" if x > 0 else "-Infinity")
    return float.__repr__(x)


#: How json.dumps writes a value of each exact scalar type.
_JSON_SCALAR = {str: encode_basestring, int: int.__repr__, float: _json_float,
                bool: lambda b: "true" if b else "false", type(None): lambda _: "null"}


def _json_text(o, indent: str) -> str:
    """``o`` as ``json.dumps`` writes it with an indent of two and ``ensure_ascii=False``, at
    nesting ``indent``."""
    scalar = _JSON_SCALAR.get(type(o))
    if scalar is not None:
        return scalar(o)
    inner = indent + "  "
    if isinstance(o, dict):
        if any(type(k) is not str for k in o):
            raise _NotPlain
        items = [f"{inner}{encode_basestring(k)}: {_json_value(v, inner)}" for k, v in o.items()]
        return "{\n" + ",\n".join(items) + "\n" + indent + "}" if items else "{}"
    if isinstance(o, (list, tuple)):
        items = [inner + _json_value(v, inner) for v in o]
        return "[\n" + ",\n".join(items) + "\n" + indent + "]" if items else "[]"
    if isinstance(o, (str, int, float)):      # subclasses (an IntEnum, numpy's float64)
        return encode_basestring(o) if isinstance(o, str) else (
            _json_float(o) if isinstance(o, float) else int.__repr__(o))
    raise _NotPlain


def _json_value(o, indent: str) -> str:
    scalar = _JSON_SCALAR.get(type(o))
    return scalar(o) if scalar is not None else _json_text(o, indent)


def fmt_num(x, digits: int = 4) -> str:
    """A number for a table: significant digits, no trailing noise; '-' for missing."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        if x == 0:
            return "0"
        if abs(x) >= 1e6 or abs(x) < 1e-3:
            return f"{x:.{digits - 1}e}"
        return f"{x:.{digits}g}"
    if isinstance(x, (list, tuple)):
        return ",".join(str(v) for v in x) or "-"
    return str(x)


def render_table(rows: Sequence[dict], columns: Sequence[tuple[str, str]],
                 title: str | None = None) -> str:
    """Aligned text table; ``columns`` is a list of (key, header-with-unit)."""
    cells = [[fmt_num(r.get(k)) for k, _ in columns] for r in rows]
    heads = [h for _, h in columns]
    widths = [max([len(h)] + [len(c[i]) for c in cells]) for i, h in enumerate(heads)]
    numeric = [all(_numeric_cell(c[i]) for c in cells) for i in range(len(heads))]

    def line(vals):
        out = []
        for v, w, num in zip(vals, widths, numeric, strict=True):
            out.append(v.rjust(w) if num else v.ljust(w))
        return "  ".join(out).rstrip()

    text = []
    if title:
        text.append(title)
    text.append(line(heads))
    text.append("  ".join("-" * w for w in widths))
    text.extend(line(c) for c in cells)
    return "\n".join(text) + "\n"


def _numeric_cell(s: str) -> bool:
    if s == "-":
        return True
    try:
        float(s)
        return True
    except ValueError:
        return False


#: First characters that make a spreadsheet read a cell as a formula (OWASP, "CSV Injection",
#: owasp.org/www-community/attacks/CSV_Injection: =, +, -, @, tab 0x09, carriage return 0x0D;
#: line feed 0x0A added to that list in 2025).
FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "\n")
_PLAIN_NUMBER = re.compile(r"-?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def formula_safe(cell: str) -> str:
    """A CSV cell no spreadsheet runs as a formula: text starting with one of
    :data:`FORMULA_START` gets a leading single quote (OWASP's advice); a plain number such as
    ``-3.2`` stays a number.

    >>> formula_safe("=HYPERLINK(1)"), formula_safe("-3.2"), formula_safe("-2+3")
    ("'=HYPERLINK(1)", '-3.2', "'-2+3")
    """
    if cell and cell[0] in FORMULA_START and not _PLAIN_NUMBER.fullmatch(cell):
        return "'" + cell
    return cell


def rows_to_csv(rows: Sequence[dict], columns: Sequence[str], safe: bool = False) -> str:
    """Tidy CSV text; lists are joined with ';'. With ``safe``, every cell (the header too) is
    made formula-safe for spreadsheets (:func:`formula_safe`) and lines end in CR LF as RFC 4180
    writes them, so that a cell holding a CR or LF is quoted."""
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n" if safe else "\n")
    w.writerow([formula_safe(str(c)) for c in columns] if safe else columns)
    for r in rows:
        out = [_csv_cell(r.get(c)) for c in columns]
        w.writerow([formula_safe(str(v)) for v in out] if safe else out)
    return buf.getvalue()


def _csv_cell(v):
    """A value as :func:`rows_to_csv` writes it: lists joined with ';', a float by the repr of
    its 15 significant digits (:func:`_short`: 70 uM, not 70.00000000000001 from 0.07 mM;
    empty when not finite), None empty."""
    if type(v) is str:
        return v
    if isinstance(v, (list, tuple)):
        return ";".join(str(x) for x in v)
    if isinstance(v, float):
        return "" if not math.isfinite(v) else repr(_short(float(v)))
    return "" if v is None else v


def safe_filename(name: str, limit: int = 60) -> str:
    """A file-name stem from any label (a trace, a student): letters, digits, '_', '-', '.'."""
    return re.sub(r"[^A-Za-z0-9._-]+", "_", str(name)).strip("_.")[:limit] or "item"


def write_text(out_dir: str | Path, name: str, text: str | bytes) -> Path:
    """Write one output file atomically into ``out_dir``; returns its path."""
    path = Path(out_dir) / name
    write_atomic(path, text)
    return path


def flatten_params(result: dict, prefix: str = "") -> dict:
    """Flatten parameter objects into ``NAME``, ``NAME_se``, ``NAME_ci_low``... columns."""
    flat = {}
    for k, v in result.items():
        if isinstance(v, dict) and "value" in v and "se" in v:
            unit = v.get("unit") or ""
            flat[f"{prefix}{k}"] = v["value"]
            flat[f"{prefix}{k}_se"] = v["se"]
            flat[f"{prefix}{k}_ci_low"] = v["ci_low"]
            flat[f"{prefix}{k}_ci_high"] = v["ci_high"]
            flat[f"{prefix}{k}_unit"] = unit
        elif isinstance(v, dict) and k == "params":
            flat.update(flatten_params(v, prefix))
        else:
            flat[f"{prefix}{k}"] = v
    return flat
