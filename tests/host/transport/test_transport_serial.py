"""SerialTransport over pyserial's loop:// and over a pty; port ranking; the spy; open_transport."""

from __future__ import annotations

import io
import os
import threading
from pathlib import Path
from types import SimpleNamespace

import pytest

from runtrue.transport import PortError, TransportLost, open_transport
from runtrue.transport.serial import SerialTransport, find_meter_ports
from runtrue.transport.spy import SpyTransport, hex_dump_lines


def test_loop_url_round_trip() -> None:
    transport = SerialTransport("loop://")
    transport.write(b"\x01\x02\x00hello")
    got = b""
    while len(got) < 8:
        chunk = transport.read(100, 0.5)
        assert chunk, "loop:// returned nothing"
        got += chunk
    assert got == b"\x01\x02\x00hello"
    assert transport.read(100, 0.01) == b""
    transport.close()
    with pytest.raises(TransportLost):
        transport.read(1, 0.01)
    assert transport.reopen(0.1) is False  # a URL cannot come back


def _echo(master: int, stop: threading.Event) -> None:
    import select

    while not stop.is_set():
        ready, _, _ = select.select([master], [], [], 0.01)
        if ready:
            try:
                os.write(master, os.read(master, 1024)[::-1])
            except OSError:
                return


def test_pty_device_both_ways_and_loss_when_it_goes(tmp_path: Path) -> None:
    master, slave = os.openpty()
    link = tmp_path / "ttyMETER"
    link.symlink_to(os.ttyname(slave))
    stop = threading.Event()
    thread = threading.Thread(target=_echo, args=(master, stop), daemon=True)
    thread.start()
    transport = SerialTransport(str(link))
    try:
        transport.write(b"abc")
        got = b""
        for _ in range(50):
            got += transport.read(10, 0.05)
            if len(got) >= 3:
                break
        assert got == b"cba"
        stop.set()
        thread.join()
        os.close(master)
        os.close(slave)
        link.unlink()
        with pytest.raises(TransportLost, match="lost the meter"):
            for _ in range(20):
                transport.read(10, 0.05)
        assert transport.reopen(0.2) is False  # still gone
        # It comes back (a new pty behind the same name): reopen finds it.
        master2, slave2 = os.openpty()
        link.symlink_to(os.ttyname(slave2))
        assert transport.reopen(1.0) is True
        os.write(master2, b"back")
        got = b""
        for _ in range(50):
            got += transport.read(10, 0.05)
            if len(got) >= 4:
                break
        assert got == b"back"
        os.close(master2)
        os.close(slave2)
    finally:
        stop.set()
        transport.close()


def test_missing_port_error_says_what_to_do() -> None:
    with pytest.raises(PortError, match="cannot open /dev/does-not-exist.*plugged in.*Connect screen of .runtrue app. lists the meters found"):
        open_transport("/dev/does-not-exist")


def _port(device: str, vid: int | None, pid: int | None = None, description: str = "", serial: str | None = None) -> SimpleNamespace:
    return SimpleNamespace(device=device, vid=vid, pid=pid, description=description, product=None,
                           manufacturer=None, interface=None, serial_number=serial)


def test_ports_are_ranked_rp2040_first_and_uarts_left_out() -> None:
    ports = [
        _port("/dev/ttyS0", None, description="ttyS0"),
        _port("/dev/ttyUSB0", 0x0403, 0x6001, "FT232R USB UART"),
        _port("/dev/ttyACM1", 0x2E8A, 0x0005, "Board in FS mode", "E6614103E7"),
        _port("/dev/ttyACM0", 0x2341, 0x0043, "Arduino Uno"),
    ]
    ranked = find_meter_ports(ports)
    assert [c.device for c in ranked] == ["/dev/ttyACM1", "/dev/ttyACM0", "/dev/ttyUSB0"]
    assert "Raspberry Pi vendor ID" in ranked[0].reason and ranked[0].serial_number == "E6614103E7"


def test_spy_dumps_both_directions_and_reaches_the_inner_transport() -> None:
    inner = SerialTransport("loop://")
    inner.machine = "the virtual machine"  # type: ignore[attr-defined]
    out = io.StringIO()
    spy = SpyTransport(inner, out)
    spy.write(b"\x00\x01ABCDEFGHIJKLMNOPQRS")
    data = b""
    while len(data) < 21:
        data += spy.read(64, 0.5)
    assert data == b"\x00\x01ABCDEFGHIJKLMNOPQRS"
    lines = out.getvalue().splitlines()
    assert sum(" TX " in line for line in lines) == 2 and sum(" RX " in line for line in lines) >= 2
    assert "00 01 41 42" in lines[0] and lines[0].endswith("|..ABCDEFGHIJKLMN|")
    assert spy.machine == "the virtual machine"  # type: ignore[attr-defined]
    spy.close()


def test_hex_dump_line_layout() -> None:
    (line,) = hex_dump_lines(b"\x7fhi", "RX", 1.5)
    assert line == "    1.500000 RX 0000  7f 68 69" + " " * 39 + "  |.hi|"


def test_unknown_scenario_lists_the_choices() -> None:
    pytest.importorskip("runtrue.sim.transport")
    with pytest.raises(PortError, match="unknown scenario 'no-such-machine'.*runtrue scenarios"):
        open_transport("sim:no-such-machine")


def test_reopen_follows_the_usb_serial_number_to_a_new_path(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Re-plugged, the meter may come back as /dev/ttyACM1 while another board takes ttyACM0.
    master_a, slave_a = os.openpty()
    transport = SerialTransport(os.ttyname(slave_a))
    transport.serial_number = "E6614103E7"
    master_b, slave_b = os.openpty()  # the old path stays open too: "another board" (pty A)
    new_path = os.ttyname(slave_b)
    try:
        transport.close()
        monkeypatch.setattr("runtrue.transport.serial._device_with_serial_number", lambda sn: None)
        assert transport.reopen(0.2) is False  # not back yet: the old path is NOT taken instead
        monkeypatch.setattr("runtrue.transport.serial._device_with_serial_number",
                            lambda sn: new_path if sn == "E6614103E7" else None)
        assert transport.reopen(1.0) is True
        assert transport.name == new_path
        os.write(master_b, b"hi")
        got = b""
        for _ in range(50):
            got += transport.read(10, 0.05)
            if len(got) >= 2:
                break
        assert got == b"hi"
    finally:
        transport.close()
        for fd in (master_a, slave_a, master_b, slave_b):
            os.close(fd)
