"""Plots: one house style (:mod:`.style`) and one module of figures per command.

Matplotlib is imported inside the drawing functions, and each name below is loaded from its
module when first asked for (``from rateabs.plots import plate_overview`` loads
:mod:`.rates` and :mod:`.style` only), so importing this package stays light: a drawing
process loads what its figures need, not every command's figures and their analyses.
"""

from __future__ import annotations

import importlib

#: Each public name and the module of this package that holds it.
HOMES = {
    "class_summary_plot": "grade", "student_svg": "grade",
    "traces_overview": "inspect",
    "arrhenius_plot": "laws", "completion_plot": "laws", "ratelaw_plots": "laws",
    "progress_plots": "progress",
    "plate_heatmap": "rates", "plate_overview": "rates", "replicate_plot": "rates",
    "well_pages": "rates",
    "linearised": "saturation", "saturation_fit": "saturation",
    **dict.fromkeys(("GRID", "INK", "MILLI_ABSORBANCE", "PALETTE", "RC", "RESIDUAL_MAU", "SHADE",
                     "drawable", "fixed_axes", "house_style", "png_bytes", "save", "unit_text"),
                    "style"),
}

__all__ = sorted(HOMES)


def __getattr__(name: str):
    home = HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{home}", __name__), name)
    globals()[name] = value         # asked once
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(HOMES))
