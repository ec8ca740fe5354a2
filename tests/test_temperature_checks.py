"""temperature: units the values contradict, extrapolation named, every column accounted for;
and the rate-law figures keep their boxes and legends off the data."""

import json

import numpy as np
import pytest
from click.testing import CliRunner
from kinetics_truth import eyring_k
from process_truth import absorbance, first_order, noisy

from rateabs.cli import main

# k from the Eyring equation (Eyring 1935; typed in tests/kinetics_truth.py) with
# dH = 62.5 kJ/mol and dS = -40 J/(mol K) at 20-60 C, 1 % noise (seeded)
T_C = np.array([20.0, 30, 40, 50, 60])
K = eyring_k(T_C + 273.15, 62.5e3, -40.0) * (1 + 0.01 * np.random.default_rng(5).normal(size=5))


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def _table(path, header, temps, extra=""):
    path.write_text(f"{header},k (1/s){',note' if extra else ''}\n" + "".join(
        f"{t:g},{k:.6g}{',' + extra if extra else ''}\n" for t, k in zip(temps, K, strict=True)))
    return path


def test_kelvin_values_under_a_celsius_header_are_refused(tmp_path):
    """Issue 17: a 'T (C)' column holding 293-333 gave Ea = 241 kJ/mol instead of 65."""
    f = _table(tmp_path / "t.csv", "T (C)", T_C + 273.15)
    r = run("temperature", f)
    assert r.exit_code == 3
    assert "look like kelvin" in r.stderr and "--temp-unit K" in r.stderr
    ok = json.loads(run("temperature", f, "--temp-unit", "K", "--format", "json").stdout)
    good = json.loads(run("temperature", _table(tmp_path / "c.csv", "T (C)", T_C),
                          "--format", "json").stdout)
    assert ok["results"][0]["params"]["Ea"]["value"] == pytest.approx(
        good["results"][0]["params"]["Ea"]["value"], rel=1e-9)
    assert ok["settings"]["columns"]["temp_unit_source"] == "--temp-unit"


def test_celsius_values_under_a_kelvin_header_are_refused(tmp_path):
    r = run("temperature", _table(tmp_path / "k.csv", "T (K)", T_C))
    assert r.exit_code == 3 and "look like degrees Celsius" in r.stderr


def test_prediction_outside_the_measured_range_is_flagged(tmp_path):
    """Issue 12: --at '150 C' from 20-60 C data was given without a word."""
    f = _table(tmp_path / "c.csv", "T (C)", T_C, extra="batch 7")
    r = run("temperature", f, "--at", "150 C", "--at", "45 C", "--format", "json")
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    far, inside = d["results"][-1]["predictions"]
    assert far["extrapolated"] and far["beyond_K"] == pytest.approx(90.0)
    # distance in 1/T as a multiple of the measured span: |1/423.15 - 1/333.15| / (1/293.15 -
    # 1/333.15)
    span = 1 / 293.15 - 1 / 333.15
    assert far["multiple_of_span"] == pytest.approx((1 / 333.15 - 1 / 423.15) / span)
    assert not inside["extrapolated"] and inside["multiple_of_span"] == 0
    assert any("extrapolated" in w for w in d["warnings"])
    table = run("temperature", f, "--at", "150 C").stdout
    assert "EXTRAPOLATED" in table and "columns not used: 'note'" in table
    assert "warning: k at 150.0 C is extrapolated" in table


# --------------------------------------------------------------------------- figures


def _captured(monkeypatch):
    """Figures drawn by plots.laws, kept open instead of being saved."""
    import rateabs.plots.laws as laws

    figs = []

    def keep(fig, path):
        figs.append(fig)
        return path

    monkeypatch.setattr(laws, "save", keep)
    return figs


def _inside(ax, artist, xy) -> int:
    """How many data points (in data coordinates) fall inside an artist's box on screen."""
    fig = ax.figure
    fig.canvas.draw()
    box = artist.get_window_extent(fig.canvas.get_renderer())
    pts = ax.transData.transform(np.column_stack(xy))
    return int(sum(box.contains(px, py) for px, py in pts))


def test_rate_law_figure_keeps_text_and_legend_off_a_rising_trace(tmp_path, monkeypatch):
    """Issue 12/14: the parameter box covered the plateau of rising traces."""
    from rateabs.io import read_traces
    from rateabs.plots.laws import ratelaw_plots
    from rateabs.ratelaws import fit_trace

    t = np.arange(0, 60 * 60 + 1, 30.0)
    y = 1.3 - noisy(absorbance(first_order(t, 1.5e-3)), 3) + 0.06   # a rise to a plateau
    f = tmp_path / "rise.csv"
    f.write_text("time (s),A1\n" + "".join(f"{a:g},{b:.5f}\n" for a, b in
                                            zip(t, y, strict=True)))
    ts = read_traces(f)
    law = fit_trace(t, y, "A1", drift="auto")
    figs = _captured(monkeypatch)
    ratelaw_plots({"traces": ts, "laws": {"A1": law}}, tmp_path)
    ax = figs[0].axes[0]
    assert not ax.texts                                   # no box drawn inside the axes
    legend = ax.get_legend()
    assert _inside(ax, legend, (t / 60, y)) == 0
    assert "k = " in ax.get_title()                       # the parameters sit above the axes
    labels = [a.get_ylabel() for a in figs[0].axes]
    assert "residual (mAU)" in labels and "absorbance (AU)" in labels
    assert all("mA)" not in lab for lab in labels)
