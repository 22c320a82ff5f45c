"""The words a job says to the user: cautions, instructions for each step, trial verdicts.

Plain text built from a job's state; no decisions are taken here (the job's state machine and
its balancing method take them).  Conventions as in ``runtrue.jobs.model``: weight angles from
the reference mark (or, in the amplitude-only method, a chalk mark) against rotation.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from runtrue.jobs.model import ANGLE_CONVENTION, Machine, Weight
from runtrue.jobs.results import STANDARD
from runtrue.jobs.weights import is_trial, position_number
from runtrue.readings.numbers import force_text, mass_text, unbalance_text
from runtrue.readings.units import angle_diff_deg, lag_deg

if TYPE_CHECKING:
    from runtrue.jobs.job import BalanceJob

CAUTIONS: tuple[str, ...] = (
    "Stop the machine and lock it out (isolate and tag the supply) before touching the rotor or fitting weights.",
    "Never run above the rated speed of the rotor, wheel or machine.",
    "Secure every weight for the centrifugal force shown; a loose weight is a projectile.",
    "Stand clear of the plane of rotation when starting up; keep guards in place.",
    "Follow the machine maker's instructions, local codes and licensed practice; they take precedence.",
)

#: The convention sentence of an amplitude-only job (there is no reference mark: a chalk mark
#: takes its place for angles, and phase is not used).
AMPLITUDE_ONLY_CONVENTION = (
    "Weight angles are measured from the chalk mark (0°) against the direction of rotation; "
    "phase is not used (amplitude-only method)."
)

PHASE_NOT_USED = (
    "Amplitude-only balancing (four-run method): only the 1x amplitude of each run is used; "
    "a phase shown by the meter is ignored."
)

#: The trade's rule for a trial run worth using (common practice, no standard): the trial moves
#: the 1x amplitude by at least 30 % or its phase by at least 30 degrees.
TRIAL_GOOD_CHANGE_PCT = 30.0
TRIAL_GOOD_CHANGE_DEG = 30.0


#: Said when the user chose the trial weight instead of the suggestion.
TRIAL_CHOSEN_BY_USER = "Trial weight chosen by the user."


def first_trial_words(force_limit_n: float) -> str:
    """Said with the first suggested trial weight of a job (or of a four-run cycle)."""
    return (f"Trial weight sized to move the reading clearly (common practice) and kept under the "
            f"{force_text(force_limit_n)} force limit.")


def trial_change(before: complex, after: complex) -> tuple[float, float]:
    """(amplitude change in percent, phase change in degrees, -180..180) from one run to the next."""
    pct = (abs(after) / abs(before) - 1.0) * 100.0 if abs(before) > 0 else math.inf
    if abs(before) == 0 or abs(after) == 0:
        return pct, 0.0
    return pct, angle_diff_deg(lag_deg(after), lag_deg(before))


def trial_change_words(pct: float, deg: float, with_phase: bool = True) -> str:
    """``amplitude +35 %, phase +42°`` and whether that meets the common-practice rule."""
    big = abs(pct) >= TRIAL_GOOD_CHANGE_PCT or (with_phase and abs(deg) >= TRIAL_GOOD_CHANGE_DEG)
    text = f"amplitude {pct:+.0f} %" + (f", phase {deg:+.0f}°" if with_phase else "")
    rule = (f"at least {TRIAL_GOOD_CHANGE_PCT:.0f} % or {TRIAL_GOOD_CHANGE_DEG:.0f}° (common practice)" if with_phase
            else f"at least {TRIAL_GOOD_CHANGE_PCT:.0f} % (common practice)")
    return f"{text}; {'meets' if big else 'under'} the usual {rule}"


def weight_where(machine: Machine, plane: int, w: Weight) -> str:
    """``position 3 (90.0°)`` at a numbered position, else ``90.0°``."""
    pos = position_number(machine, plane, w.angle_deg)
    return f"position {pos} ({w.angle_deg:.1f}°)" if pos is not None else f"{w.angle_deg:.1f}°"


def chalk(line: str) -> str:
    """A line of the reference-mark method said for the chalk mark of the amplitude-only method."""
    if line == ANGLE_CONVENTION:
        return AMPLITUDE_ONLY_CONVENTION
    return line.replace("the reference mark", "the chalk mark (0°)")


def holes_words(machine: Machine) -> str:
    """Where to put the chalk mark on a plane with numbered positions (empty in a groove)."""
    spec = machine.planes[0]
    if spec.position_angles_deg() is None:
        return ""
    first = (spec.position_angles_deg() or [0.0])[0]
    return (
        f" (with numbered positions, put it where they are counted from, so that position 1 is at "
        f"{first:g}° from it)"
    )


def take_off_line(machine: Machine, w: Weight) -> str:
    """``Take off the trial weight: 5 g at 90.0° in plane 1.``"""
    return (f"Take off the {'trial weight' if is_trial(w) else (w.label or 'weight')}: {mass_text(w.mass_g)} at "
            f"{w.angle_deg:.1f}° in {machine.plane_name(w.plane)}.")


def trial_where(machine: Machine, t: Weight) -> str:
    """Where the trial weight of a one-plane (amplitude-only) job goes."""
    return weight_where(machine, 1, t)


def influence_instructions(job: BalanceJob) -> list[str]:
    """What to do now in a job with a reference mark, step by step, in plain sentences
    (conventions and cautions included)."""
    s, m = job.state, job.machine
    speed = f"{m.speed_rpm:g} rpm"
    out: list[str] = []
    if s.message:
        out.append(s.message)
    if s.step == "reference":
        left = job.weights_at_start
        as_found = (f"with the {len(left)} weight(s) left by the last job still on and nothing added" if left
                    else "as found, with no weights added")
        out += [
            f"Reference run: run {m.name} at its working speed ({speed}), {as_found}.",
            "Stand clear of the plane of rotation when starting up; never exceed the rated speed.",
            "Take the reading when it has settled.",
        ]
        if job.options.get("use_stored_influence"):
            out.append("Stored influence coefficients will be used: the next step is the correction.")
    elif s.step == "trial":
        t = s.trial
        assert t is not None and s.plane is not None
        where = weight_where(m, s.plane, t)
        verdict_first = 1 if s.message and "TOO SMALL" in s.message else 0
        out.insert(verdict_first, f"Fit {mass_text(t.mass_g)} at {where} in {m.plane_name(s.plane)}, radius "
                                  f"{t.radius_mm:g} mm - secure it for {force_text(job.force_n(t))} - then r.")
        out.append("Stop the machine and lock it out first.")
        removing = job.to_remove_before_trial()
        for w in removing:
            out.append(take_off_line(m, w))
        staying = [w for w in (job.runs[-1].weights if job.runs else ()) if w not in removing]
        if staying:
            out.append(f"Leave the {len(staying)} weight(s) already fitted where they are.")
        out.append(m.angle_direction_words(s.plane))
        out.append(f"Stand clear, start up, run at {speed} (never above the rated speed) and take the reading.")
    elif s.step in ("correction", "trim"):
        plan = s.plan
        what = "Correction" if s.step == "correction" else f"Trim run {s.trims_done + 1}"
        if plan is None:
            out.append(f"{what}: no correction could be worked out (see above). Take another run or stop the job.")
            out.append(ANGLE_CONVENTION)
            return out
        rows = [(pc, row) for pc in plan.planes for row in pc.sheet if getattr(row, "action", "fit") == "fit"]
        if len(rows) == 1:
            pc, row = rows[0]
            at = f"position {row.number} ({row.angle_deg:.1f}°)" if row.number is not None else f"{row.angle_deg:.1f}°"
            head = (f"Fit {row.what} ({mass_text(row.mass_g)}) at {at} in {m.plane_name(pc.plane)} - "
                    f"secure for {force_text(row.force_n)} - then r.")
        else:
            head = f"{what}: fit the {len(rows)} pieces below (f: the list to tick off), then r."
        poor = job.poor_prediction()
        out[0:0] = [poor, head] if poor else [head]
        out.append(f"{what}: stop the machine and lock it out first.")
        for w in plan.remove:
            out.append(take_off_line(m, w))
        staying = [w for w in (job.runs[-1].weights if job.runs else ()) if w not in plan.remove]
        if staying:
            out.append(f"Leave the {len(staying)} weight(s) already fitted where they are; add:")
        for pc in plan.planes:
            c = pc.correction
            out.append(
                f"{m.plane_name(pc.plane)}: the correction is {mass_text(c.mass_g)} at {c.angle_deg:.1f}°, "
                f"radius {c.radius_mm:g} mm."
            )
            for row in pc.sheet:
                at = f"position {row.number} " if row.number is not None else ""
                out.append(
                    f"  Fit {row.what} at {at}{row.angle_deg:.1f}°, radius {row.radius_mm:g} mm "
                    f"({mass_text(row.mass_g)}, secure for {force_text(row.force_n)})."
                )
            out.append(m.angle_direction_words(pc.plane))
        out.append(f"Stand clear, start up, run at {speed} (never above the rated speed) and take the reading.")
    else:
        r = job.result()
        if r.passed:
            out.append(f"Done: residual unbalance within {r.grade} ({STANDARD}). Remove the meter and tape; refit the guards.")
        else:
            out.append("Stopped before the grade was met. The runs so far are kept with the job.")
    if s.step not in ("trial", "correction", "trim"):  # those say how to count angles for their plane
        out.append(ANGLE_CONVENTION)
    return out


def four_run_instructions(job: BalanceJob) -> list[str]:
    """What to do now in an amplitude-only job (as :func:`influence_instructions`), with the
    chalk mark in place of the reference mark."""
    return [chalk(line) for line in _four_run_lines(job)]


def _four_run_lines(job: BalanceJob) -> list[str]:
    s, m = job.state, job.machine
    speed = f"{m.speed_rpm:g} rpm"
    out: list[str] = [PHASE_NOT_USED]
    if s.step == "reference":
        if s.message:
            out.append(s.message)
        out += [
            "Chalk or paint a mark on the rotor and call it 0°: any point will do"
            + holes_words(m)
            + ". Every angle in this job is measured from that mark, against the direction of rotation.",
            f"Reference run: run {m.name} at its working speed ({speed}), "
            + (f"with the {len(job.weights_at_start)} weight(s) left by the last job still on and nothing added."
               if job.weights_at_start else "as found, with no weights added."),
            "Stand clear of the plane of rotation when starting up; never exceed the rated speed.",
            "Take the reading (amplitude) when it has settled.",
            ANGLE_CONVENTION,
        ]
        return out
    if s.step == "trial":
        t = s.trial
        assert t is not None and s.trial_number is not None
        if s.message:
            out.insert(0, s.message)  # the verdict on the last run comes first
        k = s.trial_number
        head_at = 1 if s.message and ("SMALL" in s.message or "GOOD" in s.message) else 0
        force = force_text(job.force_n(t))
        if k == 1:
            out.insert(head_at, f"Fit {mass_text(t.mass_g)} at {trial_where(m, t)} from the chalk mark - secure it "
                                f"for {force} - then r.")
        else:
            out.insert(head_at, f"Move the trial weight to {trial_where(m, t)} - secure it for {force} - then r.")
        out.append(f"Four-run cycle {s.cycle}, trial run {k} of 3: stop the machine and lock it out.")
        if s.cycle > 1 and k == 1:
            out.append(
                "This cycle starts from the corrected rotor: leave the correction weights where they are; "
                "the last check run is this cycle's reference run."
            )
        where = trial_where(m, t)
        if k == 1:
            out.append(
                f"Fit the trial weight: {t.mass_g:.3g} g at {where}, radius {t.radius_mm:g} mm, "
                "measured from the chalk mark against rotation."
            )
        else:
            prev = s.trial_angles_deg[k - 2]
            out.append(
                f"Move the same trial weight ({t.mass_g:.3g} g) from {prev:.1f}° to {where}, "
                f"radius {t.radius_mm:g} mm."
            )
        out.append(
            "The three trial angles of this cycle: " + ", ".join(f"{a:.1f}°" for a in s.trial_angles_deg)
            + " (the positions closest to 0°, 120° and 240° from the first one)."
        )
        out.append(m.angle_direction_words(1))
        out.append(f"Stand clear, start up, run at {speed} (never above the rated speed) and take the reading.")
        out.append(ANGLE_CONVENTION)
        return out
    base = influence_instructions(job)
    if s.step in ("correction", "trim"):
        out.append(f"Correction from four-run cycle {s.cycle} (amplitudes only).")
        out += base
        out.insert(
            len(out) - 1,
            "This run checks the correction: the residual unbalance is estimated from its amplitude.",
        )
        return out
    r = job.result()
    if r.residual_unbalance_gmm:
        out.append(
            f"Residual unbalance about {unbalance_text(r.residual_unbalance_gmm[0])}, estimated from the amplitude "
            f"alone (no phase); permissible {unbalance_text(r.permissible_unbalance_gmm[0])}."
        )
    return out + base
