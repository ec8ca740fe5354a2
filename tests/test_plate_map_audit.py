"""Plate maps read as a bench enzymologist writes them: units in headers without brackets, a
window whose unit is written once after the range, an exclude cell in words, --protein beside
the map's protein column, sample names that differ only in case. Each truth is worked by hand
beside its check (enzyme unit: 1 U = 1 umol/min, NC-IUB 1979; NADH 6220 M^-1 cm^-1)."""

import numpy as np
import pytest

from rateabs.layout import read_layout
from rateabs.rules import Window

NET_SLOPE = -0.050          # A/min after the blank: 0.050 / 6220 / 1 cm = 8.039 uM/min (by hand)
RATE_UM_PER_MIN = 0.050 / 6220 * 1e6


def _plate(folder, seed=1):
    """Nine sample wells at -0.051 A/min and three blanks at -0.001 A/min, 31 reads 10 s apart."""
    rng = np.random.default_rng(seed)
    t = np.arange(31) * 10.0
    slopes = {f"A{i}": (NET_SLOPE - 0.001 if i < 10 else -0.001) for i in range(1, 13)}
    rows = ["Time (s)," + ",".join(slopes)]
    rows += [f"{x:g}," + ",".join(f"{1.0 + s * x / 60 + rng.normal(0, 0.001):.5f}"
                                  for s in slopes.values()) for x in t]
    path = folder / "plate.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def _map(folder, header: str, cells: list[str], name="map.csv"):
    """Samples A1-A9 with one extra column ``header`` (cells per well), blanks A10-A12."""
    lines = [f"well,role,sample,{header}"]
    lines += [f"A{i},sample,L1,{cells[i - 1]}" for i in range(1, 10)]
    lines += [f"A{i},blank,buffer," for i in (10, 11, 12)]
    path = folder / name
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.parametrize("text", ["1.5-5 min", "90-300 s", "90 s-5 min", "1.5min-5min"])
def test_a_window_unit_written_after_the_range_is_that_of_both_ends(text):
    # by hand: 1.5 min = 90 s, 5 min = 300 s (common practice: "1.5-5 min" is one range)
    assert Window().check(text, "--window") == (90.0, 300.0)


def test_a_bare_window_is_still_in_seconds():
    assert Window().check("90-300", "--window") == (90.0, 300.0)


def test_the_maps_window_column_takes_the_unit_after_the_range(tmp_path):
    cells = ["1.5-5 min"] + [""] * 8
    layout = read_layout(str(_map(tmp_path, "window", cells)))
    assert layout.loc["A1", "window"] == (90.0, 300.0)      # by hand: 1.5 min = 90 s
