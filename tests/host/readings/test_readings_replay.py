"""Replay recorded meter traffic (tests/fixtures/, simulator captures for now; see its README)
through the decoder, the device client and the vector average."""

from __future__ import annotations

import cmath
import json
import math
from pathlib import Path

import pytest

from runtrue.device import MeterClient, revfit
from runtrue.protocol.admit import counts
from runtrue.protocol.frames import FrameDecoder
from runtrue.protocol.messages import DeviceInfo, InfoAssembler, InfoPart, RevStats, parse_message
from runtrue.readings import vector_average
from runtrue.transport.base import Transport

FIXTURES = Path(__file__).resolve().parents[2] / "fixtures"
CAPTURES = sorted(FIXTURES.glob("*_rx.bin"))


class ReplayTransport(Transport):
    """Hands out a capture in uneven pieces, as a serial port would.  Like the meter, it says
    nothing ahead of the host: the k-th ACK (and what follows it) only after the k-th command."""

    def __init__(self, data: bytes) -> None:
        self.data = data
        self.pos = 0
        self.writes = 0
        self.name = "replay"
        self.sizes = [1, 7, 64, 3, 200, 33]
        self.ack_starts = []
        start = 0
        for run in data.split(b"\x00")[:-1]:
            frames = FrameDecoder().feed(run + b"\x00")
            if frames and frames[0].type == 0x04:
                self.ack_starts.append(start)
            start += len(run) + 1

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        allowed = self.ack_starts[self.writes] if self.writes < len(self.ack_starts) else len(self.data)
        size = min(max_bytes, self.sizes[self.pos % len(self.sizes)], allowed - self.pos)
        chunk = self.data[self.pos : self.pos + size]
        self.pos += len(chunk)
        return chunk

    def write(self, data: bytes) -> None:
        self.writes += 1


def _vec(d: dict) -> complex:
    return cmath.rect(d["amp"], math.radians(d["phase"]))


def test_there_are_captures() -> None:
    assert len(CAPTURES) >= 2


@pytest.mark.parametrize("capture", CAPTURES, ids=lambda p: p.stem)
def test_capture_decodes_cleanly_and_averages_to_the_truth(capture: Path) -> None:
    meta = json.loads(capture.with_suffix(".json").read_text())
    decoder = FrameDecoder()
    messages = [parse_message(f) for f in decoder.feed(capture.read_bytes())]
    assert decoder.errors == 0 and decoder.lost_frames == 0
    joiner = InfoAssembler()
    joined = [joiner.feed(m) for m in messages if isinstance(m, InfoPart)]
    info = next(i for i in joined + [m for m in messages if isinstance(m, DeviceInfo)] if i is not None)
    assert info.proto == 2 and info.board == meta["board"]
    revs = [revfit.revolution_from_info(m, info) for m in messages if isinstance(m, RevStats)]
    assert sum(counts(r) for r in revs) >= meta["usable_revs"]
    reading = vector_average(revs)
    assert len(reading.channels) == len(meta["expected"])
    for ch, truth in zip(reading.channels, meta["expected"]):
        assert abs(ch.mean - _vec(truth)) < 4 * ch.spread_g, (ch, truth)


@pytest.mark.parametrize("capture", CAPTURES, ids=lambda p: p.stem)
def test_capture_replays_through_the_device_client(capture: Path) -> None:
    meta = json.loads(capture.with_suffix(".json").read_text())
    client = MeterClient(ReplayTransport(capture.read_bytes()), "replay", command_timeout_s=0.5)
    assert client.identify().board == meta["board"]  # ACK for command seq 0 is in the capture
    client.start()  # ...and for seq 1
    revs = client.revolutions(meta["usable_revs"], timeout_s=0.5, usable_only=True)
    reading = vector_average(revs)
    for ch, truth in zip(reading.channels, meta["expected"]):
        assert abs(ch.mean - _vec(truth)) < 4 * ch.spread_g
    assert client.lost_frames == 0
