"""rateabs: kinetic numbers from absorbance-vs-time data.

Initial rates, enzyme activity, Michaelis–Menten and inhibition constants, integrated rate laws,
completion times and Arrhenius/Eyring parameters, each with an honest uncertainty.

Results are for research and teaching. They are not for clinical diagnosis, and a predicted
completion time is no substitute for a process-safety assessment.

The public API is imported lazily so that ``rateabs --help`` stays fast:

>>> import rateabs
>>> ts = rateabs.read_traces(rateabs.sample_path("plate_kbdh_340nm.csv"))  # doctest: +SKIP
>>> plate = rateabs.analyse_plate(ts, rateabs.read_layout(...))            # doctest: +SKIP

Each command's settings are one typed object (``rateabs.RatesOptions`` and so on, see
:mod:`rateabs.options`) that ``rateabs.views.run_rates`` and its siblings take:

>>> from rateabs import views                                               # doctest: +SKIP
>>> views.compute_rates(rateabs.RatesOptions("plate.csv", chromophore="NADH"))  # doctest: +SKIP
"""

__version__ = "0.1.0"

_API = {
    "read_traces": "rateabs.io",
    "read_table": "rateabs.io",
    "sample_path": "rateabs.io",
    "TraceSet": "rateabs.traces",
    "read_layout": "rateabs.layout",
    "chromophore": "rateabs.photometry",
    "pathlength_from_volume": "rateabs.photometry",
    "fit": "rateabs.fitting",
    "batch_lm": "rateabs.fitting",
    "compare": "rateabs.fitting",
    "Model": "rateabs.models",
    "analyse_plate": "rateabs.rates",
    "RateSettings": "rateabs.rates",
    "find_windows": "rateabs.rates",
    "fit_trace": "rateabs.ratelaws",
    "assess_completion": "rateabs.completion",
    "grade_class": "rateabs.grade",
    "InspectOptions": "rateabs.options",
    "RatesOptions": "rateabs.options",
    "SaturationOptions": "rateabs.options",
    "RatelawOptions": "rateabs.options",
    "CompletionOptions": "rateabs.options",
    "TemperatureOptions": "rateabs.options",
    "ProgressOptions": "rateabs.options",
    "GradeOptions": "rateabs.options",
}
_RENAMED = {"assess_completion": "assess"}

__all__ = ["__version__", *_API]


def __getattr__(name):
    if name in _API:
        import importlib

        return getattr(importlib.import_module(_API[name]), _RENAMED.get(name, name))
    raise AttributeError(f"module 'rateabs' has no attribute {name!r}")
