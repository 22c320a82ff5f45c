"""The runtrue application: a thin App that wires the screens, the meter link and the session.

Screens (one module each under ``runtrue.tui.screens``): connect -> machine -> runs (the
balancing steps; it opens live readings and fitting over itself) -> result.  All meter I/O is in
``runtrue.tui.link.MeterLink``'s thread, which only posts messages; the App turns them into
session state and tells the current screen.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

from rich.text import Text
from textual.app import App, ScreenStackError
from textual.binding import Binding
from textual.scrollbar import ScrollBar, ScrollBarRender
from textual.theme import Theme

from runtrue.errorlog import log_exception, one_line
from runtrue.jobs.headless import VirtualRotorFitter
from runtrue.tui.link import MeterLink
from runtrue.tui.messages import (
    CommandFailed,
    MeterConnected,
    MeterFailed,
    MeterLost,
    RevolutionsRead,
    SelfTestDone,
)
from runtrue.tui.screens.connect import ConnectScreen
from runtrue.tui.screens.diagnosis import DiagnosisScreen
from runtrue.tui.screens.help import HelpScreen
from runtrue.tui.screens.machine import MachineScreen
from runtrue.tui.screens.result import ResultScreen
from runtrue.tui.screens.runs import RunsScreen
from runtrue.tui.session import MANUAL_PORT, Session
from runtrue.tui.settings import saved_vib_unit, settings_path
from runtrue.tui.units_text import METRIC
from runtrue.tui.widgets.braille import plain_wanted, use_plain

# Our own palette: deep blue-grey ground, teal for what you can act on, amber for what to watch.
RUNTRUE_THEME = Theme(
    name="runtrue",
    primary="#2E9C8F",
    secondary="#C7883A",
    accent="#E0B040",
    foreground="#E4E7EA",
    background="#161B22",
    surface="#1E252E",
    panel="#26303B",
    success="#4CAF6A",
    warning="#E0B040",
    error="#E05A4F",
    dark=True,
)


# Key names for the footer in plain mode: Textual shows some keys as symbols the Linux console's
# fonts lack (checked against Debian's console-setup fonts).
PLAIN_KEYS = {"\N{RETURN SYMBOL}": "Enter", "\N{ERASE TO THE LEFT}": "Bksp", "\N{UPWARDS ARROW}": "Up",
              "\N{DOWNWARDS ARROW}": "Down", "\N{LEFTWARDS ARROW}": "Left", "\N{RIGHTWARDS ARROW}": "Right"}


class PlainScrollBarRender(ScrollBarRender):
    """Scroll bars in whole cells: the eighth-block characters of the thumb's ends are missing
    from the Linux console's fonts.  The thumb stays visible without colour (reverse video)."""

    VERTICAL_BARS = [" "] * 8
    HORIZONTAL_BARS = [" "] * 8


