"""SimBoard: the board layer (the Meter's ``hw`` object, DEVELOPERS.md) for the virtual machine.

It plays the part of ``firmware/runtrue_fw/board_rp2040.py`` on simulated time and drives the
REAL firmware ``runtrue_fw.meter.Meter``:

* sampling as the RP2040 ADC does it (Raspberry Pi Ltd, *RP2040 Datasheet*, section 4.9): one
  conversion at a time, round-robin over the enabled channels, every P = 1 + INT + FRAC/256
  cycles of the 48 MHz ADC clock (at least 96).  The per-channel rate is 48 MHz / (P n_ch), so
  the actual rate differs slightly from the one asked for; channel of rank r within a frame is
  sampled r*P after the frame's first conversion (the "channel skew" the board docstring names);
* edges stamped to a whole microsecond (as ``time.ticks_us`` does) and converted to a position
  on the sample timebase in 1/256 frame since START, modulo 2**30, fed before the frames of the
  same pass, all of them (the Meter does debounce and glitch logic);
* one analog channel per pickup of the scenario (``channels_max`` = pickups, at most 3): the
  simulated meter has as many inputs wired as the machine has pickups;
* blocks of up to 256 frames, interleaved, enabled channels ascending, as ``array('H')``;
* 12-bit codes from :func:`runtrue.sim.frontend.quantise` (rounding, clipping at the end stops).

``cpu_load_permille()`` reports a MODELLED load of the RP2040 running this traffic: a cost per
frame (``CPU_US_PER_FRAME_BASE`` + ``CPU_US_PER_FRAME_CHANNEL`` per channel) and per revolution
(``CPU_US_PER_REV``), over one-second windows of simulated time.  The constants are the chip
estimates of tests/bench/bench_meter_unix.py (unix-port times x the RP2040/unix factor of 45-94
measured from the old float path, an ESTIMATE; firmware/README.md, CPU budget), rounded up.
``dropped_samples()`` counts samples "lost" only when a test injects a loss with
:meth:`SimBoard.inject_dropped_samples` (the real board counts DMA overruns).
"""

from __future__ import annotations

import math
from array import array
from typing import Any, Protocol

import numpy as np

from runtrue.sim.frontend import quantise
from runtrue.sim.machine import VirtualMachine

ADC_CLOCK_HZ = 48_000_000
ADC_CYCLES_PER_CONVERSION = 96
ADC_DIV_INT_MAX = 0xFFFF
CHANNELS_MAX = 3
BLOCK_FRAMES = 256
POS_MOD = 1 << 30
IDLE_STEP_S = 0.01
CPU_US_PER_FRAME_BASE = 4.0  # deinterleave and the loop, per frame (chip estimate)
CPU_US_PER_FRAME_CHANNEL = 9.0  # the revolution kernel's share, per frame and channel (chip estimate)
CPU_US_PER_REV = 1500.0  # edge logic, kernel set-up/fold/output, header, CRC, COBS, write (chip estimate)
CPU_IDLE_PERMILLE = 20  # the main loop's own passes (estimate)


class MeterLike(Protocol):
    def feed_samples(self, block: Any, n_frames: int) -> None: ...
    def feed_edge(self, pos_q8: int) -> None: ...
    def feed_command_bytes(self, data: bytes) -> None: ...
    def service(self) -> None: ...


def actual_rate_hz(rate_hz: float, n_channels: int) -> float:
    """Per-channel rate the RP2040 ADC really runs at for a requested rate (datasheet 4.9.6, DIV):
    conversion period rounded to 1/256 cycle, clamped to 96 .. 65536+255/256 cycles."""
    period_q8 = int(ADC_CLOCK_HZ * 256 / (rate_hz * n_channels) + 0.5)
    period_q8 = max(ADC_CYCLES_PER_CONVERSION * 256, min(period_q8, ((ADC_DIV_INT_MAX + 1) << 8) + 255))
    return ADC_CLOCK_HZ * 256 / (period_q8 * n_channels)


