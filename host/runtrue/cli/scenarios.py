"""``runtrue scenarios``: the simulator's demo machines, one a line: the name, a space, and a
short description.  Use a name as ``--port sim:NAME``.

Scenario files (TOML or JSON, DEVELOPERS.md "Scenario files") given as arguments are checked and
listed after the built-ins, under their path (``--port sim:PATH``, ``demo --scenario PATH``).
``--json`` prints one JSON object: ``{"scenarios": [{"name", "description", "source",
"use", "speed_rpm", "planes", "pickups", "grade_mm_s", "line_hz"}, ...]}``; ``source`` is
``"built-in"`` or the file's path, ``use`` the port to give.
"""

from __future__ import annotations

import json
from typing import Any

from runtrue.cli import UsageError


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "scenarios",
        help="list the simulator's demo machines (use one as --port sim:NAME); check scenario files",
        description="List the simulator's scenarios, one a line: the name, a space, a short "
        "description.  Every built-in scenario is a machine of our own invention.  Scenario files "
        "given are checked and listed too.",
    )
    p.add_argument("files", nargs="*", metavar="FILE", help="scenario files (.toml or .json) to check and list")
    p.add_argument("--json", action="store_true", help="print one JSON object")


def _entry(scenario: Any, source: str, use: str) -> dict[str, Any]:
    return {
        "name": scenario.name,
        "description": scenario.description,
        "source": source,
        "use": use,
        "speed_rpm": scenario.speed_rpm,
        "planes": [{"name": p.name, "radius_mm": p.radius_mm} for p in scenario.planes],
        "pickups": [pk.name for pk in scenario.pickups],
        "grade_mm_s": scenario.grade,
        "line_hz": scenario.line_hz,
    }


def run(args: Any) -> int:
    from runtrue.sim.scenario_file import ScenarioFileError, load_scenario_file
    from runtrue.sim.scenarios import SCENARIOS

    entries = [_entry(sc, "built-in", f"sim:{name}") for name, sc in SCENARIOS.items()]
    for path in getattr(args, "files", []) or []:
        try:
            sc = load_scenario_file(path)
        except ScenarioFileError as exc:
            raise UsageError(str(exc)) from None
        entries.append(_entry(sc, path, f"sim:{path}"))
    if getattr(args, "json", False):
        print(json.dumps({"scenarios": entries}))
        return 0
    for e in entries:
        if e["source"] == "built-in":
            print(f"{e['name']} {e['description']}")
        else:
            print(f"{e['source']} {e['description']} (file; use --port sim:{e['source']})")
    return 0
