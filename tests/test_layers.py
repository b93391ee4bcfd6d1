"""The package's layers import one way, with no cycle, and nothing imports the package ``__init__``."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "sweep"

# Lowest first; a module may import its own layer (without a cycle) and the layers below it.
LAYERS = [
    ("sweep.version", "sweep.errors", "sweep.safefs", "sweep.atomic"),
    ("sweep.physics",),
    ("sweep.catalog", "sweep.config"),
    ("sweep.model",),
    ("sweep.engine",),
    ("sweep.cube", "sweep.report"),
    ("sweep.universal", "sweep.lock", "sweep.manifest", "sweep.pipeline"),
    ("sweep.cli", "sweep.__main__"),
]


def _module(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _layer(module: str) -> int:
    for rank, prefixes in enumerate(LAYERS):
        if any(module == p or module.startswith(p + ".") for p in prefixes):
            return rank
    raise AssertionError(f"{module} belongs to no layer: add it to LAYERS")


def _imports(path: Path) -> set[str]:
    """Every sweep module ``path`` imports, at the top or inside a function."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found |= {alias.name for alias in node.names if alias.name.split(".")[0] == "sweep"}
        elif isinstance(node, ast.ImportFrom) and node.module and node.module.split(".")[0] == "sweep":
            # "from package import submodule" depends on the submodule, not on what the package's __init__ defines
            folder = PACKAGE.parent / node.module.replace(".", "/")
            submodules = {alias.name for alias in node.names if (folder / f"{alias.name}.py").is_file()}
            found |= {f"{node.module}.{name}" for name in submodules}
            if len(submodules) < len(node.names):
                found.add(node.module)
    return found


MODULES = sorted(PACKAGE.rglob("*.py"))
GRAPH = {_module(path): _imports(path) - {_module(path)} for path in MODULES}


@pytest.mark.parametrize("module", sorted(m for m in GRAPH if m != "sweep"))
def test_imports_point_down_the_layers(module):
    assert "sweep" not in GRAPH[module], f"{module} imports the package __init__"
    upward = sorted(n for n in GRAPH[module] if _layer(n) > _layer(module))
    assert not upward, f"{module} (layer {_layer(module)}) imports {upward} from above"


def test_the_import_graph_has_no_cycle():
    # depth-first search; the graph's nodes are modules (a package's import of itself is its __init__)
    state: dict[str, int] = {}

    def visit(module: str, trail: list[str]) -> None:
        state[module] = 1
        for target in GRAPH.get(module, ()):
            if state.get(target) == 1:
                raise AssertionError(" -> ".join([*trail, module, target]))
            if target in GRAPH and state.get(target) is None:
                visit(target, [*trail, module])
        state[module] = 2

    for module in GRAPH:
        if state.get(module) is None:
            visit(module, [])
    assert len(state) >= 25  # every module was read


def test_physics_stays_pure():
    # kernels are numpy only: no xarray, joblib, file or logging machinery
    forbidden = ("xarray", "joblib", "tomllib", "logging", "netCDF4", "pandas")
    for path in (PACKAGE / "physics").glob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        names = {alias.name.split(".")[0] for node in ast.walk(tree) if isinstance(node, ast.Import)
                 for alias in node.names}
        names |= {node.module.split(".")[0] for node in ast.walk(tree)
                  if isinstance(node, ast.ImportFrom) and node.module}
        assert not names & set(forbidden), (path.name, names & set(forbidden))