class RuntrueApp(App):
    """Balance a rotor in place, from plugging in the meter to handing over the report."""

    CSS_PATH = "app.tcss"
    TITLE = "runtrue"
    ENABLE_COMMAND_PALETTE = False
    # reached from the live and machine screens with app.push_screen('diagnosis'); installed, so
    # it keeps its last diagnosis and takes a fresh one each time it is opened again
    SCREENS = {"diagnosis": DiagnosisScreen}
    BINDINGS = [
        Binding("ctrl+q", "quit", "Quit", priority=True),
        Binding("f1", "help", "Help", show=False),
        Binding("f9", "toggle_plain", "Plain", show=False),
    ]

    def __init__(
        self,
        port: str | None = None,
        *,
        seed: int | None = None,
        realtime: bool = True,
        store_path: str | None = None,
        revs_per_reading: int = 32,
        opener: Callable[..., Any] | None = None,
        post_interval_s: float = 0.25,
        auto_take: bool = False,
        report_dir: str | None = None,
        max_revs_per_s: float | None = None,
        plain: bool | None = None,
    ) -> None:
        super().__init__()
        # plots and the dial in plain characters (no braille): by default on the Linux console
        self.plain = False
        self._set_plain(plain_wanted() if plain is None else bool(plain))
        self.session = Session(
            seed=seed, realtime=realtime, revs_per_reading=revs_per_reading, store_path=store_path
        )
        self._initial_port = port
        self.auto_connect = port is None  # default: the first meter found
        self._opener = opener
        self._post_interval_s = post_interval_s
        self._max_revs_per_s = max_revs_per_s
        self.report_dir = report_dir or str(Path.cwd() / "reports")
        self.auto_take = auto_take  # live screen takes each reading by itself once steady
        self.ticked: set[str] = set()  # fitting list items ticked off for the coming run
        self._fitter: Any = None  # runtrue.jobs.headless.VirtualRotorFitter for a simulated rotor
        self._failed_ports: set[str] = set()  # ports whose failure to open was already reported
        self.trial_removed = True  # take each trial weight off before the next run
        self.amplitude_only = False  # no reference mark: the four-run method (machine screen, F7)
        self.units = METRIC  # display units, metric or imperial (machine screen, F8); jobs stay metric

        self.settings_path = settings_path(store_path)  # settings.json beside the job database
        self.vib_unit = saved_vib_unit(self.settings_path)  # u on the reading screen; kept between sessions
        self.failure: str = ""  # the one line shown after an unexpected error ended the application

    # -- notifications ----------------------------------------------------------------------------
    def notify(self, message: str, *, title: str = "", severity: Any = "information",
               timeout: float | None = None, markup: bool = True) -> None:
        """Every notification goes to the current step screen's notice line (under the title bar,
        covering nothing) as one text; dialogs and help, which have no such line, keep Textual's
        toast."""
        super().notify(message, title=title, severity=severity, timeout=timeout, markup=markup)
        show = getattr(self.screen, "show_notice", None) if self._screen_stack else None
        if show is not None:
            text = " ".join(str(message).split())
            show(f"{title}: {text}" if title else text, str(severity), float(timeout or 6.0))

    def clear_notifications(self) -> None:
        super().clear_notifications()
        show = getattr(self.screen, "show_notice", None) if self._screen_stack else None
        if show is not None:
            show("")

    # -- an unexpected error ----------------------------------------------------------------------
    def _handle_exception(self, error: Exception) -> None:
        """A bug or an unforeseen state: no traceback on screen.  The traceback goes to the error
        log in the data directory; the application closes with exit status 2 and one line saying
        what happened, where the details are, and that the job is kept (every run and decision is
        in the job database before the screen shows it, so the job resumes from the Machine
        screen).  Textual stops the message loop that raised, so carrying on is not safe."""
        if isinstance(error, ScreenStackError) and (self._exit or self._closing or not self._screen_stack):
            return  # a key still queued while the application closes: nothing went wrong
        where = log_exception(error, "runtrue app")
        self.failure = (
            f"runtrue: unexpected error ({one_line(error, 100)}); the job is kept: start runtrue again "
            f"and resume it on the Machine screen. Details in {where}"
        )
        self._return_code = 2
        if self._exception is None:  # the test pilot raises it again at the end of a test
            self._exception = error
            self._exception_event.set()
        self._exit_renderables.append(Text(self.failure))
        self._close_messages_no_wait()

    # -- start and stop -------------------------------------------------------------------------
    def on_mount(self) -> None:
        self.register_theme(RUNTRUE_THEME)
        self.theme = "runtrue"
        if self._initial_port:
            self.use_port(self._initial_port)
        self.push_screen(ConnectScreen())

    def on_unmount(self) -> None:
        self.session.close()

    # -- the meter ------------------------------------------------------------------------------
    def use_port(self, port: str) -> None:
        """Use ``port`` ("sim:NAME", a serial device, or "manual") from now on."""
        s = self.session
        if s.port == port and (s.link is not None or port == MANUAL_PORT):
            return
        if s.link is not None:
            s.link.close()
            s.link = None
        s.port = port
        s.device_info = {}
        s.self_test = None
        s.live.reset(min_epoch=0)  # a new link counts its epochs from 0
        self._fitter = None
        if port == MANUAL_PORT:
            s.meter_state = "manual entry"
        else:
            s.meter_state = "connecting ..."
            s.link = MeterLink(
                port,
                self.post_message,
                seed=s.seed,
                realtime=s.realtime,
                opener=self._opener,
                post_interval_s=self._post_interval_s,
                max_revs_per_s=self._max_revs_per_s,
            )
            s.link.start()
        self._tell_screen(None)

    def use_channels(self, n_pickups: int) -> bool:
        """Make the meter measure one channel per pickup; False (and a message) if it cannot."""
        s = self.session
        if s.manual or s.link is None:
            return True
        info = s.device_info
        channels_max = int(info.get("channels_max", 3) or 3)
        if n_pickups > channels_max:
            self.notify(
                f"The meter has {channels_max} channel(s) but {n_pickups} pickups are described: "
                "describe at most one pickup per channel.",
                title="Check the pickups",
                severity="error",
                timeout=8,
            )
            return False
        mask = (1 << n_pickups) - 1
        if int(info.get("channel_mask", 0) or 0) != mask:

            def set_channels(client: Any) -> None:
                client.set_channels(mask)

            s.link.call(set_channels)
            info["channel_mask"] = mask
        return True

    def fit_on_simulator(self, wanted: list[Any]) -> int:
        """Put exactly ``wanted`` (job weights) on the simulated rotor, by their geometry, in the
        link's thread; returns the epoch of the revolutions measured after the change."""

        def fit(client: Any) -> None:
            rotor = client.transport.machine
            if self._fitter is None or self._fitter.machine is not rotor:
                self._fitter = VirtualRotorFitter(rotor)
            self._fitter.fit(list(wanted))

        return self.session.link.call(fit)

    def _tell_screen(self, message: object, *, status: bool = True) -> None:
        if not self._screen_stack:  # starting up or shutting down
            return
        screen = self.screen
        refresh = getattr(screen, "refresh_status", None)
        if status and refresh is not None:
            refresh()
        if message is not None and hasattr(screen, "meter_event"):
            screen.meter_event(message)

    def on_meter_connected(self, message: MeterConnected) -> None:
        was_lost = "LOST" in self.session.meter_state
        self._failed_ports.discard(message.port)
        self.session.device_info = message.info
        self.session.live.info = message.info  # taken readings: the joint fit (runtrue.readings.joint)
        self.session.meter_state = "connected"
        if was_lost:
            self.notify("Meter is back. The job was kept; carry on.", title="Reconnected")
        self._tell_screen(message)

    def on_meter_lost(self, message: MeterLost) -> None:
        s = self.session
        if "LOST" not in s.meter_state:
            self.notify(
                f"Lost the meter on {message.port} ({message.reason}). Check the USB cable; "
                "runtrue reconnects by itself. Every reading taken so far is saved.",
                title="Meter lost",
                severity="error",
                timeout=8,
            )
        s.meter_state = "LOST - reconnecting"
        s.live.cancel()
        self._tell_screen(message)

    def on_meter_failed(self, message: MeterFailed) -> None:
        s = self.session
        s.meter_state = "cannot open - retrying"
        if s.link is not None and message.port not in self._failed_ports:
            self._failed_ports.add(message.port)  # said once; the title bar keeps showing it
            self.notify(
                f"Cannot open {message.port}: {message.reason}",
                title="No meter",
                severity="error",
                timeout=6,
            )
        self._tell_screen(message)

    def on_revolutions_read(self, message: RevolutionsRead) -> None:
        self.session.live.add(message.revs, message.lost_frames, message.epoch)
        self._tell_screen(message, status=False)

    def on_self_test_done(self, message: SelfTestDone) -> None:
        self.session.self_test = message.result
        self._tell_screen(message)

    def on_command_failed(self, message: CommandFailed) -> None:
        what = message.what.replace("_", " ")
        self.notify(f"The meter could not do {what}: {message.reason}", title="Meter", severity="error", timeout=8)
        self._tell_screen(message)

    def _set_plain(self, on: bool) -> None:
        self.plain = on
        use_plain(on)
        ScrollBar.renderer = PlainScrollBarRender if on else ScrollBarRender
        self.set_class(on, "-plain")
        # 8/16 colours (the Linux console, TERM=xterm, old Windows consoles): styles that stay legible
        self.set_class(on or self.console.color_system in ("standard", "windows"), "-few-colours")

    def action_toggle_plain(self) -> None:
        """F9: plots and dial in plain characters or braille (for a font that shows braille as boxes)."""
        self._set_plain(not self.plain)
        for widget in self.screen.query("*"):
            widget.refresh()
        self.notify("Plots in plain characters." if self.plain else "Plots in braille dots.",
                    title="F9", timeout=3)

    def get_key_display(self, binding: Binding) -> str:
        text = super().get_key_display(binding)
        if self.plain:
            for symbol, name in PLAIN_KEYS.items():
                text = text.replace(symbol, name)
        return text

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    # -- moving between steps -------------------------------------------------------------------
    def show_connect(self) -> None:
        self.switch_screen(ConnectScreen())

    def show_machine(self) -> None:
        self.switch_screen(MachineScreen())

    def show_runs(self) -> None:
        self.switch_screen(RunsScreen())

    def show_result(self) -> None:
        self.switch_screen(ResultScreen())
