"""Test helpers: write a TraceSet in every layout, delimiter, decimal mark, encoding and time
format the reader claims to support, so that reading it back can be compared."""

from __future__ import annotations

import numpy as np


def fmt_value(x: float, decimal: str) -> str:
    s = repr(float(x))
    return s.replace(".", ",") if decimal == "," else s


def fmt_time(seconds: float, style: str, decimal: str) -> str:
    if style == "s":
        return fmt_value(seconds, decimal)
    if style == "min":
        return fmt_value(seconds / 60.0, decimal)
    if style == "h":
        return fmt_value(seconds / 3600.0, decimal)
    if style == "hms":
        h, rem = divmod(int(round(seconds)), 3600)
        m, s = divmod(rem, 60)
        return f"{h}:{m:02d}:{s:02d}"
    if style == "ms":
        m, s = divmod(int(round(seconds)), 60)
        return f"{m:02d}:{s:02d}"
    if style == "hm":
        h, m = divmod(int(round(seconds / 60)), 60)
        return f"{h:02d}:{m:02d}"
    raise ValueError(style)


TIME_HEADER = {"s": "Time (s)", "min": "time_min", "h": "Time [h]", "hms": "Time", "ms": "Time",
               "hm": "Time (hh:mm)"}


def write_table(names, times, values, *, layout="wide", delimiter=",", decimal=".",
                time_style="s", preamble=(), newline="\n") -> str:
    """Text of a table in the requested shape (values: traces x times, NaN written empty)."""
    def v(x):
        return "" if not np.isfinite(x) else fmt_value(x, decimal)

    lines = list(preamble)
    th = TIME_HEADER[time_style]
    if layout == "wide":
        lines.append(delimiter.join([th, *names]))
        for j, t in enumerate(times):
            lines.append(delimiter.join([fmt_time(t, time_style, decimal)]
                                        + [v(values[i, j]) for i in range(len(names))]))
    elif layout == "long":
        lines.append(delimiter.join(["well", th, "absorbance"]))
        for i, n in enumerate(names):
            for j, t in enumerate(times):
                lines.append(delimiter.join([n, fmt_time(t, time_style, decimal), v(values[i, j])]))
    elif layout == "transposed":
        lines.append(delimiter.join([th] + [fmt_time(t, time_style, decimal) for t in times]))
        for i, n in enumerate(names):
            lines.append(delimiter.join([n] + [v(values[i, j]) for j in range(len(times))]))
    else:
        raise ValueError(layout)
    return newline.join(lines) + newline


def write_plate_blocks(times, values, *, rows="ABCDEFGH", cols=12, delimiter=",",
                       label="Read {k}, elapsed {t:g} s") -> str:
    """Text of a plate-grid-per-read export: a label line naming each read's time, a row of
    column numbers, then one lettered row per plate row (values: wells x times, row-major)."""
    lines = ["Simulated plate read", ""]
    for k, t in enumerate(times):
        lines.append(label.format(k=k + 1, t=t))
        lines.append(delimiter.join([""] + [str(c) for c in range(1, cols + 1)]))
        for r, letter in enumerate(rows):
            cells = [repr(float(values[r * cols + c, k])) for c in range(cols)]
            lines.append(delimiter.join([letter] + cells))
        lines.append("")
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- fuzzing

def seed_exports(rng: np.random.Generator) -> list[tuple[str, bytes]]:
    """Exports in every shape the reader claims (names and bytes), made from known values:
    the seeds that :func:`mutate` damages."""
    out = []
    names = ["A1", "A2", "B1", "blank 1"]
    times = np.arange(8) * 30.0
    values = 0.1 + 0.002 * np.arange(4)[:, None] * times[None, :] / 30 + rng.normal(
        0, 0.001, (4, 8))
    for layout in ("wide", "long", "transposed"):
        for delimiter, decimal in ((",", "."), (";", ","), ("\t", ".")):
            for style in ("s", "min", "hms"):
                text = write_table(names, times, values, layout=layout, delimiter=delimiter,
                                   decimal=decimal, time_style=style,
                                   preamble=("Fuzz seed", "Wavelength: 405 nm", ""))
                for enc in ("utf-8", "utf-16"):
                    out.append((f"{layout}_{style}_{enc}.csv", text.encode(enc)))
    grid = 0.2 + rng.normal(0, 0.01, (96, 5))
    out.append(("blocks.csv", write_plate_blocks(np.arange(5) * 30.0, grid).encode()))
    return out


