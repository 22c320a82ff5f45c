"""Raw capture (RAW 0x8B, firmware/PROTOCOL.md "Raw capture"): the meter sends exactly the
samples it stored and the reference edges on the same timebase, a bounded number of frames per
service pass while revolutions keep flowing, and refuses what it cannot do with a message.

Drives the real firmware with the scripted board of tests/micropython/rtlib under CPython."""

from __future__ import annotations

import struct

import pytest
from rtlib.drive import Host, capture_scenario  # type: ignore[import-not-found]
from rtlib.fakeboard import FakeBoard  # type: ignore[import-not-found]

from runtrue_fw import capture as cap
from runtrue_fw import frames as fr
from runtrue_fw.meter import Meter

ONE = [(0.5, 30.0, 0.1, 200.0, 0.2)]
THREE = [(0.5, 30.0, 0.1, 200.0, 0.2), (0.25, 300.0, 0.05, 10.0, -0.1), (1.0, 181.0, 0.0, 0.0, 0.0)]


@pytest.mark.parametrize("channels", [ONE, THREE[:2], THREE], ids=["1ch", "2ch", "3ch"])
def test_capture_holds_exactly_the_samples_fed_and_the_edges_on_their_timebase(channels) -> None:
    raw, revs, per_pass, ack, shaft, edges = capture_scenario(channels=channels, n_capture=1000, request_at=640)
    assert ack == (fr.ACK_OK, "")
    b = raw["begin"]
    assert b["start_frame"] == 640 and b["n_frames"] == 1000 and b["n_ch"] == len(channels)
    assert raw["status"] == cap.END_OK
    hw = FakeBoard(channels_max=len(channels))
    expected = list(shaft.block(640, 1000, hw.counts_per_g, hw.zero_code))
    assert raw["codes"] == expected                      # bit for bit, interleaved as fed
    assert raw["indices"] == list(range(0, 1000, cap.frames_per_chunk(len(channels))))
    # every edge from one block length before the capture to its settle end, relative to frame 640
    want = [e - 640 * 256 for e in edges if -1000 * 256 <= e - 640 * 256 < (1000 + cap.SETTLE_FRAMES) * 256]
    assert raw["edges_q8"] == want and b["n_edges"] == len(want)


@pytest.mark.slow
def test_capture_is_sent_a_few_frames_per_pass_while_revolutions_keep_coming() -> None:
    raw, revs, per_pass, ack, shaft, edges = capture_scenario(channels=THREE, n_capture=4096, request_at=640,
                                                              n_frames=12000)
    assert raw["status"] == cap.END_OK and len(raw["codes"]) == 3 * 4096
    assert max(per_pass) <= cap.FRAMES_PER_PASS
    spr = 4000 * 60 / 2466.24
    assert len(revs) >= int(12000 / spr) - 4         # no revolution lost while the capture went out
    assert [r["rev"] for r in revs] == list(range(revs[0]["rev"], revs[0]["rev"] + len(revs)))


def test_capture_refused_before_start_with_a_bad_length_or_while_one_is_sent() -> None:
    hw = FakeBoard(channels_max=1)
    m = Meter(hw)
    host = Host(m, hw)

    def ack_of(payload: bytes) -> tuple[int, str]:
        host.command(cap.C_RAW, payload)
        p = [p for t, _, p in host.frames() if t == fr.T_ACK][-1]
        return p[3], p[4:].decode()

    assert ack_of(struct.pack("<H", 1000)) == (fr.ACK_BUSY, "START first: a capture takes samples while streaming")
    host.command(fr.C_START)
    host.frames()
    assert ack_of(b"\x10")[0] == fr.ACK_BAD_ARGUMENT
    assert ack_of(struct.pack("<H", 15))[0] == fr.ACK_BAD_ARGUMENT
    assert ack_of(struct.pack("<H", 4097))[0] == fr.ACK_BAD_ARGUMENT
    assert ack_of(struct.pack("<H", 4096))[0] == fr.ACK_OK
    assert ack_of(struct.pack("<H", 100)) == (fr.ACK_BUSY, "a capture is being sent")


def test_capture_ends_with_stopped_when_streaming_stops_during_it() -> None:
    raw, *_ = capture_scenario(n_capture=2000, request_at=640, stop_at=1280, n_frames=3000)
    assert raw["begin"] is None and raw["status"] == cap.END_STOPPED


def test_capture_ends_with_overwritten_when_the_ring_laps_it_before_it_is_sent() -> None:
    # blocks of 4096 frames between service passes: the ring (8192 frames) laps the capture
    raw, *_ = capture_scenario(n_capture=4096, request_at=4096, n_frames=4096 * 6, block=4096)
    assert raw["status"] == cap.END_OVERWRITTEN


def test_portable_copy_interleaves_the_ring_slots_like_the_board_delivers_them() -> None:
    from array import array
    ring = array("H", range(3 * 16))                    # slots of 16 frames, 3 channels
    body = bytearray(40)
    p = array("i", [5, 3, 14, 16, 2])                    # 5 frames from ring position 14 (wraps)
    cap.copy_frames_portable(ring, body, p)
    got = struct.unpack_from("<15H", body, 2)
    want = []
    for i in range(5):
        pos = (14 + i) % 16
        want += [pos, 16 + pos, 32 + pos]
    assert list(got) == want
