"""Limits on every value a user or a file gives runtrue, and the messages that refuse the rest.

One pure module (no I/O, no numpy, no Textual) used by the command line, the application's
forms and the job store, so a value the forms refuse is refused the same way by the commands
and never reaches the database.  Every check returns the cleaned value or raises
:class:`ValidationError`, whose message says what is wrong and what to do, in one line.

The limits are our choices (documented here and in each command's ``--help``):

* physical: what an in-place balancing job on a shop machine can be.  Rotor mass 0.01 kg to
  100 t; running speed 30 rpm (below it the 1x acceleration is too small to read) to 30,000
  rpm (the meter's limit; pure calculations such as ``solve`` accept up to
  ``runtrue.balancing.forces.MAX_SPEED_RPM``); a weight 1 mg to 50 kg, at 1 mm to 10 m radius
  (``runtrue.balancing.forces``); a trial or correction weight at most 30 % of the rotor's
  weight as a mass (the trial safety cap, ``runtrue.balancing.trial``);
* sizes: what a person can type or a job can hold, so no input can make runtrue run for hours
  or fill memory: see the ``MAX_*`` constants below.
"""

from __future__ import annotations

import math
import re
from typing import Any

# ---- physical limits (our choices; see the module docstring) ------------------------------------
ROTOR_MASS_MIN_KG = 0.01
ROTOR_MASS_MAX_KG = 100_000.0
SPEED_MIN_RPM = 30.0
SPEED_MAX_RPM = 30_000.0  # the meter samples up to 30,000 rpm (DEVELOPERS.md, known limits)
CALC_SPEED_MAX_RPM = 200_000.0  # pure calculations; same as runtrue.balancing.forces.MAX_SPEED_RPM
WEIGHT_MIN_G = 0.001
WEIGHT_MAX_G = 50_000.0
RADIUS_MIN_MM = 1.0
RADIUS_MAX_MM = 10_000.0
#: A balance weight heavier than this share of the rotor's mass is not a balance weight.
WEIGHT_MAX_ROTOR_FRACTION = 0.30
#: A correction more than this many times the trial's unbalance means the trial run changed the
#: readings by less than 1/RATIO of the reference: the change is noise, the correction is not real.
CORRECTION_MAX_TRIAL_RATIO = 100.0
#: 1x amplitude: any unit the user reads in; beyond this it is not a vibration reading.
AMPLITUDE_MAX = 1.0e6

# ---- sizes ----------------------------------------------------------------------------------------
MAX_JSON_BYTES = 1_000_000  # a JSON input file
MAX_JSON_DEPTH = 32  # nesting of a JSON input
MAX_PLANES = 4  # correction planes in `solve` (the application: 1 or 2)
MAX_PICKUPS = 8
MAX_RUNS = 100  # runs in one job or one `solve` input
MAX_POSITIONS = 360  # weight positions in one plane
MAX_STOCK_SIZES = 32
MAX_STOCK_COUNT = 10_000  # pieces of one size
MAX_PIECES_PER_POSITION = 50
MAX_EXISTING_WEIGHTS = 64
MAX_SEARCH_NODES = 20_000  # allocation search nodes (about 25 s at worst on a 2-core machine)
MAX_REVS = 10_000  # revolutions averaged in one reading (about 3 min at 3,000 rpm)
MAX_TIMEOUT_S = 600.0
MIN_TIMEOUT_S = 0.1
MAX_SEED = 2**32 - 1
MAX_JOB_ID = 2**63 - 1  # SQLite's largest row id
MAX_NAME_CHARS = 80  # machine name
MAX_LABEL_CHARS = 40  # pickup label, plane name
MAX_NOTE_CHARS = 2_000


class ValidationError(ValueError):
    """A value runtrue refuses; the message says what is wrong and what to do.  ``field`` names
    the value (a form field id or a JSON key) when known."""

    def __init__(self, message: str, field: str = "") -> None:
        super().__init__(message)
        self.field = field


def _g(x: float) -> str:
    return f"{x:.6g}"


def number(value: Any, what: str, *, field: str = "") -> float:
    """``value`` as a finite float (bools, text and NaN/inf refused)."""
    if isinstance(value, bool):
        raise ValidationError(f"{what} must be a number, got {value!r}", field)
    if isinstance(value, str):
        text = value.strip().replace(",", ".")
        try:
            value = float(text)
        except ValueError:
            raise ValidationError(f"{what}: write a number (got {text[:40]!r})", field) from None
    if not isinstance(value, (int, float)):
        raise ValidationError(f"{what} must be a number, got {type(value).__name__}", field)
    try:
        x = float(value)
    except OverflowError:
        raise ValidationError(f"{what} is far too large; check the units", field) from None
    if not math.isfinite(x):
        raise ValidationError(f"{what} must be a finite number, got {value!r}", field)
    return x


