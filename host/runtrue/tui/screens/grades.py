"""A pop-up table of typical balance quality grades by rotor type; Enter picks one."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

from runtrue.tui.grades import SOURCE, TYPICAL_GRADES


class GradeTable(ModalScreen[str | None]):
    BINDINGS = [Binding("escape", "dismiss(None)", "Close")]

    def compose(self) -> ComposeResult:
        with Vertical(id="grade-box"):
            yield Static("Typical balance quality grades", classes="pane-title")
            yield OptionList(
                *[Option(f"{g:5} {text}", id=f"{i}") for i, (g, text) in enumerate(TYPICAL_GRADES)],
                id="grade-list",
            )
            yield Static(f"Source: {SOURCE}. Enter picks, Esc closes.", classes="note", markup=False)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(TYPICAL_GRADES[int(event.option.id or 0)][0])
