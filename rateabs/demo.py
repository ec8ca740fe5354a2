"""The demo: the whole job on the embedded sample runs (an invented lab, simulated data).

Scenario: the Enzymology Core of the invented Kestrel Bay Institute characterises KbDH1, an
NADH-dependent dehydrogenase, and its inhibitor candidate KB-17 on a 96-well plate; follows the
phosphatase KbAP through whole progress curves; a pilot plant watches the hydrolysis of the dye
Kestrel Red with an in-line probe and at several temperatures; and a teaching lab grades a class
that measured the same hydrolysis. Every step writes its results, plots and one report page;
``index.html`` links them all.
"""

from __future__ import annotations

import time
from pathlib import Path

from .files import RunOutputs, write_atomic
from .fitting import fmt_pm
from .io import sample_path
from .report import esc, notes, page, table


def _steps(run, s, out: Path) -> dict:
    """Every demo step but the class: key -> the step's view."""
    from . import options as opts
    from . import views

    return {
        "inspect": run("1_inspect", "What the reader finds in a messy cuvette export", "everyone",
                       views.run_inspect, opts.InspectOptions,
                       {"file": s("cuvettes_kbap_405nm_messy.csv")}),
        "plate": run("2_plate_rates", "KbDH1 plate: initial rates, activity and QC",
                     "enzyme assay scientist", views.run_rates, opts.RatesOptions,
                     {"file": s("plate_kbdh_340nm.csv"), "layout_file": s("plate_kbdh_map.csv"),
                      "chromophore": "NADH", "well_volume": "200 uL", "plate": 96,
                      "total_volume": "200 uL", "sample_volume": "20 uL", "katal": True}),
        "sat": run("3_inhibition", "KB-17 inhibition mode from the plate's rates",
                   "enzyme assay scientist", views.run_saturation, opts.SaturationOptions,
                   {"file": str(out / "2_plate_rates" / "rates.csv"), "select": ["sample=KbDH1"],
                    "enzyme": "1 nM", "model": "auto"}),
        "prog": run("4_progress", "KbAP progress curves: integrated Michaelis-Menten and "
                    "Selwyn's test", "enzyme assay scientist", views.run_progress,
                    opts.ProgressOptions,
                    {"file": s("progress_kbap_405nm.csv"), "s0_column": "S0 (uM)",
                     "chromophore": "pnp", "selwyn": "enzyme (nM)"}),
        "unst": run("5_progress_unstable", "The same test on an enzyme that decays during the "
                    "assay", "enzyme assay scientist", views.run_progress, opts.ProgressOptions,
                    {"file": s("progress_kbap_unstable.csv"), "s0_column": "S0 (uM)",
                     "chromophore": "pnp", "selwyn": "enzyme (nM)"}),
        "law": run("6_process_ratelaw", "Pilot reactor R-2: order and rate constant",
                   "process chemist", views.run_ratelaw, opts.RatelawOptions,
                   {"file": s("process_kestrel_red_probe.csv"), "order": "auto"}),
        "comp": run("7_process_completion", "Pilot reactor R-2: time to 99 % conversion",
                    "process chemist", views.run_completion, opts.CompletionOptions,
                    {"file": s("process_kestrel_red_probe.csv"), "target": 99.0, "order": "1"}),
        "temp": run("8_temperature", "Kestrel Red hydrolysis: Arrhenius and Eyring",
                    "process chemist", views.run_temperature, opts.TemperatureOptions,
                    {"file": s("temperature_kestrel_red.csv"), "at": ["60 C"]}),
    }


def _flag_words(table) -> str:
    """Which flags the plate's wells carry, most common first (meanings on the plate's page)."""
    from collections import Counter

    counts = Counter(f for flags in table["flags"] for f in flags)
    flagged = int(sum(bool(f) for f in table["flags"]))
    if not flagged:
        return "no well needs a look"
    top = ", ".join(f"{word} {n}" for word, n in counts.most_common(4))
    return (f"wells that need a look: {flagged} of {len(table)} ({top}; meanings on the plate's "
            "page)")


def _selwyn_words(selwyn: dict) -> str:
    return ("enzyme stable (the curves superimpose)" if selwyn["enzyme_stable"] else
            "enzyme not stable (the curves do not superimpose)")


def _pm(p, digits: int = 3) -> str:
    """A fitted parameter as value ± SE with its unit, as a person reads it."""
    from .plots.style import unit_text

    return fmt_pm(p.value, p.se, digits, unit_text(p.unit))


