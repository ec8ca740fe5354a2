"""The sample runs shipped with the package."""

from __future__ import annotations

from pathlib import Path


def sample_path(name: str) -> Path:
    """Path of an embedded sample run shipped with the package."""
    return Path(__file__).resolve().parents[1] / "data" / "samples" / name
