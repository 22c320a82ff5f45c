"""The host's side of a raw capture: parts put together, codes to g with INFO's calibration, and
every way a capture can go wrong reported with what to do."""

from __future__ import annotations

import struct

import numpy as np
import pytest

from runtrue.device.capture import CaptureError, RawAssembler
from runtrue.protocol.commands import raw_payload
from runtrue.protocol.errors import MessageError
from runtrue.protocol.messages import DeviceInfo
from runtrue.protocol.raw import RawPart, parse_raw

INFO = DeviceInfo(fw="t", board="sim", proto=2, channels_max=3, channel_mask=0b101, rate_hz=4000.0,
                  counts_per_g=[400.0, 300.0, 200.0], zero_code=[2048.0, 2000.0, 2100.0])


def _parts(n=6, codes=None, edges=(-300, 100, 500), status=0, cap_id=4):
    codes = codes or [2048 + i for i in range(2 * n)]
    head = struct.pack("<BBHB", cap_id, 0, 0, 0) + struct.pack("<IHBBH", 77, n, 2, 0b101, len(edges))
    parts = [head,
             struct.pack("<BBHB", cap_id, 2, 0, len(edges)) + struct.pack(f"<{len(edges)}i", *edges),
             struct.pack("<BBHB", cap_id, 1, 0, 4) + struct.pack("<8H", *codes[:8]),
             struct.pack("<BBHB", cap_id, 1, 4, n - 4) + struct.pack(f"<{2 * (n - 4)}H", *codes[8:]),
             struct.pack("<BBHB", cap_id, 3, 0, 0) + bytes([status])]
    return [parse_raw(p) for p in parts]


def test_codes_become_g_per_channel_and_edges_become_samples() -> None:
    a = RawAssembler()
    done = [a.feed(p) for p in _parts()]
    assert done[-1] is not None and all(d is None for d in done[:-1])
    cap = a.result(INFO)
    assert cap.channels == [0, 2] and cap.samples_g.shape == (2, 6)
    codes = np.array([2048 + i for i in range(12)], dtype=float).reshape(6, 2)
    assert np.allclose(cap.samples_g[0], (codes[:, 0] - 2048.0) / 400.0)
    assert np.allclose(cap.samples_g[1], (codes[:, 1] - 2100.0) / 200.0)
    assert list(cap.edges_samples) == [-300 / 256, 100 / 256, 500 / 256]
    assert cap.speed_rpm() == pytest.approx(60 * 4000 * 2 / (800 / 256))


def test_a_lost_samples_frame_says_to_capture_again() -> None:
    a = RawAssembler()
    for i, p in enumerate(_parts()):
        if i != 2:
            a.feed(p)
    with pytest.raises(CaptureError, match="lost on the link"):
        a.result(INFO)


@pytest.mark.parametrize("status, words", [(1, "overwritten"), (2, "stopped")])
def test_a_capture_the_meter_could_not_finish_says_why(status: int, words: str) -> None:
    a = RawAssembler()
    for p in _parts(status=status):
        a.feed(p)
    with pytest.raises(CaptureError, match=words):
        a.result(INFO)


def test_parts_of_another_capture_are_ignored() -> None:
    a = RawAssembler()
    a.feed(_parts(cap_id=4)[0])
    assert a.feed(RawPart(cap_id=5, kind=3, status=0)) is None


@pytest.mark.parametrize("payload", [b"\x01", struct.pack("<BBHB", 1, 0, 0, 0) + b"\x00" * 3,
                                     struct.pack("<BBHB", 1, 0, 0, 0) + struct.pack("<IHBBH", 0, 5, 2, 1, 0),
                                     struct.pack("<BBHB", 1, 1, 0, 1) + b"\x00",
                                     struct.pack("<BBHB", 1, 2, 0, 2) + b"\x00" * 4,
                                     struct.pack("<BBHB", 1, 3, 0, 0), struct.pack("<BBHB", 1, 9, 0, 0)])
def test_malformed_raw_parts_are_refused_with_a_message(payload: bytes) -> None:
    with pytest.raises(MessageError):
        parse_raw(payload)


def test_capture_length_outside_16_to_4096_is_refused_before_sending() -> None:
    assert raw_payload(4096) == b"\x00\x10"
    with pytest.raises(ValueError, match="16 to 4096"):
        raw_payload(15)
