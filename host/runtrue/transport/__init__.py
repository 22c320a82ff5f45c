"""Byte pipes to the meter: a serial port, a registered plug-in's source, or a spy around either.

``open_transport(port)`` picks one from the port name (DEVELOPERS.md, "Host transport"):
``SCHEME:NAME`` for a scheme a plug-in has registered (:mod:`runtrue.transport.registry`; the
simulator offers ``sim:NAME``, a built-in scenario or a scenario file's path) goes to that
plug-in; anything else is a serial port or a pyserial URL.  This layer names no plug-in, so the
serial path never loads numpy-heavy simulator code.
"""

from __future__ import annotations

from runtrue.transport import registry
from runtrue.transport.base import PortError, Transport, TransportLost

__all__ = ["PortError", "Transport", "TransportLost", "open_transport", "scenario_names"]

#: The scheme under which the simulator registers its machines (``sim:NAME``).
SIM_SCHEME = "sim"


def scenario_names() -> list[str]:
    """Names of the simulator's built-in scenarios (empty if no simulator is registered)."""
    return registry.source_names(SIM_SCHEME)


def open_transport(
    port: str, *, seed: int | None = None, realtime: bool = False, spy: str | None = None
) -> Transport:
    """Open ``port``: ``SCHEME:NAME`` for a registered plug-in's source (``sim:NAME``), else a
    serial device or URL.  With ``spy`` (a file path) every byte each way is also hex-dumped to
    that file.

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
    transport = registry.open_source(port, seed=seed, realtime=realtime)
    if transport is not None:
        return transport
    if port.startswith(SIM_SCHEME + ":"):
        raise PortError("the simulator is not available in this installation: give a serial port")
    from runtrue.transport.serial import SerialTransport

    return SerialTransport(port)
