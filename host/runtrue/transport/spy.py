"""A transport that passes everything through and writes a hex dump of the traffic.

For debugging a link in the field: ``runtrue ... --port /dev/ttyACM0`` with a spy shows every
byte each way with a time stamp.  Each line reads

    12.345678 RX 0010  01 02 03 ...                                      |...|

(seconds since the spy started, direction, offset within that read/write, 16 bytes in hex,
printable ASCII).  Attributes the spy does not have (e.g. the simulator's ``machine``) are
looked up on the wrapped transport.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import IO, Any

from runtrue.transport.base import Transport


def hex_dump_lines(data: bytes, direction: str, t_s: float) -> list[str]:
    """The dump lines of one read or write."""
    lines = []
    for offset in range(0, len(data), 16):
        chunk = data[offset : offset + 16]
        hexes = " ".join(f"{b:02x}" for b in chunk)
        text = "".join(chr(b) if 32 <= b < 127 else "." for b in chunk)
        lines.append(f"{t_s:12.6f} {direction} {offset:04x}  {hexes:<47}  |{text}|")
    return lines


class SpyTransport(Transport):
    """Wraps ``inner`` and dumps its traffic to ``out`` (a path or an open text file)."""

    def __init__(self, inner: Transport, out: str | Path | IO[str]) -> None:
        self.inner = inner
        self.name = f"spy:{inner.name}"
        if isinstance(out, (str, Path)):
            self._file: IO[str] = open(out, "a", encoding="utf-8")  # noqa: SIM115 - closed in close()
            self._owns_file = True
        else:
            self._file = out
            self._owns_file = False
        self._t0 = time.monotonic()

    def _dump(self, data: bytes, direction: str) -> None:
        if not data:
            return
        t_s = time.monotonic() - self._t0
        self._file.write("\n".join(hex_dump_lines(data, direction, t_s)) + "\n")
        self._file.flush()

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        data = self.inner.read(max_bytes, timeout_s)
        self._dump(data, "RX")
        return data

    def write(self, data: bytes) -> None:
        self._dump(data, "TX")
        self.inner.write(data)

    def reopen(self, timeout_s: float) -> bool:
        back = self.inner.reopen(timeout_s)
        self._file.write(f"{time.monotonic() - self._t0:12.6f} -- reopened: {back}\n")
        return back

    def close(self) -> None:
        self.inner.close()
        if self._owns_file and not self._file.closed:
            self._file.close()

    def __getattr__(self, attr: str) -> Any:
        # Only called for attributes not found normally: reach the wrapped transport's extras.
        if attr in ("inner", "_file"):
            raise AttributeError(attr)
        return getattr(self.inner, attr)
