"""The machine form's text fields <-> ``runtrue.jobs.model.Machine``: pure parsing, with
messages that say what is wrong and what to write instead.

Field syntax (shown as placeholders on the screen):

* positions: ``8`` (8 equally spaced holes), ``any`` (continuous groove or rim),
  or a list of angles ``0, 40, 95`` (degrees from the mark, against rotation);
* stock: ``1x6 2x6 5x4`` (mass in g x how many), or ``strip 0.8`` (strip, g per mm), or empty;
* pickups: labels separated by ``;`` (one per meter channel, in channel order).
"""

from __future__ import annotations

import math
import re

from runtrue.balancing.grades import grade_label, parse_grade
from runtrue.jobs.model import Machine, Pickup, PlaneSpec, StockPiece, StripSpec
from runtrue.validation import ValidationError, check_machine

FIELDS: tuple[tuple[str, str, str], ...] = (
    # id, label, placeholder
    ("name", "Machine name", "e.g. Boiler-house fan 2"),
    ("mass", "Rotor mass kg", "mass of the rotating part, kg"),
    ("speed", "Running speed rpm", "normal working speed"),
    ("rated", "Rated speed rpm", "maker's max (blank: unknown)"),
    ("rotation", "Rotation", "cw or ccw, from the drive end"),
    ("grade", "Grade (ISO)", "G6.3 (F3: typical grades)"),
    ("planes", "Planes", "1 or 2 correction planes"),
    ("p1_name", "Plane 1 name", "e.g. inlet side (optional)"),
    ("p1_view", "Plane 1 seen from", "drive or far: where you stand"),
    ("p1_radius", "Plane 1 radius mm", "radius where weights sit"),
    ("p1_pos", "Plane 1 positions", "8 | any | 0, 40, 95"),
    ("p1_first", "Plane 1 first, deg", "deg from mark (usually 0)"),
    ("p1_blocked", "Plane 1 not usable", "position numbers, e.g. 3, 7"),
    ("p2_name", "Plane 2 name", "(two planes only)"),
    ("p2_view", "Plane 2 seen from", "drive or far"),
    ("p2_radius", "Plane 2 radius mm", "(two planes only)"),
    ("p2_pos", "Plane 2 positions", "8 | any | 0, 40, 95"),
    ("p2_first", "Plane 2 first, deg", "deg"),
    ("p2_blocked", "Plane 2 not usable", "position numbers"),
    ("stock", "Stock weights, g", "1x6 2x6 (g x count)|strip 0.8"),
    ("stack", "Pieces per hole", "most per hole (blank: any)"),
    ("pickups", "Pickups", "names in channel order: a; b"),
)


