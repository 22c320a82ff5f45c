"""What every screen has: a one-line title bar with the step and the meter's state, and the
footer listing every key.  Screens build their body in ``compose_body``.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING

from textual.app import ComposeResult
from textual.css.query import NoMatches
from textual.screen import Screen
from textual.widget import Widget
from textual.widgets import Footer, Static

if TYPE_CHECKING:
    from runtrue.tui.app import RuntrueApp
    from runtrue.tui.session import Session


class StepScreen(Screen):
    """A screen of the job.  ``STEP`` names it in the title bar."""

    STEP = ""

    @property
    def rt_app(self) -> RuntrueApp:
        return self.app  # type: ignore[return-value]

    @property
    def session(self) -> Session:
        return self.rt_app.session

    def compose(self) -> ComposeResult:
        yield Static(self._title_text(), id="titlebar", markup=False)
        yield Static("", id="notice", markup=False)  # notifications: under the title bar, over nothing
        yield from self.compose_body()
        yield Footer()

    def compose_body(self) -> Iterable[Widget]:
        return []

    def _title_text(self) -> str:
        return f" runtrue | {self.STEP}"

    def on_mount(self) -> None:
        self.refresh_status()

    def refresh_status(self) -> None:
        """Redraw the title bar (meter state changes come through here)."""
        try:
            bar = self.query_one("#titlebar", Static)
        except NoMatches:  # not composed yet, or going away
            return
        state = self.session.meter_state
        width = max(20, self.size.width or 80)
        left = self._title_text()
        right = f"meter: {state} "
        pad = max(1, width - len(left) - len(right))
        bar.update(left + " " * pad + right)
        bar.set_class("LOST" in state, "lost")

    def on_resize(self) -> None:
        self.refresh_status()

    def show_notice(self, text: str, severity: str = "information", timeout_s: float = 6.0) -> None:
        """Show a notification in the line under the title bar (it pushes the body down rather
        than covering it, so the text it reports on stays readable at 80x24); "" hides it."""
        try:
            notice = self.query_one("#notice", Static)
        except NoMatches:
            return
        notice.update(text)
        notice.set_classes(f"shown {severity}" if text else "")
        old = getattr(self, "_notice_timer", None)
        if old is not None:
            old.stop()
        self._notice_timer = self.set_timer(timeout_s, lambda: self.show_notice("")) if text else None

    def meter_event(self, message: object) -> None:
        """Called by the App after it has handled a meter message (override to react)."""
