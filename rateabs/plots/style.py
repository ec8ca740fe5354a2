"""The one house style of every rateabs figure, and how figures are laid out and saved.

The palette is the Okabe–Ito colour-blind-safe set (Okabe & Ito 2008, "Color Universal
Design"); every axis carries its unit; figures are written atomically as PNG.

Speed: the style is a plain ``rc_context`` around the drawing (measured at under 1 ms a figure,
against 100 ms and more for the drawing itself, so it is kept per figure and never changes a
caller's own matplotlib settings); :func:`fixed_axes` lays a figure out once, in inches, so
:func:`save` needs neither constrained layout nor a tight bounding box (each costs a further pass
over every artist).

Names in other scripts: the house font (DejaVu Sans, shipped with matplotlib) draws Latin, Greek,
Cyrillic, and, where matplotlib shapes text (libraqm, matplotlib 3.11 on), Arabic and Hebrew. Text
it cannot draw (Chinese, Japanese, Korean, Devanagari, ...) is kept out of the raster image:
:func:`save` replaces each such run of characters by :data:`NOT_DRAWN`, and the report page shows
the name in full, in the reader's browser fonts. No font is packaged, so the wheel stays small,
and no warning is printed per missing glyph.
"""

from __future__ import annotations

import io
import re
import unicodedata
from contextlib import contextmanager
from functools import lru_cache
from pathlib import Path

PALETTE = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000"]


INK = "#222222"


GRID = "#d9d9d9"


SHADE = "#0072B2"

#: The house font: ships with matplotlib, so every installation has it.
FONT = "DejaVu Sans"

RC = {
    "figure.dpi": 110, "savefig.dpi": 110, "font.size": 9.5, "axes.titlesize": 10.5,
    "axes.labelsize": 9.5, "axes.edgecolor": INK, "axes.labelcolor": INK,
    "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True,
    "grid.color": GRID, "grid.linewidth": 0.6, "xtick.color": INK, "ytick.color": INK,
    "legend.frameon": False, "legend.fontsize": 8.5, "lines.linewidth": 1.6,
    "lines.markersize": 4, "axes.prop_cycle": None, "font.family": FONT,
    # glyphs drawn as the font designs them, without fitting them to the pixel grid: at 110
    # dpi they look the same, and laying text out takes a fifth less time (a 96-number plate
    # map: 0.12 s against 0.145 s), text being most of the time a figure takes to draw
    "text.hinting": "no_hinting",
}

#: The unit of residuals in thousandths of an absorbance unit. Written "mAU", never "mA", which
#: reads as milliampere (mAU, milli-absorbance unit: common practice in spectrophotometry).
MILLI_ABSORBANCE = "mAU"

#: Axis label of absorbance residuals shown in thousandths.
RESIDUAL_MAU = "residual (mAU, 0.001 absorbance)"

#: What stands in a figure for text the house font cannot draw (the report shows it in full).
NOT_DRAWN = "[…]"

#: Scripts that need shaping and right-to-left layout (drawn only where matplotlib shapes text).
_SHAPED = re.compile("[\u0590-\u08ff\ufb1d-\ufdff\ufe70-\ufeff]")


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


def fixed_axes(plt, size: tuple[float, float], rows: int = 1, cols: int = 1, *,
               margins: tuple[float, float, float, float] = (0.75, 0.2, 0.5, 0.4),
               **grid):
    """A figure of ``size`` inches and its grid of axes, laid out once with fixed margins.

    ``margins`` are (left, right, bottom, top) in inches, so labels keep their room whatever the
    figure's size; ``grid`` goes to the gridspec (``height_ratios``, ``hspace``, ``wspace``...)
    and to ``subplots`` (``sharex``, ``squeeze``). Returns (figure, axes) as ``plt.subplots``.
    """
    w, h = size
    left, right, bottom, top = margins
    share = {k: grid.pop(k) for k in ("sharex", "sharey", "squeeze") if k in grid}
    fig = plt.figure(figsize=size)
    axes = fig.subplots(rows, cols, gridspec_kw={"left": left / w, "right": 1 - right / w,
                                                 "bottom": bottom / h, "top": 1 - top / h,
                                                 **grid}, **share)
    return fig, axes


