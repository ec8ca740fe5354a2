"""The demo: the whole job on the embedded sample runs (an invented lab, simulated data).

Scenario: the Enzymology Core of the invented Kestrel Bay Institute characterises KbDH1, an
NADH-dependent dehydrogenase, and its inhibitor candidate KB-17; a teaching annex follows a
phosphatase at 405 nm; a thiol assay reads raw detector counts at 412 nm.
"""

from __future__ import annotations

from pathlib import Path

from .inspecting import summarize
from .io import read_traces, sample_path
from .output import rows_to_csv, write_text
from .photometry import chromophore, pathlength_from_volume

#: (sample file, chromophore, pathlength in cm or a well volume, what it shows)
RUNS = [
    ("plate_kbdh_340nm.csv", "NADH", "200 uL", "96-well KbDH1 plate, NADH consumed at 340 nm"),
    ("cuvettes_kbap_405nm_messy.csv", "p-nitrophenolate", 1.0,
     "cuvette export with decimal commas, clock times and an overflowing cuvette"),
    ("tubes_tnb_412nm_counts.tsv", "TNB", 1.0, "raw detector counts with a reference row"),
]


def run_demo(out: str | Path, echo=print) -> str:
    """Run every demo step into ``out``; returns a short summary for the terminal."""
    from .plots import traces_overview

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    lines = [f"rateabs demo: results in {out}/"]
    for name, chrom, path_spec, what in RUNS:
        ts = read_traces(sample_path(name))
        insp = summarize(ts)
        c = chromophore(chrom)
        b = pathlength_from_volume(path_spec) if isinstance(path_spec, str) else path_spec
        conc = insp.traces.to_concentration(c.epsilon, b)
        stem = Path(name).stem
        d = conc.data.assign(value_uM=conc.data["value"] * 1e6)
        rows = d.to_dict("records")
        write_text(out, f"{stem}_concentration.csv",
                   rows_to_csv(rows, ["trace", "time_s", "value_uM", "usable", "flag"]))
        traces_overview(conc, out / f"{stem}.png", f"{stem}: {c.name} ({c.wavelength_nm:g} nm)",
                        f"[{c.name}] (µM)", scale=1e6)
        flagged = sum(bool(r["flags"]) for r in insp.results)
        lines.append(f"  {name}: {len(insp.results)} traces, layout {ts.info['layout']}, "
                     f"time {ts.info['time_unit']}, {flagged} flagged; epsilon {c.epsilon:g} "
                     f"M^-1 cm^-1, pathlength {b:.3g} cm ({what})")
    return "\n".join(lines)
