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
conversion number ``n*n_ch + c``; conversion j is sampled at ``t_start + (j + 1) * P`` (assumed, see
``_FIRST_SAMPLE_PERIODS``) where P
is the conversion period in clk_adc cycles (so channel c lags channel 0 by c*P: ``info()`` says
``round_robin`` and the Meter corrects that known delay; see hardware/FRONTEND.md).  An edge stamped at ``t_us`` is at
frame position ``(t_us - t_start_us) * 48 / (P * n_ch) - 1/n_ch``, reported in 1/256 frame,
modulo 2**30.  Error budget: the 1 us stamp (+-0.5 us), the time from the pin change to the
stamp in the hard interrupt handler (a few microseconds, more when a USB interrupt is being
served: unmeasured here, see the bring-up check), and the +-0.5 us of reading ``t_start``.
At 3000 rpm 10 us of jitter is 0.18 degree of rotation for one revolution, and it averages down
over revolutions; a constant latency is a constant time delay (a phase lag proportional to
speed, like the filter's).
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
_DMA_RELOAD_COUNT = const(0x40000000)  # transfers between reloads by the second channel
_BLOCK_FRAMES = const(256)  # frames handed to the Meter per feed_samples call
_EDGE_SLOTS = const(32)  # power of two
_EDGE_MASK = const(_EDGE_SLOTS - 1)
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
        self._block_mv = memoryview(self._block)
        self._reload_word = array.array("I", [_DMA_RELOAD_COUNT])

        self._dma = rp2.DMA()
        self._dma_reload = rp2.DMA()
        self._dma_regs = _DMA_BASE + _DMA_CH_STRIDE * self._dma.channel

        # Edge stamps: written by the hard IRQ handler, read by the loop.
        self._edge_t = array.array("i", bytes(4 * _EDGE_SLOTS))
        self._edge_head = 0
        self._edge_tail = 0
        self._edge_lost = 0
        self._edge_handler = self._on_edge  # bound once: the IRQ must not allocate
        self._falling = False

        self._cmd_buf = bytearray(_CMD_BYTES_MAX)
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
        self._produced = 0
        self._consumed = 0
        self._last_count = 0
        self._t_start_us = 0
        self._anchor_us = 0
        self._anchor_elapsed_us = 0
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
        self._produced = 0
        self._consumed = 0
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
        self._anchor_us = t0
        self._anchor_elapsed_us = 0
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

    def enter_repl(self) -> None:
        """Leave the main loop at its next pass: acquisition stops and Ctrl-C works again."""
        self._running = False

    # ------------------------------------------------------------------ main loop
    def run(self, meter) -> None:
        """Serve the Meter until it asks for the REPL (or Ctrl-C arrives while not streaming)."""
        ticks_us = self._ticks_us
        ticks_diff = self._ticks_diff
        self._running = True
        micropython.kbd_intr(-1)  # 0x03 is an ordinary byte inside binary frames
        busy_us = 0
        window_start = ticks_us()
        try:
            while self._running:
                t0 = ticks_us()
                self.poll(meter)
                meter.service()
                t1 = ticks_us()
                busy_us += ticks_diff(t1, t0)
                span = ticks_diff(t1, window_start)
                if span >= _LOAD_WINDOW_US:
                    self._load_permille = min(1000, busy_us * 1000 // span)
                    busy_us = 0
                    window_start = t1
                time.sleep_ms(1)
        finally:
            if self._streaming:
                self.stop()
            micropython.kbd_intr(3)

    def poll(self, meter) -> None:
        """One pass: host bytes, then edges, then whole sample frames, into the Meter."""
        n = 0
        buf = self._cmd_buf
        while n < _CMD_BYTES_MAX and self._poller.poll(0):
            b = sys.stdin.buffer.read(1)
            if not b:
                break
            buf[n] = b[0]
            n += 1
        if n:
            meter.feed_command_bytes(bytes(buf[:n]))
        if not self._streaming:
            return
        now: int = self._ticks_us()  # type: ignore[assignment]  # stubs: _TicksUs
        self._anchor_elapsed_us += self._ticks_diff(now, self._anchor_us)
        self._anchor_us = now
        self._feed_edges(meter)
        self._feed_frames(meter)

    # ------------------------------------------------------------------ internals
    def _arm_edge_irq(self) -> None:
        pin = machine.Pin
        trigger = pin.IRQ_FALLING if self._falling else pin.IRQ_RISING
        self._ref_pin.irq(handler=self._edge_handler, trigger=trigger, hard=True)

    def _on_edge(self, _pin) -> None:
        # Hard IRQ: small-int arithmetic and array stores only (no allocation).
        i = self._edge_head
        if i - self._edge_tail >= _EDGE_SLOTS:
            self._edge_lost += 1
            return
        self._edge_t[i & _EDGE_MASK] = self._ticks_us()  # type: ignore[call-overload]  # stubs: _TicksUs
        self._edge_head = i + 1

    def edge_position_q8(self, t_us: int) -> int:
        """Sample-frame position of a microsecond stamp, in 1/256 frame since START (not wrapped).

        frames = elapsed_us * 48 / (P * n_ch) - 1/n_ch, with P = period_q8/256 clk_adc cycles
        (the first conversion completes one period after START_MANY; see the module docstring).
        """
        elapsed_us = self._anchor_elapsed_us + self._ticks_diff(t_us, self._anchor_us)
        num = elapsed_us * (ADC_CLOCK_HZ // 1_000_000) * 65536 - 256 * _FIRST_SAMPLE_PERIODS * self._period_q8
        return num // (self._period_q8 * self._n_ch)

    def _feed_edges(self, meter) -> None:
        while self._edge_tail != self._edge_head:
            t = self._edge_t[self._edge_tail & _EDGE_MASK]
            self._edge_tail += 1
            pos = self.edge_position_q8(t)
            if pos >= 0:
                meter.feed_edge(pos % _POS_MOD)

    def _transfers_done(self) -> int:
        count = self._mem[self._dma_regs + _DMA_CH_TRANS_COUNT] & 0xFFFFFFFF
        last = self._last_count
        self._last_count = count
        if count <= last:
            return last - count
        return last + (_DMA_RELOAD_COUNT - count)  # the reload channel restarted the count

    def _feed_frames(self, meter) -> None:
        self._produced += self._transfers_done()
        n_ch = self._n_ch
        backlog = self._produced - self._consumed
        if backlog > _RING_SAMPLES - _RING_GUARD:
            # The loop fell behind and the DMA overwrote unread samples.  They are still fed (the
            # timebase must keep counting) and reported, so the Meter flags the revolution.
            self._dropped += backlog - (_RING_SAMPLES - _RING_GUARD)
        frames = backlog // n_ch
        ring = self._ring
        block = self._block_mv
        while frames > 0:
            take = frames if frames < _BLOCK_FRAMES else _BLOCK_FRAMES
            count = take * n_ch
            a = self._consumed % _RING_SAMPLES
            first = _RING_SAMPLES - a
            if first >= count:
                block[0:count] = ring[a : a + count]
            else:
                block[0:first] = ring[a:_RING_SAMPLES]
                block[first:count] = ring[0 : count - first]
            self._consumed += count
            frames -= take
            meter.feed_samples(self._block, take)
        mem = self._mem
        fcs = mem[_ADC_BASE + _ADC_FCS]
        if fcs & _ADC_FCS_OVER:
            # A conversion found the FIFO full: the DMA did not keep up and a sample was lost.
            self._dropped += 1
            mem[_ADC_BASE + _ADC_FCS] = fcs | _ADC_FCS_OVER

    def _drain_fifo(self) -> None:
        mem = self._mem
        for _ in range(8):
            if mem[_ADC_BASE + _ADC_FCS] & _ADC_FCS_EMPTY:
                break
            mem[_ADC_BASE + _ADC_FIFO]
