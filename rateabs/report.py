"""Self-contained HTML pages that read like a lab report: one look for every page, pictures
inline, no external links.

Every piece of user-supplied text goes through :func:`esc`. Pictures are embedded as base64 PNG
data URIs, so a page opens offline and can be handed on as a single file. The generic parts serve
every command's page: settings in words with their units (:func:`settings_table`, from the field
metadata of :mod:`rateabs.options`), field names in words (:func:`label`), values rounded to
their uncertainty (:func:`key_table` merges ``x`` and ``x_se`` through ``fitting.fmt_pm``), a key
table that fits the page with the full table one click away (:func:`csv_link`), and no Python
literals (:func:`esc` writes yes/no, a dash for nothing, and dicts as words).
"""

from __future__ import annotations

import base64
import html
import math
from pathlib import Path

from . import __version__
from .fitting import fmt_interval, fmt_pm

CAUTIONS = (
    "rateabs results are for research and teaching and are not for clinical diagnosis.",
    "Handle reagents under the local safety rules and licensed practice.",
)
#: Said only on the pages of commands that forecast how far a reaction has gone.
FORECAST_CAUTION = ("A predicted completion time is no process-safety assessment: runaway, "
                    "sampling and mixing hazards follow the site's own rules.")
FORECASTING = ("completion", "ratelaw")
#: Said on the pages of initial rates: what a fitted rate rests on.
RATES_CAUTION = ("Each initial rate is fitted to the readings of its well: before you report "
                 "one, look at the wells that need a look and at the window or curve it came "
                 "from.")


def cautions_for(command: str) -> tuple[str, ...]:
    """The cautions of a command's page: the forecast one only where there is a forecast, the
    fitting one on the pages of initial rates."""
    own = ((FORECAST_CAUTION,) if command in FORECASTING else ()) + (
        (RATES_CAUTION,) if command == "rates" else ())
    return CAUTIONS[:1] + own + CAUTIONS[1:]

STYLE = """
:root { --ink:#1f2328; --muted:#5b6470; --line:#d8dde3; --accent:#0b5f8a; --warm:#b34700;
        --paper:#fcfcfa; --band:#eef3f6; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font:16px/1.55 "Charter","Georgia","DejaVu Serif",serif; overflow-wrap:break-word; }
header { background:var(--band); border-bottom:3px solid var(--accent); padding:18px 28px 12px; }
header h1 { margin:0; font:600 24px/1.25 "Segoe UI","DejaVu Sans",sans-serif; }
header .sub { color:var(--muted); font:14px "Segoe UI","DejaVu Sans",sans-serif; margin-top:4px; }
main { max-width:1200px; margin:0 auto; padding:12px 28px 40px; }
h2 { font:600 19px "Segoe UI","DejaVu Sans",sans-serif; color:var(--accent);
     border-bottom:1px solid var(--line); padding-bottom:3px; margin-top:30px; }
table { border-collapse:collapse; margin:10px 0; font:13.5px "DejaVu Sans Mono",monospace; }
th, td { border-bottom:1px solid var(--line); padding:4px 10px; text-align:right;
         vertical-align:top; }
th { background:var(--band); font-family:"Segoe UI","DejaVu Sans",sans-serif; font-weight:600;
     position:sticky; top:0; }
td { white-space:nowrap; }
td.t, th.t { text-align:left; }
td.t { font-family:"Segoe UI","DejaVu Sans",sans-serif; white-space:normal; overflow-wrap:anywhere; }
td.t:first-child { white-space:nowrap; }
.scroll { overflow-x:auto; max-height:560px; overflow-y:auto; max-width:100%; }
figure { margin:14px 0; } figure img { max-width:100%; height:auto; border:1px solid var(--line); }
figcaption { color:var(--muted); font-size:14px; }
.note { border-left:4px solid var(--warm); background:#fff6ef; padding:8px 12px; margin:8px 0; }
.ok { border-left:4px solid #2b7a4b; background:#f0f8f2; padding:8px 12px; margin:8px 0; }
.kv { width:100%; } .kv td { text-align:left; font-family:"Segoe UI","DejaVu Sans",sans-serif; }
.kv td { white-space:normal; overflow-wrap:anywhere; }
.kv td:first-child { color:var(--muted); width:32%; overflow-wrap:normal; }
.more { font-size:14px; color:var(--muted); }
footer { color:var(--muted); font-size:13px; border-top:1px solid var(--line); margin-top:36px;
         padding-top:8px; }
a { color:var(--accent); }
"""

