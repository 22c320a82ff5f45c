"""The whole link over a real tty: SerialTransport on a pty served by a fake meter thread,
unplugged (the pty closes, its by-id style symlink goes) and plugged back in (a new pty
behind the same symlink, the meter restarted)."""

from __future__ import annotations

import threading
import time
from pathlib import Path

import pytest
from fake_meter import PtyMeter

from runtrue.device import MeterClient
from runtrue.transport.base import TransportLost
from runtrue.transport.serial import SerialTransport

pytestmark = pytest.mark.skipif(not hasattr(__import__("os"), "openpty"), reason="needs ptys")


def test_pty_meter_streams_through_the_serial_transport(tmp_path: Path) -> None:
    device = PtyMeter(tmp_path / "meter")
    try:
        client = MeterClient(SerialTransport(str(tmp_path / "meter")), str(tmp_path / "meter"))
        assert client.identify().board == "fake"
        client.start()
        revs = client.revolutions(10, timeout_s=2.0)
        client.stop()
        assert [r.rev for r in revs] == list(range(10))
        assert client.lost_frames == 0 and client.frame_errors == 0
        client.close()
    finally:
        device.close()


@pytest.mark.slow
def test_unplug_and_replug_resumes_the_session(tmp_path: Path) -> None:
    link = tmp_path / "meter"
    device = PtyMeter(link)
    try:
        client = MeterClient(SerialTransport(str(link)), str(link))
        client.identify()
        client.set_rate(2500)
        client.start()
        before = client.revolutions(5, timeout_s=2.0)

        device.unplug()
        replug = threading.Timer(0.3, device.plug_in)
        replug.start()
        t0 = time.monotonic()
        after = client.revolutions(5, timeout_s=3.0)  # waits through the unplug
        replug.join()

        assert time.monotonic() - t0 >= 0.25
        assert client.reconnects == 1 and client.connected
        assert len(before) == 5 and len(after) == 5
        # The meter came back power-cycled: the client set it up again and restarted streaming.
        assert device.meter.rate_hz == 2500 and device.meter.streaming
        assert after[0].rev == 0  # a fresh START on the restarted meter
        client.close()
    finally:
        device.close()


@pytest.mark.slow
def test_owner_reopening_the_port_gets_the_same_session_back(tmp_path: Path) -> None:
    # An application may run its own reconnect loop: reopen the transport, identify, start.
    link = tmp_path / "meter"
    device = PtyMeter(link)
    try:
        client = MeterClient(SerialTransport(str(link)), str(link))
        client.identify()
        client.set_channels(0b011)
        client.start()
        client.revolutions(3, timeout_s=2.0)
        device.unplug()
        with pytest.raises(TransportLost):
            client.read_revolution(0.2)
        assert not client.connected
        device.plug_in()
        assert client.transport.reopen(2.0)
        assert client.identify().channel_mask == 0b011  # settings applied again before IDENTIFY
        client.start()
        revs = client.revolutions(3, timeout_s=2.0)
        assert all(r.channels == [0, 1] for r in revs) and client.connected
        client.close()
    finally:
        device.close()