def in_range(value: Any, what: str, lo: float, hi: float, unit: str, advice: str = "check the units", *,
             field: str = "") -> float:
    """A finite number within ``lo``..``hi`` (inclusive), or a message naming the range."""
    x = number(value, what, field=field)
    if not lo <= x <= hi:
        raise ValidationError(
            f"{what} {_g(x)} {unit} is outside {_g(lo)}-{_g(hi)} {unit}; {advice}".replace("  ", " "), field
        )
    return x


def whole(value: Any, what: str, lo: int, hi: int, *, field: str = "") -> int:
    """A whole number within ``lo``..``hi`` (JSON 3.0 is accepted as 3)."""
    if isinstance(value, bool):
        raise ValidationError(f"{what} must be a whole number, got {value!r}", field)
    if isinstance(value, int):
        n = value
    else:
        x = number(value, what, field=field)
        if x != int(x):
            raise ValidationError(f"{what} must be a whole number, got {_g(x)}", field)
        n = int(x)
    if not lo <= n <= hi:
        shown = str(n) if abs(n) < 10**15 else f"{float(n):.3g}"
        bound = f"at least {lo} (up to {hi})" if n < lo else f"at most {hi} (from {lo})"
        raise ValidationError(f"{what} must be {bound}, got {shown}", field)
    return n


# ---- physical values -----------------------------------------------------------------------------
def rotor_mass_kg(value: Any, *, field: str = "mass") -> float:
    return in_range(value, "rotor mass", ROTOR_MASS_MIN_KG, ROTOR_MASS_MAX_KG, "kg",
                    "give the mass of the rotating part in kilograms", field=field)


def speed_rpm(value: Any, *, field: str = "speed", calc: bool = False) -> float:
    hi = CALC_SPEED_MAX_RPM if calc else SPEED_MAX_RPM
    return in_range(value, "running speed", SPEED_MIN_RPM, hi, "rpm",
                    "give the running speed in revolutions per minute (the meter reads 30-30000 rpm)"
                    if not calc else "give the running speed in revolutions per minute", field=field)


def radius_mm(value: Any, what: str = "radius", *, field: str = "") -> float:
    return in_range(value, what, RADIUS_MIN_MM, RADIUS_MAX_MM, "mm",
                    "measure from the shaft axis to where the weight sits, in millimetres", field=field)


def weight_g(value: Any, what: str = "weight mass", *, field: str = "",
             rotor_mass_kg: float | None = None) -> float:
    """A balance weight's mass in g; with ``rotor_mass_kg``, also at most 30 % of the rotor."""
    m = in_range(value, what, WEIGHT_MIN_G, WEIGHT_MAX_G, "g", "check the units (grams)", field=field)
    if rotor_mass_kg is not None and m > WEIGHT_MAX_ROTOR_FRACTION * rotor_mass_kg * 1000.0:
        raise ValidationError(
            f"{what} {_g(m)} g is more than {WEIGHT_MAX_ROTOR_FRACTION:.0%} of the rotor's "
            f"{_g(rotor_mass_kg)} kg: check the units (grams) and the rotor mass", field)
    return m


def angle_deg(value: Any, what: str = "angle", *, field: str = "") -> float:
    """Any finite angle in degrees, wrapped to 0-360."""
    return in_range(value, what, -1e6, 1e6, "deg", "give degrees from the mark", field=field) % 360.0


def amplitude(value: Any, what: str = "amplitude", *, field: str = "") -> float:
    return in_range(value, what, 0.0, AMPLITUDE_MAX, "", "give the 1x amplitude as a positive number "
                    "(the direction goes in the phase)", field=field)


def text(value: Any, what: str, max_chars: int, *, field: str = "", required: bool = False) -> str:
    """Printable text, stripped, at most ``max_chars`` characters."""
    if not isinstance(value, str):
        raise ValidationError(f"{what} must be text", field)
    t = value.strip()
    if required and not t:
        raise ValidationError(f"give a {what}", field)
    if len(t) > max_chars:
        raise ValidationError(f"{what} is {len(t)} characters; keep it to {max_chars}", field)
    if re.search(r"[\x00-\x1f\x7f]", t):
        raise ValidationError(f"{what} contains control characters; type plain text", field)
    return t


# ---- command-line values -------------------------------------------------------------------------
def seed(value: Any) -> int:
    return whole(value, "--seed", 0, MAX_SEED)


def revs(value: Any, what: str = "--revs", lo: int = 2) -> int:
    return whole(value, what, lo, MAX_REVS)