#: What each command's page is about, for its heading.
TITLES = {"inspect": "What the reader found", "rates": "Initial rates",
          "saturation": "Saturation and inhibition", "ratelaw": "Rate law and rate constant",
          "completion": "Conversion and time to completion",
          "temperature": "Temperature dependence: Arrhenius and Eyring",
          "progress": "Progress curves: integrated Michaelis–Menten"}

#: Field names whose words are not spelled out by their parts.
LABELS = {"r2": "r²", "n": "n", "n_points": "readings used", "aicc": "AICc", "aic": "AIC",
          "bic": "BIC", "rss": "residual sum of squares", "dof": "degrees of freedom",
          "delta_aicc": "ΔAICc", "z_prime": "Z′", "cv_pct": "CV (%)", "sd": "SD",
          "sem": "SEM", "epsilon_M_per_cm": "molar absorptivity (M⁻¹ cm⁻¹)",
          "epsilon_se": "SE of the molar absorptivity (M⁻¹ cm⁻¹)",
          "noisy_rel_se": "noisy above relative SE", "T_range_K": "temperature range (K)",
          "ci": "interval method", "ci_method": "interval method", "akaike_weight": "Akaike weight"}

#: Unit words at the end of a field name (``rate_uM_per_min``), as a person writes them.
UNIT_WORDS = {"s": "s", "min": "min", "h": "h", "M": "M", "mM": "mM", "uM": "µM", "nM": "nM",
              "L": "L", "mL": "mL", "uL": "µL", "cm": "cm", "nm": "nm", "K": "K", "C": "°C",
              "A": "AU", "AU": "AU", "U": "U", "mg": "mg", "kJ": "kJ", "mol": "mol",
              "pct": "%", "nkat": "nkat", "kat": "kat", "J": "J"}


def label(key: str) -> str:
    """A field name in words, its unit in brackets: ``rate_uM_per_min_se`` -> ``rate SE
    (µM/min)``, ``window_start_s`` -> ``window start (s)``, ``k_per_s`` -> ``k (1/s)``.

    >>> label("rate_uM_per_min_se"), label("half_life_s"), label("k_per_s"), label("noise_A")
    ('rate SE (µM/min)', 'half life (s)', 'k (1/s)', 'noise (AU)')
    """
    if key in LABELS:
        return LABELS[key]
    words = str(key).split("_")
    se = len(words) > 1 and words[-1] == "se"
    if se:
        words = words[:-1]
    unit: list[str] = []
    while len(words) > 1 and (words[-1] in UNIT_WORDS or words[-1] == "per"):
        unit.insert(0, words.pop())
    if unit and unit[0] == "per":
        unit.insert(0, "1")
    name = " ".join(words) + (" SE" if se else "")
    if not unit:
        return name
    text = "".join("/" if u == "per" else UNIT_WORDS.get(u, u) for u in unit)
    return f"{name} ({text})"


def _num(x: float, digits: int = 4) -> str:
    if x == 0:
        return "0"
    if abs(x) >= 1e6 or abs(x) < 1e-3:
        return f"{x:.{digits - 1}e}"
    return f"{float(f'{x:.{digits}g}'):g}"            # 18000, not 1.8e+04


def words(x) -> str:
    """Any value as plain words: numbers to four significant digits, yes/no, a dash for
    nothing, lists joined, dicts as ``name: value; ...`` with their names in words.

    >>> words(True), words(None), words(0.123456), words({"mode": "slope", "n_wells": 8})
    ('yes', '–', '0.1235', 'mode: slope; n wells: 8')
    """
    if hasattr(x, "item") and not isinstance(x, (str, bytes, list, tuple, dict)):
        x = x.item()                                  # numpy scalars
    if x is None:
        return "–"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, float):
        return _num(x) if math.isfinite(x) else "–"
    if isinstance(x, dict):
        if "value" in x and "se" in x:
            return param_text(x)
        return "; ".join(f"{label(k)}: {words(v)}" for k, v in x.items()
                         if v not in (None, "", [], {})) or "–"
    if isinstance(x, (list, tuple)):
        if x and all(isinstance(v, dict) for v in x):
            return f"{len(x)} entries"
        return ", ".join(words(v) for v in x) or "–"
    return str(x)


