"""The meter's USB serial port, through pyserial.

* :func:`find_meter_ports` lists serial ports that may be a meter, best first.  The ranking is
  a heuristic (common practice): USB vendor ID 0x2E8A is Raspberry Pi's, used by RP2040 boards
  running MicroPython (from memory; MicroPython's rp2 port reports product ID 0x0005, also from
  memory), then any port naming MicroPython, then other USB CDC ACM ports.  Ports without a
  USB identity (built-in UARTs such as ``/dev/ttyS0``) are left out.
* :class:`SerialTransport` opens one port; when the device goes away it raises
  :class:`TransportLost`, and :meth:`SerialTransport.reopen` waits for the same device to come
  back: the same USB serial number (at whatever path the OS gives it now), else the same path.
  A URL such as ``loop://`` goes through ``serial.serial_for_url`` (for tests).

Opening a port discards what the device sent before, and a port may open in the middle of a
frame; the frame decoder resynchronises at the next delimiter (firmware/PROTOCOL.md).
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from typing import Any

from runtrue.transport.base import PortError, Transport, TransportLost

RASPBERRY_PI_VID = 0x2E8A  # Raspberry Pi's USB vendor ID (from memory)
MICROPYTHON_RP2_PID = 0x0005  # MicroPython rp2 port's CDC product ID (from memory)
BAUD = 115200  # USB CDC ignores the baud rate; any value works


@dataclass(frozen=True)
class PortCandidate:
    """A serial port that may be a meter, with why it was ranked as it was."""

    device: str
    description: str
    serial_number: str | None
    vid: int | None
    pid: int | None
    score: int
    reason: str


def rank_port(info: Any) -> PortCandidate | None:
    """Score one ``serial.tools.list_ports`` entry; ``None`` if it cannot be a USB meter."""
    vid = getattr(info, "vid", None)
    pid = getattr(info, "pid", None)
    if vid is None:
        return None
    text = " ".join(
        str(getattr(info, key, "") or "") for key in ("description", "product", "manufacturer", "interface")
    ).lower()
    score = 10
    reasons = ["USB serial"]
    if vid == RASPBERRY_PI_VID:
        score += 100
        reasons.append("Raspberry Pi vendor ID (RP2040)")
        if pid == MICROPYTHON_RP2_PID:
            score += 20
            reasons.append("MicroPython product ID")
    if "micropython" in text:
        score += 50
        reasons.append("names MicroPython")
    if "runtrue" in text:
        score += 200
        reasons.append("names runtrue")
    return PortCandidate(
        device=str(info.device),
        description=str(getattr(info, "description", "") or ""),
        serial_number=getattr(info, "serial_number", None),
        vid=vid,
        pid=pid,
        score=score,
        reason=", ".join(reasons),
    )


def find_meter_ports(ports: list[Any] | None = None) -> list[PortCandidate]:
    """Ports that may be a meter, best first (``ports`` defaults to the system's list)."""
    if ports is None:
        from serial.tools import list_ports

        ports = list(list_ports.comports())
    ranked = [c for c in (rank_port(p) for p in ports) if c is not None]
    return sorted(ranked, key=lambda c: (-c.score, c.device))


def _serial_number_of(device: str) -> str | None:
    from serial.tools import list_ports

    real = os.path.realpath(device)
    for info in list_ports.comports():
        if info.device in (device, real):
            return getattr(info, "serial_number", None)
    return None


def _device_with_serial_number(serial_number: str) -> str | None:
    from serial.tools import list_ports

    for info in list_ports.comports():
        if getattr(info, "serial_number", None) == serial_number:
            return str(info.device)
    return None


class SerialTransport(Transport):
    """A serial port (real USB CDC, a pty, or a pyserial URL like ``loop://``)."""

    def __init__(self, port: str, *, baudrate: int = BAUD) -> None:
        self.port = port
        self.name = port
        self.baudrate = baudrate
        self.serial_number: str | None = None
        self._ser: Any = None
        self._timeout_s: float | None = None
        self._open(port)
        if "://" not in port:
            try:
                self.serial_number = _serial_number_of(port)
            except Exception:  # noqa: BLE001 - listing ports is a nicety; never fail the open over it
                self.serial_number = None

    def _open(self, device: str) -> None:
        import serial

        try:
            if "://" in device:
                ser = serial.serial_for_url(device, baudrate=self.baudrate, timeout=0)
            else:
                ser = serial.Serial(
                    device,
                    baudrate=self.baudrate,
                    timeout=0,
                    exclusive=True if os.name == "posix" else None,
                )
        except (serial.SerialException, OSError, ValueError) as exc:
            raise PortError(
                f"cannot open {device}: {exc}. Check the meter is plugged in and that no other "
                "program has the port open; the Connect screen of `runtrue app` lists the meters found"
            ) from None
        self._ser = ser
        self._timeout_s = 0.0

    def _lost(self, exc: BaseException) -> TransportLost:
        self._close_quietly()
        return TransportLost(f"lost the meter on {self.port}: {exc}")

    def _close_quietly(self) -> None:
        if self._ser is not None:
            try:
                self._ser.close()
            except Exception:  # noqa: BLE001 - best-effort close of a port that may be gone
                pass
            self._ser = None

    @property
    def is_open(self) -> bool:
        return self._ser is not None

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        import serial

        if self._ser is None:
            raise TransportLost(f"the port {self.port} is closed (meter unplugged?)")
        ser = self._ser
        try:
            if self._timeout_s != timeout_s:
                ser.timeout = timeout_s
                self._timeout_s = timeout_s
            first = ser.read(1)
            if not first:
                return b""
            waiting = min(ser.in_waiting, max_bytes - 1)
            return first + (ser.read(waiting) if waiting > 0 else b"")
        except (serial.SerialException, OSError) as exc:
            raise self._lost(exc) from None

    def write(self, data: bytes) -> None:
        import serial

        if self._ser is None:
            raise TransportLost(f"the port {self.port} is closed (meter unplugged?)")
        try:
            self._ser.write(data)
            self._ser.flush()
        except (serial.SerialException, OSError) as exc:
            raise self._lost(exc) from None

    def reopen(self, timeout_s: float) -> bool:
        """Wait up to ``timeout_s`` for the same device (same USB serial number, else the same
        path) and open it.  True when it is open again."""
        self._close_quietly()
        if "://" in self.port:
            return False
        deadline = time.monotonic() + timeout_s
        while True:
            device: str | None = self.port
            if self.serial_number:
                # The same meter, wherever the OS put it now; never another board at the old path.
                try:
                    device = _device_with_serial_number(self.serial_number)
                except Exception:  # noqa: BLE001 - listing ports is a nicety; fall back to the old path
                    device = self.port
            if device is not None and os.path.exists(device):
                try:
                    self._open(device)
                    self.name = device
                    return True
                except PortError:
                    pass
            if time.monotonic() >= deadline:
                return False
            time.sleep(min(0.1, max(0.0, deadline - time.monotonic())))

    def close(self) -> None:
        self._close_quietly()


def list_ports() -> list[PortCandidate]:
    """The system's ports that may be a meter, best first (each has ``device`` and
    ``description``)."""
    return find_meter_ports()
