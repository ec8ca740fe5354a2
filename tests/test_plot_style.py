"""Figure helpers of rateabs.plots.style checked against matplotlib's own text drawing (the
reference library): labels drawn as one glyph collection must look like text artists."""

import numpy as np
import pytest

from rateabs.plots.style import house_style, png_bytes, text_marks


def _ink(draw) -> np.ndarray:
    """Darkness (0-1) of a small figure whose one Axes spans it, drawn by ``draw(ax)``."""
    from io import BytesIO

    from PIL import Image

    with house_style() as plt:
        fig = plt.figure(figsize=(3.0, 0.6), dpi=110)
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_axis_off()
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        draw(ax)
        data = png_bytes(fig, tight=False)
    grey = np.asarray(Image.open(BytesIO(data)).convert("L"), float) / 255
    return 1 - grey


@pytest.mark.parametrize("size", [5.0, 6.5, 9.0])
@pytest.mark.parametrize(("ha", "va"), [("center", "center"), ("right", "top"),
                                        ("left", "bottom")])
def test_glyph_collection_looks_like_matplotlib_text(size, ha, va):
    """Same amount of ink within 12 %, and its centre within two pixels, as ``ax.text`` (which
    kerns pairs such as "LT": offsets of a pixel or so are expected, a lost bar or a misplaced
    label is not)."""
    text = "EFHLT 0.123 µM"
    ref = _ink(lambda ax: ax.text(0.5, 0.5, text, fontsize=size, ha=ha, va=va))
    got = _ink(lambda ax: text_marks(ax, [0.5], [0.5], [text], size=size, ha=ha, va=va))
    assert got.sum() == pytest.approx(ref.sum(), rel=0.12)
    rows, cols = np.indices(ref.shape)
    for a in (rows, cols):
        assert (a * got).sum() / got.sum() == pytest.approx((a * ref).sum() / ref.sum(), abs=2.0)


def test_glyph_collection_colours_each_text_and_skips_blanks():
    with house_style() as plt:
        fig = plt.figure(figsize=(2, 1))
        ax = fig.add_axes((0, 0, 1, 1))
        marks = text_marks(ax, [0.2, 0.5, 0.8], [0.5] * 3, ["1", " ", "2"], size=8,
                           colors=np.array(["white", "red", "black"]))
        assert len(marks.get_paths()) == 2
        assert marks.get_facecolors()[:, :3].tolist() == [[1, 1, 1], [0, 0, 0]]
        assert text_marks(ax, [0.1], [0.1], [""], size=8) is None
