"""The one house style of every rateabs figure, and how figures are saved.

The palette is the Okabe–Ito colour-blind-safe set (Okabe & Ito 2008, "Color Universal
Design"); every axis carries its unit; figures are written atomically as PNG.
"""

from __future__ import annotations

import io
from contextlib import contextmanager
from pathlib import Path

PALETTE = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000"]


INK = "#222222"


GRID = "#d9d9d9"


SHADE = "#0072B2"


RC = {
    "figure.dpi": 110, "savefig.dpi": 110, "font.size": 9.5, "axes.titlesize": 10.5,
    "axes.labelsize": 9.5, "axes.edgecolor": INK, "axes.labelcolor": INK,
    "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True,
    "grid.color": GRID, "grid.linewidth": 0.6, "xtick.color": INK, "ytick.color": INK,
    "legend.frameon": False, "legend.fontsize": 8.5, "lines.linewidth": 1.6,
    "lines.markersize": 4, "axes.prop_cycle": None, "font.family": "DejaVu Sans",
}


@contextmanager
def house_style():
    """Matplotlib settings of every rateabs figure (Agg backend, palette, grid, fonts)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt
    from cycler import cycler

    rc = dict(RC, **{"axes.prop_cycle": cycler(color=PALETTE)})
    with plt.rc_context(rc):
        yield plt


def save(fig, path: str | Path, tight: bool = True, compress_level: int = 6) -> Path:
    """Write a figure as PNG atomically and close it. ``tight=False`` keeps a layout fixed in
    advance as it is (the figure is drawn once instead of twice); a lower ``compress_level``
    (0-9, zlib) writes faster and larger files."""
    from ..files import write_atomic

    buf = io.BytesIO()
    fig.savefig(buf, format="png", bbox_inches="tight" if tight else None,
                pil_kwargs={"compress_level": compress_level})
    import matplotlib.pyplot as plt

    plt.close(fig)
    write_atomic(path, buf.getvalue())
    return Path(path)
