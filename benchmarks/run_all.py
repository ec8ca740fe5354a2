"""Run every benchmark and simulation study: ``python benchmarks/run_all.py``."""

import runpy
import sys
from pathlib import Path

HERE = Path(__file__).parent
SCRIPTS = ["bench_rates.py", "bench_bootstrap.py", "window_hit_rates.py", "mode_choice.py",
           "order_choice.py", "completion_coverage.py", "bench_grade.py", "bench_plates.py",
           "flag_calibration.py"]

if __name__ == "__main__":
    sys.path.insert(0, str(HERE))
    for name in SCRIPTS:
        if (HERE / name).exists():
            print(f"\n=== {name}")
            sys.argv = [name]
            runpy.run_path(str(HERE / name), run_name="__main__")
