"""The structure of the code, enforced: layer order, no import cycles, small modules, no private
names taken across modules, and comments and docs that stand alone.

The rules and the layer table live in ``structure_rules``; the second half of this file tries
each checker on a small fake package, so a check that stopped seeing what it should fails too.
"""

from __future__ import annotations

from pathlib import Path

import pytest
import structure_rules as rules

REPO = Path(__file__).resolve().parents[1]
HOST = REPO / "host"
# (source root, package): the host application and the meter's firmware
PACKAGES = [(HOST, "runtrue"), (REPO / "firmware", "runtrue_fw")]


def _fail_with(title: str, problems: list[str]) -> None:
    if problems:
        pytest.fail(f"{title} ({len(problems)}):\n  " + "\n  ".join(problems), pytrace=False)


def test_lower_layers_never_import_higher_ones() -> None:
    problems = rules.layer_violations(HOST)
    _fail_with("imports against the layer order (module -> imported module)", problems)


@pytest.mark.parametrize("root, package", PACKAGES, ids=[p for _, p in PACKAGES])
def test_no_import_cycles_even_through_imports_inside_functions(root: Path, package: str) -> None:
    cycles = rules.import_cycles(root, package)
    _fail_with("import cycles", [" -> ".join(c) for c in cycles])


@pytest.mark.parametrize("root, package", PACKAGES, ids=[p for _, p in PACKAGES])
def test_no_module_over_500_lines(root: Path, package: str) -> None:
    problems = rules.long_modules(root, package)
    _fail_with("modules to split", problems)


@pytest.mark.parametrize("root, package", PACKAGES, ids=[p for _, p in PACKAGES])
def test_no_module_takes_a_private_name_from_another(root: Path, package: str) -> None:
    problems = rules.private_imports(root, package)
    _fail_with("private names imported from another module (make them public or move them)", problems)


def test_comments_and_docs_point_to_nothing_outside_the_repository() -> None:
    problems = rules.outside_references(REPO)
    _fail_with("references to design notes outside the repository or to issue numbers (state the fact itself)",
               problems)


# --- the checkers themselves, on a fake package ----------------------------------------------


def _package(root: Path, files: dict[str, str]) -> Path:
    for name, text in files.items():
        path = root / "runtrue" / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return root


def _clean_tree() -> dict[str, str]:
    return {
        "__init__.py": '"""Fake runtrue."""\n__version__ = "0"\n',
        "__main__.py": "from runtrue.cli import main\n",
        "validation.py": "LIMIT = 1\n",
        "transport/__init__.py": "from runtrue.transport.base import Transport\n",
        "transport/base.py": "import runtrue\nclass Transport: ...\n",
        "protocol/__init__.py": "from . import frames\n",
        "protocol/frames.py": "from ..transport import base\n",
        "device/__init__.py": "from runtrue.protocol.frames import base\nfrom runtrue import validation\n",
        "readings/__init__.py": "import runtrue.device\n",
        "balancing/__init__.py": "from runtrue.readings import x\n",
        "diagnosis/__init__.py": "from runtrue.readings import x\n",
        "allocation/__init__.py": "from runtrue.balancing import y\n",
        "jobs/__init__.py": "from runtrue.allocation import z\nfrom runtrue.diagnosis import w\n",
        "sim/__init__.py": "from runtrue.jobs import a\nfrom runtrue.transport.base import Transport\n",
        "deploy/__init__.py": "from runtrue.device import b\n",
        "tui/__init__.py": "from runtrue.sim import c\nfrom runtrue.jobs import d\n",
        "cli/__init__.py": "from runtrue.tui import make_app\nfrom runtrue.deploy import e\n"
                           "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from runtrue.cli import helpers\n",
        "cli/helpers.py": "from runtrue.cli import main\n",
    }


def test_a_tree_that_keeps_the_rules_passes_every_check(tmp_path: Path) -> None:
    root = _package(tmp_path, _clean_tree())
    assert rules.layer_violations(root) == []
    assert rules.import_cycles(root) == []
    assert rules.private_imports(root) == []
    assert rules.long_modules(root) == []


def test_an_upward_import_is_named_with_both_layers(tmp_path: Path) -> None:
    tree = _clean_tree()
    tree["transport/base.py"] += "def later():\n    from runtrue.sim import scenarios\n"   # inside a function
    tree["device/__init__.py"] += "from runtrue.readings import admit\n"
    tree["balancing/__init__.py"] += "from runtrue.diagnosis import severity\n"            # side by side
    tree["validation.py"] += "import runtrue.protocol\n"                                   # the base imports nothing
    tree["jobs/__init__.py"] += "from runtrue.tui import screen\n"
    tree["sim/__init__.py"] += "from runtrue.deploy import install\n"                       # plug-in to plug-in
    tree["deploy/__init__.py"] += "from runtrue.cli import main\n"                          # plug-in to the app
    problems = rules.layer_violations(_package(tmp_path, tree))
    assert [p.split(", line")[0] for p in problems] == [
        "runtrue.balancing -> runtrue.diagnosis (balancing -> diagnosis)",
        "runtrue.deploy -> runtrue.cli (plug-in deploy -> app)",
        "runtrue.device -> runtrue.readings (device -> readings)",
        "runtrue.jobs -> runtrue.tui (jobs -> app)",
        "runtrue.sim -> runtrue.deploy (plug-in sim -> plug-in deploy)",
        "runtrue.transport.base -> runtrue.sim (transport -> plug-in sim)",
        "runtrue.validation -> runtrue.protocol (base -> protocol)",
    ]


