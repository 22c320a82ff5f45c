"""MeterClient against a fake meter that follows firmware/PROTOCOL.md."""

from __future__ import annotations

import pytest
from fake_meter import TRUE_1X, FakeMeter, FakeMeterTransport

from runtrue.device import CommandRejected, MeterClient, MeterError, NoAnswer, NoRevolutions
from runtrue.readings import vector_average
from runtrue.transport.base import Transport, TransportLost


def client_for(meter: FakeMeter | None = None, **kw: float) -> tuple[MeterClient, FakeMeterTransport]:
    transport = FakeMeterTransport(meter)
    return MeterClient(transport, "fake0", **kw), transport


def test_identify_start_read_stop() -> None:
    client, transport = client_for()
    info = client.identify()
    assert (info.board, info.proto, info.serial) == ("fake", 2, "FAKE0001")
    client.start()
    revs = client.revolutions(20)
    client.stop()
    assert [r.rev for r in revs] == list(range(20))
    assert revs[0].flag_names == ["first"] and all(r.usable for r in revs)
    assert revs[5].speed_rpm == pytest.approx(3000.0)
    reading = vector_average(revs)
    assert abs(reading.channels[0].mean - TRUE_1X[0]) < 0.003
    assert client.lost_frames == 0 and not transport.meter.streaming


def test_settings_update_info_and_bad_rate_is_refused_clearly() -> None:
    client, transport = client_for()
    assert client.set_rate(2500) == 2500.0
    client.set_channels(0b011)
    client.set_edge("falling")
    assert client.info is not None and (client.info.channel_mask, client.info.edge) == (0b011, "falling")
    with pytest.raises(CommandRejected, match=r"refused SET_RATE \(bad argument\): rate 20 Hz outside 500-10000"):
        client.set_rate(20)
    client.start()
    assert client.read_revolution(1.0).channels == [0, 1]  # type: ignore[union-attr]


def test_self_test_and_status() -> None:
    client, _ = client_for()
    result = client.self_test()
    assert result["pass"] is True and result["checks"][0]["name"] == "adc"
    status = client.status()
    assert status.cpu_load_permille == 250 and not status.streaming


def test_silent_board_gives_the_no_answer_advice() -> None:
    client, _ = client_for(FakeMeter(silent=True), command_timeout_s=0.2)
    with pytest.raises(NoAnswer) as info:
        client.identify()
    assert str(info.value) == (
        "no answer from the meter on fake0: is the runtrue firmware installed? try `runtrue device check`"
    )


def test_no_reference_pulses_means_no_revolutions_with_advice() -> None:
    client, transport = client_for()
    client.start()
    transport.meter.streaming = False  # the machine stopped / the sensor sees no mark
    client.discard_revolutions()
    with pytest.raises(NoRevolutions, match="reference"):
        client.revolutions(3, timeout_s=0.2)


class DroppingTransport(FakeMeterTransport):
    """Loses the 5th and 6th frames the meter sends (a flaky cable)."""

    def __init__(self) -> None:
        super().__init__()
        self.frames_out = 0

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        data = super().read(max_bytes, timeout_s)
        kept = b""
        for part in data.split(b"\x00")[:-1]:
            self.frames_out += 1
            if self.frames_out not in (5, 6):
                kept += part + b"\x00"
        return kept


def test_lost_frames_are_counted() -> None:
    transport = DroppingTransport()
    client = MeterClient(transport, "flaky")
    client.identify()  # frames 1-2
    client.start()  # frame 3
    client.revolutions(10)
    assert client.lost_frames == 2


class UnplugOnceTransport(FakeMeterTransport):
    """Goes away after ``after`` reads; reopen brings back a *restarted* meter."""

    def __init__(self, after: int) -> None:
        super().__init__()
        self.after = after
        self.reads = 0
        self.reopens = 0

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        self.reads += 1
        if self.reads == self.after:
            self.gone = True
        return super().read(max_bytes, timeout_s)

    def reopen(self, timeout_s: float) -> bool:
        self.reopens += 1
        self.gone = False
        self.meter = FakeMeter()  # power-cycled: default settings, not streaming, seq from 0
        return True


def test_reconnect_keeps_the_session_and_reapplies_settings() -> None:
    transport = UnplugOnceTransport(after=12)
    client = MeterClient(transport, "usb0")
    client.identify()
    client.set_rate(2000)
    client.set_channels(0b011)
    client.start()
    revs = client.revolutions(30)
    assert transport.reopens == 1 and client.reconnects == 1 and client.connected
    # The restarted meter was set up again and streams the same channels.
    assert transport.meter.rate_hz == 2000 and transport.meter.mask == 0b011 and transport.meter.streaming
    assert all(r.channels == [0, 1] for r in revs) and len(revs) == 30
    assert client.lost_frames == 0  # a restart is not lost frames


class GoneForGoodTransport(FakeMeterTransport):
    def reopen(self, timeout_s: float) -> bool:
        return False


def test_meter_that_stays_away_raises_transport_lost_with_advice() -> None:
    transport = GoneForGoodTransport()
    client = MeterClient(transport, "usb0")
    client.identify()
    client.start()
    first = client.revolutions(3)
    transport.gone = True
    with pytest.raises(TransportLost, match="plug it back in"):
        client.read_revolution(0.1)
    assert len(first) == 3 and not client.connected


def test_ack_for_another_command_is_not_taken_as_ours() -> None:
    class WrongAck(FakeMeterTransport):
        def write(self, data: bytes) -> None:
            # Answer every command with an ACK for a seq the host never used.
            self.meter._ack(999, 0x81)

    client = MeterClient(WrongAck(), "odd", command_timeout_s=0.2)
    with pytest.raises(MeterError, match="did not acknowledge IDENTIFY"):
        client.identify()


def test_base_transport_is_abstract() -> None:
    with pytest.raises(NotImplementedError):
        Transport().read(1, 0.0)