def timeout_s(value: Any, what: str = "--timeout") -> float:
    return in_range(value, what, MIN_TIMEOUT_S, MAX_TIMEOUT_S, "s", "give seconds to wait for one revolution")


def job_id(value: Any) -> int:
    return whole(value, "job number", 1, MAX_JOB_ID)


# ---- a machine and a job --------------------------------------------------------------------------
def check_machine(machine: Any) -> None:
    """Every field of a ``runtrue.jobs.model.Machine`` within the limits, before it is saved."""
    text(machine.name, "machine name", MAX_NAME_CHARS, field="name", required=True)
    mass = rotor_mass_kg(machine.rotor_mass_kg)
    speed_rpm(machine.speed_rpm)
    text(getattr(machine, "notes", "") or "", "notes", MAX_NOTE_CHARS, field="notes")
    if not 1 <= len(machine.planes) <= 2:
        raise ValidationError("a machine has one or two correction planes", "planes")
    for p, plane in enumerate(machine.planes, start=1):
        radius_mm(plane.radius_mm, f"plane {p} radius", field=f"p{p}_radius")
        if plane.count is not None:
            whole(plane.count, f"plane {p} positions", 1, MAX_POSITIONS, field=f"p{p}_pos")
        if plane.angles_deg is not None:
            if not 1 <= len(plane.angles_deg) <= MAX_POSITIONS:
                raise ValidationError(f"plane {p}: give 1-{MAX_POSITIONS} position angles", f"p{p}_pos")
            for a in plane.angles_deg:
                angle_deg(a, f"plane {p} position angle", field=f"p{p}_pos")
        angle_deg(plane.first_angle_deg, f"plane {p} first position", field=f"p{p}_first")
        if plane.max_pieces_per_position is not None:
            whole(plane.max_pieces_per_position, "pieces per position", 1, MAX_PIECES_PER_POSITION, field="stack")
        if plane.max_mass_per_position_g is not None:
            weight_g(plane.max_mass_per_position_g, f"plane {p} mass limit per position", field=f"p{p}_pos")
        text(plane.name or "", f"plane {p} name", MAX_LABEL_CHARS, field=f"p{p}_pos")
    if not 1 <= len(machine.pickups) <= MAX_PICKUPS:
        raise ValidationError(f"describe 1-{MAX_PICKUPS} pickups", "pickups")
    for i, pk in enumerate(machine.pickups, start=1):
        text(pk.label, f"pickup {i} label", MAX_LABEL_CHARS, field="pickups")
    if len(machine.stock) > MAX_STOCK_SIZES:
        raise ValidationError(f"list at most {MAX_STOCK_SIZES} stock sizes", "stock")
    for s in machine.stock:
        weight_g(s.mass_g, "stock piece mass", field="stock", rotor_mass_kg=mass)
        whole(s.count, "stock count", 0, MAX_STOCK_COUNT, field="stock")
    if machine.strip is not None:
        in_range(machine.strip.grams_per_mm, "strip mass per mm", 1e-4, 1000.0, "g/mm",
                 "weigh a length of strip and divide by its length", field="stock")


def check_weight(w: Any, *, rotor_mass_kg: float | None = None, n_planes: int | None = None) -> None:
    """A ``runtrue.jobs.model.Weight`` (plane, mass_g, angle_deg, radius_mm) within the limits."""
    hi = n_planes if n_planes is not None else MAX_PLANES
    whole(w.plane, "weight plane", 1, hi, field="plane")
    weight_g(w.mass_g, f"plane {w.plane} weight", field="mass", rotor_mass_kg=rotor_mass_kg)
    angle_deg(w.angle_deg, f"plane {w.plane} weight angle", field="angle")
    radius_mm(w.radius_mm, f"plane {w.plane} weight radius", field="radius")


def check_correction_plausible(correction_gmm: float, trial_gmm: float, plane: int) -> None:
    """Refuse a correction that only a trial run which changed nothing can give.

    The correction is about the trial times reference/change; far beyond the trial, the change
    was lost in the noise and the number means nothing (our limit, CORRECTION_MAX_TRIAL_RATIO)."""
    if trial_gmm > 0 and correction_gmm > CORRECTION_MAX_TRIAL_RATIO * trial_gmm:
        raise ValidationError(
            f"plane {plane}: the trial run barely changed the readings (the correction would be "
            f"{correction_gmm / trial_gmm:.3g} times the trial weight), so no correction can be trusted; "
            "repeat the trial run with a heavier trial weight, one that changes the 1x amplitude by "
            "about 30 % or its phase by about 30 degrees (common practice)", "trial")
