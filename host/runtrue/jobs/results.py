"""What a balancing job shows and keeps: its state, trial verdicts, correction plans and result.

Plain records (no maths): the job's state machine (``runtrue.jobs.job``) and its balancing
methods fill them; the screens, reports and exports read them.  Conventions as in
``runtrue.jobs.model`` (phase lag; weight angles from the mark against rotation; planes and
pickups numbered from 1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from runtrue.allocation import SheetRow
from runtrue.jobs.model import Weight

STANDARD = "ISO 21940-11"
#: The steps of every job, in order (a job may skip the trial step or repeat the trim step).
STEPS = ("reference", "trial", "correction", "trim", "done")
#: The two balancing methods a job can use (``JobState.method``, ``JobResult.method``).
INFLUENCE_METHOD = "influence-coefficient"
FOUR_RUN_METHOD = "four-run"


@dataclass(frozen=True)
class ForceCheck:
    """A weight to fit for the next run, its force at running speed and the multiple of the limit."""

    weight: Weight
    force_n: float
    limit_n: float

    @property
    def multiple(self) -> float:
        return self.force_n / self.limit_n if self.limit_n > 0 else math.inf



@dataclass(frozen=True)
class TrialCheck:
    """Was the trial weight's effect big enough to trust, compared with the readings' scatter?"""

    plane: int
    ok: bool
    ratio: float
    message: str
    suggested_scale: float
    accepted_anyway: bool = False


@dataclass
class PlaneCorrection:
    """What to fit in one plane: the computed correction and the allocator's placements.

    ``correction`` is the weight to add now (relative to the weights already on);
    ``fit`` are the placements as :class:`Weight` (one per position); ``sheet`` the fitting
    sheet rows (``runtrue.allocation.SheetRow``: number, angle_deg, radius_mm, what, mass_g,
    force_n, action); ``residual_gmm`` what the placements leave of the correction.
    """

    plane: int
    correction: Weight
    fit: list[Weight]
    sheet: list[SheetRow]
    residual_gmm: float
    residual_fraction: float
    warnings: list[str] = field(default_factory=list)
    taken_off: list[Weight] = field(default_factory=list)  # weights already on that come off (moved or removed)


@dataclass
class CorrectionPlan:
    """A correction or trim step: weights to remove first, then per plane what to fit."""

    kind: str  # "correction" | "trim"
    remove: list[Weight]
    planes: list[PlaneCorrection]
    predicted: list[complex]
    method: str
    condition_number: float
    warnings: list[str] = field(default_factory=list)

    def weights_to_fit(self) -> list[Weight]:
        return [w for pc in self.planes for w in pc.fit]


@dataclass(frozen=True)
class ChannelResult:
    """One pickup before (reference run) and after (last run), complex g, phase-lag convention."""

    label: str
    before: complex
    after: complex | None

    @property
    def before_amp_g(self) -> float:
        return abs(self.before)

    @property
    def after_amp_g(self) -> float | None:
        return abs(self.after) if self.after is not None else None


@dataclass
class JobResult:
    """A job's outcome: before/after per channel and the grade check per plane.

    ``residual_unbalance_gmm`` is the engine's estimate from the last reading and the influence
    coefficients, ``residual_uncertainty_gmm`` its 95 % uncertainty from the reading's scatter;
    ``passed`` is True only when every plane's residual plus its uncertainty is within its
    permissible share (``None`` while no correction run has been taken).
    """

    job_id: int
    machine_name: str
    grade: str
    standard: str
    speed_rpm: float
    channels: list[ChannelResult]
    residual_unbalance_gmm: list[float] | None
    permissible_unbalance_gmm: list[float]
    permissible_total_gmm: float
    passed: bool | None
    runs: int
    status: str
    weights_on: list[Weight]
    influence: list[list[complex]] | None
    warnings: list[str]
    tolerance_rule: str = ""
    residual_uncertainty_gmm: list[float] | None = None
    method: str = INFLUENCE_METHOD
    influence_magnitude: float | None = None
    before_speed_rpm: float | None = None  # measured speed of the reference run
    after_speed_rpm: float | None = None  # measured speed of the last correction or trim run
    influence_source: str = ""  # where the coefficients came from, in words
    weights_at_start: list[Weight] = field(default_factory=list)  # left on by an earlier job

    def to_dict(self) -> dict[str, Any]:
        extra: dict[str, Any] = {"method": self.method}
        if self.influence_magnitude is not None:
            extra["influence_magnitude_g_per_gmm"] = self.influence_magnitude
        extra["influence_source"] = self.influence_source
        extra["before_speed_rpm"] = self.before_speed_rpm
        extra["after_speed_rpm"] = self.after_speed_rpm
        extra["weights_at_start"] = [w.to_dict() for w in self.weights_at_start]
        return {
            "job_id": self.job_id,
            "machine": self.machine_name,
            "grade": self.grade,
            "standard": self.standard,
            "speed_rpm": self.speed_rpm,
            "initial": [c.before_amp_g for c in self.channels],
            "final": [c.after_amp_g for c in self.channels],
            "residual_unbalance_gmm": self.residual_unbalance_gmm,
            "residual_uncertainty_gmm": self.residual_uncertainty_gmm,
            "permissible_unbalance_gmm": self.permissible_unbalance_gmm,
            "permissible_total_gmm": self.permissible_total_gmm,
            "passed": self.passed,
            "runs": self.runs,
            "status": self.status,
            "weights_on": [w.to_dict() for w in self.weights_on],
            "warnings": list(self.warnings),
            **extra,
        }


@dataclass
class JobState:
    """Where a job stands.  ``step`` is one of :data:`STEPS`; ``plane`` is the trial's plane
    during the ``trial`` step; ``trial`` the trial weight to fit; ``last_trial_check`` the verdict
    on the last trial run; ``plan`` the correction or trim to fit; ``status`` ``open``,
    ``passed`` or ``stopped``.

    Amplitude-only jobs (``method == "four-run"``, see :mod:`runtrue.jobs.method_four_run`) also
    fill ``cycle`` (the four-run cycle, from 1), ``trial_number`` (1-3 during a trial step) and
    ``trial_angles_deg`` (the cycle's three trial angles)."""

    step: str = "reference"
    plane: int | None = None
    trial: Weight | None = None
    last_trial_check: TrialCheck | None = None
    plan: CorrectionPlan | None = None
    trims_done: int = 0
    status: str = "open"
    message: str = ""
    warnings: list[str] = field(default_factory=list)
    method: str = INFLUENCE_METHOD
    cycle: int = 0
    trial_number: int | None = None
    trial_angles_deg: list[float] = field(default_factory=list)