def legend_below(fig, ax, ncol: int = 2, fontsize: float = 7.5, *, note: str = "",
                 margins: tuple[float, float, float] = (0.8, 0.25, 0.75)) -> None:
    """Lay out a one-axes figure once, with room below the axes for the x label, the legend
    (its rows counted from its entries) and an optional ``note`` line, and put them there.
    ``margins`` are (left, right, top) in inches. Save the figure with ``tight=False``."""
    handles, labels = ax.get_legend_handles_labels()
    rows = -(-len(labels) // ncol)
    w, h = fig.get_size_inches()
    label_in, row_in, note_in = 0.5, fontsize * 1.75 / 72, 0.3 if note else 0.0
    bottom = label_in + rows * row_in + 0.1 + note_in
    left, right, top = margins
    fig.subplots_adjust(left=left / w, right=1 - right / w, top=1 - top / h, bottom=bottom / h)
    if labels:
        fig.legend(handles, labels, loc="upper center", ncol=ncol, fontsize=fontsize,
                   bbox_to_anchor=(0.5 + (left - right) / (2 * w), (bottom - label_in) / h))
    if note:
        fig.text(0.1 / w, 0.08 / h, note, fontsize=7, color=INK)


_UNIT_TEXT = (("^-1", "⁻¹"), ("^-2", "⁻²"), ("^2", "²"), ("^3", "³"))


def unit_text(unit: str) -> str:
    """A unit as a figure writes it: ``uM`` as ``µM``, ``M^-1 cm^-1`` as ``M⁻¹ cm⁻¹``.

    >>> unit_text("uM/min per enzyme unit"), unit_text("M^-1 cm^-1")
    ('µM/min per enzyme unit', 'M⁻¹ cm⁻¹')
    """
    words = []
    for w in str(unit).split(" "):
        if re.fullmatch(r"u(M|L|g|mol|m|s)(/\w+)?", w):
            w = "µ" + w[1:]
        for a, b in _UNIT_TEXT:
            w = w.replace(a, b)
        words.append(w)
    return " ".join(words)


@lru_cache(maxsize=1)
def _font_chars() -> frozenset[int]:
    """Code points the house font has a glyph for."""
    from matplotlib import font_manager
    from matplotlib.ft2font import FT2Font

    path = font_manager.findfont(font_manager.FontProperties(family=FONT),
                                 fallback_to_default=True)
    return frozenset(FT2Font(path).get_charmap())


@lru_cache(maxsize=1)
def _shapes_text() -> bool:
    """Whether this matplotlib shapes complex scripts (it lays text out with libraqm)."""
    import matplotlib

    return "text.language" in matplotlib.rcParams


def _char_ok(c: str) -> bool:
    if ord(c) < 0x250 or unicodedata.category(c).startswith(("Z", "C")):
        return True
    if _SHAPED.match(c) and not _shapes_text():
        return False
    return ord(c) in _font_chars()


def drawable(text: str, fallback: str | None = None) -> str:
    """``text`` as a figure may show it: unchanged where the house font draws every character;
    otherwise ``fallback``, or (without one) the text with each run it cannot draw replaced by
    :data:`NOT_DRAWN`.

    >>> drawable("KbDH1 Иванов"), drawable("样品 1"), drawable("王", "trace 3")
    ('KbDH1 Иванов', '[…] 1', 'trace 3')
    """
    text = str(text)
    if all(_char_ok(c) for c in text):
        return text
    if fallback is not None:
        return fallback
    out, run = [], False
    for c in text:
        ok = _char_ok(c)
        if ok:
            out.append(c)
        elif not run:
            out.append(NOT_DRAWN)
        run = not ok
    return "".join(out)


def _keep_drawable(fig) -> None:
    """Every text a figure draws made drawable by the house font (see :func:`drawable`)."""
    for t in _drawn_texts(fig):
        s = t.get_text()
        if s and not s.isascii():
            t.set_text(drawable(s))


def _drawn_texts(artist):
    """The texts under ``artist`` that are drawn: invisible artists, and the axes an Axes with
    its axis turned off does not draw, are passed over (walking those would make matplotlib
    build their ticks, a millisecond each, only to look at them)."""
    from matplotlib.axes import Axes
    from matplotlib.text import Text

    hidden = ({id(artist.xaxis), id(artist.yaxis)}
              if isinstance(artist, Axes) and not artist.axison else set())
    for child in artist.get_children():
        if id(child) in hidden or not child.get_visible():
            continue
        if isinstance(child, Text):
            yield child
        yield from _drawn_texts(child)


def png_bytes(fig, tight: bool = True, dpi: float | None = None,
              compress_level: int = 6) -> bytes:
    """A figure as PNG bytes, closed afterwards; text the house font cannot draw is replaced
    first (see :func:`drawable`). ``tight=False`` keeps the figure's own layout (one drawing pass
    instead of two): use it with :func:`fixed_axes`. A lower ``compress_level`` (0-9, zlib)
    writes faster and larger files."""
    import matplotlib.pyplot as plt

    _keep_drawable(fig)
    buf = io.BytesIO()
    try:
        fig.savefig(buf, format="png", bbox_inches="tight" if tight else None, dpi=dpi,
                    pil_kwargs={"compress_level": compress_level})
    finally:
        plt.close(fig)
    return buf.getvalue()


def save(fig, path: str | Path, tight: bool = True, compress_level: int = 6) -> Path:
    """Write a figure as PNG atomically and close it (see :func:`png_bytes`)."""
    from ..files import write_atomic

    write_atomic(path, png_bytes(fig, tight, compress_level=compress_level))
    return Path(path)


def warm_up() -> None:
    """Draw a small figure with text to nothing: loads the backend, the house font and its
    glyph cache, so that a drawing process's first real figure does not pay for them. Run in a
    drawing process of the command line only (:mod:`rateabs.views.drawing`), which loads
    matplotlib without its interactive help text (:func:`skip_artist_help`)."""
    skip_artist_help()
    with house_style() as plt:
        fig = plt.figure(figsize=(1, 1))
        fig.text(0.5, 0.5, "0.123 µM/min A–H 1–12", fontsize=7)
        png_bytes(fig, tight=False, compress_level=1)


def skip_artist_help() -> None:
    """Load matplotlib, if it is not loaded yet, without writing the help text of each artist
    class's ``set`` method.

    While matplotlib loads, every artist class (over a hundred) lists its settable properties
    into the docstring and signature of its ``set`` method, for ``help()``: about a third of the
    time it takes to load (0.1 s of 0.35 s on the project's machine), which a drawing process
    pays before its first figure. The figures never read that text. So for a process that only
    draws, the one class method that writes it is replaced, once ``matplotlib.artist`` has run,
    by one that keeps only the mark matplotlib checks (``_autogenerated_signature``); ``set``
    works as before. Where matplotlib is loaded already, or its artist module has no such
    method (another version), nothing changes. Not for a library user's own session: only the
    command line's drawing process calls this.
    """
    import importlib.abc
    import importlib.util
    import sys

    if "matplotlib.artist" in sys.modules:
        return

    class _AfterArtist(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path, target=None):
            if name != "matplotlib.artist":
                return None
            sys.meta_path.remove(self)
            spec = importlib.util.find_spec(name)
            if spec is None or spec.loader is None:
                return spec
            run = spec.loader.exec_module

            def exec_module(module):
                run(module)
                artist = getattr(module, "Artist", None)
                if hasattr(artist, "_update_set_signature_and_docstring"):
                    artist._update_set_signature_and_docstring = classmethod(_mark_only)
                    module.kwdoc = lambda _artist: ""

            spec.loader.exec_module = exec_module
            return spec

    sys.meta_path.insert(0, _AfterArtist())


def _mark_only(cls) -> None:
    cls.set._autogenerated_signature = True