ODD_CELLS = ["1e308", "inf", "-inf", "nan", "NaN", "1e-320", "-0", "1,5", "\u00b2", "\u0663",
             "\uff11", "0x10", "1e999", "", "OVER", ">3.5", "9" * 400, "-", "1_000", "n/a",
             "\ufffd", "0.", ".", "e5", "1e", "--1", "\x00", "30 s", "1:30", "99:99:99"]
HEADER_WORDS = ["second", "min", "Time", "t", "Temp (C)", "Cycle", "n", "Step", "", "A1",
                "well", "I0", "%T", "counts", "seconds", "Time (min)", "T [K]"]


def _lines(data: bytes) -> list[bytes]:
    return data.split(b"\n")


def _cells_op(rng, data: bytes, op) -> bytes:
    lines = _lines(data)
    i = int(rng.integers(len(lines)))
    delim = next((d for d in (b"\t", b";", b",") if d in lines[i]), b",")
    cells = lines[i].split(delim)
    lines[i] = delim.join(op(rng, cells))
    return b"\n".join(lines)


def _replace_cell(rng, cells, pool):
    j = int(rng.integers(len(cells)))
    cells[j] = str(pool[int(rng.integers(len(pool)))]).encode("utf-8")
    return cells


def _reencode(rng, data: bytes) -> bytes:
    text = data.decode("utf-8", errors="replace")
    enc = ["utf-16", "utf-16-le", "utf-16-be", "latin-1", "utf-8-sig", "cp1252"][
        int(rng.integers(6))]
    return text.encode(enc, errors="replace")


def _on_header(rng, data: bytes) -> bytes:
    lines = _lines(data)
    i = next((k for k, ln in enumerate(lines) if ln.count(b",") + ln.count(b";")
              + ln.count(b"\t") >= 1 and not ln[:1].isdigit()), 0)
    i = min(i + int(rng.integers(0, 4)), len(lines) - 1)
    delim = next((d for d in (b"\t", b";", b",") if d in lines[i]), b",")
    lines[i] = delim.join(_replace_cell(rng, lines[i].split(delim), HEADER_WORDS))
    return b"\n".join(lines)


def _dup_column(rng, data: bytes) -> bytes:
    lines = _lines(data)
    delim = next((d for d in (b"\t", b";", b",") if d in data), b",")
    j = int(rng.integers(0, 4))
    return b"\n".join(delim.join((c := ln.split(delim))[:j + 1] + c[j:j + 1] + c[j + 1:])
                      for ln in lines)


def _lines_op(rng, data: bytes, what: str) -> bytes:
    lines = _lines(data)
    i = int(rng.integers(len(lines)))
    if what == "dup":
        lines.insert(i, lines[i])
    elif what == "drop" and len(lines) > 1:
        lines.pop(i)
    elif what == "swap":
        k = int(rng.integers(len(lines)))
        lines[i], lines[k] = lines[k], lines[i]
    elif what == "blank":
        lines.insert(i, b"")
    return b"\n".join(lines)


MUTATIONS = {
    "flip byte": lambda rng, d: _at(rng, d, lambda b: bytes([int(rng.integers(256))])),
    "flip bit": lambda rng, d: _at(rng, d, lambda b: bytes([b[0] ^ (1 << int(rng.integers(8)))])),
    "insert NUL": lambda rng, d: _at(rng, d, lambda b: b + b"\x00"),
    "truncate": lambda rng, d: d[:int(rng.integers(len(d) + 1))],
    "cut last line end": lambda rng, d: d.rstrip(b"\r\n\x00"),
    "duplicate line": lambda rng, d: _lines_op(rng, d, "dup"),
    "remove line": lambda rng, d: _lines_op(rng, d, "drop"),
    "swap lines": lambda rng, d: _lines_op(rng, d, "swap"),
    "blank line": lambda rng, d: _lines_op(rng, d, "blank"),
    "duplicate cell": lambda rng, d: _cells_op(rng, d, lambda r, c: c + c[-1:]),
    "remove cell": lambda rng, d: _cells_op(rng, d, lambda r, c: c[:-1] or c),
    "odd number": lambda rng, d: _cells_op(rng, d, lambda r, c: _replace_cell(r, c, ODD_CELLS)),
    "header word": _on_header,
    "duplicate column": _dup_column,
    "long field": lambda rng, d: _cells_op(rng, d, lambda r, c: c + [b"7" * 140_000]),
    "superscript digit": lambda rng, d: d.replace(b"3", "\u00b3".encode(), 1),
    "encoding": _reencode,
    "line ends": lambda rng, d: d.replace(b"\n", [b"\r\n", b"\r"][int(rng.integers(2))]),
}


