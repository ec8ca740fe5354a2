"""The ``temperature`` command's view."""

from __future__ import annotations

from ..options import TemperatureOptions
from ..output import document, render_table, rows_to_csv
from ..units import kelvin_to_celsius
from . import View, deliver


def _results(a, preds) -> list[dict]:
    results = [{"model": "arrhenius", "params": {"Ea": a.params["Ea"].to_dict(),
                                                  "A": a.params["A"].to_dict()},
                "equation": "ln k = ln A - Ea/(R T)", "sigma_lnk": a.arrhenius.sigma},
               {"model": "eyring", "params": {"dH": a.params["dH"].to_dict(),
                                               "dS": a.params["dS"].to_dict()},
                "equation": "ln(k/T) = ln(kB/h) + dS/R - dH/(R T)", "sigma_lnk": a.eyring.sigma}]
    if preds:
        results.append({"model": "prediction", "predictions": preds})
    return results


def _text(a, rows, preds, level: float) -> str:
    T = a.T
    table = render_table(rows, [("p", "parameter"), ("v", "value"), ("se", "SE"),
                                ("lo", f"{100 * level:g}% low"),
                                ("hi", f"{100 * level:g}% high"), ("u", "unit")],
                         title=f"Arrhenius and Eyring from {T.size} temperatures "
                               f"({kelvin_to_celsius(T.min()):.1f} to "
                               f"{kelvin_to_celsius(T.max()):.1f} C)")
    for pr in preds:
        kk = pr["k"]
        table += (f"k at {kelvin_to_celsius(pr['T_K']):.2f} C ({pr['T_K']:.2f} K): "
                  f"{kk['value']:.4g} [{kk['ci_low']:.4g}, {kk['ci_high']:.4g}] {kk['unit']}\n")
    return table


def compute_temperature(o: TemperatureOptions) -> View:
    """The ``temperature`` command's results."""
    from ..io import read_table
    from ..temperature import analyse, read_temperature_table

    df = read_table(o.file)
    T, k, se, cols, kunit = read_temperature_table(df, temp_col=o.temp_column,
                                                   k_col=o.k_column, se_col=o.se_column,
                                                   temp_unit=o.temp_unit)
    a = analyse(T, k, se, level=o.level, k_unit=kunit)
    preds = [{"T_K": tk, "k": a.predict(tk, o.level).to_dict()} for tk in o.at]
    settings = {"columns": cols, "n": int(T.size), "T_range_K": [float(T.min()), float(T.max())],
                "weighting": a.arrhenius.weighting, "level": o.level,
                "constants": "scipy.constants (CODATA)"}
    doc = document("temperature", [o.file], settings, _results(a, preds), a.warnings)
    rows = [{"p": n, "v": p.value, "se": p.se, "lo": p.ci_low, "hi": p.ci_high, "u": p.unit}
            for n, p in a.params.items()]
    flat = [{"parameter": r["p"], "value": r["v"], "se": r["se"], "ci_low": r["lo"],
             "ci_high": r["hi"], "unit": r["u"]} for r in rows]
    return View(doc, _text(a, rows, preds, o.level), rows_to_csv(flat, list(flat[0])), a)


def run_temperature(o: TemperatureOptions, emit) -> View:
    """The ``temperature`` command."""
    from ..plots import arrhenius_plot

    view = compute_temperature(o)
    deliver(o, emit, view, "temperature", lambda folder: [
        arrhenius_plot(view.analysis, folder / "temperature_arrhenius.png")])
    return view
