"""What the weight allocator works on: positions, stock, strip, existing weights, and its answer.

Conventions (DEVELOPERS.md): a weight angle is measured in degrees from the reference mark
**against** the direction of rotation; a weight is the complex unbalance
``mass_g * radius_mm * exp(+j*angle)`` in g·mm.  Position *indices* are 0-based in the API;
the fitting sheet numbers positions from 1 (position 1 is the first angle given).  The phasor
and the angle wrap are the readings layer's (``runtrue.readings.units``), as everywhere.

One weight type per layer: the engine's is ``runtrue.balancing.model.Weight`` (a plane, a mass,
an angle, a radius); the allocator's is :class:`ExistingWeight` (a weight already on the rotor,
with where it sits and what may be done with it).  :meth:`ExistingWeight.from_engine` and
:meth:`ExistingWeight.to_engine` convert between them.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Protocol

from runtrue.balancing.model import Weight
from runtrue.readings.units import lag_deg, phasor

#: A best fit leaving more than this fraction of the correction gets a plain warning (our choice).
POOR_FIT_FRACTION = 0.25


class AllocationError(ValueError):
    """Input the allocator cannot work with (negative mass, no usable position, empty stock)."""


class PointWeight(Protocol):
    """Anything that is a weight at a point: a mass at an angle and a radius (the engine's
    ``Weight``, or a job's weight record)."""

    @property
    def mass_g(self) -> float: ...

    @property
    def angle_deg(self) -> float: ...

    @property
    def radius_mm(self) -> float: ...


def weight_gmm(mass_g: float, angle_deg: float, radius_mm: float) -> complex:
    """The unbalance of a point mass, ``mass_g·radius_mm·e^{+j·angle}`` in g·mm."""
    return phasor(mass_g * radius_mm, angle_deg)


def angle_of_deg(vector: complex) -> float:
    """Angle of a complex unbalance in degrees, 0 <= angle < 360 (0 for a zero vector, and for
    an angle within 1e-12 degree below 360)."""
    if vector == 0:
        return 0.0
    a = lag_deg(vector)
    return 0.0 if a >= 360.0 - 1e-12 else a


@dataclass(frozen=True)
class Positions:
    """Where weights can go: fixed positions (angle and radius each) or a continuous groove.

    Build with :meth:`equally_spaced`, :meth:`at_angles` or :meth:`groove`; remove blocked or
    full positions with :meth:`excluding` (0-based indices).
    """

    angles_deg: tuple[float, ...] = ()
    radii_mm: tuple[float, ...] = ()
    continuous: bool = False
    groove_radius_mm: float = 0.0
    excluded: frozenset[int] = frozenset()

    @classmethod
    def equally_spaced(
        cls, count: int, radius_mm: float, first_angle_deg: float = 0.0, excluded: Sequence[int] = ()
    ) -> Positions:
        """``count`` positions every 360/count degrees starting at ``first_angle_deg``."""
        if count < 1:
            raise AllocationError("the number of positions must be at least 1")
        angles = tuple((first_angle_deg + 360.0 * i / count) % 360.0 for i in range(count))
        return cls.at_angles(angles, radius_mm, excluded)

    @classmethod
    def at_angles(
        cls, angles_deg: Sequence[float], radius_mm: float | Sequence[float], excluded: Sequence[int] = ()
    ) -> Positions:
        """Positions at the given angles; one radius for all or one radius per angle."""
        angles = tuple(float(a) % 360.0 for a in angles_deg)
        if isinstance(radius_mm, (int, float)):
            radii = tuple(float(radius_mm) for _ in angles)
        else:
            radii = tuple(float(r) for r in radius_mm)
        if len(radii) != len(angles):
            raise AllocationError(f"{len(angles)} angles but {len(radii)} radii; give one radius per angle")
        for r in radii:
            if not r > 0:
                raise AllocationError(f"position radius {r} mm is not positive; give the radius in mm")
        return cls(angles_deg=angles, radii_mm=radii, excluded=frozenset(int(i) for i in excluded))

    @classmethod
    def groove(cls, radius_mm: float) -> Positions:
        """A continuous groove or ring: a weight can go at any angle at this radius."""
        if not radius_mm > 0:
            raise AllocationError(f"groove radius {radius_mm} mm is not positive; give the radius in mm")
        return cls(continuous=True, groove_radius_mm=float(radius_mm))

    def excluding(self, indices: Sequence[int]) -> Positions:
        """The same positions with more of them (0-based indices) marked unusable."""
        return Positions(self.angles_deg, self.radii_mm, self.continuous, self.groove_radius_mm,
                         self.excluded | frozenset(int(i) for i in indices))

    def usable(self) -> list[int]:
        """0-based indices of the positions that may take weight."""
        return [i for i in range(len(self.angles_deg)) if i not in self.excluded]


@dataclass(frozen=True)
class StockItem:
    """``count`` pieces of ``mass_g`` each (``count=None``: as many as needed)."""

    mass_g: float
    count: int | None = None


@dataclass(frozen=True)
class Stock:
    """The shop's inventory of discrete pieces (washers, clip weights, set screws)."""

    items: tuple[StockItem, ...]

    @classmethod
    def of(cls, pairs: Sequence[tuple[float, int | None]]) -> Stock:
        """``Stock.of([(1.0, 6), (2.0, 6), (5.0, 4)])``: (mass_g, count) pairs."""
        return cls(tuple(StockItem(float(m), None if c is None else int(c)) for m, c in pairs))


@dataclass(frozen=True)
class Strip:
    """Heavy strip cut to length: lengths are ``min_mm + k·step_mm`` (k = 0, 1, ...), at most ``max_mm``.

    One piece per position.  At a fixed position a piece counts as a point mass at the position's
    radius; in a continuous groove it lies along the arc (its unbalance is that of the arc).
    """

    grams_per_mm: float
    min_mm: float
    step_mm: float
    max_mm: float | None = None


@dataclass(frozen=True)
class ExistingWeight:
    """A weight already on the rotor (its effect is already in the measured correction).

    ``may_remove``: it can be taken off; ``may_move``: it can be refitted at another position
    (as a piece of its own mass).  With neither it stays where it is.
    """

    mass_g: float
    angle_deg: float
    radius_mm: float
    position_index: int | None = None
    may_move: bool = False
    may_remove: bool = False

    @property
    def unbalance_gmm(self) -> complex:
        return weight_gmm(self.mass_g, self.angle_deg, self.radius_mm)

    @classmethod
    def from_engine(
        cls,
        weight: PointWeight,
        position_index: int | None = None,
        *,
        may_move: bool = False,
        may_remove: bool = False,
    ) -> ExistingWeight:
        """The allocator's view of a weight on the rotor (the engine's ``Weight`` or any weight
        with ``mass_g``, ``angle_deg`` and ``radius_mm``), sitting at ``position_index``
        (0-based; ``None`` when not at a numbered position)."""
        return cls(float(weight.mass_g), float(weight.angle_deg), float(weight.radius_mm), position_index,
                   may_move=may_move, may_remove=may_remove)

    def to_engine(self, plane: int) -> Weight:
        """The same weight as the engine's ``Weight`` in correction plane ``plane`` (from 1)."""
        return Weight(plane, self.mass_g, self.angle_deg, self.radius_mm)


@dataclass(frozen=True)
class Placement:
    """What to fit at one position.

    ``position_index`` is 0-based (``None`` in a continuous groove).  ``pieces`` are the masses of
    new stock pieces, ``length_mm`` a strip piece (else ``None``), ``moved_existing`` the indices
    (into the ``existing`` list given to :func:`allocate`) of old weights refitted here.
    ``mass_g`` is the total fitted here (including moved old weights).
    """

    position_index: int | None
    angle_deg: float
    radius_mm: float
    pieces: tuple[float, ...] = ()
    length_mm: float | None = None
    mass_g: float = 0.0
    moved_existing: tuple[int, ...] = ()
    unbalance_gmm: complex = 0j


@dataclass(frozen=True)
class Allocation:
    """The allocator's answer.

    ``residual_gmm`` = correction − (everything fitted, changed or removed), as a complex g·mm
    (the same number at any radius); ``residual_mass_g`` is it expressed as a mass at the
    correction radius.  ``optimal`` is True when the search proved the objective optimal.
    ``bound_gmm`` is a proven lower bound on the smallest residual any allocation could leave
    (the residual itself when it is proven smallest; a relaxation bound, often 0, otherwise).
    """

    correction_gmm: complex
    correction_radius_mm: float
    placements: tuple[Placement, ...]
    residual_gmm: complex
    optimal: bool
    bound_gmm: float
    warnings: tuple[str, ...] = ()
    kept_existing: tuple[int, ...] = ()
    removed_existing: tuple[int, ...] = ()
    nodes: int = 0

    @property
    def status(self) -> str:
        """``"optimal"`` when proven optimal under the stated objective, else ``"best found"``
        (then ``bound_gmm`` is what is proven: no allocation leaves less residual)."""
        return "optimal" if self.optimal else "best found"

    @property
    def residual_fraction(self) -> float:
        """|residual| / |correction| (0 when the correction is zero)."""
        c = abs(self.correction_gmm)
        return abs(self.residual_gmm) / c if c > 0 else 0.0

    @property
    def residual_mass_g(self) -> float:
        return abs(self.residual_gmm) / self.correction_radius_mm

    @property
    def residual_angle_deg(self) -> float:
        return angle_of_deg(self.residual_gmm)

    @property
    def piece_count(self) -> int:
        """New pieces (a strip piece counts as one) plus old weights moved."""
        return sum(len(p.pieces) + (p.length_mm is not None) + len(p.moved_existing) for p in self.placements)

    @property
    def added_mass_g(self) -> float:
        """Mass of new pieces and strip fitted (old weights moved are not added mass)."""
        return sum(p.mass_g for p in self.placements) - self._moved_mass_g

    _moved_mass_g: float = field(default=0.0, repr=False)
