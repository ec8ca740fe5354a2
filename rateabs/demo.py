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

#: Every step: folder -> (title, for whom, command). The class is graded by ``grade``.
STEPS = {
    "1_inspect": ("What the reader finds in a messy cuvette export", "everyone", "inspect"),
    "2_plate_rates": ("KbDH1 plate: initial rates, activity and QC", "enzyme assay scientist",
                      "rates"),
    "3_inhibition": ("KB-17 inhibition mode from the plate's rates", "enzyme assay scientist",
                     "saturation"),
    "4_progress": ("KbAP progress curves: integrated Michaelis-Menten and Selwyn's test",
                   "enzyme assay scientist", "progress"),
    "5_progress_unstable": ("The same test on an enzyme that decays during the assay",
                            "enzyme assay scientist", "progress"),
    "6_process_ratelaw": ("Pilot reactor R-2: order and rate constant", "process chemist",
                          "ratelaw"),
    "7_process_completion": ("Pilot reactor R-2: time to 99 % conversion", "process chemist",
                             "completion"),
    "8_temperature": ("Kestrel Red hydrolysis: Arrhenius and Eyring", "process chemist",
                      "temperature"),
    "9_class": ("Teaching lab: the class's Kestrel Red runs graded", "teaching-lab instructor",
                "grade"),
}

#: Steps that run one after another in one process, longest first: the inhibition step reads
#: the plate's table, and the two progress steps make one key line.
CHAINS = (("2_plate_rates", "3_inhibition"), ("9_class",), ("4_progress", "5_progress_unstable"),
          ("6_process_ratelaw",), ("1_inspect",), ("8_temperature",), ("7_process_completion",))

#: Processes that run the chains (at most the machine's cores).
DEMO_PROCESSES = 2


def _values(key: str, inputs: Path, out: Path) -> dict:
    """The settings of a step (sample runs from ``inputs``, earlier results from ``out``)."""
    def s(name):
        return str(inputs / name)

    progress = {"s0_column": "S0 (uM)", "chromophore": "pnp", "selwyn": "enzyme (nM)"}
    return {
        "1_inspect": {"file": s("cuvettes_kbap_405nm_messy.csv")},
        "2_plate_rates": {"file": s("plate_kbdh_340nm.csv"), "layout_file": s("plate_kbdh_map.csv"),
                          "chromophore": "NADH", "well_volume": "200 uL", "plate": 96,
                          "total_volume": "200 uL", "sample_volume": "20 uL", "katal": True},
        "3_inhibition": {"file": str(out / "2_plate_rates" / "rates.csv"),
                         "select": ["sample=KbDH1"], "enzyme": "1 nM", "model": "auto"},
        "4_progress": {"file": s("progress_kbap_405nm.csv"), **progress},
        "5_progress_unstable": {"file": s("progress_kbap_unstable.csv"), **progress},
        "6_process_ratelaw": {"file": s("process_kestrel_red_probe.csv"), "order": "auto"},
        "7_process_completion": {"file": s("process_kestrel_red_probe.csv"), "target": 99.0,
                                 "order": "1"},
        "8_temperature": {"file": s("temperature_kestrel_red.csv"), "at": ["60 C"]},
    }[key]


def _run_step(key: str, inputs: Path, out: Path):
    """One step into ``out/key`` (results, plots and its report page); its view."""
    from . import options as opts
    from . import views

    folder = out / key
    command = STEPS[key][2]
    if command == "grade":
        cls = inputs / "class_kestrel_red"
        # 15 runs grade faster in this process than worker processes start
        return views.run_grade(opts.GradeOptions(str(cls), str(cls / "rubric.toml"), jobs=1,
                                                 out=str(folder)), views.write_only)
    settings = getattr(opts, f"{command.capitalize()}Options").build(
        **_values(key, inputs, out), fmt="table", out=str(folder),
        report=str(folder / "report.html"), plots=True)
    return getattr(views, f"run_{command}")(settings, views.write_only)


def run_chain(keys: tuple[str, ...], inputs: Path, out: Path) -> tuple[dict, dict]:
    """Run steps one after another: {key: warnings} and {key: key-number line}."""
    from .views import drawing

    drawing.DRAWING_PROCESSES = 1     # the demo's own processes already fill the cores
    done = {key: _run_step(key, inputs, out) for key in keys}
    return ({k: len(v.doc.get("warnings", [])) for k, v in done.items()}, _key_lines(done))


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


def _activity_text(r) -> str:
    """A sample's mean activity ± the SD over its wells, or ± its one well's SE."""
    if r.n_used > 1:
        return f"{r.sample}: {fmt_pm(r.activity_U_per_mL, r.activity_U_per_mL_sd, 3, 'U/mL')}"
    return (f"{r.sample}: {fmt_pm(r.activity_U_per_mL, r.activity_U_per_mL_well_se, 3, 'U/mL')}"
            " (one well, its SE)")


def _corrected_words(a) -> str:
    """The constants at time zero of an enzyme that decays, where the run corrected them."""
    c = a.corrected
    if not c or "Km" not in c or "enzyme half-life" not in c:
        return ""
    return (f", corrected to time zero: Km = {_pm(c['Km'])}, Vmax = {_pm(c['Vmax'])}, enzyme "
            f"half-life {_pm(c['enzyme half-life'])}")


