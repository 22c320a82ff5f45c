"""RP2040 board layer of the runtrue meter: the only firmware module that touches machine/rp2.

It implements the ``hw`` object of the Meter/board contract (DEVELOPERS.md): paced sampling of up
to three analog channels, reference-edge capture on the sample timebase, USB serial, CPU load and
dropped-sample counts, and the way back to the REPL.  ``Board.run(meter)`` is the main loop.

Sources: MicroPython documentation (rp2 port): ``rp2.DMA`` (1.23+), ``machine.mem32``,
``Pin.irq(hard=True)``, ``micropython.kbd_intr``, ``select.poll``.  The ADC and DMA registers are
programmed by rp2040_adc.py (RP2040 Datasheet, sections 4.9 and 2.5), the edge stamps become
sample positions in rp2040_timebase.py (section 4.6); both import no hardware module and take
what they need from here.

Counters wrap below 2**30 (small ints); register addresses, above 2**30, are computed once
(arithmetic on them in the loop would allocate a long int).
"""

import array
import select
import sys
import time

import machine
import micropython
import rp2
import uctypes
from micropython import const

from runtrue_fw import rp2040_adc as adc
from runtrue_fw.rp2040_adc import DMA_RELOAD_COUNT, adc_div_for_rate
from runtrue_fw.rp2040_timebase import POS_MOD, Timebase

try:
    from runtrue_fw.kernels_viper import copy_wrapped
except (SyntaxError, ImportError, AttributeError):  # tests under CPython (the rp2040 fake)
    from runtrue_fw.kernels import copy_wrapped

# ---- pins: hardware/pinmap.toml is the source of truth (tests/hardware/test_pinmap.py) ----
PIN_ACCEL_CH0 = const(26)  # ADC0
PIN_ACCEL_CH1 = const(27)  # ADC1
PIN_ACCEL_CH2 = const(28)  # ADC2
PIN_REF = const(16)  # once-per-revolution reference input (Schmitt-conditioned logic level)
PIN_SAFE_MODE = const(22)  # jumper to GND at power-up: stay at the REPL
PIN_LED = const(25)  # on-board LED, lit while streaming

CHANNELS_MAX = const(3)
ADC_BITS = const(12)

# ---- buffers ----
_RING_BITS = const(14)  # DMA write ring of 2**14 bytes = 8192 samples (0.55 s at 3 x 5 kHz)
_RING_SAMPLES = const(1 << (_RING_BITS - 1))
_RING_GUARD = const(64)  # samples the DMA may be ahead of a count we just read
_BLOCK_FRAMES = const(256)  # frames handed to the Meter per feed_samples call
_EDGE_SLOTS = const(32)  # power of two
_EDGE_MASK = const(_EDGE_SLOTS - 1)
_EDGE_COUNTER_MASK = const(1023)  # head/tail counters wrap here (small ints for ever)
_COUNTER_MASK = const(0x3FFFFFFF)  # dropped/lost counters wrap at 2**30 (PROTOCOL.md, STATUS)
_FRAME_MASK = const(0x3FFFFF)  # the Meter's frame index modulo 2**22
_PLACEHOLDER_CODE = const(2048)  # fed for frames the DMA overwrote (flagged DROPPED_SAMPLES)
_CMD_BYTES_MAX = const(256)  # command bytes read per loop pass
_LOAD_WINDOW_US = const(1_000_000)
_CALIBRATION_FILE = "runtrue_calib.json"
# The front end's H(s) = 1/(1 + a1 s + a2 s^2) from hardware/frontend.py's design values (INFO
# "fe"; tests/hardware/test_frontend.py keeps them in step).
FE_A1_S = 1.834e-4
FE_A2_S2 = 1.504e-10

# Nominal sensor: ratiometric, 0.1 x supply per g, zero at half supply (hardware/FRONTEND.md),
# so counts per g = 4096 * 0.1 = 409.6 whatever the supply.  Replaced by runtrue_calib.json.
_NOMINAL_COUNTS_PER_G = 409.6
_NOMINAL_ZERO_CODE = 2048.0


def safe_mode_requested() -> bool:
    """True when the SAFE_MODE jumper pulls its pin low: main.py then leaves the board at the REPL."""
    pin = machine.Pin(PIN_SAFE_MODE, machine.Pin.IN, machine.Pin.PULL_UP)
    time.sleep_ms(2)
    return pin.value() == 0


