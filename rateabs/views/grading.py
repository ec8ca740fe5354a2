"""The ``grade`` command's view: gradebook, feedback pages, class summary.

Every file goes through the run's :class:`~rateabs.files.RunOutputs`, whose manifest lets a
rerun remove exactly the pages the previous run wrote (no stale page is left beside new ones).
Feedback pages are named ``feedback/NNN-HASH.html`` (roster number and a short hash of the
name): stable, unique and the same in any script; the readable name is in the page and in the
gradebook's ``feedback_page`` column. CSV cells are formula-safe for spreadsheets.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from pathlib import Path

import numpy as np

from ..fitting import fmt_pm
from ..options import GradeOptions
from ..output import document, render_table, rows_to_csv
from . import View, run_outputs

#: Row fields left out of the JSON document and the CSV (internal or bulky).
PRIVATE = ("figure", "path", "readings", "extra")


def page_name(index: int, student: str) -> str:
    """``feedback/007-1a2b3c4d.html``: the roster number and a hash of the name (any script).

    >>> page_name(7, "李明")
    'feedback/007-aa227102.html'
    """
    digest = hashlib.sha256(student.encode("utf-8")).hexdigest()[:8]
    return f"feedback/{index:03d}-{digest}.html"


def _reported_cell(r: dict):
    return r["reported"] if r["reported"] is not None else r["reported_text"]


def gradebook(results: list[dict]) -> list[dict]:
    """One row per student for the gradebook CSV (extra roster columns at the end)."""
    extra_cols = list(dict.fromkeys(k for r in results for k in r.get("extra", {})))
    book = []
    for r in results:
        row = {"#": r["index"], "student": r["student"], "file": r["file"],
               "feedback_page": r.get("page"), "score": r["score"], "status": r["status"],
               "slip": r["slip"], "value": r["value"], "value_se": r["value_se"],
               "unit": r["unit"], "reported": _reported_cell(r), "reference": r["reference"],
               "part_data": r["parts"].get("data"), "part_report": r["parts"].get("report"),
               "part_reference": r["parts"].get("reference"), "submitted": r["submitted"],
               "late": {True: "yes", False: "no"}.get(r["late"], ""),
               "shared_with": r["shared_with"], "findings": " | ".join(r["diagnosis"]),
               "assumptions": " | ".join(r["assumptions"])}
        row.update({c: r.get("extra", {}).get(c) for c in extra_cols})
        book.append(row)
    return book


def _you_reported(r: dict, rubric) -> str:
    from ..grade.roster import plain_number

    if r["reported"] is not None and not plain_number(r["reported_text"]):
        return f"{r['reported_text'].strip()!r} (= {r['reported']:.4g} {rubric.unit})"
    if r["reported"] is not None:
        return f"{r['reported']:g} {rubric.unit}"
    return f"{r['reported_text']!r} (not a number)" if r["reported_text"] else "nothing"


def feedback_page(r: dict, rubric, today: str) -> str:
    """One student's page: their result, what was found, how the run was read, the figure."""
    from ..plots import student_svg
    from ..report import esc, kv, notes, page, table

    parts = r["parts"]
    facts = [("assignment", rubric.title), ("graded on", today),
             ("quantity", f"{rubric.quantity} ({rubric.unit})"),
             ("your data give", fmt_pm(r["value"], r.get("value_se"), unit=rubric.unit)),
             ("you reported", _you_reported(r, rubric)),
             ("class reference", f"{rubric.reference:g} {rubric.unit} ± "
                                 f"{rubric.tolerance_pct:g} %"),
             ("score", f"{r['score']:.1f} / 100")]
    if r["submitted"]:
        facts.append(("submitted", r["submitted"] + (" (late)" if r["late"] else "")))
    ok = r["status"] == "graded" and r["verdict"] == "agrees"
    sections = [("Your result", kv(facts)),
                ("What we found", notes(r["diagnosis"], "ok" if ok else "note"))]
    if r["assumptions"]:
        sections.append(("How your run was read", "<ul>" + "".join(
            f"<li>{esc(a)}</li>" for a in r["assumptions"]) + "</ul>"))
    if r.get("figure"):
        what = "the initial slope over its window (shaded)" if r["figure"].get("window") else \
            "the fitted model"
        sections.append(("Your data and the fit", f"<figure>{student_svg(r['figure'])}"
                         f"<figcaption>{esc(f'your readings, {what}, and the residuals below')}"
                         "</figcaption></figure>"))
    if parts:
        sections.append(("How the score is built", table(
            [{"part": k, "marks": f"{100 * parts[k]:.0f} %", "weight": rubric.weights[k]}
             for k in ("data", "report", "reference")],
            [("part", "part"), ("marks", "marks"), ("weight", "weight")], text_cols=("part",))
            + "<p>data: relative SE of your value (full marks at 2 % or better); report: "
              "your number against your own data; reference: your data against the class "
              f"reference; each within {rubric.tolerance_pct:g} % for full marks, none "
              f"beyond {5 * rubric.tolerance_pct:g} %.</p>"))
    return page(f"Feedback for {r['student']}", f"{rubric.title}: {rubric.quantity} in "
                f"{rubric.unit}, graded on {today}", sections, cautions=())


