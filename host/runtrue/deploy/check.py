"""``runtrue device check``: run the meter's self-test (SELFTEST, firmware/PROTOCOL.md) and a short
stream of revolutions, and explain each result in plain words: channels present, noise floor or
vibration level, clipping, reference pulses seen and their quality, lost samples, CPU load.

The thresholds behind the words (typical noise, a steady speed) are common practice for a bench
check, not from a published source; the sensor figures come from hardware/FRONTEND.md.
"""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass, field
from typing import Any

from runtrue.deploy.install import OpenClient, Out, default_open_client, describe_meter, local_firmware_version
from runtrue.device import MeterError
from runtrue.device.advice import FLAG_ADVICE
from runtrue.protocol.admit import counts
from runtrue.transport import PortError, TransportLost

STREAM_REVS = 20
STREAM_TIMEOUT_S = 3.0
SELFTEST_TIMEOUT_S = 10.0
# Noise per sample expected from the sensor class and filter in hardware/FRONTEND.md (~12 mg rms);
# a stopped machine reading far above this has a noisy supply or pick-up (common practice).
NOISY_FLOOR_G = 0.05
#: `runtrue device check` fails a meter busier than this while streaming (per mille; our choice: margin
#: for the USB writes and bursts of edges, firmware/README.md, CPU budget).
CPU_LIMIT_PERMILLE = 600
NOMINAL_COUNTS_PER_G = 409.6


@dataclass
class CheckLine:
    name: str
    passed: bool
    text: str


@dataclass
class CheckReport:
    lines: list[CheckLine] = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return all(line.passed for line in self.lines)

    def add(self, name: str, passed: bool, text: str) -> None:
        self.lines.append(CheckLine(name, passed, text))


def explain_selftest_check(c: dict[str, Any], *, turning: bool = False) -> str:
    """One self-test result in plain words (``turning``: the reference says the machine runs)."""
    name = str(c.get("name", "?"))
    ok = bool(c.get("pass"))
    value = c.get("value")
    unit = str(c.get("unit", ""))
    note = str(c.get("note", "") or "")
    if name == "sample_rate":
        if ok:
            return f"the ADC delivers {value} samples a second per channel, as set: sampling is paced correctly"
        return (f"samples arrive at {value} {unit} ({note}): the ADC pacing is wrong or stopped; "
                "reinstall the firmware, then report the board type")
    if name == "dropped_samples":
        if ok:
            return "no samples were lost during the test"
        return (f"{value} samples were lost (the firmware fell behind the ADC): lower the sample rate "
                "or the number of channels")
    if name == "cpu_load":
        if ok:
            return f"the processor is {value} % busy: plenty of headroom"
        return f"the processor is {value} % busy: too close to its limit; lower the sample rate or channels"
    if name.startswith("ch") and name.endswith("_signal"):
        ch = name[2:-7]
        gpio = f"GPIO{26 + int(ch)}" if ch.isdigit() else "its ADC pin"
        if ok:
            amp = float(value or 0.0)
            if turning:
                level = f"{amp * 1000:.1f} mg rms overall vibration (the machine is turning)"
            else:
                level = (f"{amp * 1000:.1f} mg rms noise floor with the machine stopped (about 12 mg rms is "
                         "normal for the sensor in hardware/FRONTEND.md"
                         f"{'; this is high: check the sensor supply filter and the cable screen' if amp > NOISY_FLOOR_G else ''})")
            return f"channel {ch} is present and live: {level}"
        if "clip" in note:
            return (f"channel {ch} sits at an ADC end stop: the sensor output is shorted to 0 V or 3.3 V, "
                    f"its supply is missing, or the vibration exceeds its range; check the wiring to {gpio}")
        if "flat" in note:
            return (f"channel {ch} reads a constant value: the sensor is unplugged, unpowered, or wired to "
                    f"the wrong pin (it belongs on {gpio}, hardware/pinmap.toml)")
        return f"channel {ch}: {note or 'no samples'}"
    if name == "reference":
        rpm = float(value or 0.0)
        if rpm > 0:
            return f"reference pulses arrive: about {rpm:.0f} rpm"
        return ("no reference pulses: the machine is stopped, or the sensor does not see the mark "
                "(check the sensor's LED as the mark passes, its distance, and the edge setting)")
    text = f"{value} {unit}".strip()
    return f"{text}{' - ' + note if note else ''}"


def _gather_selftest(client: Any) -> dict[str, Any]:
    """Run SELFTEST; the client joins the parts a long result is split into."""
    return dict(client.self_test(timeout_s=SELFTEST_TIMEOUT_S))


