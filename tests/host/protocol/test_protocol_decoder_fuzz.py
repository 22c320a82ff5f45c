"""Property-based fuzzing of the stream decoder: garbage, truncation, bit flips, dropped bytes
and split reads.  It never raises, never hands out a frame that was not sent, and decodes the
good frame that follows the damage."""

from __future__ import annotations

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from runtrue.protocol.frames import MAX_PAYLOAD, Frame, FrameDecoder, encode_frame

pytestmark = pytest.mark.slow   # property tests: hundreds of generated cases

FUZZ = settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])

frames_st = st.builds(
    lambda t, s, p: Frame(2, t, s, p),
    st.integers(0, 255),
    st.integers(0, 0xFFFF),
    st.binary(max_size=MAX_PAYLOAD),
)


def wire(frame: Frame) -> bytes:
    return encode_frame(frame.type, frame.seq, frame.payload)


def feed_in_pieces(decoder: FrameDecoder, data: bytes, cuts: list[int]) -> list[Frame]:
    out: list[Frame] = []
    points = sorted({c % (len(data) + 1) for c in cuts}) + [len(data)]
    start = 0
    for point in points:
        out += decoder.feed(data[start:point])
        start = point
    return out


@FUZZ
@given(st.lists(frames_st, max_size=6), st.lists(st.integers(0, 10_000), max_size=12))
def test_any_split_of_good_frames_decodes_them_all_in_order(frames: list[Frame], cuts: list[int]) -> None:
    decoder = FrameDecoder()
    stream = b"".join(wire(f) for f in frames)
    assert feed_in_pieces(decoder, stream, cuts) == frames
    assert decoder.errors == 0


@FUZZ
@given(st.binary(max_size=600), frames_st, frames_st, st.lists(st.integers(0, 10_000), max_size=6))
def test_garbage_before_frames_is_survived(garbage: bytes, a: Frame, b: Frame, cuts: list[int]) -> None:
    decoder = FrameDecoder()
    out = feed_in_pieces(decoder, garbage + wire(a) + wire(b), cuts)
    # b always comes through; a too unless the garbage ran into it without a delimiter.
    assert out[-1] == b
    assert all(f in (a, b) for f in out)
    if garbage.endswith(b"\x00") or not garbage:
        assert out[-2:] == [a, b]


@FUZZ
@given(frames_st, frames_st, frames_st, st.data())
def test_a_flipped_bit_never_yields_a_corrupted_frame(a: Frame, b: Frame, c: Frame, data: st.DataObject) -> None:
    stream = bytearray(wire(a) + wire(b) + wire(c))
    position = data.draw(st.integers(0, len(wire(a)) - 1), label="byte in a")
    stream[position] ^= 1 << data.draw(st.integers(0, 7), label="bit")
    decoder = FrameDecoder()
    out = decoder.feed(bytes(stream))
    assert a not in out or a in (b, c)  # a was damaged: never delivered as sent...
    assert all(f in (b, c) for f in out)  # ...nor as anything else
    assert out[-1] == c
    assert decoder.errors >= 1


@FUZZ
@given(frames_st, frames_st, frames_st, st.data())
def test_truncated_frame_is_dropped_and_decoding_resumes(a: Frame, b: Frame, c: Frame, data: st.DataObject) -> None:
    # A frame cut short has no delimiter, so it runs into the next one and both are dropped
    # (COBS framing can do no better); decoding resumes with the frame after.
    wa = wire(a)
    keep = data.draw(st.integers(1, len(wa) - 2), label="bytes kept")
    decoder = FrameDecoder()
    out = decoder.feed(wa[:keep] + wire(b) + wire(c))
    assert out == [c]
    assert decoder.errors == 1


@FUZZ
@given(frames_st, frames_st, st.data())
def test_dropped_byte_loses_one_frame_only(a: Frame, b: Frame, data: st.DataObject) -> None:
    wa = wire(a)
    gone = data.draw(st.integers(0, len(wa) - 2), label="dropped byte")  # not the delimiter
    decoder = FrameDecoder()
    out = decoder.feed(wa[:gone] + wa[gone + 1 :] + wire(b))
    assert out == [b]
    assert decoder.errors == 1


@FUZZ
@given(frames_st, frames_st, st.data())
def test_port_opened_mid_frame_resynchronises(a: Frame, b: Frame, data: st.DataObject) -> None:
    wa = wire(a)
    start = data.draw(st.integers(1, len(wa) - 1), label="first byte seen")
    decoder = FrameDecoder()
    assert decoder.feed(wa[start:] + wire(b)) == [b]


@FUZZ
@given(st.lists(st.binary(max_size=400), max_size=8))
def test_pure_noise_never_crashes_and_never_yields_a_frame(chunks: list[bytes]) -> None:
    decoder = FrameDecoder()
    for chunk in chunks:
        assert decoder.feed(chunk) == []


@FUZZ
@given(st.integers(0, 0xFFFF), st.lists(st.integers(0, 40), min_size=1, max_size=20))
def test_lost_frame_count_equals_the_frames_skipped(first: int, gaps: list[int]) -> None:
    decoder = FrameDecoder()
    seq = first
    decoder.feed(encode_frame(0x06, seq))
    for gap in gaps:
        seq = (seq + gap + 1) % 65536
        decoder.feed(encode_frame(0x06, seq))
    assert decoder.lost_frames == sum(gaps)