class FormError(ValueError):
    """A field is wrong: ``field`` names it so the screen can put the cursor there."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field


def _number(values: dict[str, str], key: str, what: str, *, positive: bool = True) -> float:
    text = values.get(key, "").strip().replace(",", ".")
    try:
        v = float(text)
    except ValueError:
        raise FormError(key, f"{what}: write a number (got {text!r})") from None
    if not math.isfinite(v) or (positive and v <= 0):
        raise FormError(key, f"{what} must be a positive number")
    return v


def parse_positions(text: str, radius_mm: float, first_deg: float, name: str) -> PlaneSpec:
    t = text.strip().lower()
    if t in ("", "any", "continuous", "groove"):
        return PlaneSpec(radius_mm=radius_mm, name=name, continuous=True)
    parts = [p for p in re.split(r"[,\s;]+", t) if p]
    if len(parts) == 1:
        try:
            count = int(parts[0])
        except ValueError:
            raise ValueError(f"positions: write a count like 8, 'any', or angles like 0, 40, 95 (got {text!r})") from None
        if count < 1:
            raise ValueError("positions: the count must be at least 1")
        return PlaneSpec(radius_mm=radius_mm, name=name, count=count, first_angle_deg=first_deg)
    try:
        angles = [float(p) for p in parts]
    except ValueError:
        raise ValueError(f"positions: angles must be numbers in degrees, like 0, 40, 95 (got {text!r})") from None
    return PlaneSpec(radius_mm=radius_mm, name=name, angles_deg=angles)


def parse_stock(text: str) -> tuple[list[StockPiece], StripSpec | None]:
    t = text.strip().lower()
    if not t:
        return [], None
    m = re.fullmatch(r"strip\s+([0-9.]+)(?:\s*g/mm)?", t)
    if m:
        g = float(m.group(1))
        if not g > 0:
            raise ValueError("strip: the mass per mm must be positive")
        return [], StripSpec(grams_per_mm=g)
    pieces = []
    for item in t.replace(",", " ").split():
        mm = re.fullmatch(r"([0-9.]+)\s*g?\s*[x*]\s*([0-9]+)", item)
        if not mm:
            raise ValueError(f"stock: write each size as mass x count, like 2x6 (got {item!r})")
        mass, count = float(mm.group(1)), int(mm.group(2))
        if not mass > 0 or count < 1:
            raise ValueError(f"stock: {item!r} needs a positive mass and a count of at least 1")
        pieces.append(StockPiece(mass_g=mass, count=count))
    return pieces, None


def machine_from_fields(values: dict[str, str], machine_id: int | None = None, base: Machine | None = None) -> Machine:
    """Build a Machine from the form; :class:`FormError` names the first wrong field.

    ``base`` is the machine the form was filled from: what the form does not show (plane names,
    mass limit per position, pickup angles, notes, strip cutting limits) is kept from it."""
    name = values.get("name", "").strip()
    if not name:
        raise FormError("name", "give the machine a name you will recognise next time")
    mass = _number(values, "mass", "rotor mass (kg)")
    speed = _number(values, "speed", "running speed (rpm)")
    rated: float | None = None
    if values.get("rated", "").strip():
        rated = _number(values, "rated", "rated speed (rpm)")
        if speed > rated:
            raise FormError("speed", f"running speed {speed:g} rpm is above the rated {rated:g} rpm: never run above it")
    rotation = values.get("rotation", "").strip().lower()
    if rotation not in ("cw", "ccw"):
        raise FormError("rotation", "rotation: write cw or ccw, as seen from the drive end")
    grade = values.get("grade", "").strip() or "G6.3"
    try:
        parse_grade(grade)
    except ValueError as exc:
        raise FormError("grade", str(exc)) from None
    planes_text = values.get("planes", "").strip() or "1"
    if planes_text not in ("1", "2"):
        raise FormError("planes", "planes: 1 or 2")
    planes = []
    for p in range(1, int(planes_text) + 1):
        radius = _number(values, f"p{p}_radius", f"plane {p} radius (mm)")
        first_text = values.get(f"p{p}_first", "").strip() or "0"
        try:
            first = float(first_text)
        except ValueError:
            raise FormError(f"p{p}_first", f"plane {p} first position: an angle in degrees") from None
        plane_name = values.get(f"p{p}_name", "").strip()
        try:
            spec = parse_positions(values.get(f"p{p}_pos", ""), radius, first, plane_name)
        except ValueError as exc:
            raise FormError(f"p{p}_pos", f"plane {p} {exc}") from None
        view = values.get(f"p{p}_view", "").strip().lower() or "drive"
        view = {"d": "drive", "drive end": "drive", "f": "far", "far end": "far"}.get(view, view)
        if view not in ("drive", "far"):
            raise FormError(f"p{p}_view", f"plane {p} seen from: write drive or far (the end you stand at)")
        spec.view_side = view
        blocked_text = values.get(f"p{p}_blocked", "").strip()
        if blocked_text:
            try:
                spec.excluded = sorted({int(x) for x in re.split(r"[,\s;]+", blocked_text) if x})
            except ValueError:
                raise FormError(f"p{p}_blocked", f"plane {p}: list position numbers, like 3, 7") from None
            n_pos = len(spec.position_angles_deg() or [])
            if spec.continuous or any(not 1 <= n <= n_pos for n in spec.excluded):
                raise FormError(f"p{p}_blocked", f"plane {p}: positions are numbered 1 to {n_pos}")
            if len(spec.excluded) >= n_pos:
                raise FormError(f"p{p}_blocked", f"plane {p}: leave at least one position usable")
        stack_text = values.get("stack", "").strip()
        if stack_text:
            try:
                spec.max_pieces_per_position = int(stack_text)
            except ValueError:
                raise FormError("stack", "pieces per position: a whole number, or blank for no limit") from None
            if spec.max_pieces_per_position < 1:
                raise FormError("stack", "pieces per position: at least 1")
        if base is not None and p <= base.n_planes:
            old = base.planes[p - 1]
            spec.max_mass_per_position_g = old.max_mass_per_position_g
        planes.append(spec)
    try:
        stock, strip = parse_stock(values.get("stock", ""))
    except ValueError as exc:
        raise FormError("stock", str(exc)) from None
    labels = [s.strip() for s in values.get("pickups", "").split(";") if s.strip()] or ["1"]
    pickups = [Pickup(label) for label in labels]
    notes = ""
    if base is not None:
        for i, pk in enumerate(pickups):
            if i < len(base.pickups):
                pk.angle_deg = base.pickups[i].angle_deg
        notes = base.notes
        if strip is not None and base.strip is not None and strip.grams_per_mm == base.strip.grams_per_mm:
            strip = base.strip
    try:
        machine = Machine(
            name=name,
            rotor_mass_kg=mass,
            speed_rpm=speed,
            planes=planes,
            rotation=rotation,  # type: ignore[arg-type]
            grade=grade_label(grade),
            pickups=pickups,
            stock=stock,
            strip=strip,
            notes=notes,
            id=machine_id,
            rated_speed_rpm=rated,
            method=base.method if base is not None else "mark",
        )
    except ValueError as exc:
        raise FormError("name", str(exc)) from None

    try:
        check_machine(machine)  # the shared limits (rotor mass, speed, radius, sizes)
    except ValidationError as exc:
        field = exc.field if exc.field in {key for key, _, _ in FIELDS} else "name"
        raise FormError(field, str(exc)) from None
    return machine


def _positions_text(p: PlaneSpec) -> str:
    if p.continuous:
        return "any"
    if p.count is not None:
        return str(p.count)
    return ", ".join(f"{a:g}" for a in p.angles_deg or [])


def fields_from_machine(m: Machine) -> dict[str, str]:
    out = {
        "name": m.name,
        "mass": f"{m.rotor_mass_kg:g}",
        "speed": f"{m.speed_rpm:g}",
        "rated": f"{m.rated_speed_rpm:g}" if m.rated_speed_rpm is not None else "",
        "rotation": m.rotation,
        "grade": m.grade,
        "planes": str(m.n_planes),
        "stock": (
            f"strip {m.strip.grams_per_mm:g}" if m.strip else " ".join(f"{s.mass_g:g}x{s.count}" for s in m.stock)
        ),
        "pickups": "; ".join(p.label for p in m.pickups),
    }
    stacks = {p.max_pieces_per_position for p in m.planes}
    out["stack"] = str(stacks.pop()) if len(stacks) == 1 and None not in stacks else ""
    for i, p in enumerate(m.planes, start=1):
        out[f"p{i}_name"] = p.name if p.name != f"plane {i}" else ""
        out[f"p{i}_view"] = p.view_side
        out[f"p{i}_radius"] = f"{p.radius_mm:g}"
        out[f"p{i}_pos"] = _positions_text(p)
        out[f"p{i}_first"] = f"{p.first_angle_deg:g}"
        out[f"p{i}_blocked"] = ", ".join(str(n) for n in p.excluded)
    for i in range(m.n_planes + 1, 3):
        out[f"p{i}_radius"] = out[f"p{i}_pos"] = out[f"p{i}_first"] = out[f"p{i}_blocked"] = ""
        out[f"p{i}_name"] = out[f"p{i}_view"] = ""
    return out