def test_imports_for_the_type_checker_only_do_not_count(tmp_path: Path) -> None:
    tree = _clean_tree()
    tree["device/__init__.py"] += ("import typing\nif typing.TYPE_CHECKING:\n    from runtrue.jobs import store\n"
                                   "else:\n    from runtrue.tui import app\n")
    problems = rules.layer_violations(_package(tmp_path, tree))
    assert [p.split(", line")[0] for p in problems] == ["runtrue.device -> runtrue.tui (device -> app)"]


def test_a_package_missing_from_the_layer_table_is_reported(tmp_path: Path) -> None:
    tree = _clean_tree()
    tree["reports/__init__.py"] = "from runtrue.jobs import a\n"
    problems = rules.layer_violations(_package(tmp_path, tree))
    assert problems == ["runtrue.reports has no layer: add it to LAYERS or PLUGINS in tests/structure_rules.py"]


def test_a_cycle_hidden_in_a_function_is_still_a_cycle(tmp_path: Path) -> None:
    tree = _clean_tree()
    tree["jobs/workflow.py"] = "from runtrue.jobs.fitting import plan\n"
    tree["jobs/fitting.py"] = "def plan():\n    from runtrue.jobs import workflow\n"
    tree["jobs/store.py"] = "from .store import x\n"                                       # imports itself
    tree["allocation/a.py"] = "from runtrue.allocation import b\n"
    tree["allocation/b.py"] = "import runtrue.allocation.c\n"
    tree["allocation/c.py"] = "from . import a\n"
    cycles = rules.import_cycles(_package(tmp_path, tree))
    assert cycles == [
        ["runtrue.allocation.a", "runtrue.allocation.b", "runtrue.allocation.c", "runtrue.allocation.a"],
        ["runtrue.jobs.fitting", "runtrue.jobs.workflow", "runtrue.jobs.fitting"],
        ["runtrue.jobs.store", "runtrue.jobs.store"],
    ]


def test_a_module_of_501_lines_is_too_long_and_one_of_500_is_not(tmp_path: Path) -> None:
    tree = _clean_tree()
    tree["jobs/long.py"] = "x = 1\n" * 501
    tree["jobs/short.py"] = "x = 1\n" * 500
    assert rules.long_modules(_package(tmp_path, tree)) == ["runtrue.jobs.long: 501 lines (at most 500)"]


def test_a_private_name_taken_from_another_module_is_reported(tmp_path: Path) -> None:
    tree = _clean_tree()
    tree["jobs/workflow.py"] = "_plane_sums = 1\n__all__ = []\n"
    tree["jobs/four_run.py"] = ("from runtrue.jobs.workflow import __all__, _plane_sums\n"
                                "def f():\n    from .workflow import _plane_sums as sums\n")
    problems = rules.private_imports(_package(tmp_path, tree))
    assert problems == ["runtrue.jobs.four_run imports _plane_sums from runtrue.jobs.workflow, line 1",
                        "runtrue.jobs.four_run imports _plane_sums from runtrue.jobs.workflow, line 3"]


def test_references_outside_the_repository_and_issue_numbers_are_found(tmp_path: Path) -> None:
    notes = "brief" + ".md"
    (tmp_path / "host").mkdir()
    (tmp_path / "host" / "a.py").write_text(
        f'"""Geometry ({notes}, Conventions)."""\n'
        "x = 1  # fixed in is" "sue 15\n"
        "y = 2  # see (#" "12)\n"
        'COLOUR = "#444"  # the grey of the axes, a colour and no issue\n'
        "z = 3  # record number 4 of the job\n", encoding="utf-8")
    (tmp_path / "README.md").write_text("Set up as in ../sha" "red/design.\n\nIs" "sue #" "3 is gone.\n",
                                        encoding="utf-8")
    (tmp_path / "host" / "__snapshots__").mkdir()
    (tmp_path / "host" / "__snapshots__" / "s.svg").write_text("#12 " + notes, encoding="utf-8")
    found = rules.outside_references(tmp_path, ["host", "README.md"])
    assert [line.split(": ")[0] for line in found] == ["host/a.py:1", "host/a.py:2", "host/a.py:3",
                                                      "README.md:1", "README.md:3"]