def verdict_words(r: dict) -> str:
    """The verdict on a student's report in a few words (the page gives the sentence)."""
    if r["status"] != "graded":
        return "not graded"
    if r["slip"] and r["verdict"] == "slip":
        return f"slip: {r['slip']}"
    return {"agrees": "agrees", "unexplained": "differs, cause not identified",
            "sign": "sign wrong, and differs", "unchecked": "not checked (no number)"}.get(
        r["verdict"], r["verdict"] or "")


def class_page(results: list[dict], rubric, png, today: str, unlisted=()) -> str:
    """The class summary: statistics, own and reported values, every student linked, the
    students who could not be graded, shared and late work, the rubric."""
    from ..report import esc, img, kv, notes, page, table

    graded = [r for r in results if r["value"] is not None]
    vals = np.array([r["value"] for r in graded], float)
    rows = [{"#": r["index"], "student": f"@@{i}@@", "score": r["score"],
             "value": f"{r['value']:.4g}" if r["value"] is not None else "-",
             "reported": r["reported_text"] or "-", "verdict": verdict_words(r),
             "late": {True: "late", False: ""}.get(r["late"], ""),
             "shared": ", ".join(r["shared_with"])}
            for i, r in enumerate(results)]
    body = table(rows, [("#", "#"), ("student", "student"), ("score", "score (/100)"),
                        ("value", f"own value ({rubric.unit})"),
                        ("reported", f"reported ({rubric.unit})"), ("verdict", "report"),
                        ("late", "late"), ("shared", "same data as")],
                 text_cols=("student", "verdict", "late", "shared"))
    for i, r in enumerate(results):            # links are built here, names escaped
        body = body.replace(f">@@{i}@@<", f'><a href="{esc(r["page"])}">{esc(r["student"])}'
                            "</a><", 1)
    missing = [f"#{r['index']} {r['student']}: {r['diagnosis'][0]}" for r in results
               if r["status"] != "graded"]
    stats = kv([("graded on", today), ("students", len(results)), ("graded", len(graded)),
                ("could not be graded", len(missing)),
                ("slips named", sum(1 for r in results if r["slip"])),
                ("late", sum(1 for r in results if r["late"])),
                ("sharing data", sum(1 for r in results if r["shared_with"])),
                ("median own value", f"{np.median(vals):.4g} {rubric.unit}" if vals.size
                 else "-"),
                ("reference", f"{rubric.reference:g} {rubric.unit} ± {rubric.tolerance_pct:g} %"),
                ("median score", f"{np.median([r['score'] for r in results]):.1f}")])
    sections = [("Class", stats)]
    if png is not None:
        sections.append(("Own and reported values", img(png, "each row is one student, by "
                         "roster number (#, as in the table below): own value filled, reported "
                         "value open; reported values far off the scale sit at the edge with "
                         "their ratio to the own value")))
    sections.append(("Students", body))
    if missing:
        sections.append(("Could not be graded", notes(missing)))
    if unlisted:
        sections.append(("Files no roster row names", notes(_unlisted_warning(list(unlisted)))))
    sections.append(("Rubric", kv(_rubric_facts(rubric))))
    return page(f"Class summary: {rubric.title}", f"{rubric.quantity} in {rubric.unit}, graded "
                f"on {today}", sections, cautions=())


def _rubric_facts(rubric) -> list[tuple[str, object]]:
    win = rubric.window
    out = [("file", rubric.source), ("quantity", f"{rubric.quantity} ({rubric.model})"),
           ("weights", ", ".join(f"{k} {v:g}" for k, v in rubric.weights.items())),
           ("deadline", rubric.deadline.isoformat() if rubric.deadline else "none"),
           ("time unit of the runs", rubric.time_unit or "from each file's header (a bare "
                                                          "column: seconds, or minutes where "
                                                          "that fits the reference)"),
           ("trace graded", rubric.trace or "the only one, or the first not named a blank")]
    if rubric.quantity == "v0":
        out += [("initial-rate window", "automatic" if win == "auto" else
                 f"{win[0]:g}-{win[1]:g} s"), ("epsilon", f"{rubric.epsilon:g} L/(mol cm)"
                                                  if rubric.epsilon else "none (A/min)"),
                ("pathlength", f"{rubric.pathlength_cm:g} cm")]
    return out


