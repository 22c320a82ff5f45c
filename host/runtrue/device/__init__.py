"""The meter as the host sees it: commands, settings and revolution records (DEVELOPERS.md,
"Device client")."""

from __future__ import annotations

from runtrue.device.client import MeterClient, open_meter
from runtrue.device.errors import AllRevolutionsFlagged, CommandRejected, MeterError, NoAnswer, NoRevolutions
from runtrue.protocol.messages import DeviceInfo, Revolution, Status

__all__ = [
    "AllRevolutionsFlagged", "CommandRejected", "DeviceInfo", "MeterClient", "MeterError", "NoAnswer", "NoRevolutions",
    "Revolution", "Status", "open_meter",
]
