"""The ``temperature`` command's view."""

from __future__ import annotations

from ..output import document, render_table, rows_to_csv
from . import View, deliver


def compute_temperature(o: dict) -> View:
    """The ``temperature`` command's results."""
    from ..io import read_table
    from ..temperature import analyse, read_temperature_table
    from ..units import parse_temperature

    df = read_table(o["file"])
    T, k, se, cols, kunit = read_temperature_table(df, temp_col=o.get("temp_column"),
                                                   k_col=o.get("k_column"),
                                                   se_col=o.get("se_column"),
                                                   temp_unit=o.get("temp_unit"))
    a = analyse(T, k, se, level=o.get("level", 0.95), k_unit=kunit)
    preds = []
    for at in o.get("at") or ():
        tk = parse_temperature(at)
        p = a.predict(tk, o.get("level", 0.95))
        preds.append({"T_K": tk, "k": p.to_dict()})
    results = [{"model": "arrhenius", "params": {"Ea": a.params["Ea"].to_dict(),
                                                  "A": a.params["A"].to_dict()},
                "equation": "ln k = ln A - Ea/(R T)", "sigma_lnk": a.arrhenius.sigma},
               {"model": "eyring", "params": {"dH": a.params["dH"].to_dict(),
                                               "dS": a.params["dS"].to_dict()},
                "equation": "ln(k/T) = ln(kB/h) + dS/R - dH/(R T)", "sigma_lnk": a.eyring.sigma}]
    if preds:
        results.append({"model": "prediction", "predictions": preds})
    settings = {"columns": cols, "n": int(T.size), "T_range_K": [float(T.min()), float(T.max())],
                "weighting": a.arrhenius.weighting, "level": o.get("level", 0.95),
                "constants": "scipy.constants (CODATA)"}
    doc = document("temperature", [o["file"]], settings, results, a.warnings)
    rows = [{"p": n, "v": p.value, "se": p.se, "lo": p.ci_low, "hi": p.ci_high, "u": p.unit}
            for n, p in a.params.items()]
    table = render_table(rows, [("p", "parameter"), ("v", "value"), ("se", "SE"),
                                ("lo", f"{100 * o.get('level', 0.95):g}% low"),
                                ("hi", f"{100 * o.get('level', 0.95):g}% high"), ("u", "unit")],
                         title=f"Arrhenius and Eyring from {T.size} temperatures "
                               f"({T.min() - 273.15:.1f} to {T.max() - 273.15:.1f} C)")
    for pr in preds:
        kk = pr["k"]
        table += (f"k at {pr['T_K'] - 273.15:.2f} C ({pr['T_K']:.2f} K): {kk['value']:.4g} "
                  f"[{kk['ci_low']:.4g}, {kk['ci_high']:.4g}] {kk['unit']}\n")
    flat = [{"parameter": r["p"], "value": r["v"], "se": r["se"], "ci_low": r["lo"],
             "ci_high": r["hi"], "unit": r["u"]} for r in rows]
    return View(doc, table, rows_to_csv(flat, list(flat[0])), a)


def run_temperature(o: dict, emit) -> View:
    """The ``temperature`` command."""
    from ..plots import arrhenius_plot

    view = compute_temperature(o)
    deliver(o, emit, view, "temperature", lambda folder: [
        arrhenius_plot(view.analysis, folder / "temperature_arrhenius.png")])
    return view
