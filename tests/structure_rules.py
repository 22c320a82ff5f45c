"""The structure rules of the code, as data and small checkers (used by tests/test_structure.py).

Each checker takes a root directory and returns a list of violations as readable lines, so the
test can fail with all of them at once and the checkers themselves can be tried on a small fake
package written to a temporary directory.

Layers of the host package ``runtrue`` (lower may never import higher)::

    base (the package itself, validation, errorlog) < transport < protocol < device < readings
    < balancing, diagnosis (side by side: neither imports the other) < allocation < jobs
    < app (tui, cli and the composition root plugins, which may import one another)

The plug-ins ``sim`` and ``deploy`` may import any layer below the app but not each other, and
only the app layer may import them: the simulator and deployment are registered by the app, not
named by the layers below.  The base imports no other runtrue module.  ``runtrue.__main__`` is an
entry point and stands outside the order.

Imports are read with ``ast``: imports inside functions count (a cycle or an upward import hidden
in a function is still there when the function runs); imports under ``if TYPE_CHECKING:`` do not
(they never run).
"""

from __future__ import annotations

import ast
import functools
import re
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path

PACKAGE = "runtrue"

# Sub-package or top-level module name -> rank.  Equal ranks are side by side and may not import
# each other; a module may always import within its own sub-package.
LAYERS: dict[str, int] = {
    PACKAGE: 0, "validation": 0, "errorlog": 0,
    "transport": 1,
    "protocol": 2,
    "device": 3,
    "readings": 4,
    "balancing": 5, "diagnosis": 5,
    "allocation": 6,
    "jobs": 7,
    "tui": 9, "cli": 9, "plugins": 9,
}
LAYER_NAMES = {0: "base", 9: "app"}
APP_RANK = 9
PLUGINS = frozenset({"sim", "deploy"})
ENTRY_POINTS = frozenset({"__main__"})

MAX_LINES = 500


@dataclass(frozen=True)
class Import:
    importer: str   # dotted module name, e.g. runtrue.jobs.workflow
    target: str     # the module the import runs: the deepest module of the package that exists
    names: tuple[str, ...]  # the names taken by `from X import a, b` (empty for `import X`)
    line: int


def module_files(root: Path, package: str = PACKAGE) -> dict[str, Path]:
    """Dotted module name -> file, for every .py file of ``root/package``."""
    modules = {}
    for path in sorted((root / package).rglob("*.py")):
        parts = list(path.relative_to(root).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        modules[".".join(parts)] = path
    return modules


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _import_nodes(tree: ast.AST) -> Iterator[ast.Import | ast.ImportFrom]:
    """Every import statement, at any depth, except those only run for the type checker."""
    for node in ast.iter_child_nodes(tree):
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node
        elif isinstance(node, ast.If) and _is_type_checking(node.test):
            for child in node.orelse:
                yield from _import_nodes(ast.Module(body=[child], type_ignores=[]))
        else:
            yield from _import_nodes(node)


def _deepest(name: str, modules: dict[str, Path]) -> str:
    while name not in modules and "." in name:
        name = name.rsplit(".", 1)[0]
    return name


@functools.lru_cache(maxsize=8)
def imports(root: Path, package: str = PACKAGE) -> tuple[Import, ...]:
    """The imports of package modules by package modules, resolved to the modules they run
    (read once per tree and run of the tests)."""
    modules = module_files(root, package)
    found = []
    for importer, path in modules.items():
        is_package = path.name == "__init__.py"
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in _import_nodes(tree):
            if isinstance(node, ast.Import):
                for alias in node.names:
                    if alias.name == package or alias.name.startswith(package + "."):
                        found.append(Import(importer, _deepest(alias.name, modules), (), node.lineno))
                continue
            if node.level:
                base = importer.split(".") if is_package else importer.split(".")[:-1]
                base = base[:len(base) - node.level + 1]
                source = ".".join(base + ([node.module] if node.module else []))
            else:
                source = node.module or ""
            if source != package and not source.startswith(package + "."):
                continue
            names = tuple(alias.name for alias in node.names)
            plain = [n for n in names if f"{source}.{n}" not in modules]
            if plain:
                found.append(Import(importer, _deepest(source, modules), tuple(plain), node.lineno))
            for name in names:
                if f"{source}.{name}" in modules:   # `from pkg import submodule`
                    found.append(Import(importer, f"{source}.{name}", (), node.lineno))
    return tuple(found)


def area(module: str) -> str:
    """The layer table's key for a module: its sub-package or top-level module."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else parts[0]


def _layer_name(key: str) -> str:
    if key in PLUGINS:
        return f"plug-in {key}"
    rank = LAYERS[key]
    return LAYER_NAMES.get(rank, key)


def layer_violations(root: Path, package: str = PACKAGE) -> list[str]:
    problems = []
    known = set(LAYERS) | PLUGINS | ENTRY_POINTS
    for key in sorted({area(m) for m in module_files(root, package)} - known):
        problems.append(f"{package}.{key} has no layer: add it to LAYERS or PLUGINS in tests/structure_rules.py")
    for imp in imports(root, package):
        src, dst = area(imp.importer), area(imp.target)
        if src == dst or src not in known or dst not in known or src in ENTRY_POINTS:
            continue
        if dst in ENTRY_POINTS:
            allowed = False
        elif dst in PLUGINS:
            allowed = src in LAYERS and LAYERS[src] == APP_RANK
        elif src in PLUGINS:
            allowed = LAYERS[dst] < APP_RANK
        elif LAYERS[src] == 0:
            allowed = False   # the base imports no other runtrue module
        elif LAYERS[src] == LAYERS[dst] == APP_RANK:
            allowed = True    # the commands start the application; both use the composition root
        else:
            allowed = LAYERS[dst] < LAYERS[src]
        if not allowed:
            problems.append(f"{imp.importer} -> {imp.target} ({_layer_name(src)} -> {_layer_name(dst)}), "
                            f"line {imp.line}")
    return sorted(set(problems))


def import_cycles(root: Path, package: str = PACKAGE) -> list[list[str]]:
    """One cycle (a list of modules, first repeated last) for each group of modules that import
    one another, directly or through others."""
    graph: dict[str, set[str]] = {m: set() for m in module_files(root, package)}
    for imp in imports(root, package):
        if imp.target in graph:
            graph[imp.importer].add(imp.target)
    cycles = []
    for group in _strongly_connected(graph):
        if len(group) > 1 or next(iter(group)) in graph[next(iter(group))]:
            cycles.append(_cycle_in(sorted(group)[0], group, graph))
    return sorted(cycles)


def _strongly_connected(graph: dict[str, set[str]]) -> list[set[str]]:
    """Tarjan's algorithm (R. Tarjan, "Depth-first search and linear graph algorithms", SIAM J.
    Computing 1 (1972)), iterative."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups = []
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                group = set()
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.add(member)
                    if member == node:
                        break
                groups.append(group)
    return groups


