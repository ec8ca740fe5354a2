"""Figures of ``rateabs grade``: the class summary and each student's feedback figure."""

from __future__ import annotations

import io

import numpy as np

from .style import PALETTE, house_style, save


def class_summary_plot(results, rubric, path):
    """Each student's own value as a dot, the reference line and the tolerance band."""
    vals = [(r["student"], r["value"]) for r in results if r["value"] is not None]
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(7.2, max(2.6, 0.2 * len(vals) + 1.2)))
        ref, tol = rubric.reference, rubric.tolerance_pct / 100
        ax.axvspan(ref * (1 - tol), ref * (1 + tol), color=PALETTE[2], alpha=0.18, lw=0,
                   label=f"reference ± {rubric.tolerance_pct:g} %")
        ax.axvline(ref, color=PALETTE[2], lw=1.4)
        for k, (_, v) in enumerate(vals):
            inside = abs(v / ref - 1) <= tol
            ax.plot(v, k, "o", ms=5, color=PALETTE[0] if inside else PALETTE[1])
        ax.set_yticks(range(len(vals)), [n[:24] for n, _ in vals], fontsize=7)
        ax.invert_yaxis()
        ax.set_xlabel(f"{rubric.quantity} from each student's own data ({rubric.unit})")
        ax.set_title("class distribution (orange: outside the tolerance band)")
        ax.legend(loc="best")
        return save(fig, path)


def student_plot(figure: dict) -> bytes:
    """One student's readings and the fit used to check their number, as PNG bytes.

    ``figure`` holds ``x``, ``y``, ``fitted``, ``title`` and ``table`` (True when x is [S] from a
    rate table rather than time in s), as :func:`rateabs.grade.grade_one` returns it.
    """
    with house_style() as plt:
        fig, ax = plt.subplots(figsize=(5.6, 3.4))
        table = figure["table"]
        xs = figure["x"] if table else np.asarray(figure["x"]) / 60
        fitted = figure["fitted"]
        ax.plot(xs, figure["y"], "o", ms=3, color=PALETTE[0], label="your data")
        ax.plot(xs[:len(fitted)], fitted, color=PALETTE[1], label="fit")
        ax.set_xlabel("[S]" if table else "time (min)")
        ax.set_ylabel("rate" if table else "absorbance (AU)")
        ax.set_title(figure["title"], fontsize=9.5)
        ax.legend(loc="best")
        buf = io.BytesIO()
        fig.savefig(buf, format="png", bbox_inches="tight", dpi=90)
        plt.close(fig)
        return buf.getvalue()
