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

import numpy as np

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
    """Matplotlib settings of every rateabs figure (palette, grid, fonts); yields
    :data:`FIGURES`, which makes figures on the Agg canvas as ``pyplot`` would."""
    import matplotlib
    from cycler import cycler

    rc = dict(RC, **{"axes.prop_cycle": cycler(color=PALETTE)})
    with matplotlib.rc_context(rc):
        yield FIGURES


class Figures:
    """The part of ``pyplot`` the figures use, without ``pyplot``: a figure on its own Agg
    canvas, held by no figure manager (nothing to close; it goes when no longer referenced).
    Loading ``pyplot`` and its backend machinery took a drawing process about 0.07 s, a third
    of its warm-up, on the benchmark machine."""

    @staticmethod
    def figure(**kw):
        """A new figure (``Figure`` keywords: figsize, dpi, ...)."""
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure

        fig = Figure(**kw)
        FigureCanvasAgg(fig)
        return fig

    def subplots(self, nrows: int = 1, ncols: int = 1, *, figsize=None, dpi=None, **kw):
        """A new figure and its grid of axes, as ``pyplot.subplots``."""
        fig = self.figure(figsize=figsize, dpi=dpi)
        return fig, fig.subplots(nrows, ncols, **kw)


FIGURES = Figures()


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

    >>> unit_text("uM/min per nM"), unit_text("M^-1 cm^-1")
    ('µM/min per nM', 'M⁻¹ cm⁻¹')
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


#: Vertical placement of :func:`text_marks`: the share of the line's box (from the lowest
#: descent to the highest ascent of "lp", as matplotlib lays a line out) at the given y.
_VA = {"top": 1.0, "center": 0.5, "bottom": 0.0}
#: Horizontal placement: the share of the text's ink width left of the given x (the outline's
#: points bound the ink: exactly for straight strokes, within a hair for curves).
_HA = {"left": 0.0, "center": 0.5, "right": 1.0}


#: The glyph outlines of :func:`text_marks` are also stroked this wide (points): filled alone
#: they carry about 13 % less ink than matplotlib's text at the same size (tests).
GLYPH_EDGE = 0.08


def text_marks(ax, x, y, texts, *, size: float, ha: str = "center", va: str = "center",
               colors=INK, transform=None, zorder: float = 3):
    """Many short texts (cell numbers, row letters, group names) drawn as one collection of
    glyph outlines instead of one text artist each: a text artist costs about a millisecond
    to lay out and draw, so a 96-well map's numbers took longer than the rest of the figure.
    The glyphs are the house font's outlines at ``size`` points, set side by side by their
    advances (no kerning), placed at (x, y) in ``transform`` (the data coordinates by default)
    as ``ha``/``va`` say, and never clipped; text the font cannot draw is replaced as for
    every figure (:func:`drawable`). Returns the collection, or None without texts."""
    from matplotlib.collections import PathCollection
    from matplotlib.font_manager import FontProperties, findfont
    from matplotlib.path import Path as MplPath
    from matplotlib.transforms import Affine2D

    font = findfont(FontProperties(size=size))
    scale = size / GLYPH_SIZE
    lo, hi = (scale * b for b in _line_box(font))
    dy = 0.0 if va == "baseline" else -(lo + _VA[va] * (hi - lo))
    paths, at, keep = [], [], []
    for k, (xk, yk, text) in enumerate(zip(x, y, texts, strict=True)):
        text = drawable(text)
        if not text.strip():
            continue
        verts, codes, pen = [], [], 0.0
        for c in text:
            v, cd, advance = _glyph(c, font)
            if len(v):
                verts.append(v * scale + (pen, 0.0))
                codes.append(cd)
            pen += advance * scale
        if not verts:
            continue
        verts = np.concatenate(verts)
        x0, x1 = verts[:, 0].min(), verts[:, 0].max()      # the ink, as matplotlib aligns it
        paths.append(MplPath(verts + (-(x0 + _HA[ha] * (x1 - x0)), dy), np.concatenate(codes)))
        at.append((xk, yk))
        keep.append(k)
    if not paths:
        return None
    colors = np.asarray(colors, dtype=object)
    face = colors[keep].tolist() if colors.ndim else colors.item()
    marks = PathCollection(paths, offsets=np.asarray(at, float),
                           offset_transform=transform if transform is not None else ax.transData,
                           transform=Affine2D().scale(1 / 72) + ax.figure.dpi_scale_trans,
                           facecolors=face, edgecolors=face, linewidths=GLYPH_EDGE,
                           clip_on=False,
                           snap=False,     # rectilinear glyphs (E, F, H, L, T) stay whole
                           zorder=zorder)
    ax.add_collection(marks, autolim=False)
    return marks


