"""What a balancing job is made of: machines, weights, runs — plain data that round-trips to JSON
(through the one record codec, ``runtrue.jobs.codec``).

Conventions (DEVELOPERS.md, stated on every screen and report):

* **Phase** is a lag in degrees of rotation after the reference mark, 0–360.
* **Weight angles** are measured from the reference mark **against** the direction of rotation,
  so a weight at θ adds θ to the phase of its effect; a weight is the complex unbalance
  ``mass_g·radius_mm·e^{+jθ}`` in g·mm.
* **Rotation** (``Machine.rotation``, ``"cw"`` or ``"ccw"``) is the direction the rotor turns **as
  seen from the drive end** (the end where the motor or belt drive is, looking along the shaft
  towards the rotor).  Seen from there, a ``"cw"`` rotor's weight angles are counted
  counter-clockwise from the mark, a ``"ccw"`` rotor's clockwise.
* **Influence coefficient** of plane p on pickup i: the change of reading (g, complex) per g·mm
  of unbalance at 0° in plane p.  Stored as ``[pickup][plane]``.
* Correction planes and pickups are numbered from 1 in everything a user sees and in
  :class:`Weight` (``plane=1`` is the first plane); Python lists are indexed from 0.

Nothing here imports numpy, textual or the device layer at load: this module is cheap to import.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar, Literal

from runtrue.jobs.codec import Record, StoredForm, decode

Rotation = Literal["cw", "ccw"]
#: Where the fitter stands to look at a correction plane: at the drive end, looking along the
#: shaft towards the rotor, or at the far end (an overhung fan's inlet, a roll's far plane),
#: looking back towards the drive.  Seen from the far end the rotation reverses.
VIEW_SIDES: tuple[str, ...] = ("drive", "far")
VIEW_SIDE_WORDS = {"drive": "from the drive end", "far": "from the far end"}
#: How a machine is balanced: with a reference mark (phase) or without one (amplitude only).
METHODS: tuple[str, ...] = ("mark", "no mark")
RunKind = Literal["reference", "trial", "correction", "trim"]
RUN_KINDS: tuple[str, ...] = ("reference", "trial", "correction", "trim")

#: The revolution count a typed-in spread is taken over when none is given: many (the confidence
#: radius is then its large-count limit, about 1.73 x the spread at 95 %).
MANY_REVS = 100_000

#: ``RunReading.source`` of a reading typed in with amplitudes only (no phase reference).
AMPLITUDE_ONLY_SOURCE = "manual, amplitude only"

ANGLE_CONVENTION = (
    "Weight angles are measured from the reference mark against the direction of rotation; "
    "phase is a lag in degrees of rotation after the reference mark (0-360)."
)


@dataclass
class PlaneSpec(Record):
    """One correction plane and where weights can go in it.

    Positions, exactly one of:

    * ``count`` equally spaced positions starting at ``first_angle_deg`` (position 1 is at
      ``first_angle_deg``, numbered on against rotation), e.g. a ring of 12 tapped holes;
    * ``angles_deg``: an explicit list of angles (position n is ``angles_deg[n-1]``);
    * ``continuous=True``: a groove or band where a weight can go at any angle.

    ``excluded`` lists position numbers (1-based) that cannot be used (a key, a full hole).
    Angles are degrees from the reference mark against rotation.  ``radius_mm`` is the radius at
    which weights sit in this plane.
    """

    radius_mm: float
    name: str = ""
    count: int | None = None
    first_angle_deg: float = 0.0
    angles_deg: list[float] | None = None
    continuous: bool = False
    excluded: list[int] = field(default_factory=list)
    max_pieces_per_position: int | None = None
    max_mass_per_position_g: float | None = None
    view_side: str = "drive"  # where the fitter stands to see this plane: "drive" end or the "far" end

    def __post_init__(self) -> None:
        if self.view_side not in VIEW_SIDES:
            raise ValueError(f"view side must be one of {', '.join(VIEW_SIDES)}, got {self.view_side!r}")
        kinds = (self.count is not None) + (self.angles_deg is not None) + bool(self.continuous)
        if kinds == 0:
            self.continuous = True  # nothing said: any angle
        elif kinds > 1:
            raise ValueError(
                "a plane has either a count of equally spaced positions, a list of angles, "
                "or a continuous groove - give only one"
            )
        if not (self.radius_mm > 0 and math.isfinite(self.radius_mm)):
            raise ValueError(f"plane radius must be a positive number of mm, got {self.radius_mm!r}")
        if self.count is not None and self.count < 1:
            raise ValueError(f"a plane needs at least one position, got count={self.count}")

    def position_angles_deg(self) -> list[float] | None:
        """Angle of every position (1-based numbering = list index + 1); None when continuous."""
        if self.continuous:
            return None
        if self.angles_deg is not None:
            return [a % 360.0 for a in self.angles_deg]
        assert self.count is not None
        return [(self.first_angle_deg + 360.0 * k / self.count) % 360.0 for k in range(self.count)]

    def allocator_positions(self) -> dict[str, Any]:
        """The ``positions`` object of the allocator's JSON contract (``runtrue allocate``)."""
        if self.continuous:
            return {"continuous": True, "radius": self.radius_mm}
        angles = self.position_angles_deg() or []
        if self.excluded:
            keep = [a for n, a in enumerate(angles, start=1) if n not in set(self.excluded)]
            return {"angles": keep, "radius": self.radius_mm}
        if self.count is not None:
            return {"count": self.count, "first_angle": self.first_angle_deg, "radius": self.radius_mm}
        return {"angles": angles, "radius": self.radius_mm}

    def describe(self) -> str:
        if self.continuous:
            where = "any angle (continuous)"
        elif self.count is not None:
            where = f"{self.count} positions from {self.first_angle_deg:g}°"
        else:
            where = f"{len(self.angles_deg or [])} positions at listed angles"
        if self.excluded:
            where += f", positions {', '.join(str(n) for n in self.excluded)} not usable"
        label = f"{self.name}: " if self.name else ""
        return f"{label}radius {self.radius_mm:g} mm, {where}"

