"""``runtrue scenarios``: the simulator's demo machines, one a line: the name, a space, and a
short description.  Use a name as ``--port sim:NAME``."""

from __future__ import annotations

from typing import Any


def register(subparsers: Any) -> None:
    subparsers.add_parser(
        "scenarios",
        help="list the simulator's demo machines (use one as --port sim:NAME)",
        description="List the simulator's scenarios, one a line: the name, a space, a short "
        "description.  Every scenario is a machine of our own invention.",
    )


def run(args: Any) -> int:
    from runtrue.sim.scenarios import SCENARIOS

    for name, scenario in SCENARIOS.items():
        print(f"{name} {scenario.description}")
    return 0
