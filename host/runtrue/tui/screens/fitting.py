"""Fitting: where each weight goes, on a dial of the rotor face with the reference mark and the
direction of rotation, and a list to tick off as each weight is taken off or fitted.

Convention (said on the screen): angles from the reference mark against rotation; the dial is
drawn as seen from the end the fitter stands at for that plane (machine record).
"""

from __future__ import annotations

from collections.abc import Iterable

from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widget import Widget
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

from runtrue.jobs.model import VIEW_SIDE_WORDS
from runtrue.tui.fitting_list import FitItem, fit_items
from runtrue.tui.format import SAFETY_FIT, rotation_words
from runtrue.tui.method import is_four_run
from runtrue.tui.screens.base import StepScreen
from runtrue.tui.screens.dialogs import ConfirmDialog
from runtrue.tui.units_text import radius_text
from runtrue.tui.widgets.dial import DialData, FittingDial


class FittingScreen(StepScreen):
    STEP = "4 Fitting"
    BINDINGS = [
        Binding("space", "tick", "Tick off"),
        Binding("r", "run", "Reading"),
        Binding("p", "plane", "Next plane"),
        Binding("escape", "back", "Back to runs"),
        Binding("f1", "app.help", "Help"),
    ]

    def compose_body(self) -> Iterable[Widget]:
        with Horizontal(id="fit-body"):
            with Vertical(id="fit-left"):
                yield Static("", id="fit-plane", classes="pane-title", markup=False)
                yield FittingDial(id="fit-dial")
            with Vertical(id="fit-right"):
                yield Static("Tick each one off (Space)", classes="pane-title")
                yield OptionList(id="fit-list")
                yield Static("", id="fit-convention", classes="note", markup=False)
        yield Static(SAFETY_FIT, id="caution", classes="caution", markup=False)

    def on_mount(self) -> None:
        super().on_mount()
        job = self.session.job
        self.items: list[FitItem] = fit_items(job, self.rt_app.units) if job is not None else []
        self.ticked: set[str] = self.rt_app.ticked
        self.plane = min((i.plane for i in self.items), default=1)
        sl = self.query_one("#fit-list", OptionList)
        for item in self.items:
            sl.add_option(Option(self._prompt(item), id=item.key))
        if not self.items:
            sl.add_option(Option("Nothing to fit or take off for this run.", disabled=True))
        if self.items:
            sl.highlighted = 0
        sl.focus()
        self._draw_dial()

    def _draw_dial(self) -> None:
        job = self.session.job
        if job is None:
            return
        m = job.machine
        spec = m.planes[self.plane - 1]
        placements = [
            (i.letter, i.angle_deg, i.key in self.ticked) for i in self.items if i.plane == self.plane
        ]
        where = "any angle" if spec.continuous else f"{len(spec.position_angles_deg() or [])} positions"
        of = f" ({self.plane}/{m.n_planes})" if m.n_planes > 1 else ""
        self.query_one("#fit-plane", Static).update(
            f"{m.plane_name(self.plane)}{of}: r {radius_text(spec.radius_mm, self.rt_app.units)}, {where}"
        )

        self.query_one(FittingDial).show(
            DialData(m.turns_seen_from(self.plane), spec.position_angles_deg() or [], placements,
                     mark_label="CHALK" if is_four_run(job) else "MARK",
                     seen_from=VIEW_SIDE_WORDS[spec.view_side].replace("the ", ""))
        )
        mark = "chalk mark (0\N{DEGREE SIGN})" if is_four_run(job) else "mark"
        self.query_one("#fit-convention", Static).update(
            f"Angles from the {mark}, against rotation. Seen {VIEW_SIDE_WORDS[spec.view_side]}, as drawn: "
            f"the rotor turns {rotation_words(m.turns_seen_from(self.plane))}."
        )

    def _prompt(self, item: FitItem) -> str:
        box = "(x)" if item.key in self.ticked else "( )"
        return f"{box} {item.text}"

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.action_tick()

    def action_tick(self) -> None:
        sl = self.query_one("#fit-list", OptionList)
        if sl.highlighted is None or not self.items:
            return
        key = sl.get_option_at_index(sl.highlighted).id
        item = next((i for i in self.items if i.key == key), None)
        if item is None or key is None:
            return
        if key in self.ticked:
            self.ticked.discard(key)
        else:
            self.ticked.add(key)
        sl.replace_option_prompt(key, self._prompt(item))
        if key in self.ticked and sl.highlighted is not None and sl.highlighted < len(self.items) - 1:
            sl.highlighted += 1  # ticked: on to the next one
            nxt = self.items[sl.highlighted]
            if nxt.plane != self.plane:
                self.plane = nxt.plane
        self._draw_dial()
        if self.items and len(self.ticked & {i.key for i in self.items}) == len(self.items):
            self.notify("All done. Tools and loose parts off the rotor, guards on, stand clear, then r.",
                        title="Ready to run", timeout=5)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        job = self.session.job
        if action == "plane":
            return job is not None and job.machine.n_planes > 1
        return True

    def action_plane(self) -> None:
        job = self.session.job
        if job is None:
            return
        self.plane = self.plane % job.machine.n_planes + 1
        self._draw_dial()

    def action_back(self) -> None:
        self.dismiss(None)

    def action_run(self) -> None:
        """Start the run: at once when every item is ticked off, else after a confirmation."""
        left = [i for i in self.items if i.key not in self.ticked]
        if not left:
            self.dismiss("run")
            return

        lines = [f"{len(left)} of {len(self.items)} item(s) not ticked off:"]
        lines += ["  " + i.text.splitlines()[0].strip() for i in left[:6]]
        lines.append("Run only if they are done: a weight left loose or missing changes the answer, "
                     "and a loose one is a projectile.")

        def answered(yes: bool | None) -> None:
            if yes:
                self.dismiss("run")

        self.app.push_screen(ConfirmDialog("Not everything is ticked off", lines, yes="y: all done, run"), answered)
