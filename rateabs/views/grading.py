"""The ``grade`` command's view: gradebook, feedback pages, class summary."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..fitting import fmt_pm
from ..options import GradeOptions
from ..output import document, render_table, rows_to_csv, write_text
from . import View, run_outputs


def _gradebook(results: list[dict]) -> list[dict]:
    extra_cols = list(dict.fromkeys(k for r in results for k in r.get("extra", {})))
    book = []
    for r in results:
        row = {"student": r["student"], "file": r["file"], "value": r["value"],
               "unit": r["unit"], "reported": r["reported"], "reference": r["reference"],
               "score": r["score"], "status": r["status"],
               "part_data": r["parts"].get("data"), "part_report": r["parts"].get("report"),
               "part_reference": r["parts"].get("reference"),
               "diagnosis": " | ".join(r["diagnosis"])}
        row.update({c: r.get("extra", {}).get(c) for c in extra_cols})
        book.append(row)
    return book


def _feedback_page(r: dict, rubric) -> str:
    """One student's page: their result, how the score is built, what we found, the figure."""
    from ..report import img, kv, notes, page, table

    parts = r["parts"]
    sections = [("Your result", kv([
        ("assignment", rubric.title), ("quantity", f"{rubric.quantity} ({rubric.unit})"),
        ("your data give", fmt_pm(r["value"], r.get("value_se"), unit=rubric.unit)),
        ("you reported", r["reported"]),
        ("class reference", f"{rubric.reference:g} {rubric.unit}"),
        ("score", f"{r['score']:.1f} / 100")]))]
    if parts:
        sections.append(("How the score is built", table(
            [{"part": k, "marks": f"{100 * parts[k]:.0f} %", "weight": rubric.weights[k]}
             for k in ("data", "report", "reference")],
            [("part", "part"), ("marks", "marks"), ("weight", "weight")], text_cols=("part",))
            + "<p>data: relative SE of your value (full marks at 2 % or better); report: "
              "your number against your own data; reference: your data against the class "
              f"reference; each within {rubric.tolerance_pct:g} % for full marks, none "
              f"beyond {5 * rubric.tolerance_pct:g} %.</p>"))
    ok = r["status"] == "graded" and parts.get("report", 0) == 1
    sections.append(("What we found", notes(r["diagnosis"], "ok" if ok else "note")))
    if r.get("png"):
        sections.append(("Your data and the fit", img(r["png"], "readings and the fitted "
                                                      "model used to check your number")))
    return page(f"Feedback for {r['student']}", f"{rubric.title}: {rubric.quantity}", sections,
                cautions=())


def _class_page(results: list[dict], rubric, png) -> str:
    """The class summary page: statistics, the distribution and links to every student."""
    from ..report import esc, img, kv, page, table

    graded = [r for r in results if r["value"] is not None]
    vals = np.array([r["value"] for r in graded]) if graded else np.array([])
    rows = [{"student": f'<a href="{esc(r["page"])}">{esc(r["student"])}</a>',
             "score": r["score"], "value": r["value"], "reported": r["reported"],
             "diagnosis": r["diagnosis"][0] if r["diagnosis"] else ""} for r in results]
    body = table([{k: (v if k != "student" else "@@" + str(i)) for k, v in row.items()}
                  for i, row in enumerate(rows)],
                 [("student", "student"), ("score", "score (/100)"),
                  ("value", f"own value ({rubric.unit})"),
                  ("reported", f"reported ({rubric.unit})"), ("diagnosis", "first finding")],
                 text_cols=("student", "diagnosis"))
    for i, row in enumerate(rows):            # links are built here, names escaped above
        body = body.replace(f">@@{i}<", f">{row['student']}<", 1)
    stats_kv = kv([("students", len(results)), ("analysed", len(graded)),
                   ("median own value", f"{np.median(vals):.4g} {rubric.unit}" if vals.size else
                    "-"), ("reference", f"{rubric.reference:g} {rubric.unit} ± "
                                         f"{rubric.tolerance_pct:g} %"),
                   ("median score", f"{np.median([r['score'] for r in results]):.1f}")])
    return page(f"Class summary: {rubric.title}", f"{rubric.quantity} in {rubric.unit}",
                [("Class", stats_kv), ("Distribution", img(png, "each student's own value "
                                                      "against the reference and tolerance "
                                                      "band")),
                 ("Students", body)], cautions=())


