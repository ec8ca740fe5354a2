"""Analyses kept between grading runs, so that changing the rubric's scoring regrades at once.

An analysis is keyed by the run file's content (SHA-256 of its bytes), the analysis settings
(:func:`rateabs.grade.analysis.analysis_settings`: model, trace, time unit of the runs,
window, epsilon, pathlength, table units) and a fingerprint of the package's code, so that a
changed file, a changed setting or a changed analysis never reuses an old result. Scoring
settings (reference, tolerance, weights, unit, title, deadline) are not part of the key.

The command keeps the analyses of the last run in its ``--out`` folder as
``.rateabs-grade-cache.json`` (an ordinary output listed in the folder's manifest, so a rerun
replaces it like every other output). The file holds plain JSON, never code; entries that do
not have the expected shape are ignored.
"""

from __future__ import annotations

import hashlib
import json
from functools import cache
from pathlib import Path

CACHE_FILE = ".rateabs-grade-cache.json"
CACHE_FORMAT = "rateabs-grade-cache/1"


@cache
def code_fingerprint() -> str:
    """A digest of the package's source: a changed analysis never reuses an old result."""
    root = Path(__file__).resolve().parents[1]
    h = hashlib.sha256()
    for p in sorted(root.rglob("*.py")):
        h.update(p.relative_to(root).as_posix().encode())
        h.update(p.read_bytes())
    return h.hexdigest()[:16]


def file_digest(path: str) -> str:
    """SHA-256 of a file's bytes."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def run_key(path: str, settings: dict) -> str:
    """The cache key of one run's analysis: its content, the analysis settings, the code."""
    text = json.dumps([file_digest(path), settings, code_fingerprint()], sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()[:32]


class AnalysisCache:
    """Analyses by key; :attr:`reused` counts the analyses taken from it in this run."""

    def __init__(self, entries: dict | None = None) -> None:
        self.entries = dict(entries or {})
        self.kept: dict[str, dict] = {}
        self.reused = 0

    @classmethod
    def load(cls, path: str | Path) -> AnalysisCache:
        """The cache kept in a file (empty when there is none or it cannot be used)."""
        try:
            doc = json.loads(Path(path).read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return cls()
        if not isinstance(doc, dict) or doc.get("format") != CACHE_FORMAT or \
                doc.get("code") != code_fingerprint():
            return cls()
        entries = doc.get("analyses")
        return cls({k: v for k, v in entries.items() if usable(v)}
                   if isinstance(entries, dict) else {})

    def get(self, key: str) -> dict | None:
        """The kept analysis for ``key`` (None when there is none)."""
        hit = self.entries.get(key)
        if hit is not None:
            self.reused += 1
            self.kept[key] = hit
        return hit

    def put(self, key: str, analysis: dict) -> None:
        """Keep a fresh analysis."""
        self.entries[key] = analysis
        self.kept[key] = analysis

    def dumps(self) -> str:
        """The analyses used in this run, as the JSON text of the cache file."""
        return json.dumps({"format": CACHE_FORMAT, "code": code_fingerprint(),
                           "analyses": self.kept}, separators=(",", ":"))


def usable(entry) -> bool:
    """Whether a kept analysis has the shape the grader reads."""
    if not isinstance(entry, dict) or not isinstance(entry.get("ok"), bool):
        return False
    if not entry["ok"]:
        return isinstance(entry.get("problem"), str)
    values, facts, fig = entry.get("values"), entry.get("facts"), entry.get("figure")
    return (isinstance(values, dict) and isinstance(facts, dict) and isinstance(fig, dict)
            and all(isinstance(v, list) and len(v) == 2 and
                    all(isinstance(x, (int, float)) for x in v) for v in values.values())
            and isinstance(entry.get("alt"), dict) and isinstance(entry.get("readings"), str))
