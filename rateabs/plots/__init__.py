"""Plots: one house style (:mod:`.style`) and one module of figures per command.

Matplotlib is imported inside the drawing functions, so importing this package stays light.
"""

from .grade import class_summary_plot, student_plot
from .inspect import traces_overview
from .laws import arrhenius_plot, completion_plot, ratelaw_plots
from .progress import progress_plots
from .rates import plate_heatmap, plate_overview, replicate_plot, well_pages
from .saturation import linearised, saturation_fit
from .style import GRID, INK, PALETTE, RC, SHADE, house_style, save

__all__ = [
    "PALETTE", "INK", "GRID", "SHADE", "RC", "house_style", "save", "traces_overview",
    "saturation_fit", "linearised", "plate_overview", "well_pages", "plate_heatmap",
    "replicate_plot",
    "ratelaw_plots", "completion_plot", "arrhenius_plot", "progress_plots", "class_summary_plot",
    "student_plot",
]
