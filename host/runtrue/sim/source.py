"""The simulator as a source of the transport layer: ``sim:NAME`` opens scenario NAME (a
built-in machine, or a scenario file's path) behind a :class:`~runtrue.sim.transport.SimTransport`.

:func:`register` offers it to :mod:`runtrue.transport.registry`; the heavy parts of the
simulator (numpy, the firmware) load only when a source is listed, described or opened, so
registering costs nothing at start-up.
"""

from __future__ import annotations

from typing import Any

from runtrue.transport.base import PortError, Transport
from runtrue.transport.registry import SourceScheme
from runtrue.transport.registry import register as register_scheme

SCHEME = "sim"


def open_scenario(name: str, *, seed: int | None = None, realtime: bool = False) -> Transport:
    """The simulated meter on scenario ``name``; :class:`PortError` saying what to give instead
    for an unknown name or a scenario file that cannot be used."""
    try:
        from runtrue.sim.scenario_file import ScenarioFileError, load_scenario_file, looks_like_file
        from runtrue.sim.scenarios import SCENARIOS
        from runtrue.sim.transport import SimTransport
    except ModuleNotFoundError as exc:  # numpy or the firmware package missing
        raise PortError(f"the simulator is not available in this installation ({exc})") from None
    if name in SCENARIOS:
        return SimTransport(name, seed=seed, realtime=realtime)
    if not looks_like_file(name):
        choices = ", ".join(sorted(SCENARIOS)) or "none"
        raise PortError(f"unknown scenario {name!r}: choose one of {choices} (`runtrue scenarios` lists "
                        "them), or give a scenario file: sim:PATH.toml or sim:PATH.json")
    try:
        return SimTransport(load_scenario_file(name), seed=seed, realtime=realtime)
    except ScenarioFileError as exc:
        raise PortError(str(exc)) from None


def builtin_sources() -> list[tuple[str, str]]:
    """(name, one-line description) of the built-in scenarios, in the table's order (none when
    the simulator cannot load)."""
    try:
        from runtrue.sim.scenarios import SCENARIOS
    except ModuleNotFoundError:  # numpy missing
        return []
    return [(name, sc.description) for name, sc in SCENARIOS.items()]


def describe_scenario(name: str) -> Any:
    """The :class:`~runtrue.sim.scenario.Scenario` called ``name`` (a built-in or a file's path)."""
    from runtrue.sim.scenarios import get_scenario

    return get_scenario(name)


def register() -> None:
    """Offer the simulator's machines as ``sim:NAME`` ports."""
    register_scheme(SourceScheme(scheme=SCHEME, open=open_scenario, sources=builtin_sources,
                                 describe=describe_scenario))
