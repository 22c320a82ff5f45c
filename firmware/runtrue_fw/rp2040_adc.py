"""RP2040 paced sampling: the ADC in free-running round robin, drained by DMA into a ring.

Programs the ADC and DMA registers for the board layer (board_rp2040.py), which owns the pins,
the buffers and the DMA channel objects and passes them in: this module imports no hardware
module, so ``machine`` and ``rp2`` stay in board_rp2040.py alone.

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
* MicroPython documentation (rp2 port): ``rp2.DMA`` (1.23+), ``machine.mem32``.

Register addresses are above 2**30, so not small ints: the ones read in the main loop are
constants here (arithmetic on them in the loop would allocate a long int).
"""

try:
    from micropython import const
except ImportError:  # CPython
    def const(x):  # type: ignore[no-redef,misc]
        return x

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
ADC_FCS_OVER = const(1 << 11)  # a conversion found the FIFO full (write 1 to clear)
_ADC_FCS_THRESH_LSB = const(24)
ADC_DIV_INT_LSB = const(8)
_ADC_DIV_INT_MAX = const(0xFFFF)
ADC_FCS_ADDR = const(0x4004C008)  # _ADC_BASE + _ADC_FCS, read at every pass of the main loop

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
DMA_RELOAD_COUNT = const(0x20000000)  # transfers between reloads (below 2**30: counts stay small ints)


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
    div = ((div_q8 >> 8) << ADC_DIV_INT_LSB) | (div_q8 & 0xFF)
    return div, ADC_CLOCK_HZ * 256 / (period_q8 * n_channels)


def dma_count_addr(channel: int) -> int:
    """Address of DMA channel ``channel``'s TRANS_COUNT register (a long int: compute it once)."""
    return _DMA_BASE + _DMA_CH_STRIDE * channel + _DMA_CH_TRANS_COUNT


def arm(mem, dma, reload, reload_word, ring_addr: int, ring_bits: int, div: int) -> None:
    """ADC on with an empty FIFO, DIV set, FIFO and DREQ on; ``dma`` configured to move halfwords
    from the FIFO into the ring at ``ring_addr`` (2**ring_bits bytes, aligned to its size), paced
    by the ADC's DREQ, and triggered: it waits for conversions.  When its count runs out it
    chains to ``reload``, which rewrites the count from ``reload_word`` and retriggers it."""
    adc = _ADC_BASE
    # ADC on, wait until ready; empty the FIFO; clear its sticky error flags (write 1 to clear).
    mem[adc + _ADC_CS] = _ADC_CS_EN
    for _ in range(1000):
        if mem[adc + _ADC_CS] & _ADC_CS_READY:
            break
    drain_fifo(mem)
    mem[adc + _ADC_DIV] = div
    mem[adc + _ADC_FCS] = (
        _ADC_FCS_EN | _ADC_FCS_DREQ_EN | (1 << _ADC_FCS_THRESH_LSB) | ADC_FCS_OVER | _ADC_FCS_UNDER
    )
    ctrl = dma.pack_ctrl(
        size=_DMA_SIZE_HALFWORD,
        inc_read=False,
        inc_write=True,
        ring_size=ring_bits,
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
        read=reload_word,
        write=_DMA_BASE + _DMA_CH_STRIDE * dma.channel + _DMA_CH_AL1_TRANS_COUNT_TRIG,
        count=1,
        ctrl=reload_ctrl,
        trigger=False,
    )
    dma.config(read=adc + _ADC_FIFO, write=ring_addr, count=DMA_RELOAD_COUNT, ctrl=ctrl, trigger=True)


def start_conversions(mem, mask: int, n_ch: int, ticks_us, disable_irq, enable_irq) -> int:
    """Select the channels of ``mask`` (round robin if more than one) and start paced
    conversions; returns ``ticks_us()`` read with interrupts off just before START_MANY.  Nothing
    runs between that read and the register write but the write's own operands (the board's
    START_READ_OFFSET_US is measured with this sequence)."""
    adc = _ADC_BASE
    first = 0
    while not (mask >> first) & 1:
        first += 1
    rrobin = mask if n_ch > 1 else 0
    cs = _ADC_CS_EN | (first << _ADC_CS_AINSEL_LSB) | (rrobin << _ADC_CS_RROBIN_LSB)
    mem[adc + _ADC_CS] = cs
    state = disable_irq()
    t0 = ticks_us()
    mem[adc + _ADC_CS] = cs | _ADC_CS_START_MANY
    enable_irq(state)
    return t0


def stop_conversions(mem) -> None:
    """Stop the ADC's paced conversions (it stays powered)."""
    mem[_ADC_BASE + _ADC_CS] = _ADC_CS_EN


def stop_dma(mem, dma, reload) -> None:
    """Stop both DMA channels, turn the FIFO off and empty it."""
    # Clear EN on both channels before the abort: on the RP2350 an aborted channel can trigger
    # again (erratum RP2350-E5; clearing EN first is its workaround).  The RP2040's abort
    # erratum (RP2040-E13) is a spurious completion IRQ, which these irq_quiet channels never raise.
    mem[_DMA_BASE + _DMA_CH_STRIDE * dma.channel + _DMA_CH_AL1_CTRL] = 0
    mem[_DMA_BASE + _DMA_CH_STRIDE * reload.channel + _DMA_CH_AL1_CTRL] = 0
    abort = (1 << dma.channel) | (1 << reload.channel)
    mem[_DMA_BASE + _DMA_CHAN_ABORT] = abort
    for _ in range(1000):
        if not mem[_DMA_BASE + _DMA_CHAN_ABORT] & abort:
            break
    mem[_ADC_BASE + _ADC_FCS] = 0
    drain_fifo(mem)


def drain_fifo(mem) -> None:
    """Read the ADC FIFO empty (at most its 8 entries)."""
    for _ in range(8):
        if mem[_ADC_BASE + _ADC_FCS] & _ADC_FCS_EMPTY:
            break
        mem[_ADC_BASE + _ADC_FIFO]
