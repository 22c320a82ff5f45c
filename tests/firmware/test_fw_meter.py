"""The Meter as the host sees it: commands, revolutions, flags, status, self-test, REPL.

Drives the real firmware logic with a scripted board (tests/micropython/rtlib), under CPython,
and finishes each REV's fit with the host's runtrue.device.revfit, as the device client does.
Phase convention: PROTOCOL.md -- amp*cos(k*phi - lag) is reported as amp*e^{+j*lag}.
"""

from __future__ import annotations

import cmath
import json
import math
import struct

import pytest
from rtlib import drive  # type: ignore[import-not-found]
from rtlib.drive import Host, stream  # type: ignore[import-not-found]
from rtlib.fakeboard import FakeBoard, Shaft  # type: ignore[import-not-found]

from runtrue.device import revfit
from runtrue.protocol.messages import RevStats
from runtrue_fw import frames as fr
from runtrue_fw.acquisition import MAX_REV_SAMPLES, MIN_REV_SAMPLES
from runtrue_fw.meter import Meter

SPR = 97.3125                       # samples per revolution: not whole, exact in 1/256 sample
RPM = 4000 * 60 / SPR               # 2466.24 rpm at 4 kHz


def _fitted(raw: list[dict], m: Meter) -> list[dict]:
    """The host's fit of the meter's REV sums (revfit), in the old per-channel dict form."""
    settings = revfit.FitSettings(m.rate_hz, tuple(m._counts_per_g), m._adc_offset, m._line_inc, m._round_robin)
    out = []
    for r in raw:
        st = RevStats(r["rev"], r["length_q8"], r["n_samples"], r["flags"], r["channel_mask"], r["first_off_q8"],
                      tuple(tuple(c) for c in r["sums"]))
        rev = revfit.revolution(st, settings)
        out.append({"rev": rev.rev, "period_us": rev.period_us, "n_samples": rev.n_samples, "flags": r["flags"],
                    "fit_flags": rev.flags, "channel_mask": rev.channel_mask,
                    "channels": [{"h1": (h1.real, h1.imag), "h2": (h2.real, h2.imag), "rms": rms}
                                 for h1, h2, rms in zip(rev.h1, rev.h2, rev.rms_g)]})
    return out


def revs_of(frames: list, m: Meter) -> list[dict]:
    return _fitted(drive.revs_of(frames), m)


def scenario(**kw) -> list[dict]:
    raw, m = drive.scenario(with_meter=True, **kw)
    return _fitted(raw, m)


def _phasor(amp: float, lag_deg: float) -> complex:
    return cmath.rect(amp, math.radians(lag_deg))


def _started(**board) -> tuple[Meter, FakeBoard, Host]:
    hw = FakeBoard(**board)
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_START)
    host.frames()
    return m, hw, host


def _acks(frames: list) -> list[tuple[int, int, int, str]]:
    out = []
    for t, _, p in frames:
        if t == fr.T_ACK:
            seq, ctype, result = struct.unpack_from(fr.ACK_FMT, p)
            out.append((seq, ctype, result, p[4:].decode()))
    return out


# ---- measurement --------------------------------------------------------------------------

