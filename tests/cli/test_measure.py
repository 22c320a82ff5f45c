"""``runtrue measure`` and ``runtrue scenarios`` end to end on the simulator (the real firmware
logic behind SimTransport)."""

from __future__ import annotations

import cmath
import json
import math
from pathlib import Path

import pytest

from runtrue.cli import main
from runtrue.protocol.frames import FrameDecoder, encode_frame
from runtrue.transport.base import Transport


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def vec(d: dict) -> complex:
    return cmath.rect(d["amp"], math.radians(d["phase"]))


@pytest.mark.slow
@pytest.mark.parametrize("scenario", ["fan", "roller", "spindle"])
def test_measured_vectors_agree_with_the_simulator_truth(capsys: pytest.CaptureFixture[str], scenario: str) -> None:
    code, out, err = run_cli(capsys, "measure", "--port", f"sim:{scenario}", "--revs", "30", "--json", "--seed", "4")
    assert code == 0, err
    result = json.loads(out)  # exactly one JSON object
    assert {"rpm", "channels", "expected"} <= result.keys()
    assert len(result["expected"]) == len(result["channels"]) >= 1
    for ch, truth in zip(result["channels"], result["expected"]):
        assert {"amp", "phase", "spread"} <= ch.keys()
        assert 0 <= ch["phase"] < 360 and ch["amp"] > 0 and ch["spread"] > 0
        # The spread is the RMS error of the mean: 4 spreads is far out in the tail (for
        # circular Gaussian scatter P(|error| > 4 spread) = e^-16).
        assert abs(vec(ch) - vec(truth)) < 4 * ch["spread"], (ch, truth)
        assert ch["confidence"] == pytest.approx(ch["spread"] * 1.78, rel=0.02)  # sqrt(F(2,58;0.95))
    assert result["revs"] == 30 and result["lost_frames"] == 0


@pytest.mark.slow
def test_seed_makes_the_run_repeatable(capsys: pytest.CaptureFixture[str]) -> None:
    first = run_cli(capsys, "measure", "--port", "sim:sander", "--revs", "10", "--json", "--seed", "7")[1]
    second = run_cli(capsys, "measure", "--port", "sim:sander", "--revs", "10", "--json", "--seed", "7")[1]
    assert json.loads(first) == json.loads(second)


def test_table_names_the_units_and_the_convention(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run_cli(capsys, "measure", "--port", "sim:roller", "--revs", "8", "--seed", "1")
    assert code == 0
    assert "g peak" in out and "lag in degrees after the reference mark" in out
    assert len([line for line in out.splitlines() if "simulator truth" in line]) == 2


def test_options_reach_the_meter(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "measure", "--port", "sim:roller", "--revs", "5", "--json", "--seed", "1",
                             "--channels", "1", "--rate", "2000", "--edge", "falling")
    assert code == 0, err
    result = json.loads(out)
    assert [ch["channel"] for ch in result["channels"]] == [1]
    assert abs(vec(result["channels"][0]) - vec(result["expected"][0])) < 4 * result["channels"][0]["spread"]


def test_all_channels_means_every_channel_the_meter_has(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "measure", "--port", "sim:roller", "--revs", "3", "--json", "--channels", "all")
    assert code == 0, err
    assert [ch["channel"] for ch in json.loads(out)["channels"]] == [0, 1]  # the roller has two pickups


def test_unknown_scenario_is_a_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(capsys, "measure", "--port", "sim:no-such", "--json")
    assert code == 2 and out == ""
    assert "unknown scenario 'no-such'" in err and "runtrue scenarios" in err


def test_no_meter_found_says_what_to_do(capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr("runtrue.transport.serial.find_meter_ports", lambda ports=None: [])
    code, _, err = run_cli(capsys, "measure", "--json")
    assert code == 2 and "no meter found" in err and "--port" in err


def test_missing_port_device_is_a_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run_cli(capsys, "measure", "--port", "/dev/no-such-tty", "--json")
    assert code == 2 and "cannot open /dev/no-such-tty" in err


class NoPulses(Transport):
    """The simulator with the reference sensor blind: every REV frame is swallowed."""

    def __init__(self, inner: Transport) -> None:
        self.inner = inner
        self.name = inner.name
        self.machine = inner.machine  # type: ignore[attr-defined]
        self.decoder = FrameDecoder()

    def read(self, max_bytes: int, timeout_s: float) -> bytes:
        data = self.inner.read(max_bytes, timeout_s)
        return b"".join(encode_frame(f.type, f.seq, f.payload) for f in self.decoder.feed(data) if f.type != 0x02)

    def write(self, data: bytes) -> None:
        self.inner.write(data)


@pytest.mark.slow
def test_missing_reference_pulses_are_reported(capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    import runtrue.device
    from runtrue.device import MeterClient
    from runtrue.transport import open_transport

    def blind_meter(port: str, seed: int | None = None, realtime: bool = False, **_: object) -> MeterClient:
        return MeterClient(NoPulses(open_transport(port, seed=seed)), port)

    monkeypatch.setattr(runtrue.device, "open_meter", blind_meter)
    code, out, err = run_cli(capsys, "measure", "--port", "sim:fan", "--json", "--timeout", "0.5")
    assert code == 2 and out == ""
    assert "reference pulses" in err and "no revolution" in err


def test_too_few_revolutions_is_refused(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run_cli(capsys, "measure", "--port", "sim:fan", "--revs", "1")
    assert code == 2 and "at least 2" in err


def test_scenarios_lists_name_space_description(capsys: pytest.CaptureFixture[str]) -> None:
    from runtrue.sim.scenarios import SCENARIOS

    code, out, _ = run_cli(capsys, "scenarios")
    lines = out.splitlines()
    assert code == 0 and len(lines) == len(SCENARIOS) >= 2
    for line in lines:
        name, description = line.split(" ", 1)
        assert SCENARIOS[name].description == description


def test_spy_writes_a_hex_dump_of_the_traffic(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    dump = tmp_path / "link.txt"
    code, out, err = run_cli(capsys, "measure", "--port", "sim:fan", "--revs", "3", "--json", "--seed", "1",
                             "--spy", str(dump))
    assert code == 0, err
    text = dump.read_text()
    assert " TX 0000  00 " in text  # the session opens with a lone 0x00 delimiter
    assert text.count(" RX ") > 3
