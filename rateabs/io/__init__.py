"""Readers: turn the file an instrument wrote into a :class:`~rateabs.traces.TraceSet`.

The reader recognises shapes, not vendors: CSV, TSV, semicolon- and whitespace-separated text
and ``.xlsx``; decimal point or comma; UTF-8 (with or without BOM), UTF-16 and Latin-1;
metadata lines above the table (kept as key/value metadata, with the facts found in them);
four layouts:

* **wide**: a time column and one column per trace (wells A1..P24 or any names);
* **long**: a trace column, a time column and a value column, one row per reading;
* **transposed**: one row per trace, times across the header row;
* **plate blocks**: one plate grid (rows A..P, columns 1..24) per read, each under a line that
  names its time.

Times in s, min or h (from ``--time-unit``, from header words such as ``min``, ``(min)``,
``time_min``, ``h``, or assumed to be seconds with a warning) or clock strings ``h:mm:ss`` /
``mm:ss``. Columns such as temperature or cycle number are set aside by name, never read as
traces. Overflow markers (``OVER``, ``overflow``, ``>3.5``, ``sat``, ``****``) are masked and
flagged, never turned into numbers. Transmittance, percent transmittance and raw intensities
are converted to absorbance. Every decision is recorded in ``TraceSet.info``; every file the
reader cannot read ends in one :class:`~rateabs.errors.InputError` naming the file, the row or
column, what is wrong and what to do.

Modules: :mod:`.decoding` and :mod:`.sniffing` (bytes to cells), :mod:`.source` (an open file,
read lazily), :mod:`.values` (cells, missing words, markers), :mod:`.headers` (header meaning),
:mod:`.times`, :mod:`.locate` (where the table is), :mod:`.body` (rows below a header),
:mod:`.columns`, :mod:`.wide`, :mod:`.long`, :mod:`.transposed`, :mod:`.blocks` (the shapes),
:mod:`.metadata`, :mod:`.signal`, :mod:`.reader` (``read_traces``), :mod:`.tables` (plain
tables) and :mod:`.samples`.
"""

from .headers import detect_signal, time_unit_from_header
from .reader import read_traces
from .samples import sample_path
from .signal import SIGNAL_KINDS
from .source import load_cells
from .tables import number_column, pick_column, read_table

__all__ = ["SIGNAL_KINDS", "detect_signal", "load_cells", "number_column", "pick_column",
           "read_table", "read_traces", "sample_path", "time_unit_from_header"]
