"""`runtrue device check`: the self-test and a short stream, explained in plain words, against the
simulator and against fake meters that fail in the ways a new build does."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pytest

from runtrue.cli import main
from runtrue.deploy import check
from runtrue.deploy.check import describe_revolutions, explain_selftest_check
from runtrue.device import NoAnswer
from runtrue.protocol.messages import DeviceInfo, Status


def run_check(port: str, **kwargs: Any) -> tuple[int, str]:
    lines: list[str] = []
    rc = check(port, out=lines.append, **kwargs)
    return rc, "\n".join(lines)


@pytest.mark.slow
def test_check_against_the_simulator_passes_and_says_it_is_a_simulator() -> None:
    rc, text = run_check("sim:fan", seed=3, stream_revs=5)
    assert rc == 0, text
    assert "sim:fan is the simulator" in text
    for name in ("firmware", "sample_rate", "dropped_samples", "cpu_load", "ch0_signal", "reference",
                 "reference pulses", "link"):
        assert f"PASS  {name}:" in text
    assert "5 revolutions at" in text and "all checks passed" in text


@pytest.mark.slow
def test_two_channel_simulator_reports_both_channels() -> None:
    rc, text = run_check("sim:roller", seed=1, stream_revs=0)
    assert rc == 0
    assert "PASS  ch0_signal: channel 0 is present and live" in text
    assert "PASS  ch1_signal: channel 1 is present and live" in text
    assert "reference pulses:" not in text, "--revs 0 skips the stream"


@pytest.mark.parametrize(
    ("result", "words"),
    [
        ({"name": "ch1_signal", "pass": False, "value": 0.0, "unit": "g", "note": "flat: sensor unplugged?"},
         ["channel 1 reads a constant value", "GPIO27"]),
        ({"name": "ch2_signal", "pass": False, "value": 0.1, "unit": "g", "note": "clipped at an ADC end stop"},
         ["channel 2 sits at an ADC end stop", "GPIO28"]),
        ({"name": "ch0_signal", "pass": True, "value": 0.0121, "unit": "g", "note": ""},
         ["12.1 mg rms noise floor"]),
        ({"name": "ch0_signal", "pass": True, "value": 0.2, "unit": "g", "note": ""},
         ["this is high: check the sensor supply filter"]),
        ({"name": "dropped_samples", "pass": False, "value": 37, "unit": "samples", "note": "DMA overrun"},
         ["37 samples were lost", "lower the sample rate"]),
        ({"name": "cpu_load", "pass": False, "value": 93.5, "unit": "%", "note": "too busy"},
         ["93.5 % busy", "too close to its limit"]),
        ({"name": "reference", "pass": True, "value": 0.0, "unit": "rpm", "note": "no edges"},
         ["no reference pulses", "the edge setting"]),
        ({"name": "sample_rate", "pass": False, "value": 0.0, "unit": "Hz", "note": "no samples: ADC not running"},
         ["pacing is wrong or stopped"]),
        ({"name": "new_check", "pass": True, "value": 3, "unit": "V", "note": "later firmware"},
         ["3 V - later firmware"]),
    ],
)
def test_each_self_test_result_is_explained_in_plain_words(result: dict[str, Any], words: list[str]) -> None:
    text = explain_selftest_check(result)
    for w in words:
        assert w in text


@dataclass
class Rev:
    period_us: float
    usable: bool = True
    flag_names: tuple[str, ...] = ()


def test_missed_and_extra_pulses_get_advice_about_the_mark() -> None:
    revs = [Rev(40_000.0)] * 6 + [Rev(80_000.0, False, ("missing pulse",)), Rev(20_000.0, False, ("extra pulse",))]
    ok, text = describe_revolutions(revs)  # type: ignore[arg-type]
    assert not ok
    assert "8 revolutions" in text and "6 usable" in text
    assert "missed pulses: move the sensor closer" in text and "extra pulses" in text


def test_steady_reference_passes_with_its_speed() -> None:
    ok, text = describe_revolutions([Rev(40_000.0), Rev(40_010.0), Rev(39_990.0)])  # type: ignore[arg-type]
    assert ok and "1500 rpm" in text and "steady to 0.02 %" in text


def test_no_revolutions_means_the_mark_is_not_seen() -> None:
    ok, text = describe_revolutions([])
    assert not ok and "not seeing its mark" in text


class _Transport:
    def close(self) -> None:
        pass


class SplitSelfTestClient:
    """A meter whose self-test result arrives in two SELFTEST frames (PROTOCOL.md allows parts),
    with channel 1 unplugged."""

    transport = _Transport()
    lost_frames = 0

    def __init__(self, port: str, **kwargs: Any) -> None:
        self.last: dict[str, Any] = {}

    def identify(self) -> DeviceInfo:
        return DeviceInfo(fw=_fw(), board="rp2040", proto=1, channels_max=3, channel_mask=3, rate_hz=4000.0,
                          counts_per_g=[402.1, 415.0], zero_code=[2040.0, 2051.0])

    def self_test(self, timeout_s: float = 10.0) -> dict[str, Any]:
        part0 = {"pass": False, "part": 0, "parts": 2, "checks": [
            {"name": "sample_rate", "pass": True, "value": 4000.0, "unit": "Hz", "note": ""},
            {"name": "ch0_signal", "pass": True, "value": 0.011, "unit": "g", "note": ""}]}
        part1 = {"pass": False, "part": 1, "parts": 2, "checks": [
            {"name": "ch1_signal", "pass": False, "value": 0.0, "unit": "g", "note": "flat: sensor unplugged?"}]}
        # As MeterClient.self_test does: the checks of every part, joined in order.
        return {"pass": False, "checks": part0["checks"] + part1["checks"]}

    def status(self) -> Status:
        return Status(uptime_ms=1, cpu_load_permille=120, dropped_samples=0, edges_rejected=0, revs_sent=0,
                      tx_overflows=0, streaming=False)


def _fw() -> str:
    from runtrue.deploy.install import local_firmware_version

    return local_firmware_version()


def test_a_self_test_split_over_two_frames_is_joined_and_a_dead_channel_fails() -> None:
    rc, text = run_check("/dev/ttyACM0", open_client=SplitSelfTestClient, stream_revs=0)
    assert rc == 1
    assert "PASS  sample_rate" in text and "PASS  ch0_signal" in text
    assert "FAIL  ch1_signal: channel 1 reads a constant value" in text
    assert "calibrated: 402.1, 415.0 counts/g" in text


def test_a_board_without_the_meter_firmware_is_sent_to_install() -> None:
    class Silent(SplitSelfTestClient):
        def identify(self) -> DeviceInfo:
            raise NoAnswer("no answer from the meter on /dev/ttyACM0: is the runtrue firmware installed?")

    rc, text = run_check("/dev/ttyACM0", open_client=Silent)
    assert rc == 1
    assert "no answer from the meter" in text and "runtrue device install --port /dev/ttyACM0" in text


def test_an_old_firmware_is_flagged_with_the_fix() -> None:
    class Old(SplitSelfTestClient):
        def identify(self) -> DeviceInfo:
            return DeviceInfo(fw="0.0.1", board="rp2040", proto=1)

    rc, text = run_check("/dev/ttyACM0", open_client=Old, stream_revs=0)
    assert rc == 1
    assert "FAIL  firmware: the meter runs firmware 0.0.1" in text


@pytest.mark.slow
def test_cli_check_on_the_simulator(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["device", "check", "--port", "sim:sander", "--revs", "3", "--seed", "2"]) == 0
    assert "all checks passed" in capsys.readouterr().out


def test_cli_unknown_scenario_is_one_line_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["device", "check", "--port", "sim:nosuch"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "unknown simulator scenario 'nosuch'" in err


def test_cli_without_a_port_and_no_board_plugged_in(monkeypatch: pytest.MonkeyPatch,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    import runtrue.transport.serial as serial_mod

    monkeypatch.setattr(serial_mod, "find_meter_ports", lambda ports=None: [])
    assert main(["device", "install"]) == 2
    assert "no USB board that looks like a meter is plugged in" in capsys.readouterr().err


def test_cli_device_without_an_action_shows_help(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["device"]) == 0
    assert "install" in capsys.readouterr().out


class BusyMeterClient(SplitSelfTestClient):
    """A meter whose processor is 72 % busy while streaming (its STATUS says so)."""

    def self_test(self, timeout_s: float = 10.0) -> dict[str, Any]:
        return {"pass": True, "checks": []}

    def status(self) -> Status:
        return Status(uptime_ms=1, cpu_load_permille=720, dropped_samples=0, edges_rejected=0, revs_sent=0,
                      tx_overflows=0, streaming=False)


def test_check_shows_the_meters_cpu_load_and_fails_above_60_percent() -> None:
    rc, text = run_check("/dev/ttyACM0", open_client=BusyMeterClient, stream_revs=0)
    assert rc == 1
    assert "FAIL  cpu: the meter's processor is 72 % busy (over the 60 % limit" in text
    rc, text = run_check("/dev/ttyACM0", open_client=SplitSelfTestClient, stream_revs=0)
    assert "PASS  cpu: the meter's processor is 12 % busy (limit 60 %)" in text
