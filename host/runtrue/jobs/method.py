"""What a balancing method must do for a job: the strategy the job's state machine calls.

A job (``runtrue.jobs.job.BalanceJob``) keeps the steps, the record of runs and decisions and
the safety checks; its method decides everything that depends on how the unbalance is found:
what to do after each kind of run, how a trial is judged, how the correction is computed and
how the grade is checked.  The methods are ``method_influence.InfluenceMethod`` (with a
reference mark) and ``method_four_run.FourRunMethod`` (amplitude only).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Protocol

from runtrue.jobs.model import RunRecord, Weight
from runtrue.jobs.results import ChannelResult

#: A trial found too small is repeated this much larger than the bare minimum the check asks
#: for (the next reading's scatter is random too), and at least :data:`MIN_TRIAL_GROWTH` times
#: larger; when the check cannot say how much larger, :data:`UNKNOWN_TRIAL_SCALE` (our choices).
TRIAL_MARGIN = 1.2
MIN_TRIAL_GROWTH = 1.5
UNKNOWN_TRIAL_SCALE = 4.0


def next_trial_scale(needed_scale: float) -> float:
    """How much larger the next trial weight is than one found too small, given the factor
    ``needed_scale`` its check asked for (not finite: unknown)."""
    scale = needed_scale if math.isfinite(needed_scale) else UNKNOWN_TRIAL_SCALE
    return max(scale * TRIAL_MARGIN, MIN_TRIAL_GROWTH)


@dataclass(frozen=True)
class GradeOutcome:
    """A method's part of a job's result: the channels before and after, the residual
    unbalance per plane with its 95 % uncertainty and the verdict (None while there is no
    check run), and what is known of the influence."""

    channels: list[ChannelResult]
    residual_gmm: list[float] | None
    uncertainty_gmm: list[float] | None
    passed: bool | None
    influence: list[list[complex]] | None
    influence_magnitude: float | None
    influence_source: str


class BalancingMethod(Protocol):
    """The strategy a job calls for everything method-specific."""

    #: ``JobState.method`` and ``JobResult.method``: "influence-coefficient" or "four-run".
    name: str

    @property
    def influence(self) -> list[list[complex]] | None:
        """Influence coefficients ``[pickup][plane]`` that may be stored with the machine, or None."""

    @property
    def early_larger_trial(self) -> Weight | None:
        """A larger trial the user may fit at once instead of the next trial run, or None."""

    def on_reference(self, run: RunRecord) -> None:
        """After the reference run: the next step (a trial, or straight to a correction)."""

    def on_trial(self, run: RunRecord) -> None:
        """After a trial run: judge the trial, then the next trial or the correction."""

    def on_check(self, run: RunRecord) -> None:
        """After a correction or trim run: check the grade, then done or another trim."""

    def apply_event(self, kind: str, data: dict[str, Any]) -> None:
        """A recorded decision of the method's own (``trial_set``, ``trial_accepted``)."""

    def check_trial_change(self) -> None:
        """Raise ValueError when the trial weight may not be changed now."""

    def after_replay(self) -> None:
        """After a resume has replayed every run and event: finish deferred work."""

    def instructions(self) -> list[str]:
        """What to do now, in plain sentences."""

    def outcome(self) -> GradeOutcome:
        """The method's part of the job's result."""
