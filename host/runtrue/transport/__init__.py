"""Byte pipes to the meter: a serial port, the simulator, or a spy around either.

``open_transport(port)`` picks one from the port name (DEVELOPERS.md, "Host transport"):
``sim:NAME`` is the simulator running scenario NAME (a built-in, or a scenario file's path) (imported only when asked for, so the
serial path never loads numpy-heavy simulator code); anything else is a serial port or a
pyserial URL.
"""

from __future__ import annotations

from runtrue.transport.base import PortError, Transport, TransportLost

__all__ = ["PortError", "Transport", "TransportLost", "open_transport", "scenario_names"]

SIM_PREFIX = "sim:"


def scenario_names() -> list[str]:
    """Names of the simulator's scenarios (empty if the simulator is not installed)."""
    try:
        from runtrue.sim.scenarios import SCENARIOS
    except ModuleNotFoundError:
        return []
    return sorted(SCENARIOS)


def open_transport(
    port: str, *, seed: int | None = None, realtime: bool = False, spy: str | None = None
) -> Transport:
    """Open ``port``: ``sim:NAME`` for a simulator scenario, else a serial device or URL.
    With ``spy`` (a file path) every byte each way is also hex-dumped to that file.

    Raises :class:`PortError` with what to do when the port cannot be opened."""
    transport = _open(port, seed=seed, realtime=realtime)
    if spy:
        from runtrue.transport.spy import SpyTransport

        try:
            return SpyTransport(transport, spy)
        except OSError as exc:
            transport.close()
            raise PortError(f"cannot write the traffic dump {spy}: {exc.strerror or exc}") from None
    return transport


def _open(port: str, *, seed: int | None, realtime: bool) -> Transport:
    if port.startswith(SIM_PREFIX):
        name = port[len(SIM_PREFIX) :]
        try:
            from runtrue.sim.scenarios import SCENARIOS
            from runtrue.sim.transport import SimTransport
        except ModuleNotFoundError as exc:
            raise PortError(f"the simulator is not available in this installation ({exc})") from None
        if name not in SCENARIOS:
            from runtrue.sim.scenario_file import ScenarioFileError, load_scenario_file, looks_like_file

            if not looks_like_file(name):
                choices = ", ".join(sorted(SCENARIOS)) or "none"
                raise PortError(f"unknown scenario {name!r}: choose one of {choices} (`runtrue scenarios` lists "
                                "them), or give a scenario file: sim:PATH.toml or sim:PATH.json")
            try:
                return SimTransport(load_scenario_file(name), seed=seed, realtime=realtime)
            except ScenarioFileError as exc:
                raise PortError(str(exc)) from None
        return SimTransport(name, seed=seed, realtime=realtime)
    from runtrue.transport.serial import SerialTransport

    return SerialTransport(port)
