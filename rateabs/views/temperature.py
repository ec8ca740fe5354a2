"""The ``temperature`` command's view."""

from __future__ import annotations

import numpy as np

from ..fitting import fmt_pm
from ..options import TemperatureOptions
from ..output import document, render_table, rows_to_csv
from ..units import TEMPERATURE_NAMES, kelvin_to_celsius
from . import View, deliver
from .ratelaw import warning_block

SOURCES = {"header": "from the header", "--temp-unit": "from --temp-unit",
           "values": "from the values"}


#: The unit a second-order k is analysed in (rateabs.temperature.K_UNITS[2]).
SECOND_ORDER = "M^-1 s^-1"


def eyring_terms(k_unit: str) -> dict:
    """What Eyring's dS rests on besides the data: the transmission coefficient (1) and, for a
    second-order k, the standard-state concentration its unit carries (k = (kB T/h) (c°)^-1
    exp(dS/R) exp(-dH/(R T)) with c° = 1 mol/L: k in M^-1 s^-1 then enters as a number)."""
    second = k_unit == SECOND_ORDER
    return {"transmission_coefficient": 1.0,
            "standard_state_mol_per_L": 1.0 if second else None}


def eyring_words(k_unit: str) -> str:
    """The head line that states Eyring's assumptions (:func:`eyring_terms`)."""
    text = ("Eyring: k = (kB T/h) exp(dS‡/R) exp(-dH‡/(R T)), transmission coefficient 1, "
            "kB, h and R from CODATA (scipy.constants)")
    if k_unit == SECOND_ORDER:
        text += ("; k is second order (M^-1 s^-1), so dS‡ refers to the standard state "
                 "c° = 1 mol/L (another standard state shifts dS‡ by R ln c°)")
    return text


def _results(a, preds) -> list[dict]:
    results = [{"model": "arrhenius", "params": {"Ea": a.params["Ea"].to_dict(),
                                                  "lnA": a.params["lnA"].to_dict(),
                                                  "A": a.params["A"].to_dict()},
                "equation": "ln k = ln A - Ea/(R T)", "sigma_lnk": a.arrhenius.sigma,
                "checks": a.checks},
               {"model": "eyring", "params": {"dH": a.params["dH"].to_dict(),
                                               "dS": a.params["dS"].to_dict()},
                "equation": "ln(k/T) = ln(kB/h) + dS/R - dH/(R T)", "sigma_lnk": a.eyring.sigma,
                **eyring_terms(a.k_unit)}]
    if preds:
        results.append({"model": "prediction", "predictions": preds})
    return results


#: Row labels of the table.
LABELS = {"lnA": "ln A", "dH": "dH‡", "dS": "dS‡"}


def _row(name: str, p) -> dict:
    """One table row: the value rounded to its SE, the interval likewise; A, whose interval is
    ln A's mapped by exp (asymmetric), without a ± (its SE means little on a log scale)."""
    from ..fitting import fmt_interval

    lo, hi = fmt_interval(p.ci_low, p.ci_high, se=None if name == "A" else p.se)[1:-1].split(
        ", ")
    value = f"{p.value:.4g} (see ln A)" if name == "A" else fmt_pm(p.value, p.se)
    return {"p": LABELS.get(name, name), "v": value, "lo": lo, "hi": hi, "u": p.unit}


def _prediction_line(pr: dict) -> str:
    kk, T = pr["k"], pr["T_K"]
    line = (f"k at {kelvin_to_celsius(T):.2f} C ({T:.2f} K): {kk['value']:.4g} "
            f"[{kk['ci_low']:.4g}, {kk['ci_high']:.4g}] {kk['unit']}")
    if pr["extrapolated"]:
        side = "above the highest" if pr["beyond_K"] > 0 else "below the lowest"
        line += (f"  EXTRAPOLATED: {abs(pr['beyond_K']):.1f} K {side} measured temperature, "
                 f"{pr['multiple_of_span']:.2g} times the measured span in 1/T")
    return line


def _counted(T) -> str:
    """'6 temperatures', or '7 rate constants at 6 temperatures' where one is repeated."""
    n, distinct = T.size, np.unique(T).size
    return (f"{distinct} temperatures" if n == distinct else
            f"{n} rate constants at {distinct} temperatures")