def grade_pages(results: list[dict], rubric, out: Path, today: str, run, unlisted=()) -> None:
    """Gradebook CSV, one feedback page per student and the class summary, into ``out``
    through the run's outputs (``run``, a :class:`~rateabs.files.RunOutputs`)."""
    from ..plots import class_summary_plot

    out = Path(out)
    for r in results:
        r["page"] = r.get("page") or page_name(r["index"], r["student"])
    book = gradebook(results)
    pages = [(out / r["page"], feedback_page(r, rubric, today)) for r in results]
    run.write_many([(out / "gradebook.csv", rows_to_csv(book, list(book[0]), safe=True)),
                    *pages])
    png = class_summary_plot(results, rubric, out / "class_summary.png") if any(
        r["value"] is not None for r in results) else None
    run.write(out / "class_summary.html", class_page(results, rubric, png, today, unlisted))


def _text(public: list[dict], rubric) -> str:
    rows = [{"#": r["index"], "student": r["student"], "score": r["score"], "value": r["value"],
             "reported": _reported_cell(r), "diag": r["diagnosis"][0][:90] + (
                 "..." if len(r["diagnosis"][0]) > 90 else "")} for r in public]
    return render_table(rows, [("#", "#"), ("student", "student"), ("score", "score"),
                               ("value", f"own ({rubric.unit})"),
                               ("reported", f"reported ({rubric.unit})"), ("diag", "finding")],
                        title=f"{rubric.title}: {rubric.quantity}, reference "
                              f"{rubric.reference:g} {rubric.unit} ± {rubric.tolerance_pct:g} %")


def _unlisted_warning(unlisted: list[str]) -> list[str]:
    if not unlisted:
        return []
    return [f"{len(unlisted)} file(s) in the class folder are named by no roster row and were "
            f"not graded: {', '.join(unlisted[:8])}" + (" ..." if len(unlisted) > 8 else "")
            + "; add a roster row for each student who handed one in"]


def _warnings(results: list[dict], rubric, unlisted=()) -> list[str]:
    out = _unlisted_warning(list(unlisted))
    bad = [r["student"] for r in results if r["status"] != "graded"]
    if bad:
        out.append(f"{len(bad)} student(s) could not be graded: {', '.join(bad[:5])}"
                   + (" ..." if len(bad) > 5 else ""))
    if rubric.deadline is not None and not any(r["submitted"] for r in results):
        out.append("the rubric gives a deadline but the roster has no 'submitted' times: "
                   "lateness was not checked")
    return out


def run_grade(o: GradeOptions, emit, progressbar=None) -> View:
    """The ``grade`` command: grade in parallel (reusing the analyses kept in --out), print the
    gradebook, write the pages."""
    from ..grade import AnalysisCache, check_jobs, grade_class, read_rubric
    from ..grade.cache import CACHE_FILE
    from ..grade.roster import unlisted_runs
    from ..parallel import describe, open_executor

    rubric = read_rubric(o.rubric)
    cache = AnalysisCache.load(Path(o.out) / CACHE_FILE) if o.out else None
    scheduler = getattr(o, "scheduler", None)
    jobs = check_jobs(o.jobs) if not scheduler else None
    with open_executor(jobs, scheduler) as executor:
        where = describe(executor)
        results = grade_class(o.folder, rubric, executor=executor, progress=progressbar,
                              plots=bool(o.out), cache=cache)
    today = dt.date.today().isoformat()
    for r in results:
        r["page"] = page_name(r["index"], r["student"]) if o.out else None
    reused = cache.reused if cache is not None else 0
    settings = {"rubric": rubric.to_dict(), "jobs": jobs, "ran_on": where, "graded_on": today,
                "analyses": {"kept_in": str(Path(o.out) / CACHE_FILE) if o.out else None,
                             "reused": reused},
                "score": "100 x sum(weight x part) / sum(weights); parts data, report, "
                         "reference (see docs/formats.md)"}
    public = [{k: v for k, v in r.items() if k not in PRIVATE} for r in results]
    planned = ["grade.json", "grade.csv", "gradebook.csv", "class_summary.html",
               "class_summary.png", CACHE_FILE]
    unlisted = unlisted_runs(o.folder, [r["file"] for r in results], [o.rubric] + (
        [Path(o.out) / n for n in planned] if o.out else []))
    doc = document("grade", [o.folder, o.rubric], settings, public,
                   _warnings(results, rubric, unlisted))
    flat = [{k: r[k] for k in ("index", "student", "file", "value", "reported", "reference",
                               "unit", "score", "status", "slip", "late", "shared_with",
                               "diagnosis")} for r in public]
    view = View(doc, _text(public, rubric), rows_to_csv(flat, list(flat[0]), safe=True), results)
    with run_outputs(o, "grade", planned) as run:
        if o.out:
            grade_pages(results, rubric, Path(o.out), today, run, unlisted)
            run.write_in(CACHE_FILE, cache.dumps())
        emit(o.fmt, view.doc, view.table, view.csv, o.out, "grade")
    return view
