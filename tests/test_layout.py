"""The package's shape (DESIGN.md, "Layout"): modules small enough to read, no private names crossing
module boundaries, no import cycles at module level, and dependencies pointing downwards only."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "iqsift"
MAX_LINES = 800

# Layers, lowest first (DESIGN.md): a module may import from its own layer and the layers below.
LAYERS: list[tuple[str, ...]] = [
    ("iqsift.errors", "iqsift.checks", "iqsift.units", "iqsift.modes", "iqsift.jsonable", "iqsift.version",
     "iqsift.reference"),
    ("iqsift.emission", "iqsift.channel", "iqsift.rasters", "iqsift.plan", "iqsift.captures", "iqsift.dsp",
     "iqsift.spectra", "iqsift.schemas"),
    ("iqsift.measure", "iqsift.receiver", "iqsift.survey", "iqsift.synth", "iqsift.plots", "iqsift.plot_data", "iqsift.plot_fork",
     "iqsift.activity_plot"),
    ("iqsift.extractor", "iqsift.stage_plots", "iqsift.html_report"),
    ("iqsift.jobs",),
    ("iqsift.cli", "iqsift.demo", "iqsift.__main__"),
]


def modules() -> dict[str, Path]:
    out = {}
    for path in sorted(SRC.rglob("*.py")):
        parts = ("iqsift", *path.relative_to(SRC).with_suffix("").parts)
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = path
    return out


MODULES = modules()


def resolve(module: str, node: ast.ImportFrom) -> str:
    """The absolute module an ``import from`` names."""
    if not node.level:
        return node.module or ""
    base = module.split(".")
    if not MODULES[module].name == "__init__.py":
        base = base[:-1]
    base = base[: len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def imports(module: str, *, module_level_only: bool) -> list[tuple[str, str]]:
    """(target module, imported name) for every import in ``module`` of something inside iqsift."""
    tree = ast.parse(MODULES[module].read_text(encoding="utf-8"))
    found: list[tuple[str, str]] = []
    stack: list[ast.AST] = list(tree.body)
    while stack:
        node = stack.pop()
        if module_level_only and isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            continue
        if isinstance(node, ast.If) and isinstance(node.test, ast.Name) and node.test.id == "TYPE_CHECKING":
            continue  # typing only, never executed
        if isinstance(node, ast.ImportFrom):
            target = resolve(module, node)
            if target.split(".")[0] == "iqsift":
                found += [(target, alias.name) for alias in node.names]
        elif isinstance(node, ast.Import):
            found += [(alias.name, "") for alias in node.names if alias.name.split(".")[0] == "iqsift"]
        stack.extend(ast.iter_child_nodes(node))
    return found


def target_module(target: str, name: str) -> str:
    """The module an import really loads: ``from .dsp import stages`` loads iqsift.dsp.stages."""
    return f"{target}.{name}" if f"{target}.{name}" in MODULES else target


def layer_of(module: str) -> int:
    for i, layer in enumerate(LAYERS):
        if any(module == top or module.startswith(top + ".") for top in layer):
            return i
    if module == "iqsift":
        return len(LAYERS)  # the package's public face re-exports from every layer
    raise AssertionError(f"{module} belongs to no layer of DESIGN.md; add it to LAYERS")


@pytest.mark.parametrize("module", sorted(MODULES))
def test_module_is_at_most_800_lines(module):
    lines = len(MODULES[module].read_text(encoding="utf-8").splitlines())
    assert lines <= MAX_LINES, f"{module} has {lines} lines: split it along its seams"


def test_no_private_name_is_imported_from_another_module():
    crossing = [f"{m} imports {t}.{n}" for m in MODULES for t, n in imports(m, module_level_only=False)
                if n.startswith("_") and not n.startswith("__") and t != m]
    assert crossing == []


def test_no_import_cycle_at_module_level():
    edges: dict[str, set[str]] = {}
    for m in MODULES:
        targets = {target_module(t, n) for t, n in imports(m, module_level_only=True)}
        # a package importing its own submodules (to re-export them) is how packages work, not a cycle
        edges[m] = {t for t in targets if t in MODULES and t != m
                    and not (MODULES[m].name == "__init__.py" and t.startswith(m + "."))}
    cycles: list[list[str]] = []
    state: dict[str, int] = {}

    def visit(u: str, path: list[str]) -> None:
        state[u] = 1
        path.append(u)
        for v in sorted(edges[u]):
            if state.get(v) == 1:
                cycles.append(path[path.index(v):] + [v])
            elif not state.get(v):
                visit(v, path)
        path.pop()
        state[u] = 2

    for m in sorted(MODULES):
        if not state.get(m):
            visit(m, [])
    assert cycles == []


def test_dependencies_point_downwards_only():
    """Lazy imports included: a lower layer never reaches up (DESIGN.md: cli -> jobs -> receiver ... -> dsp)."""
    upward = []
    for m in MODULES:
        for t, n in imports(m, module_level_only=False):
            target = target_module(t, n)
            if target != "iqsift" and layer_of(target) > layer_of(m):
                upward.append(f"{m} -> {target}")
    assert upward == []