def _key_lines(v: dict) -> dict:
    """The headline figure of each step that has one, for the terminal and the index page."""
    lines = {}
    if "2_plate_rates" in v:
        a = v["2_plate_rates"].analysis
        t, act, zp = a.table, a.activity, a.zprime
        lysate = act[act["sample"].astype(str).str.startswith("lysate")]
        lines["2_plate_rates"] = (
            f"  plate: {len(t)} wells, Z′ = {zp['value']:.2f} ({zp['verdict']}); lysate "
            "activities (mean ± SD) " + ", ".join(
                _activity_text(r) for r in lysate.itertuples())
            + f"; {_flag_words(t)}")
    if "3_inhibition" in v:
        sat = v["3_inhibition"].analysis
        p = sat.best.params
        lines["3_inhibition"] = (f"  inhibition: chosen {sat.chosen}; Km = {_pm(p['Km'])}, "
                                 f"Ki = {_pm(p['Ki'])}" if "Ki" in p
                                 else f"  saturation: chosen {sat.chosen}")
    if "4_progress" in v:
        pp = v["4_progress"].analysis.params
        lines["4_progress"] = (
            f"  progress curves: Km = {_pm(pp['Km'])}, Vmax = {_pm(pp['Vmax'])}; Selwyn's test: "
            f"{_selwyn_words(v['4_progress'].analysis.selwyn)}; on the decaying enzyme: "
            f"{_selwyn_words(v['5_progress_unstable'].analysis.selwyn)}"
            + _corrected_words(v["5_progress_unstable"].analysis))
    lines.update(_process_lines(v))
    if "9_class" in v:
        scores = sorted(r["score"] for r in v["9_class"].analysis)
        lines["9_class"] = (f"  class: {len(scores)} students graded, median score "
                            f"{scores[len(scores) // 2]:.0f}")
    return lines


def _process_lines(v: dict) -> dict:
    """The key lines of the process chemist's steps."""
    lines = {}
    if "6_process_ratelaw" in v:
        lw = next(iter(v["6_process_ratelaw"].analysis["laws"].values()))
        k = lw.fit.params["k"]
        lines["6_process_ratelaw"] = (f"  process run: order {lw.order}, k = "
                                      f"{fmt_pm(k.value, k.se, unit='1/s')}, half-life "
                                      f"{lw.half_life.value / 60:.1f} min")
    if "7_process_completion" in v:
        c = next(iter(v["7_process_completion"].analysis["done"].values()))
        lines["7_process_completion"] = (
            f"  completion: {100 * c.conversion.value:.1f} % now; 99 % at "
            f"{c.t_target.value / 60:.1f} min [{c.t_target.ci_low / 60:.1f}, "
            f"{c.t_target.ci_high / 60:.1f}]; {c.claim}")
    if "8_temperature" in v:
        ea = v["8_temperature"].analysis.params["Ea"]
        lines["8_temperature"] = (f"  temperature: Ea = {ea.value:.1f} [{ea.ci_low:.1f}, "
                                  f"{ea.ci_high:.1f}] kJ/mol")
    return lines


def run_demo(out: str | Path, echo=print) -> str:
    """Run every demo step into ``out``; returns a short summary for the terminal."""
    with RunOutputs("demo", out=out, planned=["index.html", "summary.txt"]):
        return _run_all(Path(out), echo)


def _run_all(out: Path, echo) -> str:
    t0 = time.perf_counter()
    echo(f"rateabs demo: writing into {out}/")
    inputs = _copy_samples(out)
    warnings, key_lines = {}, {}
    for keys, (warn, lines) in _chains_done(inputs, out):
        warnings.update(warn)
        key_lines.update(lines)
        for key in keys:
            echo(f"  done: {STEPS[key][0]}")
    lines = [f"rateabs demo: results in {out}/ (open {out / 'index.html'})"]
    lines += [key_lines[k] for k in STEPS if k in key_lines]
    lines.append(f"  finished in {time.perf_counter() - t0:.1f} s")
    _index(out, warnings, lines)
    write_atomic(out / "summary.txt", "\n".join(lines) + "\n")
    return "\n".join(lines)


def _chains_done(inputs: Path, out: Path):
    """Each chain's keys and results as it finishes: on :data:`DEMO_PROCESSES` local processes
    (they die with the demo), or here one after another on a one-core machine."""
    import os
    from concurrent.futures import as_completed

    from .parallel import LocalPool, stopping

    n = min(DEMO_PROCESSES, os.cpu_count() or 1)
    if n < 2:
        for keys in CHAINS:
            yield keys, run_chain(keys, inputs, out)
        return
    with stopping(LocalPool(n, warm=("rateabs.plots.style:warm_up",))) as pool:
        futures = {pool.submit(run_chain, keys, inputs, out): keys for keys in CHAINS}
        for future in as_completed(futures):
            yield futures[future], future.result()


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


def _index(out: Path, warnings: dict, lines: list) -> None:
    """``index.html``: every step's page linked, with its warnings counted, and the key
    numbers."""
    steps = [{"title": title, "page": f"{key}/" + ("class_summary.html" if command == "grade"
                                                  else "report.html")}
             for key, (title, _, command) in STEPS.items()]
    rows = [{"step": f"@@{i}", "for": who, "warnings": warnings[key]}
            for i, (key, (_, who, _)) in enumerate(STEPS.items())]
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