def _load_calibration() -> tuple[list, list]:
    counts = [_NOMINAL_COUNTS_PER_G] * CHANNELS_MAX
    zero = [_NOMINAL_ZERO_CODE] * CHANNELS_MAX
    try:
        import json

        with open(_CALIBRATION_FILE) as f:
            data = json.load(f)
        for i in range(CHANNELS_MAX):
            counts[i] = float(data["counts_per_g"][i])
            zero[i] = float(data["zero_code"][i])
    except (OSError, ValueError, KeyError, IndexError, TypeError):
        pass  # no (or unreadable) calibration: nominal figures
    return counts, zero


class Board:
    """The RP2040 meter hardware, offering the Meter's ``hw`` interface (DEVELOPERS.md)."""

    def __init__(self) -> None:
        self._mem = machine.mem32
        self._ticks_us = time.ticks_us
        self._ticks_diff = time.ticks_diff
        # Analog pads: machine.ADC puts the GPIOs in analog mode (digital input and pulls off).
        self._adc_pads = [machine.ADC(machine.Pin(p)) for p in (PIN_ACCEL_CH0, PIN_ACCEL_CH1, PIN_ACCEL_CH2)]
        self._ref_pin = machine.Pin(PIN_REF, machine.Pin.IN, machine.Pin.PULL_UP)
        self._led = machine.Pin(PIN_LED, machine.Pin.OUT, value=0)

        # DMA write ring: 2**_RING_BITS bytes aligned to its own size (RING_SIZE wraps the low bits).
        # A bytes initializer fills the array in one allocation (MicroPython and CPython alike).
        raw = array.array("H", bytes(4 * _RING_SAMPLES))
        addr = uctypes.addressof(raw)
        ring_bytes = 1 << _RING_BITS
        skip = ((ring_bytes - (addr & (ring_bytes - 1))) & (ring_bytes - 1)) >> 1
        self._ring_raw = raw
        self._ring_addr = addr + 2 * skip
        self._ring = memoryview(raw)[skip : skip + _RING_SAMPLES]
        self._block = array.array("H", bytes(2 * _BLOCK_FRAMES * CHANNELS_MAX))
        self._pcopy = array.array("i", [0, 0, _RING_SAMPLES])
        self._reload_word = array.array("I", [DMA_RELOAD_COUNT])

        self._dma = rp2.DMA()
        self._dma_reload = rp2.DMA()
        # Register addresses are above 2**30, so not small ints: computed once here, because any
        # arithmetic on them in the loop would allocate a long int.
        self._count_addr = adc.dma_count_addr(self._dma.channel)
        self._fcs_addr = adc.ADC_FCS_ADDR

        # Edge stamps: written by the hard IRQ handler, read by the loop.
        self._edge_t = array.array("i", [0] * _EDGE_SLOTS)
        self._edge_head = 0
        self._edge_tail = 0
        self._edge_lost = 0
        self._edge_handler = self._on_edge  # bound once: the IRQ must not allocate
        self._falling = False

        self._cmd_buf = bytearray(_CMD_BYTES_MAX)
        self._one = bytearray(1)
        self._placeholder = array.array("H", [_PLACEHOLDER_CODE] * (_BLOCK_FRAMES * CHANNELS_MAX))
        self._poller = select.poll()
        self._poller.register(sys.stdin, select.POLLIN)
        self._out = sys.stdout.buffer

        self._counts_per_g, self._zero_code = _load_calibration()
        self._streaming = False
        self._mask = 0
        self._n_ch = 0
        self._period_q8 = 0
        self._rate_hz = 0.0
        self.configure(0b001, 4000)
        self._running = False
        self._dropped = 0
        self._backlog = 0          # samples the DMA wrote that the loop has not fed yet
        self._rpos = 0             # ring index of the next sample to feed (a frame boundary)
        self._frames_fed = 0       # frames fed to the Meter since START, modulo 2**22
        self._misaligned = False   # a conversion was lost (FIFO overflow): channels may be rotated
        self._last_count = 0
        self._t_start_us = 0
        self._timebase = Timebase()  # edge stamps -> frame positions
        self._load_permille = 0

    # ------------------------------------------------------------------ hw interface
    def write(self, buf, n: int) -> int:
        """The board contract's write(buf, n): send buf[:n] now (the Meter reuses buf).  The stream
        method's length argument avoids slicing, so nothing is allocated."""
        r = self._out.write(buf, n)
        return n if r is None else r

    def configure(self, channel_mask: int, rate_hz: float) -> float:
        """Select channels (bits 0-2) and the per-channel rate; returns the actual rate in Hz."""
        mask = channel_mask & 0b111
        if not mask:
            raise ValueError("no channel enabled")
        n = (mask & 1) + ((mask >> 1) & 1) + ((mask >> 2) & 1)
        div, actual = adc_div_for_rate(rate_hz, n)
        was = self._streaming
        if was:
            self.stop()
        self._mask = mask
        self._n_ch = n
        self._div = div
        self._period_q8 = (((div >> adc.ADC_DIV_INT_LSB) << 8) | (div & 0xFF)) + 256
        self._rate_hz = actual
        if was:
            self.start()
        return actual

    def set_edge(self, falling: bool) -> None:
        self._falling = bool(falling)
        if self._streaming:
            self._arm_edge_irq()

    def start(self) -> None:
        """Start paced conversions into the ring and edge capture; sample index 0 is the first frame."""
        if self._streaming:
            self.stop()
        mem = self._mem
        adc.arm(mem, self._dma, self._dma_reload, self._reload_word, self._ring_addr, _RING_BITS, self._div)
        self._backlog = 0
        self._rpos = 0
        self._frames_fed = 0
        self._misaligned = False
        self._last_count = DMA_RELOAD_COUNT
        self._edge_head = 0
        self._edge_tail = 0
        self._arm_edge_irq()
        t0: int = adc.start_conversions(mem, self._mask, self._n_ch, self._ticks_us,  # type: ignore[assignment]
                                        machine.disable_irq, machine.enable_irq)  # stubs: _TicksUs
        self._t_start_us = t0
        self._timebase.set(t0, self._period_q8, self._n_ch)
        self._streaming = True
        self._led.value(1)

    def stop(self) -> None:
        """Stop conversions, DMA and edge capture."""
        mem = self._mem
        adc.stop_conversions(mem)
        self._ref_pin.irq(handler=None)
        adc.stop_dma(mem, self._dma, self._dma_reload)
        self._streaming = False
        self._led.value(0)

    def ticks_ms(self) -> int:
        return time.ticks_ms()  # type: ignore[return-value]  # stubs: _TicksMs, an int at run time

    def info(self) -> dict:
        try:
            serial = "".join("%02x" % b for b in machine.unique_id())
        except (AttributeError, OSError):
            serial = ""
        return {
            "board": "rp2040",
            "adc_bits": ADC_BITS,
            "channels_max": CHANNELS_MAX,
            "counts_per_g": list(self._counts_per_g),
            "zero_code": list(self._zero_code),
            "serial": serial,
            "round_robin": True,  # channel k of a frame is converted k conversion periods late
            "fe": [FE_A1_S, FE_A2_S2],
        }

    def cpu_load_permille(self) -> int:
        return self._load_permille

    def dropped_samples(self) -> int:
        return self._dropped

    def edges_lost(self) -> int:
        """Edges the hard IRQ could not queue (32 waiting): reported in STATUS edges_lost."""
        return self._edge_lost

    def enter_repl(self) -> None:
        """Leave the main loop at its next pass: acquisition stops and Ctrl-C works again."""
        self._running = False

    # ------------------------------------------------------------------ main loop
    def run(self, meter) -> None:
        """Serve the Meter until it asks for the REPL (or Ctrl-C arrives while not streaming).

        CPU load: the time the loop spends asleep (idle) against each one-second window, so the
        work done in interrupts and in the Meter is counted as busy.  The loop allocates nothing
        while no command arrives (ipoll, readinto a preallocated byte)."""
        ticks_us = self._ticks_us
        ticks_diff = self._ticks_diff
        self._running = True
        micropython.kbd_intr(-1)  # 0x03 is an ordinary byte inside binary frames
        idle_us = 0
        window_start = ticks_us()
        try:
            while self._running:
                self.poll(meter)
                meter.service()
                t1 = ticks_us()
                time.sleep_ms(1)
                t2 = ticks_us()
                idle_us += ticks_diff(t2, t1)
                span = ticks_diff(t2, window_start)
                if span >= _LOAD_WINDOW_US:
                    busy = span - idle_us
                    self._load_permille = (busy >> 4) * 1000 // (span >> 4) if busy > 0 else 0
                    idle_us = 0
                    window_start = t2
        finally:
            if self._streaming:
                self.stop()
            micropython.kbd_intr(3)

    def poll(self, meter) -> None:
        """One pass: host bytes, then edges, then whole sample frames, into the Meter."""
        n = 0
        buf = self._cmd_buf
        one = self._one
        stdin = sys.stdin.buffer
        while n < _CMD_BYTES_MAX:
            ready = False
            for _ in self._poller.ipoll(0):
                ready = True
            if not ready or not stdin.readinto(one):
                break
            buf[n] = one[0]
            n += 1
        if n:
            meter.feed_command_bytes(bytes(buf[:n]))  # a command: the reply allocates anyway
        if not self._streaming:
            return
        self._feed_edges(meter)
        now: int = self._ticks_us()  # type: ignore[assignment]  # stubs: _TicksUs
        self._timebase.advance(now)
        self._feed_frames(meter)

    # ------------------------------------------------------------------ internals
    def _arm_edge_irq(self) -> None:
        pin = machine.Pin
        trigger = pin.IRQ_FALLING if self._falling else pin.IRQ_RISING
        self._ref_pin.irq(handler=self._edge_handler, trigger=trigger, hard=True)

    def _on_edge(self, _pin) -> None:
        # Hard IRQ: small-int arithmetic and array stores only (no allocation).
        i = self._edge_head
        if ((i - self._edge_tail) & _EDGE_COUNTER_MASK) >= _EDGE_SLOTS:
            self._edge_lost = (self._edge_lost + 1) & _COUNTER_MASK
            return
        self._edge_t[i & _EDGE_MASK] = self._ticks_us()  # type: ignore[call-overload]  # stubs: _TicksUs
        self._edge_head = (i + 1) & _EDGE_COUNTER_MASK

    def _feed_edges(self, meter) -> None:
        while self._edge_tail != self._edge_head:
            t = self._edge_t[self._edge_tail & _EDGE_MASK]
            self._edge_tail = (self._edge_tail + 1) & _EDGE_COUNTER_MASK
            pos = self._timebase.edge_position_q8(t)
            if pos >= 0 or self._timebase.wrapped:
                meter.feed_edge(pos & (POS_MOD - 1))

    def _transfers_done(self) -> int:
        count = self._mem[self._count_addr]  # < 2**29: a small int
        last = self._last_count
        self._last_count = count
        if count <= last:
            return last - count
        return last + (DMA_RELOAD_COUNT - count)  # the reload channel restarted the count

    def _feed_frames(self, meter) -> None:
        n_ch = self._n_ch
        self._backlog += self._transfers_done()
        cap = _RING_SAMPLES - _RING_GUARD
        if self._backlog > cap:
            # The loop fell behind and the DMA overwrote unread samples.  Skip them in whole
            # frames (the ring is not a multiple of 3 samples, so reading on would rotate the
            # channels), feed placeholders so the frame count stays the timebase, and tell the
            # Meter exactly which frames they are: every revolution touching them is flagged.
            skip = (self._backlog - cap + n_ch - 1) // n_ch
            self._dropped = (self._dropped + skip * n_ch) & _COUNTER_MASK
            self._backlog -= skip * n_ch
            self._rpos = (self._rpos + skip * n_ch) % _RING_SAMPLES
            first = self._frames_fed
            left = skip
            while left > 0:
                take = left if left < _BLOCK_FRAMES else _BLOCK_FRAMES
                meter.feed_samples(self._placeholder, take)
                left -= take
            self._frames_fed = (first + skip) & _FRAME_MASK
            meter.mark_dropped(first, self._frames_fed)
        frames = self._backlog // n_ch
        pc = self._pcopy
        while frames > 0:
            take = frames if frames < _BLOCK_FRAMES else _BLOCK_FRAMES
            count = take * n_ch
            a = self._rpos
            pc[0] = a
            pc[1] = count
            copy_wrapped(self._ring, self._block, pc)  # type: ignore[arg-type]  # viper ptr args
            self._rpos = (a + count) % _RING_SAMPLES
            self._backlog -= count
            frames -= take
            first_frame = self._frames_fed
            self._frames_fed = (first_frame + take) & _FRAME_MASK
            meter.feed_samples(self._block, take)
            if self._misaligned:
                meter.mark_dropped(first_frame, self._frames_fed)
        mem = self._mem
        fcs = mem[self._fcs_addr]
        if fcs & adc.ADC_FCS_OVER:
            # A conversion found the FIFO full: the DMA did not keep up and one conversion was
            # lost, so every later sample may belong to the next channel.  Not expected with the
            # DMA at high priority; if it happens, every frame from here to the next START is
            # marked dropped, so no revolution with rotated channels goes out unflagged.
            self._dropped = (self._dropped + 1) & _COUNTER_MASK
            self._misaligned = True
            mem[self._fcs_addr] = fcs | adc.ADC_FCS_OVER