def _text(a, rows, preds, level: float, head: list[str], warnings: list[str]) -> str:
    T = a.T
    table = "\n".join(head) + "\n\n" + render_table(
        rows, [("p", "parameter"), ("v", "value ± SE"), ("lo", f"{100 * level:g} % low"),
               ("hi", f"{100 * level:g} % high"), ("u", "unit")],
        title=f"Arrhenius and Eyring from {_counted(T)} "
              f"({kelvin_to_celsius(T.min()):.1f} to {kelvin_to_celsius(T.max()):.1f} C)")
    table += "".join(_prediction_line(pr) + "\n" for pr in preds)
    return table + "\n" + warning_block(warnings)


def _columns_line(cols: dict, kunit: str, weighting: str) -> str:
    """Which columns were read, in which units (and from where), and the weighting used."""
    t_unit = TEMPERATURE_NAMES[cols["temp_unit"]]
    if cols["temp_unit"] == "F":
        t_unit += ", converted to kelvin"
    read = cols["k_unit_read"]
    k_unit = (f"{kunit} (unit assumed: the header names none)" if read is None else
              kunit if cols["k_factor"] == 1.0 else f"{read!r}, converted to {kunit}")
    weights = (f", SE {cols['se']!r} (weights 1/SE(ln k)^2)" if weighting == "sd" else
               ", unweighted")
    return (f"columns: temperature {cols['temperature']!r} in {t_unit} "
            f"({SOURCES.get(cols['temp_unit_source'], cols['temp_unit_source'])}), "
            f"k {cols['k']!r} in {k_unit}{weights}")


def compute_temperature(o: TemperatureOptions) -> View:
    """The ``temperature`` command's results."""
    from ..io import read_table
    from ..temperature import analyse, read_temperature_table

    df = read_table(o.file, o.sheet)
    T, k, se, cols, kunit = read_temperature_table(df, temp_col=o.temp_column,
                                                   k_col=o.k_column, se_col=o.se_column,
                                                   temp_unit=o.temp_unit)
    a = analyse(T, k, se, level=o.level, k_unit=kunit, rows=cols.pop("rows"))
    warnings = list(df.attrs["notes"]) + list(cols["notes"]) + list(a.warnings)
    preds = []
    for tk in o.at:
        ex = a.extrapolation(tk)
        preds.append({"T_K": tk, "k": a.predict(tk, o.level).to_dict(),
                      "extrapolated": not ex["inside"], "beyond_K": ex["beyond_K"],
                      "multiple_of_span": ex["multiple_of_span"]})
        if not ex["inside"]:
            warnings.append(f"k at {kelvin_to_celsius(tk):.1f} C is extrapolated "
                            f"{abs(ex['beyond_K']):.1f} K beyond the measured "
                            f"{kelvin_to_celsius(T.min()):.1f} to "
                            f"{kelvin_to_celsius(T.max()):.1f} C: it assumes Ea stays constant "
                            "and no other step takes over")
    settings = {"columns": cols, "n": int(T.size), "n_temperatures": int(np.unique(T).size),
                "T_range_K": [float(T.min()), float(T.max())], "k_unit": kunit,
                "weighting": a.arrhenius.weighting, "level": o.level,
                "constants": "scipy.constants (CODATA)", "eyring": eyring_terms(kunit)}
    doc = document("temperature", [o.file], settings, _results(a, preds), warnings)
    rows = [_row(n, p) for n, p in a.params.items()]
    head = [f"temperature: {o.file}", _columns_line(cols, kunit, a.arrhenius.weighting),
            eyring_words(kunit)]
    if cols["not_used"]:
        head.append("columns not used: " + ", ".join(repr(c) for c in cols["not_used"]))
    flat = [{"parameter": n, "value": p.value, "se": p.se, "ci_low": p.ci_low,
             "ci_high": p.ci_high, "unit": p.unit} for n, p in a.params.items()]
    flat += [{"parameter": f"k at {pr['T_K']:.2f} K", "value": pr["k"]["value"],
              "se": pr["k"]["se"], "ci_low": pr["k"]["ci_low"], "ci_high": pr["k"]["ci_high"],
              "unit": pr["k"]["unit"], "extrapolated": pr["extrapolated"]} for pr in preds]
    return View(doc, _text(a, rows, preds, o.level, head, doc["warnings"]),
                rows_to_csv(flat, list(dict.fromkeys(k for f in flat for k in f))), a)


def run_temperature(o: TemperatureOptions, emit) -> View:
    """The ``temperature`` command."""
    from ..plots.laws import arrhenius_plot

    view = compute_temperature(o)
    preds = (view.doc["results"][-1].get("predictions") or []) if view.doc["results"] else []
    deliver(o, emit, view, "temperature", lambda folder: [
        arrhenius_plot(view.analysis, folder / "temperature_arrhenius.png", preds)])
    return view