def describe_revolutions(revs: list[Any]) -> tuple[bool, str]:
    """Quality of the reference pulses from a short stream of revolutions."""
    if not revs:
        return False, ("no revolutions in a few seconds: with the machine running, the reference sensor "
                       "is not seeing its mark once per revolution (with the machine stopped, use --revs 0 "
                       "to skip this check)")
    # After START the firmware flags revolutions "speed jump" until two in a row agree (it is
    # confirming the speed, PROTOCOL.md): those first settling revolutions are not a sensor fault.
    n_read = len(revs)
    settled = [r for r in revs
               if not (getattr(r, "rev", 99) < 3 and r.flag_names
                       and set(r.flag_names) <= {"first", "speed jump"})]
    if settled:
        revs = settled
    usable = [r for r in revs if counts(r)]
    flagged: dict[str, int] = {}
    for r in revs:
        for name in r.flag_names:
            if name != "first":
                flagged[name] = flagged.get(name, 0) + 1
    periods = [r.period_us for r in usable] or [r.period_us for r in revs]
    mean_rpm = 60e6 / statistics.fmean(periods)
    spread = statistics.pstdev(periods) / statistics.fmean(periods) if len(periods) > 1 else 0.0
    words = [f"{n_read} revolutions at {mean_rpm:.0f} rpm, {len(usable)} usable",
             f"speed steady to {100 * spread:.2f} %"]
    if flagged:
        words.append("flags: " + ", ".join(f"{k} x{v}" for k, v in sorted(flagged.items())))
    ok = len(usable) >= max(1, math.ceil(0.9 * len(revs)))  # common practice: nine in ten clean
    for name, heading in (("missing pulse", "missed pulses"), ("extra pulse", "extra pulses"),
                          ("clipped", "clipping")):
        if flagged.get(name):
            words.append(f"{heading}: {FLAG_ADVICE[name]}")
    if spread > 0.02:
        words.append("the speed wanders by more than 2 %: wait for the machine to settle before measuring")
    return ok, "; ".join(words)


def check(port: str, *, open_client: OpenClient | None = None, out: Out = print,
          stream_revs: int = STREAM_REVS, seed: int | None = None) -> int:
    """Run the checks on ``port`` and print them; 0 if all pass, 1 otherwise."""
    open_client = open_client or default_open_client
    if port.startswith("sim:"):
        out(f"{port} is the simulator: these results come from a virtual machine, not from hardware.")
    kwargs: dict[str, Any] = {"command_timeout_s": 2.0}
    if seed is not None:
        kwargs["seed"] = seed
    try:
        client = open_client(port, **kwargs)
    except PortError as exc:
        out(f"check failed: {exc}")
        return 1
    report = CheckReport()
    try:
        try:
            info = client.identify()
        except (MeterError, TransportLost) as exc:
            out(f"check failed: {exc}")
            out(f"if the board runs MicroPython but not the meter: `runtrue device install --port {port}`")
            return 1
        out(f"meter: {describe_meter(info)}")
        expected = local_firmware_version()
        if info.fw != expected:
            report.add("firmware", False, f"the meter runs firmware {info.fw}, this runtrue expects {expected}: "
                       f"run `runtrue device install --port {port}`")
        else:
            report.add("firmware", True, f"firmware {info.fw} matches this runtrue")
        cal = list(getattr(info, "counts_per_g", []) or [])
        if cal and all(math.isclose(float(c), NOMINAL_COUNTS_PER_G, rel_tol=1e-6) for c in cal):
            report.add("calibration", True, "nominal sensor calibration (409.6 counts/g); "
                       "the flip test in hardware/BRINGUP.md makes it exact")
        elif cal:
            report.add("calibration", True, "calibrated: " + ", ".join(f"{float(c):.1f}" for c in cal) + " counts/g")
        out("running the self-test (about a second of measurement) ...")
        result = _gather_selftest(client)
        checks = result.get("checks", [])
        turning = any(c.get("name") == "reference" and float(c.get("value") or 0) > 0 for c in checks)
        for c in checks:
            report.add(str(c.get("name", "?")), bool(c.get("pass")), explain_selftest_check(c, turning=turning))
        if result.get("missing_parts"):
            report.add("selftest", False, f"{result['missing_parts']} part(s) of the self-test result were lost on the link")
        if stream_revs > 0:
            try:
                client.start()
                revs: list[Any] = []
                while len(revs) < stream_revs:
                    rev = client.read_revolution(STREAM_TIMEOUT_S)
                    if rev is None:
                        break
                    revs.append(rev)
                client.stop()
                ok, text = describe_revolutions(revs)
                report.add("reference pulses", ok, text)
                if client.envelope_warning:
                    report.add("speed", False, client.envelope_warning)
            except (MeterError, TransportLost) as exc:
                report.add("reference pulses", False, f"streaming failed: {exc}")
        try:
            st = client.status()
            cpu_pct = st.cpu_load_permille / 10.0
            report.add("cpu", st.cpu_load_permille <= CPU_LIMIT_PERMILLE,
                       f"the meter's processor is {cpu_pct:.0f} % busy "
                       + ("(limit 60 %)" if st.cpu_load_permille <= CPU_LIMIT_PERMILLE else
                          "(over the 60 % limit: it may fall behind; use fewer channels or a lower --rate)"))
            report.add("link", st.dropped_samples == 0 and client.lost_frames == 0,
                       f"{st.dropped_samples} samples dropped on the board, {client.lost_frames} frames lost "
                       f"on the USB link, {st.edges_rejected} reference edges rejected as glitches")
        except (MeterError, TransportLost) as exc:
            report.add("link", False, f"no STATUS report: {exc}")
    except (MeterError, TransportLost) as exc:
        report.add("meter", False, f"the meter stopped answering: {exc}")
    finally:
        try:
            client.transport.close()
        except Exception:  # noqa: BLE001 - best-effort close; the port may already be gone
            pass
    for line in report.lines:
        out(f"{'PASS' if line.passed else 'FAIL'}  {line.name}: {line.text}")
    out("all checks passed" if report.passed else "some checks failed: see the advice above (hardware/BRINGUP.md)")
    return 0 if report.passed else 1


__all__ = ["CheckReport", "check", "describe_revolutions", "explain_selftest_check"]
