"""Files the tool writes: every output goes through here.

Outputs are written to a temporary name in the target folder and renamed into place, so a crash
leaves no half-written result.
"""

from __future__ import annotations

from pathlib import Path


def write_atomic(path: str | Path, data: str | bytes) -> None:
    """Write a whole file via a temporary name and rename, so a crash leaves no half file."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp")
    mode = "wb" if isinstance(data, bytes) else "w"
    with open(tmp, mode, **({} if mode == "wb" else {"encoding": "utf-8", "newline": ""})) as fh:
        fh.write(data)
    tmp.replace(path)
