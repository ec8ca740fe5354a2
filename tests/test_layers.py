"""The layers of the design: a lower layer never imports a higher one (read from the source)."""

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "rateabs"

LAYER = {
    "errors": 0, "units": 0, "files": 0, "photometry": 1, "io": 2, "traces": 2, "layout": 3, "models": 3,
    "fitting": 4, "rates": 5, "saturation": 5, "ratelaws": 5, "completion": 5, "temperature": 5,
    "progress": 5, "inspecting": 5, "simulate": 5, "output": 6, "plots": 6, "report": 6,
    "views": 7, "grade": 7, "cli": 8, "demo": 8,
}

SUBPACKAGES = ("views", "io")       # each one layer


def _imports(path: Path):
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level >= 1:
            mod = (node.module or "").split(".")[0]
            if node.level == 2 or path.parent.name in SUBPACKAGES:
                mod = mod if node.level == 2 else path.parent.name
            if mod:
                yield mod, node.lineno


def test_no_module_imports_a_higher_layer():
    bad = []
    for path in sorted(PKG.rglob("*.py")):
        me = path.parent.name if path.parent.name in SUBPACKAGES else path.stem
        if me in ("__init__",):
            continue
        for mod, line in _imports(path):
            if mod in LAYER and me in LAYER and LAYER[mod] > LAYER[me]:
                bad.append(f"{path.relative_to(PKG)}:{line} imports {mod}")
    assert not bad, bad


def test_every_module_has_a_layer():
    mods = {p.stem for p in PKG.glob("*.py")} - {"__init__"}
    assert mods <= set(LAYER), mods - set(LAYER)
