"""Plots: one house style (:mod:`.style`) and one module of figures per command.

Matplotlib is imported inside the drawing functions, so importing this package stays light.
"""

from .grade import class_summary_plot, student_svg
from .inspect import traces_overview
from .laws import arrhenius_plot, completion_plot, ratelaw_plots
from .progress import progress_plots
from .rates import plate_heatmap, plate_overview, replicate_plot, well_pages
from .saturation import linearised, saturation_fit
from .style import (
    GRID,
    INK,
    MILLI_ABSORBANCE,
    PALETTE,
    RC,
    RESIDUAL_MAU,
    SHADE,
    drawable,
    fixed_axes,
    house_style,
    png_bytes,
    save,
    unit_text,
)

__all__ = [
    "PALETTE", "INK", "GRID", "SHADE", "RC", "MILLI_ABSORBANCE", "RESIDUAL_MAU", "house_style",
    "fixed_axes", "save", "png_bytes", "drawable", "unit_text", "traces_overview",
    "saturation_fit", "linearised", "plate_overview", "well_pages", "plate_heatmap",
    "replicate_plot",
    "ratelaw_plots", "completion_plot", "arrhenius_plot", "progress_plots", "class_summary_plot",
    "student_svg",
]
