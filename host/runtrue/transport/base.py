"""The byte-pipe contract every transport keeps (DEVELOPERS.md, "Host transport").

A transport moves raw bytes; it knows nothing of frames.  Real serial ports, the simulator and
the hex-dumping spy all look the same to the device client.
"""

from __future__ import annotations


class TransportLost(Exception):
    """The device went away (unplugged, port closed under us).  The session can go on: call
    :meth:`Transport.reopen` (the device client does) to wait for the device to come back."""


class PortError(Exception):
    """A port cannot be opened: the message says what is wrong and what to do."""


class Transport:
    """Base class of the byte pipes."""

    name: str = "transport"

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        """Up to ``max_bytes`` bytes; ``b""`` if none came within ``timeout_s``.

        Raises :class:`TransportLost` when the device goes away."""
        raise NotImplementedError

    def write(self, data: bytes) -> None:
        """Send ``data``; raises :class:`TransportLost` when the device goes away."""
        raise NotImplementedError

    def close(self) -> None:
        """Release the port.  Closing twice is harmless."""

    def reopen(self, timeout_s: float) -> bool:
        """Try to open the same device again after :class:`TransportLost`, for up to
        ``timeout_s``.  True when it is back.  Transports that cannot come back return False."""
        return False

    def __enter__(self) -> Transport:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
