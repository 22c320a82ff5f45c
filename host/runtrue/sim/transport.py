"""SimTransport: the simulated meter behind the host's byte-pipe contract (DEVELOPERS.md).

Bytes written go to the REAL firmware ``runtrue_fw.meter.Meter`` (``feed_command_bytes``);
``read()`` lets simulated time pass (:class:`runtrue.sim.board.SimBoard` feeds the Meter samples
and edges from the :class:`runtrue.sim.machine.VirtualMachine`) until the firmware has written
something, and returns those bytes.  With ``realtime=False`` simulated time runs as fast as the
computer allows and ``timeout_s`` is simulated time; with ``realtime=True`` it is paced to the
wall clock, like a device on a cable.

:meth:`SimTransport.unplug` pulls the simulated cable: reads and writes raise
:class:`TransportLost` until :meth:`SimTransport.reopen`, which plugs it back in.  As with a real
USB meter, the meter restarts on power-up (new firmware state, sequence numbers from 0, not
streaming) while the machine keeps running with its weights.
"""

from __future__ import annotations

import time

from runtrue.sim.board import SimBoard
from runtrue.sim.fastsums import rev_sums as fast_rev_sums
from runtrue.sim.machine import VirtualMachine
from runtrue.sim.scenarios import Scenario, get_scenario
from runtrue.transport.base import Transport, TransportLost

REPL_BANNER = b"\r\nMicroPython (runtrue simulator); type Ctrl-D to restart the meter\r\n>>> "


class SimTransport(Transport):
    """A simulated meter on a simulated machine, as a transport named ``sim:NAME``."""

    def __init__(self, scenario: str | Scenario, seed: int | None = None, realtime: bool = False) -> None:
        sc = get_scenario(scenario) if isinstance(scenario, str) else scenario
        from runtrue_fw.meter import Meter  # type: ignore[import-not-found,unused-ignore]  # the real firmware

        self.name = f"sim:{sc.name}"
        self.realtime = bool(realtime)
        self.machine = VirtualMachine(sc, seed=seed)
        self.board = SimBoard(self.machine)
        self.meter = Meter(self.board, rev_sums_kernel=fast_rev_sums)
        self.board.attach(self.meter)
        self._closed = False
        self._unplugged = False
        self._banner_sent = False
        self._wall0 = time.monotonic()
        self._sim0 = self.machine.t_s

    # ---- Transport -----------------------------------------------------------------------------
    def write(self, data: bytes) -> None:
        self._check_open()
        if self.board.repl_requested:
            return  # the firmware is no longer running; the REPL ignores binary frames here
        self.meter.feed_command_bytes(bytes(data))
        self.meter.service()

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        self._check_open()
        if max_bytes <= 0:
            return b""
        board = self.board
        if board.pending_output:
            return board.take_output(max_bytes)
        if self.realtime:
            return self._read_realtime(max_bytes, timeout_s)
        end = self.machine.t_s + max(0.0, timeout_s)
        while True:
            self._after_repl()
            if board.pending_output:
                return board.take_output(max_bytes)
            left = end - self.machine.t_s
            if left <= 1e-12:
                return b""
            board.step(left)

    def close(self) -> None:
        self._closed = True

    def unplug(self) -> None:
        """Pull the cable: the host sees TransportLost until :meth:`reopen`."""
        self._unplugged = True

    def reopen(self, timeout_s: float) -> bool:
        """Plug the meter back in (it restarts); False if this transport was closed."""
        if self._closed:
            return False
        if self._unplugged:
            from runtrue_fw.meter import Meter  # type: ignore[import-not-found,unused-ignore]

            self._unplugged = False
            self.board = SimBoard(self.machine, serial=self.board.serial)
            self.meter = Meter(self.board, rev_sums_kernel=fast_rev_sums)
            self.board.attach(self.meter)
            self._banner_sent = False
        return True

    # ---- internals -----------------------------------------------------------------------------
    def _check_open(self) -> None:
        if self._closed:
            raise TransportLost(f"{self.name} is closed")
        if self._unplugged:
            raise TransportLost(f"{self.name}: the simulated meter was unplugged")

    def _after_repl(self) -> None:
        if self.board.repl_requested and not self._banner_sent:
            self._banner_sent = True
            self.board.write(REPL_BANNER)

    def _read_realtime(self, max_bytes: int, timeout_s: float) -> bytes:
        board = self.board
        deadline = time.monotonic() + max(0.0, timeout_s)
        while True:
            # Catch simulated time up with the wall clock, one block at a time.
            target = self._sim0 + (time.monotonic() - self._wall0)
            while self.machine.t_s < target:
                board.step(target - self.machine.t_s)
                self._after_repl()
                if board.pending_output:
                    return board.take_output(max_bytes)
            now = time.monotonic()
            if now >= deadline:
                return b""
            time.sleep(min(0.005, deadline - now))