def _key_numbers(v: dict, gview) -> list[str]:
    """The headline figure of every step, for the terminal and the index page."""
    t = v["plate"].analysis.table
    lysate = t[t["sample"].astype(str).str.startswith("lysate")]
    zp = v["plate"].analysis.zprime
    lines = [f"  plate: {len(t)} wells, Z′ = {zp['value']:.2f} ({zp['verdict']}); "
             + "lysate activities " + ", ".join(f"{g}: {d['activity_U_per_mL'].mean():.3g} U/mL"
                                                for g, d in lysate.groupby("sample"))
             + f"; {_flag_words(t)}"]
    sat = v["sat"].analysis
    p = sat.best.params
    lines.append(f"  inhibition: chosen {sat.chosen}; Km = {_pm(p['Km'])}, Ki = {_pm(p['Ki'])}"
                 if "Ki" in p else f"  saturation: chosen {sat.chosen}")
    pp = v["prog"].analysis.params
    lines.append(f"  progress curves: Km = {_pm(pp['Km'])}, Vmax = {_pm(pp['Vmax'])}; "
                 f"Selwyn's test: {_selwyn_words(v['prog'].analysis.selwyn)}; on the decaying "
                 f"enzyme: {_selwyn_words(v['unst'].analysis.selwyn)}")
    lw = next(iter(v["law"].analysis["laws"].values()))
    k = lw.fit.params["k"]
    lines.append(f"  process run: order {lw.order}, k = {fmt_pm(k.value, k.se, unit='1/s')}, "
                 f"half-life {lw.half_life.value / 60:.1f} min")
    c = next(iter(v["comp"].analysis["done"].values()))
    lines.append(f"  completion: {100 * c.conversion.value:.1f} % now; 99 % at "
                 f"{c.t_target.value / 60:.1f} min [{c.t_target.ci_low / 60:.1f}, "
                 f"{c.t_target.ci_high / 60:.1f}]; "
                 f"{c.claim}")
    ea = v["temp"].analysis.params["Ea"]
    lines.append(f"  temperature: Ea = {ea.value:.1f} [{ea.ci_low:.1f}, {ea.ci_high:.1f}] kJ/mol")
    scores = sorted(r["score"] for r in gview.analysis)
    lines.append(f"  class: {len(scores)} students graded, median score "
                 f"{scores[len(scores) // 2]:.0f}")
    return lines


def run_demo(out: str | Path, echo=print) -> str:
    """Run every demo step into ``out``; returns a short summary for the terminal."""
    with RunOutputs("demo", out=out, planned=["index.html", "summary.txt"]):
        return _run_all(Path(out), echo)


def _run_all(out: Path, echo) -> str:
    from . import views
    from .options import GradeOptions

    t0 = time.perf_counter()
    steps = []

    def run(key, title, who, fn, settings_cls, values):
        folder = out / key
        o = settings_cls.build(**values, fmt="table", out=str(folder),
                               report=str(folder / "report.html"), plots=True)
        view = fn(o, views.write_only)
        steps.append({"key": key, "title": title, "who": who, "view": view,
                      "page": f"{key}/report.html"})
        echo(f"  done: {title}")
        return view

    def s(name):
        return str(inputs / name)

    echo(f"rateabs demo: writing into {out}/")
    inputs = _copy_samples(out)
    v = _steps(run, s, out)
    cls = inputs / "class_kestrel_red"
    # 15 runs grade faster in this process than worker processes start
    gview = views.run_grade(GradeOptions(str(cls), str(cls / "rubric.toml"), jobs=1,
                                         out=str(out / "9_class")), views.write_only)
    steps.append({"key": "9_class", "title": "Teaching lab: the class's Kestrel Red runs graded",
                  "who": "teaching-lab instructor", "view": gview,
                  "page": "9_class/class_summary.html"})
    echo("  done: class graded")
    lines = [f"rateabs demo: results in {out}/ (open {out / 'index.html'})"]
    lines += _key_numbers(v, gview)
    lines.append(f"  finished in {time.perf_counter() - t0:.1f} s")
    _index(out, steps, lines)
    write_atomic(out / "summary.txt", "\n".join(lines) + "\n")
    return "\n".join(lines)


#: The embedded sample runs the demo uses, copied beside its results so that every page names
#: its input as a file the user has (not a path inside the installed package).
SAMPLES = ("cuvettes_kbap_405nm_messy.csv", "plate_kbdh_340nm.csv", "plate_kbdh_map.csv",
           "progress_kbap_405nm.csv", "progress_kbap_unstable.csv",
           "process_kestrel_red_probe.csv", "temperature_kestrel_red.csv", "class_kestrel_red")


def _copy_samples(out: Path) -> Path:
    """The sample runs copied into ``out/inputs`` (through the run's outputs); their folder."""
    inputs = out / "inputs"
    for name in SAMPLES:
        src = sample_path(name)
        files = sorted(src.iterdir()) if src.is_dir() else [src]
        for f in files:
            write_atomic(inputs / f.relative_to(src.parent), f.read_bytes())
    return inputs


def _index(out: Path, steps: list, lines: list) -> None:
    rows = [{"step": f'@@{i}', "for": s["who"], "warnings": len(s["view"].doc.get("warnings", []))}
            for i, s in enumerate(steps)]
    body = table(rows, [("step", "step"), ("for", "for"), ("warnings", "warnings")],
                 text_cols=("step", "for"))
    for i, s in enumerate(steps):
        body = body.replace(f">@@{i}<", f'><a href="{esc(s["page"])}">{esc(s["title"])}</a><', 1)
    intro = ("<p>The whole job of rateabs on simulated sample runs set in an invented lab (the "
             "Kestrel Bay Institute): a 96-well plate through initial rates, activity and the "
             "inhibition mode; progress curves with Selwyn's test; a process run through order, "
             "rate constant and time to completion; rate constants at several temperatures; and "
             "a class graded. Each step links to its self-contained report.</p>")
    html_text = page("rateabs demo", "Kestrel Bay Institute sample runs (simulated data)",
                     [("", intro), ("Steps", body), ("Key numbers", notes(lines[1:], "ok"))])
    write_atomic(out / "index.html", html_text)