def _cycle_in(start: str, group: set[str], graph: dict[str, set[str]]) -> list[str]:
    """A shortest path from ``start`` back to itself inside ``group`` (breadth first)."""
    came_from: dict[str, str] = {}
    frontier = [start]
    while frontier:
        following = []
        for node in frontier:
            for child in sorted(graph[node] & group):
                if child == start:
                    path = [node]
                    while path[-1] != start:
                        path.append(came_from[path[-1]])
                    return [*reversed(path), start]
                if child not in came_from:
                    came_from[child] = node
                    following.append(child)
        frontier = following
    raise AssertionError(f"no cycle through {start}")  # a strongly connected group always has one


def private_imports(root: Path, package: str = PACKAGE) -> list[str]:
    """Imports of a ``_name`` (not a dunder) from another module."""
    problems = []
    for imp in imports(root, package):
        for name in imp.names:
            if name.startswith("_") and not (name.startswith("__") and name.endswith("__")) \
                    and imp.target != imp.importer:
                problems.append(f"{imp.importer} imports {name} from {imp.target}, line {imp.line}")
    return sorted(problems)


def long_modules(root: Path, package: str = PACKAGE, max_lines: int = MAX_LINES) -> list[str]:
    problems = []
    for module, path in module_files(root, package).items():
        n_lines = len(path.read_text(encoding="utf-8").splitlines())
        if n_lines > max_lines:
            problems.append(f"{module}: {n_lines} lines (at most {max_lines})")
    return problems


# Comments and docs stand alone: they point to nothing outside the repository and to no issue.
# The names are spelled out from parts so that this file does not match its own patterns.
_OUTSIDE_FILES = ("brief", "toolchain", "style")
OUTSIDE_REFERENCE = re.compile(r"\b(?:" + "|".join(_OUTSIDE_FILES) + r")\.md\b|\.\./" + "shared")
ISSUE_REFERENCE = re.compile(
    r"\bissues?\s*(?:number\s*|no\.?\s*)?#?\s*\d+\b"    # the word, then a number (a hash or not)
    r"|(?<![\w&#/])#\d+\b(?![\w-])",                    # a hash and a number standing alone
    re.IGNORECASE)
# A hex colour made of digits only (three or six of them) after a quote, an equals sign, a CSS
# property or a border style is a colour, not an issue.
_COLOUR_BEFORE = re.compile(r"""(?:[:="']|\b(?:solid|dashed|dotted|double))\s*$""")
TEXT_SUFFIXES = frozenset({".py", ".md", ".toml", ".txt", ".json", ".tcss", ".mjs", ".js", ".sh", ".cfg",
                           ".ini", ".html", ".css", ".csv", ".kicad_sch", ".yaml", ".yml"})
# fixtures hold what the program wrote (its messages number stored records "#5"), not prose
SKIP_DIRS = frozenset({"node_modules", "__pycache__", "__snapshots__", ".venv", ".git", "fixtures"})
DOC_ROOTS = ("host", "firmware", "tests", "hardware", "examples", "README.md", "DEVELOPERS.md", "pyproject.toml")


def text_files(repo: Path, roots: Iterable[str] = DOC_ROOTS) -> Iterator[Path]:
    for name in roots:
        top = repo / name
        if top.is_file():
            yield top
            continue
        for path in sorted(top.rglob("*")):
            if not path.is_file() or SKIP_DIRS.intersection(path.relative_to(repo).parts):
                continue
            if path.suffix in TEXT_SUFFIXES or (path.suffix == "" and _is_text(path)):
                yield path


def _is_text(path: Path) -> bool:
    head = path.read_bytes()[:1024]
    return b"\0" not in head and head.startswith(b"#!")


def outside_references(repo: Path, roots: Iterable[str] = DOC_ROOTS) -> list[str]:
    """Lines pointing to design notes outside the repository or to issue numbers."""
    problems = []
    for path in text_files(repo, roots):
        for n, line in enumerate(path.read_text(encoding="utf-8", errors="replace").splitlines(), 1):
            hits = [m.group(0) for m in OUTSIDE_REFERENCE.finditer(line)]
            hits += [m.group(0) for m in ISSUE_REFERENCE.finditer(line)
                     if not (m.group(0).startswith("#") and _COLOUR_BEFORE.search(line[:m.start()]))]
            if hits:
                problems.append(f"{path.relative_to(repo)}:{n}: {', '.join(hits)}: {line.strip()[:100]}")
    return problems