@dataclass
class StockPiece(Record):
    """A size of discrete weight in the shop's stock (washer, clip weight, set screw)."""

    mass_g: float
    count: int

@dataclass
class StripSpec(Record):
    """Heavy strip cut to length: mass per mm, the shortest useful piece and the cutting step."""

    grams_per_mm: float
    min_mm: float = 5.0
    step_mm: float = 1.0

@dataclass
class Pickup(Record):
    """A vibration pickup: a label the user recognises and its mounting angle (informative)."""

    label: str
    angle_deg: float = 0.0

@dataclass
class StoredInfluence(Record):
    """Influence coefficients kept with a machine: ``coefficients[pickup][plane]`` in g per g·mm.

    Valid only near ``speed_rpm`` (the machine's response, and so the coefficients, change with
    speed); ``job_id`` is the job they were fitted in.
    """

    coefficients: list[list[complex]]
    speed_rpm: float
    measured_at: str = ""
    job_id: int | None = None

@dataclass
class Machine(Record):
    """A machine as the user describes it once and balances many times.

    ``rotation`` is seen from the drive end (see the module docstring).  ``grade`` is an
    ISO 21940-11 balance quality grade such as ``"G6.3"``.  Give ``stock`` (discrete pieces) or
    ``strip`` (cut to length) or neither (then any mass is assumed possible and the correction
    is shown as computed).  ``influence`` holds coefficients from an earlier job, so the next
    job can go straight to the correction.  ``id`` is set by the store.
    """

    name: str
    rotor_mass_kg: float
    speed_rpm: float
    planes: list[PlaneSpec]
    rotation: Rotation = "cw"
    grade: str = "G6.3"
    pickups: list[Pickup] = field(default_factory=lambda: [Pickup("1")])
    stock: list[StockPiece] = field(default_factory=list)
    strip: StripSpec | None = None
    influence: StoredInfluence | None = None
    notes: str = ""
    id: int | None = None
    rated_speed_rpm: float | None = None  # the most the rotor, wheel or machine may run at (maker's plate)
    method: str = "mark"  # "mark" (reference mark, phase) or "no mark" (amplitude only), remembered

    #: the id lives in the store's own column; the keys keep the order records were always written in
    STORED: ClassVar[StoredForm] = StoredForm(
        unstored=frozenset({"id"}),
        order=("name", "rotor_mass_kg", "speed_rpm", "rotation", "grade", "planes"),
    )

    @classmethod
    def from_dict(cls, d: Any, id: int | None = None) -> Machine:
        """The machine stored as ``d``; ``id`` is its row in the store (None: not saved)."""
        return decode(cls, d, id=id)

    def __post_init__(self) -> None:
        if self.rated_speed_rpm is not None:
            if not (self.rated_speed_rpm > 0 and math.isfinite(self.rated_speed_rpm)):
                raise ValueError(f"rated speed must be a positive number of rpm, got {self.rated_speed_rpm!r}")
            if self.speed_rpm > self.rated_speed_rpm:
                raise ValueError(
                    f"the running speed {self.speed_rpm:g} rpm is above the rated speed {self.rated_speed_rpm:g} rpm: "
                    "balance at or below the rated speed"
                )
        if self.method not in METHODS:
            raise ValueError(f"method must be one of {', '.join(METHODS)}, got {self.method!r}")
        if not self.name.strip():
            raise ValueError("a machine needs a name")
        if not (self.rotor_mass_kg > 0 and math.isfinite(self.rotor_mass_kg)):
            raise ValueError(f"rotor mass must be a positive number of kg, got {self.rotor_mass_kg!r}")
        if not (self.speed_rpm > 0 and math.isfinite(self.speed_rpm)):
            raise ValueError(f"running speed must be a positive number of rpm, got {self.speed_rpm!r}")
        if self.rotation not in ("cw", "ccw"):
            raise ValueError(f"rotation must be 'cw' or 'ccw' (seen from the drive end), got {self.rotation!r}")
        if not 1 <= len(self.planes) <= 2:
            raise ValueError(f"a machine has one or two correction planes, got {len(self.planes)}")
        if not self.pickups:
            raise ValueError("a machine needs at least one pickup")

    @property
    def n_planes(self) -> int:
        return len(self.planes)

    @property
    def n_pickups(self) -> int:
        return len(self.pickups)

    def plane_name(self, plane: int) -> str:
        """The name of correction plane ``plane`` (1-based) as the user gave it, else "plane N"."""
        name = self.planes[plane - 1].name.strip() if 1 <= plane <= self.n_planes else ""
        return name or f"plane {plane}"

    def pickup_name(self, index: int) -> str:
        """The label of pickup ``index`` (0-based) as the user gave it, else "pickup N"."""
        label = self.pickups[index].label.strip() if 0 <= index < self.n_pickups else ""
        return label if label and label != str(index + 1) else f"pickup {index + 1}"

    def turns_seen_from(self, plane: int) -> str:
        """"cw" or "ccw": the rotation as seen by someone looking at ``plane`` from its view side."""
        side = self.planes[plane - 1].view_side if 1 <= plane <= self.n_planes else "drive"
        if side == "drive":
            return self.rotation
        return "ccw" if self.rotation == "cw" else "cw"

    def angle_direction_words(self, plane: int | None = None) -> str:
        """How to count weight angles on this machine, in words a fitter can follow; for
        ``plane``, as seen from the end the fitter stands at for it."""
        rotation = self.turns_seen_from(plane) if plane is not None else self.rotation
        side = VIEW_SIDE_WORDS[self.planes[plane - 1].view_side] if plane is not None and 1 <= plane <= self.n_planes \
            else VIEW_SIDE_WORDS["drive"]
        way = "counter-clockwise" if rotation == "cw" else "clockwise"
        turn = "clockwise" if rotation == "cw" else "counter-clockwise"
        return (
            f"Seen {side}, the rotor turns {turn}: count weight angles {way} "
            "(against the direction of rotation) from the reference mark."
        )