def test_revolutions_carry_the_true_1x_and_2x_at_high_gain() -> None:
    chans = [(0.5, 30.0, 0.1, 200.0, 0.2), (0.25, 300.0, 0.05, 10.0, -0.1), (1.0, 181.0, 0.0, 0.0, 0.0)]
    revs = scenario(rpm=RPM, channels=chans, counts_per_g=1500.0, n_frames=1200)
    assert len(revs) == 12
    # FIRST, then "speed not yet confirmed" (edges.py: two agreeing turns lock), then clean
    assert [r["flags"] for r in revs[:2]] == [fr.F_FIRST, fr.F_SPEED_JUMP]
    assert all(r["flags"] == 0 for r in revs[2:])
    for r in revs:
        assert r["rev"] == revs.index(r)
        assert r["period_us"] == pytest.approx(SPR / 4000 * 1e6, rel=1e-7)
        assert r["n_samples"] in (97, 98)
        for ch, (a1, l1, a2, l2, _dc) in zip(r["channels"], chans):
            # 12-bit codes at 1,500 counts/g: rounding leaves ~3e-5 g rms on each phasor
            assert complex(*ch["h1"]) == pytest.approx(_phasor(a1, l1), abs=2e-4)
            assert complex(*ch["h2"]) == pytest.approx(_phasor(a2, l2), abs=2e-4)
            # RMS over one revolution's samples: not a whole number of samples, so within ~1/n
            assert ch["rms"] == pytest.approx(math.sqrt((a1 ** 2 + a2 ** 2) / 2), rel=0.01)


def test_12_bit_quantisation_leaves_only_small_errors() -> None:
    revs = scenario(rpm=1234.5, n_frames=2000)
    for r in revs:
        h1 = complex(*r["channels"][0]["h1"])
        assert abs(h1) == pytest.approx(0.5, abs=2e-3)
        assert math.degrees(cmath.phase(h1)) == pytest.approx(30.0, abs=0.3)


def test_round_robin_conversion_delay_is_corrected_per_channel() -> None:
    chans = [(1.0, 90.0, 0.0, 0.0, 0.0)] * 3
    revs = scenario(rpm=RPM, channels=chans, counts_per_g=1500.0,
                    round_robin=True, n_frames=600)
    for r in revs:
        for ch in r["channels"]:
            assert complex(*ch["h1"]) == pytest.approx(1j, abs=2e-4)