def esc(x) -> str:
    """HTML-escape any value as :func:`words` writes it."""
    return html.escape(words(x))


def img(png: bytes | str | Path | None, caption: str = "", alt: str = "plot") -> str:
    """An inline picture (PNG bytes or a PNG file) with a caption."""
    if png is None:
        return ""
    data = Path(png).read_bytes() if isinstance(png, (str, Path)) else png
    b64 = base64.b64encode(data).decode("ascii")
    cap = f"<figcaption>{esc(caption)}</figcaption>" if caption else ""
    return f'<figure><img alt="{esc(alt)}" src="data:image/png;base64,{b64}">{cap}</figure>'


def _is_number(v) -> bool:
    return v is None or (isinstance(v, (int, float)) and not isinstance(v, bool))


def table(rows: list[dict], columns: list[tuple[str, str]], text_cols=()) -> str:
    """An HTML table; ``columns`` is a list of (key, header with unit). Columns that hold text
    are left-aligned, numbers right-aligned."""
    text_cols = set(text_cols) | {k for k, _ in columns
                                  if not all(_is_number(r.get(k)) for r in rows)}
    head = "".join(f'<th class="{"t" if k in text_cols else ""}">{esc(h)}</th>'
                   for k, h in columns)
    body = []
    for r in rows:
        cells = "".join(f'<td class="{"t" if k in text_cols else ""}">{esc(r.get(k))}</td>'
                        for k, _ in columns)
        body.append(f"<tr>{cells}</tr>")
    return f'<div class="scroll"><table><tr>{head}</tr>{"".join(body)}</table></div>'


def kv(pairs: list[tuple[str, object]]) -> str:
    """A two-column table of settings or facts."""
    rows = "".join(f"<tr><td>{esc(k)}</td><td>{esc(v)}</td></tr>" for k, v in pairs)
    return f'<table class="kv">{rows}</table>'


def notes(items, kind: str = "note") -> str:
    """Warnings or flags as boxed paragraphs."""
    return "".join(f'<div class="{kind}">{esc(w)}</div>' for w in items)


def csv_link(csv_text: str, name: str, what: str = "the full table") -> str:
    """A link that downloads ``csv_text`` as ``name`` from the page itself (a data: URI), so the
    page stays one self-contained file."""
    b64 = base64.b64encode(csv_text.encode("utf-8")).decode("ascii")
    rows = max(0, csv_text.count("\n") - 1)
    return (f'<p class="more">{esc(what.capitalize())} ({rows} rows): '
            f'<a download="{esc(name)}" href="data:text/csv;charset=utf-8;base64,{b64}">'
            f"download {esc(name)}</a></p>")


def page(title: str, subtitle: str, sections: list[tuple[str, str]], cautions=CAUTIONS) -> str:
    """A whole page: header, sections (heading, html body), cautions, version footer."""
    parts = [f"<h2>{esc(h)}</h2>{body}" if h else body for h, body in sections]
    caution = "".join(f"<li>{esc(c)}</li>" for c in cautions)
    caution = f"<h2>Cautions</h2><ul>{caution}</ul>" if cautions else ""
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{esc(title)}</title><style>{STYLE}</style></head><body>"
            f"<header><h1>{esc(title)}</h1><div class=\"sub\">{esc(subtitle)}</div></header>"
            f"<main>{''.join(parts)}{caution}"
            f"<footer>made by rateabs {esc(__version__)}; every number carries its unit and "
            "every fitted value its uncertainty</footer></main></body></html>\n")


# --------------------------------------------------------------------------- settings in words


def _flat_fields(settings) -> list[tuple[object, object]]:
    """(field, value) of every option of a settings object, its parts' options included."""
    from dataclasses import fields

    out = []
    for f in fields(settings):
        value = getattr(settings, f.name)
        if f.metadata.get("part") is not None:
            out += [(g, v) for g, v in _flat_fields(value)]
        else:
            out.append((f, value))
    return out


