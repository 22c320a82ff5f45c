"""The data the balancing engine works on: weights, runs, solutions, and its one error type.

Conventions (DEVELOPERS.md, "Conventions"; used by every module of ``runtrue.balancing``):

* A **reading** is the 1x vibration of one pickup as a complex number ``amp * e^{+j*lag}``,
  where ``lag`` is the phase lag in degrees of rotation after the reference mark (0-360).
  Amplitude may be in any one unit (g, mm/s, um); the engine is linear and keeps that unit.
* A **weight** at angle ``theta`` is measured from the reference mark **against** the direction
  of rotation, so that adding it adds ``theta`` to the phase of its effect.  Its unbalance is the
  complex number ``mass_g * radius_mm * e^{+j*theta}`` in g*mm.
* The **influence coefficient** of plane p on pickup i is the change of reading i per g*mm of
  unbalance at 0 deg in plane p (reading units per g*mm).
* **Planes are numbered from 1** (as the user sees them); column ``p - 1`` of an influence matrix
  belongs to plane ``p``.  Masses are never negative: the angle carries the direction.
* A reading's **spread** is the standard deviation of the (complex) mean reading, in the
  reading's unit: ``E|error|^2 = spread^2``, each of the real and imaginary parts having standard
  deviation ``spread / sqrt(2)``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

# One phasor convention for the whole package: the readings layer's (DEVELOPERS.md).
from runtrue.readings.units import amp_phase, phasor


class BalancingError(ValueError):
    """The engine refuses to compute: the message says what is wrong and what to do."""


@dataclass(frozen=True)
class Weight:
    """A weight on the rotor: ``mass_g`` at ``angle_deg`` (from the mark, against rotation) and
    ``radius_mm`` in correction plane ``plane`` (numbered from 1)."""

    plane: int
    mass_g: float
    angle_deg: float
    radius_mm: float

    @property
    def unbalance_gmm(self) -> complex:
        """The weight's unbalance ``mass_g * radius_mm * e^{+j*angle}`` in g*mm."""
        return phasor(self.mass_g * self.radius_mm, self.angle_deg)

    @classmethod
    def from_unbalance(cls, plane: int, unbalance_gmm: complex, radius_mm: float) -> Weight:
        """The weight giving ``unbalance_gmm`` when fitted at ``radius_mm`` (mass >= 0, angle 0-360)."""
        if not (radius_mm > 0.0 and math.isfinite(radius_mm)):
            raise BalancingError(f"plane {plane}: radius must be a positive number of mm, got {radius_mm}")
        u, ang = amp_phase(unbalance_gmm)
        return cls(plane=plane, mass_g=u / radius_mm, angle_deg=ang, radius_mm=float(radius_mm))


@dataclass(frozen=True)
class Run:
    """One run: the weights on the rotor relative to the reference state, and one reading per
    pickup (always the same pickup order).

    ``readings`` are complex (``amp * e^{+j*lag}``).  ``spreads`` (optional) is the standard
    deviation of each reading in the same unit (see module docstring); it feeds the uncertainty
    of the correction and the trial-effect check.  The reference run has no weights.
    """

    weights: Sequence[Weight]
    readings: Sequence[complex]
    spreads: Sequence[float] | None = None


@dataclass
class Solution:
    """What the engine concludes.

    ``corrections``: one weight per plane (plane 1, 2, ...) to ADD to the rotor in its reference
    state (all trial weights removed), expressed at the requested radius.
    ``influence``: complex array, pickups x planes, reading units per g*mm at 0 deg.
    ``reference``: the reference-state reading per pickup the correction cancels (fitted by least
    squares when there are more runs than needed).
    ``predicted``: the reading expected at each pickup after the correction is fitted.
    ``warnings``: plain sentences for the user.
    ``condition_number``: of the column-normalised influence matrix (1 = planes act independently;
    large = planes look alike to the pickups, see ``influence.CONDITION_WARN``).
    ``mass_sd_g`` / ``angle_sd_deg``: one standard deviation of each correction's mass and angle
    propagated from the readings' spreads (``None`` when no spreads were given).
    ``fit_rms``: root-mean-square misfit of the runs to the linear model (0 when exactly
    determined), reading units.
    ``method``: "influence" (exactly determined), "least-squares", "stored" or "four-run".
    ``amplitude_fit``: for "four-run", the fit behind it (gains per pickup and their covariance).
    """

    corrections: list[Weight]
    influence: np.ndarray
    reference: list[complex]
    predicted: list[complex]
    warnings: list[str] = field(default_factory=list)
    condition_number: float = 1.0
    mass_sd_g: list[float] | None = None
    angle_sd_deg: list[float] | None = None
    fit_rms: float = 0.0
    method: str = "influence"
    #: amplitude-only solutions: the maximum-likelihood fit (``four_run.AmplitudeFit``), else None
    amplitude_fit: Any = None

    @property
    def correction_gmm(self) -> list[complex]:
        """The corrections as complex unbalances (g*mm), plane 1 first."""
        return [w.unbalance_gmm for w in self.corrections]