def draw_figures(results: list[dict], executor=None) -> None:
    """Each graded student's figure as PNG bytes (``png``), drawn on the executor if given."""
    from ..plots import student_plot

    todo = [r for r in results if r.get("figure")]
    figures = [r["figure"] for r in todo]
    pngs = executor.map(student_plot, figures) if executor is not None else map(student_plot,
                                                                                 figures)
    for r, png in zip(todo, pngs, strict=True):
        r["png"] = png


def grade_pages(results: list[dict], rubric, out: Path) -> list[Path]:
    """Gradebook CSV, one feedback page per student and the class summary, into ``out``."""
    from ..output import safe_filename
    from ..plots import class_summary_plot

    out = Path(out)
    (out / "feedback").mkdir(parents=True, exist_ok=True)
    book = _gradebook(results)
    files = [write_text(out, "gradebook.csv", rows_to_csv(book, list(book[0])))]
    used = set()
    for r in results:
        name = safe_filename(r["student"], 40)
        while name in used:
            name += "_"
        used.add(name)
        r["page"] = f"feedback/{name}.html"
        files.append(write_text(out, r["page"], _feedback_page(r, rubric)))
    png = class_summary_plot(results, rubric, out / "class_summary.png")
    files.append(write_text(out, "class_summary.html", _class_page(results, rubric, png)))
    return files


def _text(public: list[dict], rubric) -> str:
    rows = [{"student": r["student"], "score": r["score"], "value": r["value"],
             "reported": r["reported"], "diag": r["diagnosis"][0][:90] + (
                 "..." if len(r["diagnosis"][0]) > 90 else "")} for r in public]
    return render_table(rows, [("student", "student"), ("score", "score"),
                               ("value", f"own ({rubric.unit})"),
                               ("reported", f"reported ({rubric.unit})"), ("diag", "finding")],
                        title=f"{rubric.title}: {rubric.quantity}, reference "
                              f"{rubric.reference:g} {rubric.unit} ± {rubric.tolerance_pct:g} %")


def run_grade(o: GradeOptions, emit, progressbar=None) -> View:
    """The ``grade`` command: grade in parallel, print the gradebook, write the pages."""
    from ..grade import check_jobs, grade_class, read_rubric
    from ..parallel import describe, open_executor

    rubric = read_rubric(o.rubric)
    scheduler = getattr(o, "scheduler", None)
    jobs = check_jobs(o.jobs) if not scheduler else None
    with open_executor(jobs, scheduler) as executor:
        where = describe(executor)
        results = grade_class(o.folder, rubric, executor=executor,
                              progress=progressbar, plots=bool(o.out))
        if o.out:
            draw_figures(results, executor)
    public = [{k: v for k, v in r.items() if k not in ("png", "figure")} for r in results]
    settings = {"rubric": rubric.to_dict(), "jobs": jobs, "ran_on": where,
                "score": "100 x sum(weight x part) / sum(weights); parts data, report, "
                         "reference (see docs/formats.md)"}
    doc = document("grade", [o.folder, o.rubric], settings, public, [])
    flat = [{"student": r["student"], "file": r["file"], "value": r["value"],
             "reported": r["reported"], "reference": r["reference"], "unit": r["unit"],
             "score": r["score"], "status": r["status"], "diagnosis": r["diagnosis"]}
            for r in public]
    view = View(doc, _text(public, rubric), rows_to_csv(flat, list(flat[0])), results)
    with run_outputs(o, "grade", ["grade.json", "grade.csv", "gradebook.csv"]):
        if o.out:
            grade_pages(results, rubric, Path(o.out))
        emit(o.fmt, view.doc, view.table, view.csv, o.out, "grade")
    return view