def _at(rng, data: bytes, change) -> bytes:
    if not data:
        return data
    i = int(rng.integers(len(data)))
    return data[:i] + change(data[i:i + 1]) + data[i + 1:]


def mutate(rng: np.random.Generator, data: bytes, n: int | None = None) -> tuple[bytes, list[str]]:
    """``data`` damaged by 1-3 random mutations (or ``n``), and their names."""
    names = list(MUTATIONS)
    done = []
    for _ in range(n or int(rng.integers(1, 4))):
        name = names[int(rng.integers(len(names)))]
        data = MUTATIONS[name](rng, data)
        done.append(name)
    return data, done


def session_processes(sid: int) -> list[int]:
    """Live (not zombie) processes of a session, read from /proc (Linux's proc(5) stat fields:
    state is the third, the session id the sixth)."""
    import os
    from pathlib import Path

    out = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            text = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        fields = text[text.rindex(")") + 2:].split()
        if int(fields[3]) == sid and fields[0] not in ("Z", "X"):
            out.append(int(entry))
    return out


# --------------------------------------------------------------------------- processes side by side

#: Run by :func:`start_side_by_side` in a fresh interpreter: ``argv[1]`` (Python source) runs
#: once, with ``argv[4:]`` as its arguments; then one process per argument list in ``argv[3]``
#: (JSON) is forked from this one, and all of them run ``argv[2]`` (Python source) at once,
#: each with its own ``sys.argv``. Prints the JSON list of each one's exit code and stderr.
FORKER = """
import json, os, sys, traceback
preload, body, jobs = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
sys.argv = ["preload", *sys.argv[4:]]
exec(compile(preload, "<preload>", "exec"), {"__name__": "preload"})
children = []
for argv in jobs:
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:
        os.close(r)
        os.dup2(w, 2)
        os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
        code = 0
        try:
            sys.argv = argv
            exec(compile(body, "<side by side>", "exec"), {"__name__": "__main__"})
        except SystemExit as e:
            code = e.code if isinstance(e.code, int) else (0 if e.code is None else 1)
        except BaseException:
            traceback.print_exc()
            code = 1
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    os.close(w)
    children.append((pid, r))
out = []
for pid, r in children:
    with os.fdopen(r, "rb") as f:
        err = f.read().decode("utf-8", "replace")
    _, status = os.waitpid(pid, 0)
    out.append((os.waitstatus_to_exitcode(status), err))
print(json.dumps(out))
"""


def start_side_by_side(preload: str, body: str, argvs: list[list[str]], env: dict,
                       preload_args: list[str] = ()):
    """Start real processes side by side, one per argument list, each running ``body`` (Python
    source) with that ``sys.argv``. They are forked from one fresh interpreter that first ran
    ``preload`` (with ``preload_args``), so that the imports are paid once and not once per
    process (a process start with the package's imports costs over a second of CPU). Returns
    the Popen of that interpreter; :func:`side_by_side_results` waits for it."""
    import json
    import subprocess
    import sys

    argv = [sys.executable, "-c", FORKER, preload, body, json.dumps(argvs), *preload_args]
    return subprocess.Popen(argv, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)


def side_by_side_results(p, timeout: float = 300) -> list[tuple[int, str]]:
    """Each process's (exit code, stderr), in the order of the argument lists."""
    import json

    out, err = p.communicate(timeout=timeout)
    assert p.returncode == 0, err
    return [(code, text) for code, text in json.loads(out)]
