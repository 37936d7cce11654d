"""The import graph of geo3d: no cycle, and every arrow points down the layers.

The imports are read from the source with ``ast`` (module-level and function-level ``import``
and ``from ... import`` statements naming a geo3d module), so the check does not depend on what
happens to be imported at run time.  Layers, lowest first:

errors/units -> facies -> config -> readers (io) -> site -> logs -> grid/geostats/model ->
analysis -> results -> writers (io) and report -> pipeline -> cli.
"""

from __future__ import annotations

import ast
import graphlib
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "geo3d"

#: Module (or package prefix) -> layer; a module may import only from its own layer or lower.
LAYERS: dict[str, int] = {
    "geo3d": 0,  # the package root: version and lazy attribute access only
    "geo3d.errors": 0,
    "geo3d.units": 1,
    "geo3d.facies": 2,
    "geo3d.config": 3,
    "geo3d.io.atomic": 4,
    "geo3d.io.readers": 4,
    "geo3d.io.vector": 4,
    "geo3d.io.logs_reader": 5,
    "geo3d.site": 6,
    "geo3d.logs": 7,
    "geo3d.grid": 8,
    "geo3d.geostats": 8,
    "geo3d.model": 9,
    "geo3d.checks": 9,
    "geo3d.ec_facies": 8,
    "geo3d.facies_first": 9,
    "geo3d.analysis": 10,
    "geo3d.results": 11,
    "geo3d.io": 12,
    "geo3d.report": 12,
    "geo3d.pipeline": 13,
    "geo3d.cli": 14,
    "geo3d.__main__": 15,
    "geo3d.validation": 14,  # synthetic-truth benchmark: runs the pipeline like the CLI does
}

#: Function-level imports of geo3d modules that are kept on purpose (start-up time of the CLI,
#: the optional off-screen 3D renderer); any other one would only hide an upward arrow.
DEFERRED = {
    ("geo3d.cli", "geo3d.pipeline"),
    ("geo3d.cli", "geo3d.site"),
    ("geo3d.cli", "geo3d.config"),
    ("geo3d.cli", "geo3d.io.atomic"),
    ("geo3d.cli", "geo3d.units"),
    ("geo3d.cli", "geo3d.io.output_frame"),
    ("geo3d.cli", "geo3d.errors"),
    ("geo3d.cli", "geo3d"),
    ("geo3d.report.html", "geo3d.report.view3d"),
}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _layer(module: str) -> int:
    prefix = max((k for k in LAYERS if module == k or module.startswith(k + ".")), key=len)
    return LAYERS[prefix]


def _imports(module: str) -> list[tuple[str, bool]]:
    """Return ``(imported geo3d module, at module level)`` for every import statement."""
    tree = ast.parse(MODULES[module].read_text(encoding="utf-8"))
    top_level = {id(node) for node in tree.body}
    found = []
    for node in ast.walk(tree):
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            # "from pkg import name" imports the submodule pkg.name when there is one
            subs = [f"{node.module}.{alias.name}" for alias in node.names]
            targets = [s for s in subs if s in MODULES] or [node.module]
        found += [(t, id(node) in top_level) for t in targets if t.split(".")[0] == "geo3d"]
    return found


EDGES = {module: _imports(module) for module in MODULES}


def test_every_module_has_a_layer():
    assert all(_layer(m) >= 0 for m in MODULES)
    assert "geo3d.results" in MODULES and "geo3d.logs.process" in MODULES


@pytest.mark.parametrize("module", sorted(MODULES))
def test_no_upward_import(module):
    upward = [
        target
        for target, _ in EDGES[module]
        if target in MODULES and _layer(target) > _layer(module)
    ]
    assert not upward, f"{module} (layer {_layer(module)}) imports {upward}"


def test_no_import_cycle():
    graph = {m: {t for t, _ in EDGES[m] if t in MODULES and t != m} for m in MODULES}
    # a package's __init__ re-exporting its own submodules is not a cycle of the code
    for module, targets in graph.items():
        graph[module] = {t for t in targets if not module.startswith(t + ".")}
    graphlib.TopologicalSorter(graph).prepare()  # raises CycleError on a cycle


def test_no_deferred_import_but_the_listed_ones():
    deferred = {
        (module, target)
        for module, edges in EDGES.items()
        for target, top in edges
        if not top and target in MODULES
    }
    assert deferred <= DEFERRED, sorted(deferred - DEFERRED)


def test_the_checker_sees_an_upward_arrow():
    # the layer table itself: logs sit below the report, so report -> logs is allowed and
    # logs -> report would be refused
    assert _layer("geo3d.logs.process") < _layer("geo3d.report.log_figure")
    assert _layer("geo3d.io.tables") > _layer("geo3d.analysis.volumes")
    assert _layer("geo3d.io.readers") < _layer("geo3d.site")
