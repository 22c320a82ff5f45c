"""Connect: choose the meter (ports found), a simulated machine, or manual entry of readings
taken with another instrument; see the meter's details and run its self-test.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

from textual import work
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option, OptionDoesNotExist

from runtrue.protocol.admit import counts, why_left_out
from runtrue.transport import SIM_SCHEME
from runtrue.transport.registry import listed_sources
from runtrue.tui.format import amp_text
from runtrue.tui.messages import MeterConnected, MeterFailed, MeterLost, SelfTestDone
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.session import MANUAL_PORT

LIKELY_METER_SCORE = 50  # runtrue.transport.serial ranks MicroPython / RP2040 ports this high or more


def find_sources() -> tuple[list[tuple[str, str]], list[tuple[str, str]]]:
    """(serial ports, simulator scenarios) as (port, description) pairs, best ports first.
    Slow-ish (imports pyserial and the simulator): run in a thread."""
    ports: list[tuple[str, str]] = []
    try:
        from runtrue.transport.serial import list_ports

        for p in list_ports():
            likely = getattr(p, "score", 0) >= LIKELY_METER_SCORE
            ports.append((str(p.device), ("meter? " if likely else "") + str(p.description)))
    except ImportError:
        try:
            from serial.tools import list_ports as _lp  # pyserial: the meter's USB serial port

            # only USB devices: built-in UARTs (ttyS0...) are never the meter
            ports = [(p.device, p.description or "") for p in _lp.comports() if p.vid is not None]
        except ImportError:
            ports = []
    sims = listed_sources(SIM_SCHEME)  # what the registered simulator offers (none when absent)
    return ports, sims


SAFETY_NOTE = (
    "Rotating machinery can kill. Lock out before fitting weights, never exceed rated speed, "
    "stand clear on start-up. Local codes and the maker's instructions come first."
)


def _fit(text: str, width: int) -> str:
    return text if len(text) <= width else text[: width - 1] + "\N{HORIZONTAL ELLIPSIS}"


def device_text(info: dict[str, Any]) -> str:
    if not info:
        return "No meter connected."
    chans = info.get("channel_mask", 0)
    n_ch = bin(int(chans)).count("1") if isinstance(chans, int) else "?"
    return (
        f"board    {info.get('board', '?')}  serial {info.get('serial') or '-'}\n"
        f"firmware {info.get('fw', '?')}  protocol {info.get('proto', '?')}\n"
        f"channels {n_ch} of {info.get('channels_max', '?')}  "
        f"rate {float(info.get('rate_hz', 0) or 0):.0f} Hz/ch\n"
        f"ref edge {info.get('edge', '?')}  ADC {info.get('adc_bits', '?')} bit"
    )


def self_test_text(result: dict[str, Any] | None) -> str:
    if result is None:
        return "Self-test: press t with the machine running (it checks the tape and the pickup)."
    head = "Self-test PASSED" if result.get("pass") else "Self-test FAILED - see notes"
    lines = [head]
    # Compact for 80x24: the passed checks on one line, each failed one with its value and note
    # (`runtrue device check` explains every check at length).
    passed = [str(c.get("name", "?")) for c in result.get("checks", []) if c.get("pass")]
    if passed:
        lines.append(" ok: " + ", ".join(passed))
    for c in result.get("checks", []):
        if c.get("pass"):
            continue
        value = c.get("value")
        val = f"{value:.4g}" if isinstance(value, float) else str(value)
        note = c.get("note") or ""
        lines.append(f" BAD {c.get('name', '?')}: {val} {c.get('unit', '')} {note}".rstrip())
    if result.get("missing_parts"):
        lines.append(f" BAD {result['missing_parts']} part(s) of the result lost on the link")
    return "\n".join(lines)


CHECK_S = 2.0  # seconds of revolutions looked at after the self-test


#: The reference sensor "sees the tape cleanly" when at most this share of revolutions is flagged
#: (missing or extra pulses, speed jumps) over the check (our choice).
CLEAN_FLAGGED_SHARE = 0.05
#: A pickup's signal is usable for balancing when its 1x (peak, per revolution) is at least this
#: fraction of everything else it measures (rms): vector averaging over a reading's 32
#: revolutions then lowers the rest by about sqrt(32) = 5.7, leaving the 1x about 3 times above
#: it (our choice).
USABLE_1X_TO_REST = 0.5


def signal_check_text(revs: list[Any], labels: list[str] | None = None) -> str:
    """What a couple of seconds of revolutions say about the sensors, in plain words first: does
    the reference sensor see the tape cleanly, is each pickup's signal usable; then the figures:
    revolutions, speed, flags with what to do, and per pickup the 1x and the RMS left after the 1x
    and 2x - the noise floor plus everything at other frequencies.  For a DC-free signal the mean
    square is the sum of each harmonic's (peak^2)/2 and the rest (Parseval's theorem), so
    rest = sqrt(rms^2 - |1x|^2/2 - |2x|^2/2)."""
    from runtrue.device.advice import FLAG_ADVICE

    if not revs:
        return ("Reference sensor: NO PULSES - is the machine running, and is the sensor aimed at the tape "
                "(LED lights on the tape, off beside it)?")
    flagged: dict[str, int] = {}
    for r in revs:
        for name in getattr(r, "flag_names", []):
            if name.lower() != "first":
                flagged[name] = flagged.get(name, 0) + 1
    usable = [r for r in revs if counts(r)]
    # the first revolution after START is left out of every average, but it is no fault of the tape
    judged = [r for r in revs if counts(r) or why_left_out(r) != ["first"]]
    share = 1.0 - len(usable) / len(judged) if judged else 0.0
    lines = []
    speed = ""
    if usable:
        speeds = [r.speed_rpm for r in usable]
        speed = f", {sum(speeds) / len(speeds):.0f} rpm"
    clean = share <= CLEAN_FLAGGED_SHARE
    if clean:
        lines.append(f"Reference: tape seen cleanly{speed} ({len(usable)}/{len(judged)} revs).")
    else:
        lines.append(f"Reference: NOT CLEAN - {share:.0%} of revolutions flagged{speed}.")
        for k, v in sorted(flagged.items()):  # what to do about each flag
            name = k.replace("_", " ").lower()
            lines.append(f"{name} {v}: {FLAG_ADVICE.get(name, 'see the help')}")
    if usable:
        n_ch = len(usable[-1].h1)
        for i in range(n_ch):
            ms = sum(r.rms_g[i] ** 2 for r in usable) / len(usable)
            h1 = sum(abs(r.h1[i]) ** 2 for r in usable) / len(usable) / 2
            h2 = sum(abs(r.h2[i]) ** 2 for r in usable) / len(usable) / 2
            rest = max(0.0, ms - h1 - h2) ** 0.5
            one_x = sum(abs(r.h1[i]) for r in usable) / len(usable)
            name = labels[i] if labels and i < len(labels) else f"pickup {i + 1}"
            ok = rest == 0 or one_x >= USABLE_1X_TO_REST * rest
            verdict = "usable" if ok else "WEAK, check its mounting"
            lines.append(f"{name[:14]}: {verdict} (1x {amp_text(one_x)}, rest {amp_text(rest, 'g rms')})")
    return "\n".join(lines)


class ConnectScreen(StepScreen):
    STEP = "1 Connect"
    BINDINGS = [
        Binding("enter", "use", "Use", priority=True),
        Binding("t", "self_test", "Self-test"),
        Binding("l", "live", "Live view"),
        Binding("r", "rescan", "Rescan"),
        Binding("n", "next", "Next"),
        Binding("f1", "app.help", "Help"),
    ]

    def compose_body(self) -> Iterable[Widget]:
        with Horizontal(id="connect-body"):
            with Vertical(id="sources-pane"):
                yield Static("Meter, simulator or manual entry", classes="pane-title")
                yield OptionList(id="sources")
            with Vertical(id="device-pane"):
                yield Static("Meter", classes="pane-title")
                yield Static(device_text({}), id="device", markup=False)
                yield Static(self_test_text(None), id="selftest", markup=False)
                yield Static(SAFETY_NOTE, id="safety", classes="caution", markup=False)
        yield Static("", id="hint", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        self.query_one("#sources", OptionList).add_option(Option("looking for meters ...", disabled=True))
        self._update_device()
        # after the first frame: listing ports and scenarios imports pyserial and numpy
        self.call_after_refresh(self.scan)

    @work(thread=True, exclusive=True, group="scan")
    def scan(self) -> None:
        ports, sims = find_sources()
        self.app.call_from_thread(self._show_sources, ports, sims)

    def _show_sources(self, ports: list[tuple[str, str]], sims: list[tuple[str, str]]) -> None:
        ol = self.query_one("#sources", OptionList)
        ol.clear_options()
        ol.add_option(Option("-- meters found --", disabled=True))
        if not ports:
            ol.add_option(Option("  (none: plug in the meter, press r)", disabled=True))
        for dev, desc in ports:
            ol.add_option(Option(_fit(f"  {dev}  {desc}", 36), id=dev))
        ol.add_option(Option("-- simulated machines --", disabled=True))
        for port, desc in sims:
            ol.add_option(Option(_fit(f"  {port[4:]}: {desc}", 36), id=port))
        ol.add_option(Option("-- no meter --", disabled=True))
        ol.add_option(Option("  manual entry (other instrument)", id=MANUAL_PORT))
        want = self.session.port
        likely = [dev for dev, desc in ports if desc.startswith("meter? ")]
        target = want if want else (likely[0] if likely else None)
        if target is not None and self._has(ol, target):
            ol.highlighted = ol.get_option_index(target)
        else:
            for i in range(ol.option_count):
                if not ol.get_option_at_index(i).disabled:
                    ol.highlighted = i
                    break
        ol.focus()
        # default: the first meter found is used straight away
        if self.rt_app.auto_connect and target is not None and self.session.link is None:
            self.rt_app.auto_connect = False
            self.rt_app.use_port(target)

    @staticmethod
    def _has(ol: OptionList, option_id: str) -> bool:
        try:
            ol.get_option_index(option_id)
        except OptionDoesNotExist:
            return False
        return True

    def action_use(self) -> None:
        ol = self.query_one("#sources", OptionList)
        if ol.highlighted is None:
            return
        opt = ol.get_option_at_index(ol.highlighted)
        if opt.disabled or opt.id is None:
            return
        self.rt_app.use_port(opt.id)
        self._update_device()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.action_use()

    def action_rescan(self) -> None:
        self.scan()

    def action_self_test(self) -> None:
        if self.session.link is None or not self.session.link.connected:
            self.notify("Connect a meter or a simulated machine first.", severity="warning")
            return
        self.query_one("#selftest", Static).update("Self-test running (about a second) ...")
        self.session.link.self_test()
        # then a couple of seconds of revolutions: pulses, speed, flags, noise floor
        self._checking = True
        self.session.live.reset(self.session.link.latest_epoch)
        self.session.link.stream(True)
        self.set_timer(CHECK_S + 1.0, self._end_check)

    def _end_check(self) -> None:
        s = self.session
        if s.link is not None:
            s.link.stream(False)
        self._checking = False
        m = s.machine
        labels = [m.pickup_name(i) for i in range(m.n_pickups)] if m is not None else None
        self._check_text = signal_check_text(list(s.live.seen), labels)
        self._update_device()

    def action_live(self) -> None:
        s = self.session
        if s.link is None or not s.link.connected:
            self.notify("Connect a meter or a simulated machine first.", severity="warning")
            return
        from runtrue.tui.screens.live import LiveScreen

        s.live.reset(s.link.latest_epoch)
        self.app.push_screen(LiveScreen("checking the sensors", can_take=False))

    def action_next(self) -> None:
        if self.session.port is None:
            self.notify("Choose a meter, a simulated machine or manual entry first (Enter).", severity="warning")
            return
        self.rt_app.show_machine()

    def meter_event(self, message: object) -> None:
        if isinstance(message, (MeterConnected, MeterLost, MeterFailed, SelfTestDone)):
            self._update_device()

    def _update_device(self) -> None:
        s = self.session
        hint = self.query_one("#hint", Static)
        if s.manual:
            self.query_one("#device", Static).update(
                "Manual entry: no meter. You type each reading (1x amplitude and phase lag per "
                "pickup) as read off another instrument."
            )
            self.query_one("#selftest", Static).update("")
            hint.update("Next (n): describe the machine.")
            return
        self.query_one("#device", Static).update(
            (f"port     {s.port}\n" if s.port else "") + device_text(s.device_info)
        )
        text = self_test_text(s.self_test)
        if getattr(self, "_check_text", ""):
            text += "\n" + self._check_text
        self.query_one("#selftest", Static).update(text)
        if s.link is not None and s.link.connected:
            hint.update("Connected. t: self-test, l: live view of the sensors, n: describe the machine.")
        elif s.port:
            hint.update(f"{s.port}: {s.meter_state}")
        else:
            hint.update("Up/Down to choose, Enter to use it.")
