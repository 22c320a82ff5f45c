"""RP2040 board layer of the runtrue meter: the only firmware module that touches machine/rp2.

It implements the ``hw`` object of the Meter/board contract (DEVELOPERS.md): paced sampling of up
to three analog channels, reference-edge capture on the sample timebase, USB serial, CPU load and
dropped-sample counts, and the way back to the REPL.  ``Board.run(meter)`` is the main loop.

Sources (register names and bit positions are those of the datasheet; the fields used here were
checked against the register headers generated from it; section numbers from memory):

* Raspberry Pi Ltd, *RP2040 Datasheet*, section 4.9 "ADC and Temperature Sensor": ADC block at
  0x4004C000; registers CS (0x00), FCS (0x08), FIFO (0x0C), DIV (0x10); clk_adc 48 MHz, 96 clock
  cycles per conversion (500 kS/s at most); round-robin sampling (CS.RROBIN) with the FIFO;
  DIV: "If non-zero, CS_START_MANY will start conversions at regular intervals rather than
  back-to-back. ... Total period is 1 + INT + FRAC / 256" (INT bits 23:8, FRAC bits 7:0,
  first-order delta-sigma on FRAC); a period below 96 cycles is clamped to 96.
* same datasheet, section 2.5 "DMA": channel registers at 0x50000000 + 0x40*n (READ_ADDR 0x00,
  WRITE_ADDR 0x04, TRANS_COUNT 0x08, CTRL_TRIG 0x0C, AL1_TRANS_COUNT_TRIG 0x1C); CHAN_ABORT at
  0x50000444; CTRL fields EN 0, HIGH_PRIORITY 1, DATA_SIZE 3:2, INCR_READ 4, INCR_WRITE 5,
  RING_SIZE 9:6, RING_SEL 10, CHAIN_TO 14:11, TREQ_SEL 20:15; DREQ 36 is the ADC; writing
  TRANS_COUNT sets the reload value copied into the live counter at each trigger.
* same datasheet, section 4.6 "Timer": the 1 microsecond tick behind ``time.ticks_us`` comes from
  clk_ref (the crystal), and clk_adc comes from PLL_USB (the same crystal), so the two clocks
  keep an exact ratio: an edge's microsecond stamp converts to a sample position with no drift.
* MicroPython documentation (rp2 port): ``rp2.DMA`` (1.23+), ``machine.mem32``,
  ``Pin.irq(hard=True)``, ``micropython.kbd_intr``, ``select.poll``.

Timebase.  Sample frame n (one conversion of every enabled channel, ascending) holds channel c's
conversion number ``n*n_ch + c``; conversion j is sampled at ``t_adc + (j + 1) * P`` (assumed, see
``_FIRST_SAMPLE_PERIODS``) where P is the conversion period in clk_adc cycles (so channel c lags
channel 0 by c*P: ``info()`` says ``round_robin`` and the host's fit corrects that known delay)
and ``t_adc = t_read + START_READ_OFFSET_US`` (the start time is read about 14 us before the ADC
really starts).  An edge stamped at ``t_us`` happened ``EDGE_LATENCY_US`` (19 us, the middle of
the 17-21 us measured) earlier, at frame position
``(t_us - EDGE_LATENCY_US - t_adc) * 48 / (P * n_ch) - 1/n_ch``, reported in 1/256 frame modulo
2**30 and computed from an anchor moved at every pass by an exact division (no long ints, no
drift).  Residual (firmware/README.md, timing): +-2 us of IRQ latency jitter around the constant,
+-0.5 us of stamp rounding, and the constants' own error on a given board.  Counters wrap below
2**30 (small ints); register addresses, above 2**30, are computed once (arithmetic on them would
allocate a long int in the loop).
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
ADC_CLOCK_HZ = const(48_000_000)  # clk_adc from PLL_USB (MicroPython's rp2 default)
ADC_CYCLES_PER_CONVERSION = const(96)

# ---- ADC registers (RP2040 Datasheet 4.9.6) ----
_ADC_BASE = const(0x4004C000)
_ADC_CS = const(0x00)
_ADC_FCS = const(0x08)
_ADC_FIFO = const(0x0C)
_ADC_DIV = const(0x10)
_ADC_CS_EN = const(1 << 0)
_ADC_CS_START_MANY = const(1 << 3)
_ADC_CS_READY = const(1 << 8)
_ADC_CS_AINSEL_LSB = const(12)
_ADC_CS_RROBIN_LSB = const(16)
_ADC_FCS_EN = const(1 << 0)
_ADC_FCS_DREQ_EN = const(1 << 3)
_ADC_FCS_EMPTY = const(1 << 8)
_ADC_FCS_UNDER = const(1 << 10)
_ADC_FCS_OVER = const(1 << 11)
_ADC_FCS_THRESH_LSB = const(24)
_ADC_DIV_INT_LSB = const(8)
_ADC_DIV_INT_MAX = const(0xFFFF)

# ---- DMA registers (RP2040 Datasheet 2.5.7) ----
_DMA_BASE = const(0x50000000)
_DMA_CH_STRIDE = const(0x40)
_DMA_CH_TRANS_COUNT = const(0x08)
_DMA_CH_AL1_CTRL = const(0x10)  # CTRL alias that does not trigger
_DMA_CH_AL1_TRANS_COUNT_TRIG = const(0x1C)
_DMA_CHAN_ABORT = const(0x444)
_DREQ_ADC = const(36)
_TREQ_PERMANENT = const(0x3F)
_DMA_SIZE_HALFWORD = const(1)
_DMA_SIZE_WORD = const(2)

# ---- buffers ----
_RING_BITS = const(14)  # DMA write ring of 2**14 bytes = 8192 samples (0.55 s at 3 x 5 kHz)
_RING_SAMPLES = const(1 << (_RING_BITS - 1))
_RING_GUARD = const(64)  # samples the DMA may be ahead of a count we just read
_DMA_RELOAD_COUNT = const(0x20000000)  # transfers between reloads (below 2**30: counts stay small ints)
_BLOCK_FRAMES = const(256)  # frames handed to the Meter per feed_samples call
_EDGE_SLOTS = const(32)  # power of two
_EDGE_MASK = const(_EDGE_SLOTS - 1)
_EDGE_COUNTER_MASK = const(1023)  # head/tail counters wrap here (small ints for ever)
_COUNTER_MASK = const(0x3FFFFFFF)  # dropped/lost counters wrap at 2**30 (PROTOCOL.md, STATUS)
_FRAME_MASK = const(0x3FFFFF)  # the Meter's frame index modulo 2**22
# Timing (measured on an emulated RP2040, MicroPython 1.28; firmware/README.md, timing):
# a hard Pin IRQ stamps ticks_us() 17-21 us after the pin changed: the stamp is taken back by 19.
EDGE_LATENCY_US = const(19)
# the ticks_us() read before START_MANY comes about 14 us before the ADC really starts.
START_READ_OFFSET_US = const(14)
_PLACEHOLDER_CODE = const(2048)  # fed for frames the DMA overwrote (flagged DROPPED_SAMPLES)
_CMD_BYTES_MAX = const(256)  # command bytes read per loop pass
_POS_MOD = const(1 << 30)
_LOAD_WINDOW_US = const(1_000_000)
# Conversion periods between START_MANY and the sampling instant of conversion 0.  Assumed: the
# divider counts one period before the first paced conversion (the datasheet text we checked
# does not say).  Unverified on hardware; hardware/BRINGUP.md (timing check) measures it.
_FIRST_SAMPLE_PERIODS = const(1)
_CALIBRATION_FILE = "runtrue_calib.json"
# The front end's H(s) = 1/(1 + a1 s + a2 s^2) from hardware/frontend.py's design values (INFO
# "fe"; tests/hardware/test_frontend.py keeps them in step).
FE_A1_S = 1.834e-4
FE_A2_S2 = 1.504e-10

# Nominal sensor: ratiometric, 0.1 x supply per g, zero at half supply (hardware/FRONTEND.md),
# so counts per g = 4096 * 0.1 = 409.6 whatever the supply.  Replaced by runtrue_calib.json.
_NOMINAL_COUNTS_PER_G = 409.6
_NOMINAL_ZERO_CODE = 2048.0


def adc_div_for_rate(rate_hz: float, n_channels: int) -> tuple[int, float]:
    """DIV register value and the actual per-channel rate for ``rate_hz`` on ``n_channels``.

    Conversion period P = 1 + INT + FRAC/256 clk_adc cycles (datasheet 4.9.6, DIV), at least 96.
    The per-channel rate is 48 MHz / (P * n_channels).  Rates out of reach are clamped to the
    nearest reachable one (the caller reports the actual rate, never the requested one).
    """
    conv_hz = rate_hz * n_channels
    period_q8 = int(ADC_CLOCK_HZ * 256 / conv_hz + 0.5)
    period_q8 = max(ADC_CYCLES_PER_CONVERSION * 256, min(period_q8, ((_ADC_DIV_INT_MAX + 1) << 8) + 255))
    div_q8 = period_q8 - 256
    div = ((div_q8 >> 8) << _ADC_DIV_INT_LSB) | (div_q8 & 0xFF)
    return div, ADC_CLOCK_HZ * 256 / (period_q8 * n_channels)


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
        self._reload_word = array.array("I", [_DMA_RELOAD_COUNT])

        self._dma = rp2.DMA()
        self._dma_reload = rp2.DMA()
        self._dma_regs = _DMA_BASE + _DMA_CH_STRIDE * self._dma.channel
        # Register addresses are above 2**30, so not small ints: computed once here, because any
        # arithmetic on them in the loop would allocate a long int.
        self._count_addr = self._dma_regs + _DMA_CH_TRANS_COUNT
        self._fcs_addr = _ADC_BASE + _ADC_FCS

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
        self._anc_us = 0           # timebase anchor: a ticks_us instant ...
        self._anc_q8 = 0           # ... its frame position in 1/256 frame ...
        self._anc_rem = 0          # ... plus anc_rem / den of 1/256 frame (exact, no drift)
        self._anc_wrapped = False
        self._den = 1
        self._kstep = 1
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
        self._period_q8 = (((div >> _ADC_DIV_INT_LSB) << 8) | (div & 0xFF)) + 256
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
        adc = _ADC_BASE
        # ADC on, wait until ready; empty the FIFO; clear its sticky error flags (write 1 to clear).
        mem[adc + _ADC_CS] = _ADC_CS_EN
        for _ in range(1000):
            if mem[adc + _ADC_CS] & _ADC_CS_READY:
                break
        self._drain_fifo()
        mem[adc + _ADC_DIV] = self._div
        mem[adc + _ADC_FCS] = (
            _ADC_FCS_EN | _ADC_FCS_DREQ_EN | (1 << _ADC_FCS_THRESH_LSB) | _ADC_FCS_OVER | _ADC_FCS_UNDER
        )
        # DMA: halfwords from the FIFO into the ring, paced by the ADC's DREQ; when its count runs
        # out it chains to the reload channel, which rewrites the count and retriggers it.
        dma = self._dma
        reload = self._dma_reload
        ctrl = dma.pack_ctrl(
            size=_DMA_SIZE_HALFWORD,
            inc_read=False,
            inc_write=True,
            ring_size=_RING_BITS,
            ring_sel=True,
            treq_sel=_DREQ_ADC,
            chain_to=reload.channel,
            high_pri=True,
            irq_quiet=True,
        )
        reload_ctrl = reload.pack_ctrl(
            size=_DMA_SIZE_WORD,
            inc_read=False,
            inc_write=False,
            treq_sel=_TREQ_PERMANENT,
            chain_to=reload.channel,
            irq_quiet=True,
        )
        reload.config(
            read=self._reload_word,
            write=self._dma_regs + _DMA_CH_AL1_TRANS_COUNT_TRIG,
            count=1,
            ctrl=reload_ctrl,
            trigger=False,
        )
        dma.config(read=adc + _ADC_FIFO, write=self._ring_addr, count=_DMA_RELOAD_COUNT, ctrl=ctrl, trigger=True)
        self._backlog = 0
        self._rpos = 0
        self._frames_fed = 0
        self._misaligned = False
        self._last_count = _DMA_RELOAD_COUNT
        self._edge_head = 0
        self._edge_tail = 0
        self._arm_edge_irq()
        first = 0
        while not (self._mask >> first) & 1:
            first += 1
        rrobin = self._mask if self._n_ch > 1 else 0
        cs = _ADC_CS_EN | (first << _ADC_CS_AINSEL_LSB) | (rrobin << _ADC_CS_RROBIN_LSB)
        mem[adc + _ADC_CS] = cs
        state = machine.disable_irq()
        t0: int = self._ticks_us()  # type: ignore[assignment]  # stubs: _TicksUs, an int at run time
        mem[adc + _ADC_CS] = cs | _ADC_CS_START_MANY
        machine.enable_irq(state)
        self._t_start_us = t0
        self._set_anchor(t0)
        self._streaming = True
        self._led.value(1)

    def stop(self) -> None:
        """Stop conversions, DMA and edge capture."""
        mem = self._mem
        mem[_ADC_BASE + _ADC_CS] = _ADC_CS_EN
        self._ref_pin.irq(handler=None)
        # Clear EN on both channels before the abort: on the RP2350 an aborted channel can trigger
        # again (erratum RP2350-E5; clearing EN first is its workaround).  The RP2040's abort
        # erratum (RP2040-E13) is a spurious completion IRQ, which these irq_quiet channels never raise.
        mem[self._dma_regs + _DMA_CH_AL1_CTRL] = 0
        mem[_DMA_BASE + _DMA_CH_STRIDE * self._dma_reload.channel + _DMA_CH_AL1_CTRL] = 0
        abort = (1 << self._dma.channel) | (1 << self._dma_reload.channel)
        mem[_DMA_BASE + _DMA_CHAN_ABORT] = abort
        for _ in range(1000):
            if not mem[_DMA_BASE + _DMA_CHAN_ABORT] & abort:
                break
        mem[_ADC_BASE + _ADC_FCS] = 0
        self._drain_fifo()
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
        self._advance_anchor(now)
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

    # The timebase.  Frame position x (frames since START) of an instant t (us):
    #   x = (t - t_adc) * 48 / (P * n_ch) - 1/n_ch,  t_adc = t0_read + START_READ_OFFSET_US,
    # with P = period_q8 / 256 clk_adc cycles (the first conversion samples one period after
    # START_MANY).  In 1/256 frame: q8 = cycles * 65536 / den, den = period_q8 * n_ch.  It is
    # kept as an anchor (instant, q8, remainder) moved at every pass by an exact long division
    # in small steps, so nothing becomes a long int and nothing drifts.
    def _set_anchor(self, t0_read_us: int) -> None:
        n = self._n_ch
        den = self._period_q8 * n
        self._den = den
        k = 8
        while k > 1 and (den << k) >= (1 << 30):
            k -= 1
        self._kstep = k
        # -1/n_ch of a frame (_FIRST_SAMPLE_PERIODS = 1) = -256/n_ch q8
        #   = -(a + 1) q8 + (n - b)/n q8 for 256 = a n + b, b > 0; (n - b)/n q8 = (n - b) P_q8 / den
        a = 256 // n
        b = 256 - a * n
        if b:
            self._anc_q8 = -(a + 1)
            self._anc_rem = (n - b) * self._period_q8
        else:
            self._anc_q8 = -a
            self._anc_rem = 0
        self._anc_us = time.ticks_add(t0_read_us, START_READ_OFFSET_US)  # type: ignore[assignment,type-var]  # stubs: _Ticks
        self._anc_wrapped = False

    def _q8_since_anchor(self, dt_us: int) -> int:
        """floor(q8) of the position dt_us after the anchor, relative to the anchor's q8; leaves
        the remainder (in 1/den q8) in self._rem_out.  |dt_us| < 22 s."""
        den = self._den
        c = dt_us * 48
        q = c // den
        r = c - q * den
        bits = 16
        k = self._kstep
        while bits > 0:
            s = k if k < bits else bits
            r <<= s
            d = r // den
            q = (q << s) + d
            r -= d * den
            bits -= s
        r += self._anc_rem
        if r >= den:
            r -= den
            q += 1
        self._rem_out = r
        return q

    def edge_position_q8(self, t_us: int) -> int:
        """Frame position of an edge stamped at ``t_us`` (interrupt latency taken back), in 1/256
        frame since START; negative before the first sample (before wrapping at 2**30)."""
        dt = self._ticks_diff(t_us, self._anc_us) - EDGE_LATENCY_US
        return self._anc_q8 + self._q8_since_anchor(dt)

    def _advance_anchor(self, now_us: int) -> None:
        q = self._q8_since_anchor(self._ticks_diff(now_us, self._anc_us))
        pos = self._anc_q8 + q
        if pos >= _POS_MOD:
            pos -= _POS_MOD
            self._anc_wrapped = True
        self._anc_q8 = pos
        self._anc_rem = self._rem_out
        self._anc_us = now_us

    def _feed_edges(self, meter) -> None:
        while self._edge_tail != self._edge_head:
            t = self._edge_t[self._edge_tail & _EDGE_MASK]
            self._edge_tail = (self._edge_tail + 1) & _EDGE_COUNTER_MASK
            pos = self.edge_position_q8(t)
            if pos >= 0 or self._anc_wrapped:
                meter.feed_edge(pos & (_POS_MOD - 1))

    def _transfers_done(self) -> int:
        count = self._mem[self._count_addr]  # < 2**29: a small int
        last = self._last_count
        self._last_count = count
        if count <= last:
            return last - count
        return last + (_DMA_RELOAD_COUNT - count)  # the reload channel restarted the count

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
        if fcs & _ADC_FCS_OVER:
            # A conversion found the FIFO full: the DMA did not keep up and one conversion was
            # lost, so every later sample may belong to the next channel.  Not expected with the
            # DMA at high priority; if it happens, every frame from here to the next START is
            # marked dropped, so no revolution with rotated channels goes out unflagged.
            self._dropped = (self._dropped + 1) & _COUNTER_MASK
            self._misaligned = True
            mem[self._fcs_addr] = fcs | _ADC_FCS_OVER

    def _drain_fifo(self) -> None:
        mem = self._mem
        for _ in range(8):
            if mem[_ADC_BASE + _ADC_FCS] & _ADC_FCS_EMPTY:
                break
            mem[_ADC_BASE + _ADC_FIFO]