@dataclass(frozen=True)
class Weight(Record):
    """A weight on the rotor, relative to the reference state.

    ``plane`` is the correction plane number (1-based); ``angle_deg`` from the reference mark
    against rotation; the unbalance it adds is ``mass_g·radius_mm·e^{+j·angle}`` g·mm.
    ``label`` says what it is ("trial", "correction 1 at position 4", ...).  ``pieces`` are the
    stock pieces (masses, g) it is made of, when it came from the stock (they are then not
    available for the next step).
    """

    plane: int
    mass_g: float
    angle_deg: float
    radius_mm: float
    label: str = ""
    pieces: tuple[float, ...] = ()

    @property
    def unbalance_gmm(self) -> complex:
        return self.mass_g * self.radius_mm * cmath.exp(1j * math.radians(self.angle_deg))

@dataclass(frozen=True)
class ChannelValue(Record):
    """One pickup's 1× vector in a run: ``mean`` in g (phase-lag convention) and its scatter."""

    mean: complex
    spread_g: float = 0.0
    confidence_g: float = 0.0
    h2: complex | None = None
    rms_g: float | None = None

    @property
    def amp_g(self) -> float:
        return abs(self.mean)

    @property
    def phase_deg(self) -> float:
        return math.degrees(cmath.phase(self.mean)) % 360.0

