"""Fuzz the reader: mutated exports in, and every outcome must be a TraceSet or one clear line.

Seeds: every file of ``sample_runs/`` (exports, plate maps, rate tables, rosters) and the
shapes ``tests/helpers.py`` writes (wide, long, transposed and plate blocks; comma, semicolon
and tab; decimal point and comma; times in s, min and h:mm:ss; UTF-8 and UTF-16), plus one
``.xlsx``. Each case damages a seed with one to three mutations (byte and bit flips,
truncation, duplicated, removed, swapped and blank lines, duplicated and removed cells, odd
numbers such as 1e308, inf or a superscript digit, header words such as ``second`` or
``Cycle``, duplicated columns, a field over 128 kB, another encoding, other line ends) and runs:

* ``read_traces`` then the ``inspect`` summary and the ``rates`` analysis
  (``rates.analyse_plate`` with its defaults) on what it read;
* ``read_table`` and ``number_column`` on every column (plate maps, tables of rates);
* ``layout.read_layout`` on mutated plate maps.

A crash is any exception other than the package's own one-line errors (``RateabsError``: bad
input, bad usage, an analysis the data cannot carry), an error message of more than one line, or
a case that takes longer than ``--timeout`` seconds (a hang); crashes are counted by signature
(stage, exception type, innermost frame). Python warnings raised on the way (text that would
reach a user's terminal) are counted by place too. Goal: 0 of each.

    python benchmarks/fuzz_reader.py                    # 100,000 cases
    python benchmarks/fuzz_reader.py --n 2000 --jobs 2 --seed 3
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import os
import signal
import sys
import tempfile
import time
import traceback
import warnings
from collections import Counter
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT))

from helpers import mutate, seed_exports  # noqa: E402

from rateabs.errors import InputError, RateabsError  # noqa: E402
from rateabs.inspecting import summarize  # noqa: E402
from rateabs.io import number_column, read_table, read_traces  # noqa: E402
from rateabs.layout import read_layout  # noqa: E402
from rateabs.rates import analyse_plate  # noqa: E402


def seeds(rng: np.random.Generator) -> list[tuple[str, bytes]]:
    """(name, bytes) of every seed."""
    out = seed_exports(rng)
    for p in sorted((ROOT / "sample_runs").rglob("*")):
        if p.is_file() and p.suffix in (".csv", ".tsv", ".txt", ".toml"):
            out.append((p.name, p.read_bytes()))
    out.append(("book.xlsx", _workbook(out[0][1])))
    return out


def _workbook(text: bytes) -> bytes:
    import io

    import openpyxl
    wb = openpyxl.Workbook()
    for line in text.decode().splitlines():
        wb.active.append([float(c) if _num(c) else c for c in line.split(",")])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _num(c: str) -> bool:
    try:
        float(c)
        return True
    except ValueError:
        return False


class Hang(BaseException):
    """A case ran past the time limit (BaseException: no reader code may swallow it)."""


def _alarm(signum, frame):
    raise Hang


def _signature(stage: str, exc: BaseException) -> str:
    tb = traceback.extract_tb(exc.__traceback__)
    frame = tb[-1] if tb else None
    where = f"{Path(frame.filename).name}:{frame.name}" if frame else "?"
    return f"{stage}: {type(exc).__name__} in {where}"


def _stage(stage: str, fn, path: Path, crashes: Counter, examples: dict, label: str) -> object:
    try:
        return fn(path)
    except RateabsError as exc:                         # the one-line refusals of the CLI
        if "\n" in str(exc):
            sig = f"{stage}: {type(exc).__name__} message of several lines"
            crashes[sig] += 1
            examples.setdefault(sig, label)
        return None
    except (Exception, Hang) as exc:  # noqa: BLE001 - counting crashes is the point
        sig = _signature(stage, exc)
        crashes[sig] += 1
        examples.setdefault(sig, f"{label}: {exc!s:.160}")
        return None


def _table_columns(path: Path) -> None:
    df = read_table(path)
    for col in df.columns:
        try:
            number_column(df, col)
        except InputError:
            pass


def run(args: tuple[int, int, int, str, float]) -> tuple[Counter, dict, Counter]:
    """Cases ``start..stop`` of the seeded stream: (crashes, examples, outcomes)."""
    start, stop, seed, folder, limit = args
    signal.signal(signal.SIGALRM, _alarm)
    rng = np.random.default_rng(seed)
    base = seeds(rng)
    crashes: Counter = Counter()
    outcomes: Counter = Counter()
    examples: dict[str, str] = {}
    for case in range(start, stop):
        crng = np.random.default_rng([seed, case])
        name, data = base[int(crng.integers(len(base)))]
        bad, done = mutate(crng, data)
        path = Path(folder) / f"c{os.getpid()}_{Path(name).stem}{Path(name).suffix}"
        path.write_bytes(bad)
        label = f"case {case}: {name} + {', '.join(done)}"
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            signal.setitimer(signal.ITIMER_REAL, limit)
            _case(path, name, crashes, examples, outcomes, label)
            signal.setitimer(signal.ITIMER_REAL, 0)
        for w in caught:
            sig = f"warning: {w.category.__name__} at {Path(w.filename).name}:{w.lineno}"
            outcomes[sig] += 1
            examples.setdefault(sig, f"{label}: {w.message!s:.160}")
    return crashes, examples, outcomes


def _case(path: Path, name: str, crashes: Counter, examples: dict, outcomes: Counter,
          label: str) -> None:
    ts = _stage("read_traces", lambda p: read_traces(p), path, crashes, examples, label)
    outcomes["read_traces ok" if ts is not None else "read_traces refused"] += 1
    if ts is not None:
        _stage("inspect", lambda p: summarize(ts), path, crashes, examples, label)
        _stage("rates", lambda p: analyse_plate(ts), path, crashes, examples, label)
    _stage("read_table", _table_columns, path, crashes, examples, label)
    if "map" in name:
        _stage("read_layout", lambda p: read_layout(str(p)), path, crashes, examples, label)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=100_000, help="number of mutated exports")
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--jobs", type=int, default=1, help="worker processes")
    ap.add_argument("--timeout", type=float, default=10.0, help="seconds per case (a hang)")
    a = ap.parse_args()
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as folder:
        step = -(-a.n // a.jobs)
        parts = [(k, min(a.n, k + step), a.seed, folder, a.timeout)
                 for k in range(0, a.n, step)]
        if a.jobs > 1:
            with mp.get_context("spawn").Pool(a.jobs) as pool:
                results = pool.map(run, parts)
        else:
            results = [run(p) for p in parts]
    crashes, outcomes, examples = Counter(), Counter(), {}
    for c, e, o in results:
        crashes.update(c)
        outcomes.update(o)
        for k, v in e.items():
            examples.setdefault(k, v)
    n_seeds = len(seeds(np.random.default_rng(a.seed)))
    print(f"{a.n} mutated exports from {n_seeds} seeds (seed {a.seed}) in "
          f"{time.perf_counter() - t0:.0f} s")
    print(f"read_traces: {outcomes['read_traces ok']} read, {outcomes['read_traces refused']} "
          "refused with one line")
    print(f"crashes: {sum(crashes.values())} in {len(crashes)} signature(s)")
    for sig, count in crashes.most_common():
        print(f"  {count:7d}  {sig}\n           e.g. {examples[sig]}")
    leaks = Counter({k: v for k, v in outcomes.items() if k.startswith("warning: ")})
    print(f"Python warnings: {sum(leaks.values())} in {len(leaks)} place(s)")
    for sig, count in leaks.most_common():
        print(f"  {count:7d}  {sig}\n           e.g. {examples[sig]}")


if __name__ == "__main__":
    main()