class SimBoard:
    """The simulated meter hardware around a :class:`VirtualMachine`."""

    def __init__(self, machine: VirtualMachine, serial: str = "sim-0001") -> None:
        self.machine = machine
        self.meter: MeterLike | None = None
        self.serial = serial
        self._out = bytearray()
        n_pickups = len(machine.scenario.pickups)
        self.channels_max = min(n_pickups, CHANNELS_MAX)
        self._mask = (1 << self.channels_max) - 1
        self._rate_hz = 5000.0
        self._channels: list[int] = []
        self.configure(self._mask, 5000.0)
        self.streaming = False
        self._frames = 0  # frames since START
        self._t0_s = 0.0  # machine time of frame 0's first conversion
        self._falling = False
        self._dropped = 0
        self._drop_pending = 0
        self.repl_requested = False
        self.edges_fed = 0
        self._cpu_busy_us = 0.0
        self._cpu_window_s = 0.0
        self._cpu_permille = CPU_IDLE_PERMILLE

    # ---- wiring -------------------------------------------------------------------------------
    def attach(self, meter: MeterLike) -> None:
        self.meter = meter

    def take_output(self, max_bytes: int | None = None) -> bytes:
        """Bytes the firmware has written to the host, oldest first."""
        n = len(self._out) if max_bytes is None else min(max_bytes, len(self._out))
        data = bytes(self._out[:n])
        del self._out[:n]
        return data

    @property
    def pending_output(self) -> int:
        return len(self._out)

    # ---- hw interface (DEVELOPERS.md, "Firmware: Meter and board") -------------------------------
    def write(self, buf: bytes | bytearray | memoryview, n: int | None = None) -> int:
        """hw.write(buf, n): the first ``n`` bytes of ``buf`` (all if n is None); the Meter reuses
        ``buf``, so they are copied at once.  Returns the bytes taken."""
        if n is None:
            n = len(buf)
        self._out += memoryview(buf)[:n]
        return n

    def configure(self, channel_mask: int, rate_hz: float) -> float:
        mask = int(channel_mask) & 0b111
        if not mask:
            raise ValueError("no channel enabled")
        channels = [c for c in range(CHANNELS_MAX) if mask >> c & 1]
        if channels[-1] >= self.channels_max:
            raise ValueError(f"channel {channels[-1]} not fitted: this board has {self.channels_max}")
        rate = actual_rate_hz(float(rate_hz), len(channels))
        self._mask = mask
        self._channels = channels
        self._rate_hz = rate
        # Round-robin: rank r is converted r/(n_ch * rate) after the frame's first conversion.
        delays = [0.0] * CHANNELS_MAX
        for rank, c in enumerate(channels):
            delays[c] = rank / (len(channels) * rate)
        self.machine.set_channel_delays(delays, corrected_by_meter=True)
        if getattr(self, "streaming", False):  # as the RP2040 board: stop, reconfigure, restart
            self.start()
        return rate

    def set_edge(self, falling: bool) -> None:
        self._falling = bool(falling)
        self.machine.set_active_edge(self._falling)

    def start(self) -> None:
        self.streaming = True
        self._frames = 0
        self._t0_s = self.machine.t_s

    def stop(self) -> None:
        self.streaming = False

    def ticks_ms(self) -> int:
        return int(self.machine.t_s * 1000.0)

    def info(self) -> dict:
        fe = self.machine.scenario.front_end
        n = self.channels_max
        return {
            "board": "sim",
            "adc_bits": fe.adc_bits,
            "channels_max": n,
            "counts_per_g": [fe.counts_per_g] * n,
            "zero_code": [float(fe.zero_code)] * n,
            "serial": f"{self.serial}-{self.machine.scenario.name}",
            "round_robin": True,  # channel k of a frame converted k/n_ch sample later; the host corrects
            "fe": [fe.lowpass_a1_s, fe.lowpass_a2_s2],  # H(s) = 1/(1 + a1 s + a2 s^2) of this front end
        }

    def edges_lost(self) -> int:
        """Edges lost before the Meter saw them (the simulated board loses none)."""
        return 0

    def cpu_load_permille(self) -> int:
        """The modelled CPU load of the last full second of streaming (module docstring)."""
        return self._cpu_permille

    def _account_cpu(self, n_frames: int, n_edges: int, dt_s: float) -> None:
        self._cpu_busy_us += n_frames * (CPU_US_PER_FRAME_BASE + CPU_US_PER_FRAME_CHANNEL * len(self._channels))
        self._cpu_busy_us += n_edges * CPU_US_PER_REV
        self._cpu_window_s += dt_s
        if self._cpu_window_s >= 1.0:
            load = self._cpu_busy_us / (self._cpu_window_s * 1e6)
            self._cpu_permille = min(1000, CPU_IDLE_PERMILLE + round(1000 * load))
            self._cpu_busy_us = 0.0
            self._cpu_window_s = 0.0

    def dropped_samples(self) -> int:
        return self._dropped

    def enter_repl(self) -> None:
        self.streaming = False
        self.repl_requested = True

    # ---- simulation -------------------------------------------------------------------------------
    @property
    def rate_hz(self) -> float:
        return self._rate_hz

    @property
    def channels(self) -> list[int]:
        return list(self._channels)

    def inject_dropped_samples(self, n_samples: int) -> None:
        """Pretend the DMA lost ``n_samples`` in the next block (counted, as the real board does)."""
        self._drop_pending += int(n_samples)

    def step(self, max_s: float | None = None) -> float:
        """Advance simulated time by one block (or ``IDLE_STEP_S`` when idle), feed the Meter and
        let it do its work.  Returns the simulated seconds that passed."""
        meter = self.meter
        if meter is None:
            raise RuntimeError("SimBoard.step() before a Meter was attached")
        if self.repl_requested:
            dt = IDLE_STEP_S if max_s is None else min(IDLE_STEP_S, max_s)
            self.machine.advance(dt)
            return dt
        if not self.streaming:
            dt = IDLE_STEP_S if max_s is None else min(IDLE_STEP_S, max_s)
            self.machine.advance(dt)
            meter.service()
            return dt
        n = BLOCK_FRAMES
        if max_s is not None:
            n = max(1, min(n, int(max_s * self._rate_hz)))
        rate = self._rate_hz
        accel_g, edges = self.machine.generate(n, rate, self._channels)
        fe = self.machine.scenario.front_end
        codes = quantise(accel_g, fe.counts_per_g, fe.zero_code, fe.adc_bits)
        n_edges = 0
        for edge in edges:
            if edge.rising == self._falling:
                continue
            n_edges += 1
            # time.ticks_us(): whole microseconds; then to 1/256 frame on the sample timebase.
            t_us = math.floor(edge.t_s * 1e6)
            pos = math.floor((t_us * 1e-6 - self._t0_s) * rate * 256.0)
            if pos >= 0:
                meter.feed_edge(pos % POS_MOD)
                self.edges_fed += 1
        if self._drop_pending:
            self._dropped += self._drop_pending
            self._drop_pending = 0
        block = array("H")
        block.frombytes(np.ascontiguousarray(codes, dtype="<u2").tobytes())
        meter.feed_samples(block, n)
        self._frames += n
        self._account_cpu(n, n_edges, n / rate)
        meter.service()
        return n / rate

    def run_for(self, seconds: float) -> None:
        """Advance simulated time by ``seconds`` (as fast as the host computes)."""
        end = self.machine.t_s + seconds
        while self.machine.t_s < end - 1e-12:
            self.step(end - self.machine.t_s)
