"""Messages the meter worker posts to the application: small dataclasses, nothing else.

The worker thread never touches a widget; it only posts these (``post_message`` is thread-safe
in Textual), and the screens decide what to show.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from textual.message import Message


@dataclass(eq=False)
class _Msg(Message):
    """Base of our messages (Textual's Message initialises dataclass messages itself)."""


@dataclass(eq=False)
class MeterConnected(_Msg):
    """The meter answered: ``info`` is its INFO object (fw, board, channels, rate...)."""

    port: str
    info: dict[str, Any]


@dataclass(eq=False)
class RevolutionsRead(_Msg):
    """A batch of revolutions read since the last message (in order)."""

    revs: list[Any] = field(default_factory=list)
    lost_frames: int = 0
    epoch: int = 0  # bumped by every MeterLink.call (e.g. weights changed on a simulated rotor)


@dataclass(eq=False)
class SelfTestDone(_Msg):
    """The meter's self-test result: ``{"pass": bool, "checks": [...]}``."""

    result: dict[str, Any]


@dataclass(eq=False)
class MeterLost(_Msg):
    """The cable was pulled or the port went away; the worker keeps trying to reconnect."""

    port: str
    reason: str


@dataclass(eq=False)
class MeterFailed(_Msg):
    """The meter could not be opened at all (wrong port, not a meter)."""

    port: str
    reason: str


@dataclass(eq=False)
class CommandFailed(_Msg):
    """A request to the meter failed without losing it (refused command, bad self-test)."""

    port: str
    what: str
    reason: str
