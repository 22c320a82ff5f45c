"""The real firmware Meter on the RP2040 board module, on a fake chip: a synthetic machine whose
three channels have known 1x phase lags is sampled the way the ADC round robin samples it
(conversion j at t_start + (j + 1) P), its reference edges are stamped in microseconds by the
edge interrupt, and the REV frames that come out over "USB" must carry those lags.  This checks
the board's timebase arithmetic (edge position in 1/256 frame), the ring-to-Meter path and the
Meter/board contract end to end.  It cannot check the hardware assumptions themselves (see
hardware/BRINGUP.md, step 9)."""

from __future__ import annotations

import cmath
import math

import pytest
from rp2040_fake import Rig

from runtrue.device import revfit
from runtrue.protocol.commands import (
    CMD_IDENTIFY,
    CMD_SET_CHANNELS,
    CMD_SET_RATE,
    CMD_START,
    CommandEncoder,
    set_channels_payload,
    set_rate_payload,
)
from runtrue.protocol.frames import FrameDecoder
from runtrue.protocol.messages import DeviceInfo, InfoAssembler, InfoPart, RevStats, parse_message
from runtrue_fw.rp2040_timebase import EDGE_LATENCY_US, START_READ_OFFSET_US

LAGS_DEG = (30.0, 100.0, 250.0)
AMP_G = 0.5
SPEED_HZ = 25.0  # 1500 rpm
RATE_HZ = 4000


def test_meter_on_the_board_reports_the_true_1x_lag_of_every_channel(rig: Rig) -> None:
    from runtrue_fw.meter import Meter

    board = rig.board()
    meter = Meter(board)
    enc = CommandEncoder()
    for cmd, payload in ((CMD_IDENTIFY, b""), (CMD_SET_RATE, set_rate_payload(RATE_HZ)),
                         (CMD_SET_CHANNELS, set_channels_payload(0b111)), (CMD_START, b"")):
        rig.host.to_board += enc.encode(cmd, payload)[1]
    board.poll(meter)
    meter.service()
    assert board._streaming, "START reached the board"

    # The chip: conversion j of the round robin is sampled at t_start + (j + 1) * P.
    # The chip as measured: the ADC starts START_READ_OFFSET_US after the board read its start time,
    # and the hard IRQ stamps an edge EDGE_LATENCY_US after the mark passed; the board takes both
    # back, so the residual is the stamp's whole-microsecond rounding (firmware/README.md, timing).
    t_start_us = rig.clock.now_us + START_READ_OFFSET_US  # the ADC's real start
    latency_us = EDGE_LATENCY_US
    period_cycles = board._period_q8 / 256.0
    conv_us = period_cycles / 48.0
    count_addr = 0x50000000 + 0x40 * rig.dmas[0].channel + 0x08
    ring = board._ring
    edge_offset_us = 3_137.0  # the mark passes the sensor first at this time after START
    rev_us = 1e6 / SPEED_HZ
    j = 0
    next_edge = 0
    end_us = t_start_us + 14 * rev_us
    now = float(t_start_us)
    while now < end_us:
        now += 2_000.0  # the main loop runs every ~2 ms
        # edges that happened up to now, stamped by the hard IRQ
        while t_start_us + edge_offset_us + next_edge * rev_us + latency_us <= now:
            rig.clock.now_us = round(t_start_us + edge_offset_us + next_edge * rev_us + latency_us)
            board._on_edge(None)
            next_edge += 1
        # conversions completed up to now, written by the DMA
        while t_start_us + (j + 1) * conv_us <= now:
            t = (j + 1) * conv_us - edge_offset_us
            ch = j % 3
            a = AMP_G * math.cos(2 * math.pi * SPEED_HZ * t * 1e-6 - math.radians(LAGS_DEG[ch]))
            ring[j % len(ring)] = int(round(2048 + 409.6 * a))
            rig.mem.values[count_addr] -= 1
            j += 1
        rig.clock.now_us = int(now)
        board.poll(meter)
        meter.service()

    decoder = FrameDecoder()
    messages = [parse_message(f) for f in decoder.feed(bytes(rig.host.from_board))]
    joiner = InfoAssembler()
    info = [joiner.feed(m) for m in messages if isinstance(m, InfoPart)] + [m for m in messages if isinstance(m, DeviceInfo)]
    info = [i for i in info if i is not None]
    assert info and info[-1].board == "rp2040" and info[-1].channels_max == 3 and info[-1].round_robin
    revs = [revfit.revolution_from_info(m, info[-1]) for m in messages if isinstance(m, RevStats)]
    revs = [r for r in revs if r.usable]
    assert len(revs) >= 8
    for rev in revs:
        assert rev.speed_rpm == pytest.approx(SPEED_HZ * 60, rel=1e-4)
        for ch, h in enumerate(rev.h1):
            # the cosine above is the signal at the ADC pin; the host divides the front end's
            # response (INFO's fe) out, so put it back to compare
            lag = (math.degrees(cmath.phase(h)) + rev.fe_lag_deg) % 360
            assert rev.fe_lag_deg > 0.5
            assert abs(h) * rev.fe_gain == pytest.approx(AMP_G, rel=0.01)
            assert lag == pytest.approx(LAGS_DEG[ch], abs=0.3), f"channel {ch}"
