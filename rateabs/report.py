"""Self-contained HTML pages: one look for every report, pictures inline, no external links.

Every piece of user-supplied text goes through :func:`esc`. Pictures are embedded as base64 PNG
data URIs, so a page opens offline and can be handed on as a single file.
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
    "A predicted completion time is no process-safety assessment: runaway, sampling and mixing "
    "hazards follow the site's own rules.",
    "Handle reagents under the local safety rules and licensed practice.",
)

STYLE = """
:root { --ink:#1f2328; --muted:#5b6470; --line:#d8dde3; --accent:#0b5f8a; --warm:#b34700;
        --paper:#fcfcfa; --band:#eef3f6; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font:16px/1.55 "Charter","Georgia","DejaVu Serif",serif; }
header { background:var(--band); border-bottom:3px solid var(--accent); padding:18px 28px 12px; }
header h1 { margin:0; font:600 24px/1.25 "Segoe UI","DejaVu Sans",sans-serif; }
header .sub { color:var(--muted); font:14px "Segoe UI","DejaVu Sans",sans-serif; margin-top:4px; }
main { max-width:1040px; margin:0 auto; padding:12px 28px 40px; }
h2 { font:600 19px "Segoe UI","DejaVu Sans",sans-serif; color:var(--accent);
     border-bottom:1px solid var(--line); padding-bottom:3px; margin-top:30px; }
table { border-collapse:collapse; margin:10px 0; font:13.5px "DejaVu Sans Mono",monospace; }
th, td { border-bottom:1px solid var(--line); padding:4px 10px; text-align:right; }
th { background:var(--band); font-family:"Segoe UI","DejaVu Sans",sans-serif; font-weight:600; }
td.t, th.t { text-align:left; }
.scroll { overflow-x:auto; max-height:560px; overflow-y:auto; }
figure { margin:14px 0; } figure img { max-width:100%; border:1px solid var(--line); }
figcaption { color:var(--muted); font-size:14px; }
.note { border-left:4px solid var(--warm); background:#fff6ef; padding:8px 12px; margin:8px 0; }
.ok { border-left:4px solid #2b7a4b; background:#f0f8f2; padding:8px 12px; margin:8px 0; }
.kv td { text-align:left; } .kv td:first-child { color:var(--muted); }
footer { color:var(--muted); font-size:13px; border-top:1px solid var(--line); margin-top:36px;
         padding-top:8px; }
a { color:var(--accent); }
"""


def esc(x) -> str:
    """HTML-escape any value (numbers formatted, None as a dash)."""
    if x is None:
        return "-"
    if isinstance(x, float):
        if not math.isfinite(x):
            return "-"
        return html.escape(f"{x:.5g}")
    if isinstance(x, (list, tuple)):
        return html.escape(", ".join(str(v) for v in x)) or "-"
    return html.escape(str(x))


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


def document_page(doc: dict, pictures: list[Path | tuple], title: str | None = None) -> str:
    """A report page for any command's JSON document and its plots."""
    cmd = doc["command"]
    sections = [("Inputs", kv([("file", f) for f in doc["inputs"]])),
                ("Settings", kv([(k, _short(v)) for k, v in doc["settings"].items()
                                 if not isinstance(v, (list, dict)) or k in ("blank", "columns",
                                                                             "fixed")]))]
    rows, cols = flatten_results(doc["results"])
    if len(rows) <= 3:            # a few results read best one by one, field by field
        body = "".join(kv([(k, r[k]) for k, _ in cols if k in r]) for r in rows)
    else:
        body = table(rows, cols, text_cols=("trace", "model", "flags", "status", "order"))
    sections.append(("Results", body))
    for r in doc["results"]:
        ev = r.get("evidence")
        if isinstance(ev, dict) and ev.get("aicc_table"):
            body = table(ev["aicc_table"], [("model", "model"), ("k", "free parameters"),
                                            ("aicc", "AICc"), ("delta_aicc", "dAICc"),
                                            ("weight", "Akaike weight")], text_cols=("model",))
            if ev.get("f_tests"):
                body += table(ev["f_tests"], [("simpler", "simpler"), ("general", "within"),
                                              ("F", "F"), ("df1", "df1"), ("df2", "df2"),
                                              ("p", "p")], text_cols=("simpler", "general"))
            body += notes([f"chosen: {ev.get('chosen')} ({ev.get('reason')})"], "ok")
            label = r.get("trace") or r.get("model") or ""
            sections.append((f"Evidence for the chosen model {label}".rstrip(), body))
    if doc["warnings"]:
        sections.append(("Warnings and flags", notes(doc["warnings"])))
    figs = []
    for p in pictures:
        path, cap = (p if isinstance(p, tuple) else (p, Path(p).stem.replace("_", " ")))
        figs.append(img(path, cap))
    if figs:
        sections.append(("Plots", "".join(figs)))
    return page(title or f"rateabs {cmd}", f"{cmd} of {', '.join(doc['inputs'])}", sections)


def _short(v):
    if isinstance(v, dict):
        return "; ".join(f"{k}={_short(x)}" for k, x in v.items() if not isinstance(x, (list,
                                                                                         dict)))
    return v


def flatten_results(results: list[dict]) -> tuple[list[dict], list[tuple[str, str]]]:
    """Rows and (key, header) columns for a results table; parameter objects become
    'value ± se [low, high] unit' cells."""
    rows, keys = [], []
    for r in results:
        row = {}
        for k, v in r.items():
            if k == "params" and isinstance(v, dict):
                for name, p in v.items():
                    row[name] = _param_cell(p)
                    keys.append(name)
            elif isinstance(v, dict) and "value" in v and "se" in v:
                row[k] = _param_cell(v)
                keys.append(k)
            elif isinstance(v, (dict, list)) and k not in ("flags", "diagnosis"):
                continue
            else:
                row[k] = v
                keys.append(k)
        rows.append(row)
    cols = list(dict.fromkeys(keys))
    return rows, [(c, c) for c in cols]


def _param_cell(p: dict) -> str:
    if not p or p.get("value") is None:
        return "-"
    interval = fmt_interval(p.get("ci_low"), p.get("ci_high"))
    text = fmt_pm(p["value"], p.get("se")) + ("" if interval == "-" else f" {interval}")
    return f"{text} {p['unit']}" if p.get("unit") else text