#: The size (points) glyph outlines are cached at; outlines without hinting scale exactly.
GLYPH_SIZE = 12.0
#: Characters whose outlines a drawing process caches while it warms up (numbers, well names).
COMMON_GLYPHS = "0123456789.-+ ABCDEFGHIJKLMNOPabcdefghijklmnopqrstuvwxyz"


@lru_cache(maxsize=2048)
def _glyph(char: str, font: str):
    """One character of the font file ``font`` at :data:`GLYPH_SIZE` points: its outline
    (vertices in points from the pen position, path codes) and its advance (points)."""
    from matplotlib import ft2font
    from matplotlib.font_manager import FontProperties, get_font
    from matplotlib.textpath import TextPath

    face = get_font(font)
    face.set_size(GLYPH_SIZE, 72)
    flags = getattr(getattr(ft2font, "LoadFlags", None), "NO_HINTING", None)
    glyph = face.load_char(ord(char), flags=ft2font.LOAD_NO_HINTING if flags is None else flags)
    advance = glyph.linearHoriAdvance / 65536
    if char.isspace():                  # no outline (matplotlib cannot make an empty path)
        return np.zeros((0, 2)), np.zeros(0, np.uint8), advance
    path = TextPath((0, 0), char, size=GLYPH_SIZE, prop=FontProperties(fname=font))
    verts = np.array(path.vertices, float).reshape(-1, 2)
    codes = np.array(path.codes if path.codes is not None else [], dtype=np.uint8)
    return verts, codes, advance


@lru_cache(maxsize=16)
def _line_box(font: str) -> tuple[float, float]:
    """The lowest descent and highest ascent of "lp" at :data:`GLYPH_SIZE` points (from the
    baseline), the box matplotlib lays a line of text in."""
    low = [_glyph(c, font)[0] for c in "lp"]
    ys = np.concatenate([v[:, 1] for v in low if len(v)])
    return float(ys.min()), float(ys.max())


def png_bytes(fig, tight: bool = True, dpi: float | None = None,
              compress_level: int = 6) -> bytes:
    """A figure as PNG bytes (no figure manager holds it: nothing to close); text the house
    font cannot draw is replaced first (see :func:`drawable`). ``tight=False`` keeps the
    figure's own layout (one drawing pass instead of two): use it with :func:`fixed_axes`. A
    lower ``compress_level`` (0-9, zlib) writes faster and larger files."""
    _keep_drawable(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", bbox_inches="tight" if tight else None, dpi=dpi,
                pil_kwargs={"compress_level": compress_level})
    return buf.getvalue()


def save(fig, path: str | Path, tight: bool = True, compress_level: int = 6) -> Path:
    """Write a figure as PNG atomically (see :func:`png_bytes`)."""
    from ..files import write_atomic

    write_atomic(path, png_bytes(fig, tight, compress_level=compress_level))
    return Path(path)


def warm_up() -> None:
    """Draw a small figure with text to nothing: loads the backend, the house font, its glyph
    cache and the outlines of :data:`COMMON_GLYPHS`, so that a drawing process's first real
    figure does not pay for them. Run in a drawing process of the command line only
    (:mod:`rateabs.views.drawing`), which loads matplotlib without its interactive help text
    (:func:`skip_artist_help`)."""
    skip_artist_help()
    with house_style() as plt:
        fig = plt.figure(figsize=(1, 1))
        fig.text(0.5, 0.5, "0.123 µM/min A–H 1–12", fontsize=7)
        ax = fig.add_axes((0, 0, 1, 1))
        text_marks(ax, [0.5], [0.5], [COMMON_GLYPHS], size=7)
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
