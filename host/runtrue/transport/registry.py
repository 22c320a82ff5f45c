"""Sources of bytes that plug in under a port scheme, such as ``sim:NAME`` for the simulator.

The transport layer does not know the plug-ins that offer such sources; each one registers a
:class:`SourceScheme` here (the simulator does so in ``runtrue.sim.register()``), and the
program that puts runtrue together (the command line, the tests) loads the plug-ins before it
opens a port.  A port ``SCHEME:NAME`` whose scheme is registered goes to that scheme's opener;
any other port is a serial device or a pyserial URL (``loop://`` and the like).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from runtrue.transport.base import PortError, Transport


@dataclass(frozen=True)
class SourceScheme:
    """What a plug-in offers under one port scheme.

    ``open(name, seed=..., realtime=...)`` opens source ``name`` (raises :class:`PortError`
    saying what to do when it cannot); ``sources()`` lists the built-in sources as (name,
    one-line description); ``describe(name)`` is the machine source ``name`` stands for (the
    plug-in's own description object; ``ValueError`` with what to do for an unknown name).
    """

    scheme: str
    open: Callable[..., Transport]
    sources: Callable[[], list[tuple[str, str]]]
    describe: Callable[[str], Any]


_SCHEMES: dict[str, SourceScheme] = {}


def register(scheme: SourceScheme) -> None:
    """Offer ``scheme``'s sources under ``SCHEME:NAME`` (again: replaces the earlier one)."""
    _SCHEMES[scheme.scheme] = scheme


def unregister(scheme: str) -> None:
    """Stop offering ``scheme`` (harmless when it is not registered)."""
    _SCHEMES.pop(scheme, None)


def registered(scheme: str) -> SourceScheme | None:
    """The registered scheme called ``scheme``, or None."""
    return _SCHEMES.get(scheme)


def split_port(port: str) -> tuple[SourceScheme, str] | None:
    """(scheme, source name) when ``port`` is ``SCHEME:NAME`` for a registered scheme, else None."""
    head, sep, name = port.partition(":")
    if not sep:
        return None
    scheme = _SCHEMES.get(head)
    return None if scheme is None else (scheme, name)


def source_names(scheme: str) -> list[str]:
    """Names of the built-in sources ``scheme`` offers, sorted (empty when it is not registered)."""
    found = _SCHEMES.get(scheme)
    return sorted(name for name, _ in found.sources()) if found is not None else []


def listed_sources(scheme: str) -> list[tuple[str, str]]:
    """(port, one-line description) of every built-in source ``scheme`` offers, in its order."""
    found = _SCHEMES.get(scheme)
    if found is None:
        return []
    return [(f"{scheme}:{name}", description) for name, description in found.sources()]


def open_source(port: str, *, seed: int | None = None, realtime: bool = False) -> Transport | None:
    """Open ``port`` through its registered scheme; None when no registered scheme claims it."""
    claimed = split_port(port)
    if claimed is None:
        return None
    scheme, name = claimed
    return scheme.open(name, seed=seed, realtime=realtime)


def describe_source(scheme: str, name: str) -> Any:
    """The machine source ``name`` of ``scheme`` stands for; ValueError with what to do when the
    scheme is not registered or the name is unknown."""
    found = _SCHEMES.get(scheme)
    if found is None:
        raise ValueError(f"no {scheme}: sources are available in this installation")
    return found.describe(name)


__all__ = [
    "PortError",
    "SourceScheme",
    "describe_source",
    "listed_sources",
    "open_source",
    "register",
    "registered",
    "source_names",
    "split_port",
    "unregister",
]