@dataclass(frozen=True)
class RunReading(Record):
    """A taken reading as stored: speed and one :class:`ChannelValue` per pickup.

    Build it from a live ``runtrue.readings.Reading`` with :meth:`from_reading`, or from numbers
    read off another instrument with :meth:`manual`.
    """

    speed_rpm: float
    channels: tuple[ChannelValue, ...]
    speed_sd_rpm: float = 0.0
    n_revs: int = 0
    source: str = "meter"
    frontend_note: str = ""  # the front-end correction made to the phase and amplitude ("" none)
    warnings: tuple[str, ...] = ()  # what the fit could not separate (e.g. line hum near an order)

    #: the front-end note and the warnings are written only when there are some
    STORED: ClassVar[StoredForm] = StoredForm(
        omit_empty=frozenset({"frontend_note", "warnings"}),
        order=("speed_rpm", "speed_sd_rpm", "n_revs", "source", "channels"),
    )

    @classmethod
    def from_reading(cls, reading: Any) -> RunReading:
        """Convert a ``runtrue.readings.Reading`` (or anything shaped like it, or a RunReading)."""
        if isinstance(reading, RunReading):
            return reading
        chans = []
        for ch in reading.channels:
            h2 = getattr(ch, "h2", None)
            rms = getattr(ch, "rms_g", None)
            chans.append(
                ChannelValue(
                    mean=complex(ch.mean),
                    spread_g=float(getattr(ch, "spread_g", 0.0) or 0.0),
                    confidence_g=float(getattr(ch, "confidence_g", 0.0) or 0.0),
                    h2=complex(h2) if isinstance(h2, (complex, float, int)) else None,
                    rms_g=float(rms) if isinstance(rms, (float, int)) else None,
                )
            )
        return cls(
            speed_rpm=float(reading.speed_rpm),
            channels=tuple(chans),
            speed_sd_rpm=float(getattr(reading, "speed_sd_rpm", 0.0) or 0.0),
            n_revs=int(getattr(reading, "n_revs", 0) or 0),
            source="meter",
            frontend_note=str(getattr(reading, "frontend_text", "") or ""),
            warnings=tuple(str(w) for w in getattr(reading, "warnings", ()) or ()),
        )

    @classmethod
    def manual(
        cls,
        amps: Sequence[float],
        phases_deg: Sequence[float] | None,
        speed_rpm: float,
        spreads: Sequence[float] | None = None,
        n_revs: int | None = None,
    ) -> RunReading:
        """A reading typed in from another instrument: amplitude and phase lag per pickup.

        ``phases_deg=None``: amplitudes only (an instrument with no phase reference, for the
        amplitude-only method); each value is stored as the amplitude at 0° and the source is
        :data:`AMPLITUDE_ONLY_SOURCE`, so nobody mistakes the 0° for a measured phase.

        ``spreads`` (g, one per pickup) is the scatter of each mean as the meter states it
        (``spread_g``), over ``n_revs`` revolutions; its 95 % confidence radius is the readings
        layer's (``runtrue.readings.confidence.confidence_radius``), for many revolutions (about
        1.73 x the spread) when the count is not given.
        """
        if phases_deg is not None and len(amps) != len(phases_deg):
            raise ValueError("give one phase for every amplitude")
        if spreads is not None and len(spreads) != len(amps):
            raise ValueError("give one spread for every amplitude")
        if n_revs is not None and n_revs < 2:
            raise ValueError("a spread needs at least 2 revolutions")
        # numpy comes with the readings layer: imported here, when a reading is typed in, so that
        # loading the records stays cheap
        from runtrue.readings.confidence import confidence_radius

        chans = []
        for i, a in enumerate(amps):
            p = 0.0 if phases_deg is None else phases_deg[i]
            if not (math.isfinite(a) and a >= 0 and math.isfinite(p)):
                raise ValueError(f"pickup {i + 1}: amplitude must be >= 0 and phase a number")
            sd = float(spreads[i]) if spreads is not None else 0.0
            confidence_g = confidence_radius(sd, n_revs or MANY_REVS) if sd else 0.0
            chans.append(ChannelValue(mean=a * cmath.exp(1j * math.radians(p)), spread_g=sd, confidence_g=confidence_g))
        source = "manual" if phases_deg is not None else AMPLITUDE_ONLY_SOURCE
        return cls(speed_rpm=float(speed_rpm), channels=tuple(chans), n_revs=n_revs or 0, source=source)

    @property
    def has_phase(self) -> bool:
        """False for readings taken or typed in without a phase reference."""
        return not self.source.endswith("amplitude only")

    def amplitudes_only(self, source: str = "meter, amplitude only") -> RunReading:
        """The same reading with every phase dropped (amplitude at 0°): what an instrument
        without a reference mark would give.  The scatter figures are kept."""
        chans = tuple(
            ChannelValue(mean=complex(c.amp_g, 0.0), spread_g=c.spread_g, confidence_g=c.confidence_g, rms_g=c.rms_g)
            for c in self.channels
        )
        return RunReading(self.speed_rpm, chans, self.speed_sd_rpm, self.n_revs, source, self.frontend_note,
                          self.warnings)

    def vector(self) -> list[complex]:
        return [c.mean for c in self.channels]


@dataclass(frozen=True)
class RunRecord(Record):
    """A run as stored: its kind, when it was taken, the reading and every weight present then.

    ``weights`` are all weights on the rotor relative to the reference state (trial weights
    still on, corrections and trims fitted so far).  ``seq`` counts runs in the job from 1.
    """

    job_id: int
    seq: int
    kind: str
    taken_at: str
    reading: RunReading
    weights: tuple[Weight, ...]
    note: str = ""
    id: int | None = None

    STORED: ClassVar[StoredForm] = StoredForm(unstored=frozenset({"id"}))  # the id is the row's own column
