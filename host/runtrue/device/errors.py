"""Errors of the device client; each message says what to do."""

from __future__ import annotations


class MeterError(Exception):
    """The meter did not do what was asked."""


class NoAnswer(MeterError):
    """Nothing at all came back: wrong port, or no runtrue firmware on the board."""


class CommandRejected(MeterError):
    """The meter answered a command with an ACK result other than ok."""

    def __init__(self, message: str, result: int) -> None:
        super().__init__(message)
        self.result = result


class NoRevolutions(MeterError):
    """Streaming, but no usable revolution arrived in time: the reference pulses are missing."""


class AllRevolutionsFlagged(NoRevolutions):
    """Revolutions arrive, but every one is flagged (clipping, missed or extra pulses, speed
    jumps), so none can be averaged into a reading.  ``flags`` counts each flag seen."""

    def __init__(self, message: str, flags: dict[str, int]) -> None:
        super().__init__(message)
        self.flags = flags
