"""The lower layers keep their order: each imports only the layers below it, and none of them
imports another in a circle (imports inside functions count too).

Order: transport -> protocol -> device -> readings -> diagnosis; the simulator and deployment
are plug-ins that may use those layers but are named by none of them; ``runtrue.validation``
and ``runtrue.errorlog`` import no other runtrue module.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

import runtrue

HOST = Path(runtrue.__file__).resolve().parent

#: package -> the runtrue packages its modules may import (besides itself)
ALLOWED: dict[str, set[str]] = {
    "transport": set(),
    "protocol": set(),
    "device": {"transport", "protocol"},
    "readings": {"transport", "protocol", "device"},
    "diagnosis": {"transport", "protocol", "device", "readings"},
    "sim": {"transport", "protocol", "device", "readings"},
    "deploy": {"transport", "protocol", "device", "readings"},
    "validation": set(),
    "errorlog": set(),
}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(HOST.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imports(path: Path) -> Iterator[str]:
    """Every runtrue module ``path`` imports, at the top or inside a function (not for typing only)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    typing_only = {id(n) for node in ast.walk(tree) if isinstance(node, ast.If)
                   and "TYPE_CHECKING" in ast.unparse(node.test) for n in ast.walk(node)}
    package = _module_name(path) if path.name == "__init__.py" else _module_name(path).rsplit(".", 1)[0]
    for node in ast.walk(tree):
        if id(node) in typing_only:
            continue
        if isinstance(node, ast.Import):
            yield from (a.name for a in node.names if a.name.startswith("runtrue."))
        elif isinstance(node, ast.ImportFrom):
            module = node.module or ""
            if node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                module = ".".join(base + ([module] if module else []))
            if module == "runtrue" or module.startswith("runtrue."):
                yield module
                yield from (f"{module}.{a.name}" for a in node.names)


def _layer(module: str) -> str:
    return module.split(".")[1] if module.count(".") else ""


def _sources(layer: str) -> list[Path]:
    folder = HOST / layer
    return sorted(folder.rglob("*.py")) if folder.is_dir() else [HOST / f"{layer}.py"]


@pytest.mark.parametrize("layer", sorted(ALLOWED))
def test_each_lower_layer_imports_only_the_layers_below_it(layer: str) -> None:
    wrong = sorted(
        f"{path.relative_to(HOST)} imports {module}"
        for path in _sources(layer)
        for module in _imports(path)
        if (used := _layer(module)) and used != layer and used not in ALLOWED[layer]
        and (HOST / used).exists() | (HOST / f"{used}.py").exists()
    )
    assert wrong == []


def test_the_lower_layers_import_one_another_in_no_circle() -> None:
    known = {_module_name(p) for layer in ALLOWED for p in _sources(layer)}
    edges = {_module_name(p): {m for m in _imports(p) if m in known and m != _module_name(p)}
             for layer in ALLOWED for p in _sources(layer)}
    # a module's package runs first when the module is imported: that is not an edge of its own
    circles: list[list[str]] = []
    state: dict[str, int] = {}

    def visit(node: str, trail: list[str]) -> None:
        state[node] = 1
        for nxt in sorted(edges.get(node, ())):
            if state.get(nxt) == 1:
                circles.append(trail[trail.index(nxt):] + [nxt])
            elif nxt not in state:
                visit(nxt, trail + [nxt])
        state[node] = 2

    for start in sorted(edges):
        if start not in state:
            visit(start, [start])
    assert circles == []
