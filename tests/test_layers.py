"""The shape of the code, read from the source: the layers of the design (a lower layer never
imports a higher one), no private name reached across modules, no function too long to hold in
mind."""

import ast
import functools
from pathlib import Path

import pytest

# the three walks over the package share its parsed sources (parsing is most of their cost)
pytestmark = pytest.mark.xdist_group("layers")

PKG = Path(__file__).resolve().parents[1] / "rateabs"

LAYER = {
    "errors": 0, "units": 0, "distributions": 0, "files": 0, "parallel": 0, "rules": 0, "batch": 0,
    "wells": 0,
    "photometry": 1, "options": 1,
    "io": 2, "traces": 2, "layout": 3, "models": 3, "fitting": 4, "rates": 5, "slopes": 5,
    "saturation": 5, "ratelaws": 5, "completion": 5, "temperature": 5, "progress": 5, "inspecting": 5,
    "simulate": 5, "grade": 5, "output": 6, "plots": 6, "report": 6, "views": 7, "cli": 8,
    "demo": 8,
}
# grade computes (runs, scores, diagnoses); its pages and figures are drawn by the views layer.

#: Functions longer than the limit that other work will split (the rates rewrite of issue 11,
#: the reader split of issue 16, the plate-map reader); every other function stays within it.
LONG_LIMIT = 80
KNOWN_LONG: set = set()


@functools.cache
def nodes(path: Path) -> tuple:
    """Every node of a source file's syntax tree (the file parsed once per session)."""
    return tuple(ast.walk(ast.parse(path.read_text(encoding="utf-8"))))


def _unit(path: Path, root: Path) -> str:
    """The design unit of a source file: its top-level module or subpackage under the root."""
    rel = path.relative_to(root)
    return rel.parts[0] if len(rel.parts) > 1 else rel.stem


def _package(path: Path, root: Path) -> list[str]:
    """The dotted package of a file, as a list: rateabs/views/x.py -> [rateabs, views]."""
    return [root.name, *path.relative_to(root).parent.parts]


def imports(path: Path, root: Path = PKG):
    """(unit imported, line) for every import of the package, relative or absolute, anywhere in
    the file (inside functions too)."""
    for node in nodes(path):
        if isinstance(node, ast.Import):
            for a in node.names:
                parts = a.name.split(".")
                if parts[0] == root.name and len(parts) > 1:
                    yield parts[1], node.lineno
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = _package(path, root)[: len(_package(path, root)) - node.level + 1]
            else:
                base = []
            full = base + (node.module.split(".") if node.module else [])
            if not full or full[0] != root.name:
                continue
            if len(full) > 1:
                yield full[1], node.lineno
            else:                               # from rateabs import x / from . import x
                for a in node.names:
                    yield a.name, node.lineno


def layer_violations(root: Path = PKG, layers: dict = LAYER) -> list[str]:
    """Every import of a higher layer, as 'file:line imports unit'."""
    bad = []
    for path in sorted(root.rglob("*.py")):
        if path.parent == root and path.name == "__init__.py":
            continue                        # the package's public API may name any layer
        me = _unit(path, root)
        for mod, line in imports(path, root):
            if mod in layers and me in layers and layers[mod] > layers[me]:
                bad.append(f"{path.relative_to(root)}:{line} imports {mod}")
    return bad


def test_no_module_imports_a_higher_layer():
    assert not layer_violations(), layer_violations()


def test_the_layer_check_reads_absolute_imports_and_package_inits(tmp_path):
    pkg = tmp_path / "rateabs"
    (pkg / "views").mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "grade.py").write_text("def f():\n    from rateabs.plots import house_style\n")
    (pkg / "units.py").write_text("import rateabs.fitting\n")
    (pkg / "views" / "__init__.py").write_text("from rateabs import cli\n")
    (pkg / "fitting.py").write_text("from .units import x\nfrom . import errors\n")
    bad = layer_violations(pkg)
    assert bad == ["grade.py:2 imports plots", "units.py:1 imports fitting",
                   "views/__init__.py:1 imports cli"]


def test_every_module_has_a_layer():
    units = {_unit(p, PKG) for p in PKG.rglob("*.py")} - {"__init__"}
    assert units <= set(LAYER), units - set(LAYER)


def _functions(root: Path = PKG):
    for path in sorted(root.rglob("*.py")):
        for node in nodes(path):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                yield _unit(path, root), node.name, node.end_lineno - node.lineno + 1


def test_no_function_is_too_long():
    long = {(u, name): n for u, name, n in _functions() if n > LONG_LIMIT}
    assert set(long) <= KNOWN_LONG, {k: v for k, v in long.items() if k not in KNOWN_LONG}


def test_no_private_name_is_reached_across_modules():
    bad = []
    for path in sorted(PKG.rglob("*.py")):
        for node in nodes(path):
            if isinstance(node, ast.ImportFrom):
                bad += [f"{path.relative_to(PKG)}:{node.lineno} {a.name}" for a in node.names
                        if a.name.startswith("_") and not a.name.startswith("__")]
    assert not bad, bad


def test_a_command_loads_no_other_command_module():
    """``from rateabs.views import run_rates`` loads the rates view only (it once loaded the
    saturation view first, 0.15 s of every rates run, only to look in it)."""
    import subprocess
    import sys

    for name, own in (("run_rates", "rates"), ("compute_inspect", "inspect"),
                      ("run_saturation", "saturation")):
        code = (f"import sys\nfrom rateabs import views\nviews.{name}\n"
                "print(*sorted(m.rsplit('.', 1)[1] for m in sys.modules\n"
                "      if m.rsplit('.', 1)[-1] in views.COMMAND_MODULES\n"
                "      and m.startswith('rateabs.views.')))\n")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             check=True).stdout.split()
        assert out == [own], name