def test_uncorrected_round_robin_would_shift_the_last_channel_by_its_conversion_delay() -> None:
    # the board samples round robin but (wrongly) does not say so: channel 2 lags 2/3 sample
    hw = FakeBoard(channels_max=3, counts_per_g=[1500.0] * 3)
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_START)
    sh = Shaft(4000, RPM, [(1.0, 90.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375, round_robin=True)
    stream(m, hw, sh, 600)
    r = revs_of(host.frames(), m)[3]
    lag2 = math.degrees(cmath.phase(complex(*r["channels"][2]["h1"])))
    assert lag2 == pytest.approx(90.0 - 360.0 * (2 / 3) / SPR, abs=0.02)


@pytest.mark.slow
def test_edges_fed_before_or_after_their_samples_give_the_same_revolutions() -> None:
    out = []
    for late in (0, 3):
        m, hw, host = _started()
        sh = Shaft(4000, RPM, [(0.5, 30.0, 0.1, 200.0, 0.2)] * 3, t0_samples=0.375)
        stream(m, hw, sh, 1000, edges_late=late)
        out.append(revs_of(host.frames(), m))
    assert out[0] == out[1] and len(out[0]) == 9


# ---- flags ---------------------------------------------------------------------------------

def test_clipping_is_flagged_on_the_channel_that_clipped_only() -> None:
    chans = [(0.5, 0.0, 0.0, 0.0, 0.0), (6.0, 0.0, 0.0, 0.0, 0.0), (0.5, 0.0, 0.0, 0.0, 0.0)]
    revs = scenario(rpm=RPM, channels=chans, n_frames=500)
    for r in revs:
        assert r["flags"] & ~(fr.F_FIRST | fr.F_SPEED_JUMP) == fr.F_CLIPPED | (fr.F_CLIP_CH0 << 1)


def test_dropped_samples_flag_only_the_revolution_they_fell_in() -> None:
    m, hw, host = _started()
    sh = Shaft(4000, RPM, [(0.5, 30.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375)
    stream(m, hw, sh, 1000, block=16, drop_at=500)
    revs = revs_of(host.frames(), m)
    hit = [r["rev"] for r in revs if r["flags"] & fr.F_DROPPED_SAMPLES]
    # frames 496..511 hold the drop; revolution 5 spans samples 487-584
    assert hit == [5]


def test_extra_and_missing_pulses_are_flagged_and_the_rest_stay_clean() -> None:
    m, hw, host = _started()
    sh = Shaft(4000, RPM, [(0.5, 30.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375)
    edges = sh.edges_q8(2000)
    edges.insert(4, edges[3] + 40 * 256)      # a second mark 40 samples after edge 3
    del edges[10]                              # a missed pulse
    stream(m, hw, sh, 2000, edges=edges)
    revs = revs_of(host.frames(), m)
    flags = [r["flags"] for r in revs]
    assert flags[3] == fr.F_EXTRA_PULSE
    assert flags[8] == fr.F_MISSING_PULSE and revs[8]["n_samples"] in (194, 195)
    assert len(revs) == 19 and flags.count(0) == 15     # all but the two locking, the extra and the missing
    for r in revs:
        if r["flags"] == 0:
            assert complex(*r["channels"][0]["h1"]) == pytest.approx(_phasor(0.5, 30.0), abs=3e-3)


def test_revolution_longer_than_the_buffer_is_reported_without_phasors() -> None:
    rpm = 4000 * 60 / (MAX_REV_SAMPLES + 700)      # slower than the slowest supported speed
    revs = scenario(rpm=rpm, n_frames=16000, block=256)
    assert len(revs) == 3
    for r in revs:
        assert r["flags"] & fr.F_NO_FIT
        assert r["n_samples"] > MAX_REV_SAMPLES
        assert all(c["h1"] == (0.0, 0.0) for c in r["channels"])


def test_revolution_with_fewer_than_the_minimum_samples_is_reported_without_sums() -> None:
    revs = scenario(rate_hz=500, rpm=500 * 60 / (MIN_REV_SAMPLES - 1.5), n_frames=300)
    assert revs and all(r["flags"] & fr.F_NO_FIT for r in revs)
    assert all(r["n_samples"] < MIN_REV_SAMPLES for r in revs)


def test_shortest_revolution_is_summed_and_fitted() -> None:
    revs = scenario(rpm=4000 * 60 / (MIN_REV_SAMPLES + 0.5), n_frames=600)
    clean = [r for r in revs if r["flags"] == 0]
    assert len(clean) > 20
    for r in clean:
        assert complex(*r["channels"][0]["h1"]) == pytest.approx(_phasor(0.5, 30.0), abs=5e-3)


@pytest.mark.slow
def test_slowest_supported_revolution_is_still_fitted() -> None:
    rpm = 4000 * 60 / (MAX_REV_SAMPLES - 1.5)
    revs = scenario(rpm=rpm, n_frames=3 * MAX_REV_SAMPLES + 1400, block=256)
    assert len(revs) == 3
    for r in revs:
        assert not r["flags"] & fr.F_NO_FIT
        assert complex(*r["channels"][0]["h1"]) == pytest.approx(_phasor(0.5, 30.0), abs=2e-3)


# ---- commands ------------------------------------------------------------------------------

def test_identify_answers_info_then_ack() -> None:
    hw = FakeBoard(channels_max=2)
    m = Meter(hw)
    host = Host(m, hw)
    seq = host.command(fr.C_IDENTIFY)
    frames = host.frames()
    assert [t for t, _, _ in frames] == [fr.T_INFO, fr.T_INFO, fr.T_ACK]
    parts = [json.loads(p) for t, _, p in frames if t == fr.T_INFO]
    assert [(p["part"], p["parts"]) for p in parts] == [(0, 2), (1, 2)]
    assert all(len(p) <= fr.MAX_PAYLOAD for t, _, p in frames)
    info = {**parts[0], **parts[1]}
    assert info["proto"] == 2 and info["board"] == "fake" and info["channels_max"] == 2
    assert info["channel_mask"] == 0b11 and info["rate_hz"] == 4000.0
    assert info["edge"] == "rising" and info["streaming"] is False
    assert info["counts_per_g"] == [400.0, 400.0] and info["zero_code"] == [2048.0, 2048.0]
    assert info["basis"] == "q14c1024h4l2" and info["adc_offset"] == 2048 and info["line_hz"] == 50
    assert info["line_inc"] == round(50 / 4000 * 2**30) and info["fe"] == [1.834e-4, 1.504e-10]
    assert info["max_rpm"] == 10000 and info["min_rpm"] == 60
    assert _acks(frames) == [(seq, fr.C_IDENTIFY, fr.ACK_OK, "")]


def test_settings_are_checked_and_confirmed_with_info() -> None:
    hw = FakeBoard(channels_max=3)
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_SET_RATE, struct.pack("<I", 20000))
    host.command(fr.C_SET_RATE, struct.pack("<I", 2500))
    host.command(fr.C_SET_CHANNELS, b"\x00")
    host.command(fr.C_SET_CHANNELS, b"\x09")
    host.command(fr.C_SET_CHANNELS, b"\x05")
    host.command(fr.C_SET_EDGE, b"\x02")
    host.command(fr.C_SET_EDGE, b"\x01")
    frames = host.frames()
    results = [(a[1], a[2]) for a in _acks(frames)]
    assert results == [(fr.C_SET_RATE, 1), (fr.C_SET_RATE, 0), (fr.C_SET_CHANNELS, 1),
                       (fr.C_SET_CHANNELS, 1), (fr.C_SET_CHANNELS, 0), (fr.C_SET_EDGE, 1),
                       (fr.C_SET_EDGE, 0)]
    assert "20000" in _acks(frames)[0][3] and "500-10000" in _acks(frames)[0][3]
    infos = [json.loads(p) for t, _, p in frames if t == fr.T_INFO]
    last_info = {**infos[-2], **infos[-1]}
    assert last_info["rate_hz"] == 2500.0 and last_info["channel_mask"] == 5
    assert last_info["edge"] == "falling"
    assert (hw.mask, hw.rate_hz, hw.falling) == (5, 2500.0, True)


def test_settings_while_streaming_are_refused_as_busy() -> None:
    m, hw, host = _started()
    host.command(fr.C_SET_RATE, struct.pack("<I", 2000))
    assert _acks(host.frames())[0][2] == fr.ACK_BUSY
    assert hw.rate_hz == 4000.0


def test_stop_ends_the_stream_and_start_restarts_the_count() -> None:
    m, hw, host = _started()
    sh = Shaft(4000, RPM, [(0.5, 30.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375)
    stream(m, hw, sh, 500)
    host.command(fr.C_STOP)
    stream(m, hw, sh, 500)
    frames = host.frames()
    # five turns completed, but each is held a quarter turn for late glitches: STOP drops the last
    assert frames[-1][0] == fr.T_ACK and len(drive.revs_of(frames)) == 4
    assert hw.stopped == 1
    host.command(fr.C_START)
    stream(m, hw, Shaft(4000, RPM, [(0.5, 30.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375), 300)
    revs = revs_of(host.frames(), m)
    assert revs[0]["rev"] == 0 and revs[0]["flags"] == fr.F_FIRST


@pytest.mark.slow
def test_status_comes_about_once_a_second_while_streaming() -> None:
    m, hw, host = _started()
    hw.dropped = 0
    sh = Shaft(4000, RPM, [(0.5, 30.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375)
    stream(m, hw, sh, 4000 * 3 + 640, block=64, ms_per_block=16)     # 3.16 s of samples
    status = [struct.unpack(fr.STATUS_FMT, p) for t, _, p in host.frames() if t == fr.T_STATUS]
    assert len(status) == 3
    uptime, cpu, dropped, rejected, lost, revs_sent, overflows, streaming = status[-1]
    assert cpu == 123 and dropped == 0 and rejected == 0 and streaming == 1 and overflows == 0
    assert lost == 0
    assert uptime == 3024 and [s[0] for s in status] == [1008, 2016, 3024]
    assert 118 <= revs_sent <= 125          # 3.0 s at 41.1 rev/s


def test_status_command_answers_at_once() -> None:
    hw = FakeBoard()
    m = Meter(hw)
    host = Host(m, hw)
    hw.ms += 5000
    seq = host.command(fr.C_STATUS)
    frames = host.frames()
    assert [t for t, _, _ in frames] == [fr.T_STATUS, fr.T_ACK]
    assert struct.unpack(fr.STATUS_FMT, frames[0][2])[0] == 5000
    assert _acks(frames)[0][:3] == (seq, fr.C_STATUS, 0)


def test_unknown_command_bad_payload_and_corrupt_frames_are_answered() -> None:
    hw = FakeBoard()
    m = Meter(hw)
    host = Host(m, hw)
    host.command(0x9A)
    host.command(fr.C_START, b"\x01")
    bad = bytearray(host.wire(fr.C_STOP, b""))
    bad[3] ^= 0x40
    m.feed_command_bytes(bytes(bad))
    acks = _acks(host.frames())
    assert [(a[1], a[2]) for a in acks] == [(0x9A, fr.ACK_UNKNOWN_COMMAND),
                                            (fr.C_START, fr.ACK_BAD_ARGUMENT), (0, fr.ACK_BAD_FRAME)]
    assert acks[2][0] == 0xFFFF
    assert not m.streaming


def test_repl_command_acknowledges_then_hands_over_to_the_repl() -> None:
    m, hw, host = _started()
    host.command(fr.C_REPL)
    assert _acks(host.frames())[0][2] == fr.ACK_OK
    assert hw.repl == 1 and hw.stopped == 1 and m.repl_requested and not m.streaming


def _selftest(chans, noise=1.0) -> tuple[list, FakeBoard, list]:
    hw = FakeBoard(channels_max=len(chans))
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_SELFTEST)
    sh = Shaft(4000, 1500, chans, t0_samples=0.375, noise_codes=noise)
    stream(m, hw, sh, 4400, block=100, ms_per_block=25)
    frames = host.frames()
    parts = [json.loads(p) for t, _, p in frames if t == fr.T_SELFTEST]
    return parts, hw, frames


def test_selftest_reports_every_check_after_about_a_second_then_acks() -> None:
    parts, hw, frames = _selftest([(0.5, 30.0, 0.1, 200.0, 0.2), (0.25, 300.0, 0.0, 0.0, -0.1)])
    assert frames[-1][0] == fr.T_ACK and _acks(frames)[-1][1:3] == (fr.C_SELFTEST, 0)
    assert [p["part"] for p in parts] == list(range(parts[0]["parts"]))
    checks = {c["name"]: c for p in parts for c in p["checks"]}
    assert set(checks) == {"sample_rate", "dropped_samples", "cpu_load", "ch0_signal",
                           "ch1_signal", "reference"}
    assert all(p["pass"] for p in parts)
    assert checks["sample_rate"]["value"] == pytest.approx(4000, rel=0.05)
    assert checks["reference"]["value"] == pytest.approx(1500, rel=1e-3)
    assert checks["ch0_signal"]["value"] == pytest.approx(math.sqrt(0.13), rel=0.02)
    assert hw.started == 1 and hw.stopped == 1          # sampled only for the test
    assert not drive.revs_of(frames)                           # and streamed nothing


def test_selftest_fails_a_flat_channel_and_says_why() -> None:
    parts, _, _ = _selftest([(0.5, 30.0, 0.0, 0.0, 0.0), (0.0, 0.0, 0.0, 0.0, 0.0)], noise=0.0)
    checks = {c["name"]: c for p in parts for c in p["checks"]}
    assert checks["ch1_signal"]["pass"] is False and "flat" in checks["ch1_signal"]["note"]
    assert checks["ch0_signal"]["pass"] is True
    assert all(p["pass"] is False for p in parts)


from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@pytest.mark.slow
@settings(max_examples=150, deadline=None)
@given(st.lists(st.one_of(st.binary(max_size=40),
                          st.tuples(st.integers(0x80, 0x8A), st.binary(max_size=6))), max_size=12))
def test_any_command_bytes_are_answered_and_never_crash_the_meter(items) -> None:
    hw = FakeBoard()
    m = Meter(hw)
    host = Host(m, hw)
    for item in items:
        if isinstance(item, bytes):
            m.feed_command_bytes(item)
        elif item[0] != fr.C_REPL:
            host.command(item[0], item[1])
    m.feed_command_bytes(b"\x00")
    seq = host.command(fr.C_STATUS)
    acks = _acks(host.frames())         # every frame the meter wrote decodes (CRC, COBS)
    assert acks[-1][:3] == (seq, fr.C_STATUS, fr.ACK_OK)
    assert all(a[2] in (0, 1, 2, 3, 4) for a in acks)


def test_set_line_chooses_the_line_tone_and_is_busy_while_streaming() -> None:
    hw = FakeBoard()
    m = Meter(hw)
    host = Host(m, hw)
    host.command(fr.C_SET_LINE, b"\x3c")
    host.command(fr.C_SET_LINE, b"\x37")
    host.command(fr.C_SET_LINE, b"")
    frames = host.frames()
    assert [(a[1], a[2]) for a in _acks(frames)] == [(fr.C_SET_LINE, 0), (fr.C_SET_LINE, 1), (fr.C_SET_LINE, 1)]
    infos = [json.loads(p) for t, _, p in frames if t == fr.T_INFO]
    info = {**infos[0], **infos[1]}
    assert info["line_hz"] == 60 and info["line_inc"] == round(60 / 4000 * 2**30)
    host.command(fr.C_SET_LINE, b"\x00")
    merged: dict = {}
    for t, _, p in host.frames():
        if t == fr.T_INFO:
            merged.update(json.loads(p))
    assert merged["line_hz"] == 0 and merged["line_inc"] == 0
    host.command(fr.C_START)
    host.command(fr.C_SET_LINE, b"\x32")
    assert _acks(host.frames())[-1][2] == fr.ACK_BUSY


def test_counters_wrap_below_2_30_and_stay_small_ints() -> None:
    m, hw, host = _started()
    m._rev_index = (1 << 30) - 1
    m._revs_sent = (1 << 30) - 1
    sh = Shaft(4000, RPM, [(0.5, 30.0, 0.0, 0.0, 0.0)] * 3, t0_samples=0.375)
    stream(m, hw, sh, 1000)
    revs = drive.revs_of(host.frames())
    assert [r["rev"] for r in revs[:3]] == [(1 << 30) - 1, 0, 1]     # wraps at 2**30 (PROTOCOL.md)
    assert all(v < 1 << 30 for v in m.status_fields())
    assert m.status_fields()[5] == len(revs) - 1                  # revs_sent wrapped too


@pytest.mark.slow
@settings(max_examples=40, deadline=None)
@given(st.integers(1, 3), st.integers(0, 2900), st.integers(1, 900), st.sampled_from([20.3, 97.3125, 333.7]))
def test_an_overrun_of_any_length_and_position_flags_every_revolution_it_touches(nch, drop_first, drop_len, spr) -> None:
    revs, edges = drive.run_with_overrun(nch, drop_first, drop_len, spr)
    assert revs
    for r in revs:
        e0, e1 = edges[r["rev"]] / 256, edges[r["rev"] + 1] / 256
        touched = e0 < drop_first + drop_len and e1 > drop_first
        assert bool(r["flags"] & fr.F_DROPPED_SAMPLES) == touched, (r["rev"], r["flags"])