def setting_value(rule, value) -> str:
    """A setting's value in words with its unit (quantities back in the unit the option is
    written in: a volume of 2e-4 L as ``200 µL``)."""
    from .rules import Flag, Number, Quantity, Window

    if isinstance(value, bool) or isinstance(rule, Flag):
        return words(bool(value))
    if isinstance(rule, Quantity) and isinstance(value, (int, float)):
        return _quantity_words(rule, float(value))
    if isinstance(rule, Window) and isinstance(value, tuple):
        return f"{_num(value[0])} to {_num(value[1])} s"
    if isinstance(value, dict):
        return ", ".join(f"{k} = {words(v)}" for k, v in value.items())
    if isinstance(value, tuple):
        return ", ".join(f"{v[0]} = {v[1]}" if isinstance(v, tuple) else
                         setting_value(getattr(rule, "item", None), v) for v in value)
    if isinstance(rule, Number) and rule.unit and isinstance(value, (int, float)):
        return f"{words(value)} ({rule.unit.split(';')[0]})"
    return words(value)


def _quantity_words(rule, value: float) -> str:
    from .plots.style import unit_text
    from .units import quantity

    unit = rule.default_unit
    if rule.kind == "temperature":
        return f"{_num(value - 273.15)} °C ({_num(value)} K)"
    return f"{_num(value / quantity(f'1 {unit}', rule.kind, unit))} {unit_text(unit)}"


def settings_table(settings, skip=("fmt", "out", "report", "plots")) -> str:
    """Every option of a settings object (:mod:`rateabs.options`) that has a value: the option,
    its value in words with its unit, and what it does (the option's own help), defaults marked.
    Input files are left to :func:`inputs_table`."""
    from .rules import Text

    rows = []
    for f, value in _flat_fields(settings):
        meta = f.metadata
        rule = meta.get("rule")
        if (rule is None or meta.get("hidden") or meta.get("argument") or meta.get("derived")
                or f.name in skip
                or value in (None, (), {}) or _is_file_rule(rule, Text)):
            continue
        flag = meta.get("flag", "").split("/")[0]
        shown = setting_value(rule, value)
        if not _given(settings, f):
            shown += " (default)"
        rows.append({"setting": flag, "value": shown, "meaning": meta.get("help", "")})
    return table(rows, [("setting", "option"), ("value", "value used"), ("meaning", "what it does")],
                 text_cols=("setting", "value", "meaning"))


def _is_file_rule(rule, text_cls) -> bool:
    return isinstance(rule, text_cls) and rule.what in ("file name", "folder")


def _given(settings, f) -> bool:
    """Whether the user set a field (it differs from its default); parts are searched."""
    from dataclasses import MISSING, fields

    default = f.default_factory() if f.default_factory is not MISSING else f.default
    for g in fields(settings):
        if g.metadata.get("part") is not None and f in fields(getattr(settings, g.name)):
            return getattr(getattr(settings, g.name), f.name) != default
    return getattr(settings, f.name, default) != default


def inputs_table(settings, skip=("out", "report")) -> str:
    """The input files of a settings object, as the user gave them, with what each is."""
    from .rules import Text

    pairs = [((f.metadata.get("help") or f.name).rstrip("."), value)
             for f, value in _flat_fields(settings)
             if value and f.name not in skip and (
                 f.metadata.get("argument") or _is_file_rule(f.metadata.get("rule"), Text))]
    return kv(pairs)


def _option_flags(settings) -> dict:
    """Flag -> value of every option of a settings object that has a value."""
    return {f.metadata.get("flag"): v for f, v in _flat_fields(settings)
            if f.metadata.get("flag") and v not in (None, (), {})}


def _known_fields() -> dict:
    """Field name -> field of every settings class (the analysis settings included)."""
    from dataclasses import fields, is_dataclass

    from . import options

    out = {}
    for obj in vars(options).values():
        if isinstance(obj, type) and is_dataclass(obj) and issubclass(obj, options.Checked):
            out.update({f.name: f for f in fields(obj) if f.metadata.get("flag")})
    return out


def _field_for(key: str, known: dict):
    """The settings field a document key stands for (``pathlength_cm`` -> pathlength)."""
    parts = key.split("_")
    for n in range(len(parts), 0, -1):
        f = known.get("_".join(parts[:n]))
        if f is not None:
            return f
    return None


def _same(option_value, value) -> bool:
    """Whether a document setting repeats an option's value (numbers to 1e-9)."""
    if option_value is None:
        return False
    if isinstance(value, (int, float)) and isinstance(option_value, (int, float)):
        return math.isclose(value, option_value, rel_tol=1e-9)
    if isinstance(option_value, tuple):
        option_value = list(option_value)
    return option_value == value


