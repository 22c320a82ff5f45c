"""The transport layer offers the simulator only through its source registry.

Lower layers never name a plug-in: ``sim:NAME`` opens because ``runtrue.sim`` registered its
machines, and a port whose scheme nobody registered is a serial port as before.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

import runtrue
from runtrue import plugins, sim
from runtrue.transport import PortError, open_transport, registry, scenario_names
from runtrue.transport.base import Transport

HOST = Path(runtrue.__file__).resolve().parent
BUILT_IN = ["fan", "roller", "sander", "spindle"]


@pytest.fixture
def no_plugins() -> Iterator[None]:
    """The registry as a program sees it before it loads any plug-in."""
    saved = dict(registry._SCHEMES)
    registry._SCHEMES.clear()
    try:
        yield
    finally:
        registry._SCHEMES.clear()
        registry._SCHEMES.update(saved)


def test_without_the_simulator_registered_no_scenario_is_offered(no_plugins: None) -> None:
    assert scenario_names() == []
    assert registry.listed_sources("sim") == []
    with pytest.raises(PortError, match="simulator is not available"):
        open_transport("sim:fan")
    with pytest.raises(ValueError, match="no sim: sources"):
        registry.describe_source("sim", "fan")


def test_registering_the_simulator_offers_the_built_in_machines(no_plugins: None) -> None:
    sim.register()
    assert scenario_names() == BUILT_IN
    ports = dict(registry.listed_sources("sim"))
    assert sorted(ports) == [f"sim:{name}" for name in BUILT_IN]
    assert "one plane" in ports["sim:fan"] and "1470 rpm" in ports["sim:fan"]
    transport = open_transport("sim:roller", seed=1)
    try:
        assert isinstance(transport, Transport) and transport.name == "sim:roller"
    finally:
        transport.close()
    assert len(registry.describe_source("sim", "roller").planes) == 2


def test_loading_the_plugins_twice_registers_the_simulator_once(no_plugins: None) -> None:
    plugins.load()
    plugins.load()
    assert list(registry._SCHEMES) == ["sim"]


def test_an_unregistered_scheme_is_left_to_the_serial_port(no_plugins: None) -> None:
    sim.register()
    assert registry.split_port("loop://") is None
    assert registry.split_port("/dev/ttyACM0") is None
    claimed = registry.split_port("sim:fan")
    assert claimed is not None and claimed[0].scheme == "sim" and claimed[1] == "fan"


def test_an_unknown_machine_says_what_to_choose() -> None:
    with pytest.raises(PortError, match="unknown scenario 'windmill': choose one of fan, roller, sander, spindle"):
        open_transport("sim:windmill")


def _runtrue_imports(path: Path) -> Iterator[str]:
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            yield from (a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            yield node.module
            yield from (f"{node.module}.{a.name}" for a in node.names)


@pytest.mark.parametrize("layer", ["transport", "protocol", "device", "readings", "diagnosis", "jobs"])
def test_no_layer_below_the_commands_names_the_simulator_or_deployment(layer: str) -> None:
    named = sorted(
        f"{path.relative_to(HOST)} imports {module}"
        for path in (HOST / layer).rglob("*.py")
        for module in _runtrue_imports(path)
        if module.startswith(("runtrue.sim", "runtrue.deploy")) or module in ("runtrue.plugins",)
    )
    assert named == []
