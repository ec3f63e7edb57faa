"""The package's layout: stages import only earlier stages, no import cycle, modules of one concern.

Every import statement of every module counts, also those inside functions (a
deferred import is still a dependency).  The layers, first to last, are the
pipeline's stages (project rule, DEVELOPERS.md).
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "texgen"

LAYERS = (
    ("texgen._version", "texgen.errors"),
    ("texgen.spec",),
    ("texgen.engine",),
    ("texgen.physics",),
    ("texgen.output",),
    ("texgen.library",),
    ("texgen.api",),
    ("texgen.cli",),
    ("texgen",),
)
"""Modules (by prefix) in pipeline order: each may import only its own layer and those before it."""

MAX_LINES = 700
"""A module longer than this usually holds two concerns (DEVELOPERS.md)."""


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _imports(name: str, path: Path) -> set[str]:
    """The texgen modules ``name`` imports (``from package import module`` counts as that module alone)."""
    package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            for a in node.names:  # a submodule is imported as itself, any other name from its module
                found.add(f"{target}.{a.name}" if f"{target}.{a.name}" in MODULES else target)
    return {m for m in found if m in MODULES and m != name}


GRAPH = {name: _imports(name, path) for name, path in MODULES.items()}


def _layer(name: str) -> int:
    best = None
    for rank, prefixes in enumerate(LAYERS):
        for prefix in prefixes:
            if name == prefix or name.startswith(prefix + "."):
                if best is None or len(prefix) > best[1]:
                    best = (rank, len(prefix))
    assert best is not None, f"{name} is in no layer"
    return best[0]


def test_every_module_is_in_a_layer():
    assert {_layer(m) for m in MODULES} == set(range(len(LAYERS)))


def test_no_import_goes_up_a_layer():
    upward = sorted(f"{m} ({_layer(m)}) imports {t} ({_layer(t)})"
                    for m, targets in GRAPH.items() for t in targets if _layer(t) > _layer(m))
    assert upward == []


def test_no_import_cycle():
    """Depth-first search for a back edge; the cycle found is named in full."""
    state: dict[str, int] = {}
    stack: list[str] = []
    cycles: list[list[str]] = []

    def visit(m: str) -> None:
        state[m] = 1
        stack.append(m)
        for t in sorted(GRAPH[m]):
            if state.get(t) == 1:
                cycles.append(stack[stack.index(t):] + [t])
            elif t not in state:
                visit(t)
        stack.pop()
        state[m] = 2

    for m in sorted(GRAPH):
        if m not in state:
            visit(m)
    assert cycles == []


def test_the_checks_find_a_cycle_and_an_upward_import():
    """The walk itself works: a made-up graph with a loop and an upward edge is caught."""
    assert _layer("texgen.spec.schema") < _layer("texgen.output.latex")
    saved = dict(GRAPH)
    try:
        GRAPH["texgen.spec.model"] = GRAPH["texgen.spec.model"] | {"texgen.spec.schema"}
        with pytest.raises(AssertionError):
            test_no_import_cycle()
        GRAPH["texgen.spec.model"] = saved["texgen.spec.model"] | {"texgen.output.latex"}
        with pytest.raises(AssertionError):
            test_no_import_goes_up_a_layer()
    finally:
        GRAPH.clear()
        GRAPH.update(saved)


@pytest.mark.parametrize("name", sorted(MODULES))
def test_module_holds_one_concern(name):
    lines = MODULES[name].read_text(encoding="utf-8").count("\n")
    assert lines <= MAX_LINES, f"{name} has {lines} lines"


def test_shipped_spacetimes_are_data_not_a_module():
    """The library folder of YAML files is installed as ``texgen/metrics_yaml``, which no module shadows."""
    from texgen.library.entries import PACKAGE_DATA, library_dir

    assert PACKAGE_DATA == "metrics_yaml"
    assert not any(m.split(".")[-1] == PACKAGE_DATA for m in MODULES)
    assert (library_dir() / "kerr" / "kerr.yaml").is_file()


def test_stages_register_every_figure():
    """Each figure is drawn by exactly one later stage, in report order."""
    from texgen.output.figures import FIGURE_NAMES
    from texgen.output.figures.data import _BUILDERS
    from texgen.output.stages import STAGES, stage_figures

    assert stage_figures() == FIGURE_NAMES
    assert set(_BUILDERS) == set(FIGURE_NAMES)
    assert [s.name for s in STAGES] == ["analysis", "claims"]