def decided_table(doc_settings: dict, settings=None, inputs=()) -> str:
    """What the analysis used beyond the options given: the document's settings that no given
    option states (detected from the file, derived, defaults of the analysis), in words.
    Tables (lists of records) and the flag meanings are left to their own sections."""
    known = _known_fields()
    given = _option_flags(settings) if settings is not None else {}
    inputs = set(inputs)
    pairs = []
    for key, value in doc_settings.items():
        if key == "flag_meanings" or value in (None, "", [], {}) or (
                isinstance(value, list) and value and isinstance(value[0], dict)):
            continue
        f = _field_for(key, known)
        if f is not None and _same(given.get(f.metadata.get("flag"), None), value):
            continue                        # stated with the options
        if isinstance(value, str) and value in inputs:
            continue                        # an input file, named with the inputs
        if f is not None and f.name == key and not isinstance(value, (dict, list)):
            value = setting_value(f.metadata.get("rule"), value)     # with the option's unit
        pairs.append((label(key), value))
    return kv(pairs) if pairs else ""


def flag_meanings(doc: dict) -> str:
    """What each flag that occurs in the results means (from the document's settings)."""
    meanings = doc.get("settings", {}).get("flag_meanings") or {}
    seen = {f for r in doc.get("results", []) for f in (r.get("flags") or [])
            if isinstance(r.get("flags"), list)}
    pairs = [(k, v) for k, v in meanings.items() if k in seen]
    if not pairs:
        return ""
    counts = {k: sum(k in (r.get("flags") or []) for r in doc["results"]) for k, _ in pairs}
    return kv([(f"{k} ({counts[k]} of {len(doc['results'])})", v) for k, v in pairs])


# --------------------------------------------------------------------------- results

#: Columns of the key table on a page; the full table is one click away (:func:`csv_link`).
KEY_COLUMNS = 8

#: Result fields that are lists of words (shown joined).
WORD_LISTS = ("flags", "diagnosis")


def param_text(p: dict) -> str:
    """A fitted parameter object as ``value ± SE [low, high] unit``, rounded to its SE."""
    if not p or p.get("value") is None:
        return "–"
    interval = fmt_interval(p.get("ci_low"), p.get("ci_high"), se=p.get("se"))
    text = fmt_pm(p["value"], p.get("se")) + ("" if interval == "-" else f" {interval}")
    return f"{text} {p['unit']}" if p.get("unit") else text


def _cell(r: dict, k: str, v):
    """A result field as a person reads it (None when it has no place in a table)."""
    se = r.get(f"{k}_se")
    if isinstance(v, dict):
        return param_text(v) if "value" in v and "se" in v else None
    if isinstance(v, list) and k not in WORD_LISTS:
        return None
    if _is_number(v) and v is not None and _is_number(se) and se is not None:
        return fmt_pm(v, se)
    return v


def flatten_results(results: list[dict]) -> tuple[list[dict], list[tuple[str, str]]]:
    """Rows and (key, header) columns for a results table: parameter objects become
    'value ± SE [low, high] unit' cells, a field and its ``_se`` one 'value ± SE' cell (rounded
    to the SE), nested records are left out, empty columns dropped; headers in words."""
    rows, keys = [], []
    for r in results:
        row = {}
        for k, v in r.items():
            if k.endswith("_se") and k[:-3] in r:
                continue
            items = v.items() if k == "params" and isinstance(v, dict) else [(k, v)]
            for name, value in items:
                cell = _cell(r, name, value) if k != "params" else param_text(value)
                if cell is not None:
                    row[name] = cell
                    keys.append(name)
        rows.append(row)
    cols = [k for k in dict.fromkeys(keys)
            if any(r.get(k) not in (None, "", [], "–") for r in rows)]
    return rows, [(c, label(c)) for c in cols]


def _rank(rows: list[dict], k: str, position: int) -> int:
    vals = [r.get(k) for r in rows if r.get(k) is not None]
    if k in WORD_LISTS or k in ("status", "chosen"):
        return 4
    if all(isinstance(v, str) for v in vals) and position < 3:
        return 0                                                  # what the row is
    if any(isinstance(v, str) and "±" in v for v in vals):
        return 1                                                  # values with uncertainty
    return 2 if all(_is_number(v) for v in vals) else 3


def key_table(rows: list[dict], cols: list[tuple[str, str]], limit: int = KEY_COLUMNS):
    """The columns a page shows (what each row is, values with uncertainty first, flags last)
    and how many are left to the full table."""
    if len(cols) <= limit:
        return cols, 0
    ranked = sorted(range(len(cols)), key=lambda i: (_rank(rows, cols[i][0], i), i))
    last = [i for i in ranked if _rank(rows, cols[i][0], i) == 4][:2]
    keep = [i for i in ranked if i not in last][:limit - len(last)] + last
    return [cols[i] for i in sorted(keep, key=lambda i: (i in last, i))], len(cols) - len(keep)


def results_section(doc: dict, csv_text: str | None = None, name: str | None = None) -> str:
    """The results: field by field for up to three results, else the key table; the full
    table as CSV one click away."""
    rows, cols = flatten_results(doc["results"])
    if len(rows) <= 3:            # a few results read best one by one, field by field
        body = "".join(kv([(h, r[k]) for k, h in cols if k in r]) for r in rows)
    else:
        shown, more = key_table(rows, cols)
        body = table(rows, shown)
        if more:
            body += (f'<p class="more">{more} more columns (windows, fit details, '
                     "metadata) are in the full table.</p>")
    if csv_text:
        body += csv_link(csv_text, name or f"{doc['command']}.csv")
    return body


def evidence_sections(doc: dict) -> list[tuple[str, str]]:
    """The model comparison behind each chosen model (AICc table, F-tests, the choice)."""
    sections = []
    for r in doc["results"]:
        ev = r.get("evidence")
        if not (isinstance(ev, dict) and ev.get("aicc_table")):
            continue
        body = table(ev["aicc_table"], [("model", "model"), ("k", "free parameters"),
                                        ("aicc", "AICc"), ("delta_aicc", "ΔAICc"),
                                        ("weight", "Akaike weight")], text_cols=("model",))
        if ev.get("f_tests"):
            body += table(ev["f_tests"], [("simpler", "simpler"), ("general", "within"),
                                          ("F", "F"), ("df1", "df1"), ("df2", "df2"),
                                          ("p", "p")], text_cols=("simpler", "general"))
        body += notes([f"chosen: {ev.get('chosen')} ({ev.get('reason')})"], "ok")
        what = r.get("trace") or r.get("model") or ""
        sections.append((f"Evidence for the chosen model {what}".rstrip(), body))
    return sections


def document_page(doc: dict, pictures: list[Path | tuple], title: str | None = None,
                  settings=None, csv_text: str | None = None, csv_name: str | None = None) -> str:
    """A report page for any command's JSON document and its plots.

    With the command's ``settings`` object the inputs are named as the user gave them and every
    option is stated in words with its unit; ``csv_text`` (the command's CSV) puts the full
    results table one click away.
    """
    cmd = doc["command"]
    inputs = inputs_table(settings) if settings is not None else kv(
        [("file", f) for f in doc["inputs"]])
    sections = [("Inputs", inputs)]
    if settings is not None:
        sections.append(("Settings", settings_table(settings)))
    decided = decided_table(doc["settings"], settings, doc["inputs"])
    if decided:
        sections.append(("Found in the data and derived" if settings is not None else "Settings",
                         decided))
    sections.append(("Results", results_section(doc, csv_text, csv_name)))
    sections += evidence_sections(doc)
    meanings = flag_meanings(doc)
    if meanings:
        sections.append(("What the flags mean", meanings))
    if doc["warnings"]:
        sections.append(("Warnings", notes(doc["warnings"])))
    figs = []
    for p in pictures:
        path, cap = (p if isinstance(p, tuple) else (p, Path(p).stem.replace("_", " ")))
        figs.append(img(path, cap))
    if figs:
        sections.append(("Plots", "".join(figs)))
    heading = TITLES.get(cmd, f"rateabs {cmd}")
    first = Path(doc["inputs"][0]).name if doc["inputs"] else ""
    return page(title or (f"{heading} — {first}" if first else heading),
                f"rateabs {cmd} {' '.join(doc['inputs'])}", sections, cautions_for(cmd))
