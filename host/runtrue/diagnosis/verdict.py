"""Is it unbalance?  A verdict with its reasons, from what the meter sees.

Unbalance is a force rotating with the rotor: it shows as a 1x vibration that dominates the
overall level, whose phase is steady from revolution to revolution, and which responds linearly
to added weight (J. S. Mitchell, *An Introduction to Machinery Analysis and Monitoring*, 2nd ed.,
1993, ch. 5, and R. B. Randall, *Vibration-based Condition Monitoring*, 2011, section 1.3 — the
signatures in general, from memory).  The numeric thresholds below are common practice among
balancing technicians, not values from a standard; each one is named where it is used.

Misalignment tends to raise 2x (and axial vibration); mechanical looseness raises many harmonics;
rolling-bearing faults and rubs add non-synchronous content; a resonance near the running speed
makes the 1x phase and amplitude sensitive to small speed changes and the horizontal and vertical
levels very different.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

# Thresholds (common practice, not from a standard).
ONE_X_SHARE_MIN = 0.80        # 1x mean square over the overall mean square
TWO_X_RATIO_MAX = 0.50        # |2x| / |1x| above this: check alignment
HIGHER_RATIO_MAX = 0.30       # |3x| or |4x| / |1x| above this: check looseness
NON_SYNC_SHARE_MAX = 0.30     # non-synchronous mean square over overall
SUB_SYNC_SHARE_MAX = 0.10     # below-1x mean square over overall (from a raw capture)
ELECTRICAL_SHARE_MAX = 0.20   # line-frequency multiples' mean square over overall (from a raw capture)
PHASE_SD_MAX_DEG = 15.0       # circular standard deviation of the per-revolution 1x phase
PICKUP_RATIO_MAX = 4.0        # ratio of the 1x at two radial pickups on one bearing
LINEARITY_ERROR_MAX = 0.25    # |measured - predicted| / |change predicted|


@dataclass(frozen=True)
class Finding:
    """One reason for the verdict: what was measured, against what, and what it suggests."""

    name: str
    ok: bool
    value: float
    limit: float
    text: str


@dataclass(frozen=True)
class Verdict:
    unbalance: bool
    findings: list[Finding] = field(default_factory=list)

    @property
    def headline(self) -> str:
        if self.unbalance:
            return "Looks like unbalance: 1x dominant and steady. Balancing should help."
        return "Probably not (only) unbalance: check what is listed before adding weights."

    @property
    def checks(self) -> list[str]:
        """What to check, one line per failed finding."""
        return [f.text for f in self.findings if not f.ok]


def circular_sd_deg(vectors: Sequence[complex]) -> float:
    """Circular standard deviation of the phases of ``vectors`` in degrees: sqrt(-2 ln R), R the
    mean resultant length of the unit phasors (K. V. Mardia and P. E. Jupp, *Directional
    Statistics*, 2000, section 2.3.4 (from memory))."""
    z = np.asarray(vectors, dtype=complex)
    z = z[np.abs(z) > 0]
    if len(z) < 2:
        return math.inf
    r = float(abs(np.mean(z / np.abs(z))))
    if r <= 0.0:
        return math.inf
    return math.degrees(math.sqrt(max(0.0, -2.0 * math.log(min(1.0, r)))))


def judge(*, one_x_g: complex, orders_g: Sequence[complex] = (), overall_rms_g: float | None = None,
          per_rev_one_x_g: Sequence[complex] = (), other_pickup_one_x_g: complex | None = None,
          linearity: tuple[complex, complex, complex] | None = None,
          shares: dict[str, float] | None = None) -> Verdict:
    """The verdict from one pickup's reading.

    ``one_x_g``: the averaged 1x (g peak); ``orders_g``: 2x, 3x, 4x (g peak) where known;
    ``overall_rms_g``: the overall RMS with DC removed (g) over the same revolutions;
    ``per_rev_one_x_g``: the single revolutions' 1x, for the phase steadiness;
    ``other_pickup_one_x_g``: the 1x at a second radial pickup on the same bearing;
    ``linearity``: (reference, expected, measured) 1x after a known weight was added: expected is
    the reference plus the effect the coefficients predict;
    ``shares``: from a raw capture's spectrum (:func:`runtrue.diagnosis.spectral.order_content`),
    ``one_x``, ``non_sync`` and ``sub_sync`` shares of the overall mean square: they replace the
    estimate from ``overall_rms_g`` (which cannot tell below-1x content from the rest).
    """
    findings: list[Finding] = []
    a1 = abs(complex(one_x_g))
    if shares is not None:
        share = float(shares["one_x"])
        findings.append(Finding(
            "1x share", share >= ONE_X_SHARE_MIN, share, ONE_X_SHARE_MIN,
            f"1x is only {share:.0%} of the overall level: other faults are present "
            "(bearings, looseness, misalignment, electrical); find them first"))
        non_sync = float(shares["non_sync"])
        findings.append(Finding(
            "non-synchronous", non_sync <= NON_SYNC_SHARE_MAX, non_sync, NON_SYNC_SHARE_MAX,
            f"{non_sync:.0%} of the level is not at running-speed orders: check bearings, "
            "rubs, belts, electrical (line-frequency) vibration and neighbouring machines"))
        sub = float(shares["sub_sync"])
        findings.append(Finding(
            "sub-synchronous", sub <= SUB_SYNC_SHARE_MAX, sub, SUB_SYNC_SHARE_MAX,
            f"{sub:.0%} of the level is below running speed: check for a rub, looseness, "
            "a worn belt, or oil whirl in sleeve bearings"))
        if "electrical" in shares:
            el = float(shares["electrical"])
            findings.append(Finding(
                "electrical", el <= ELECTRICAL_SHARE_MAX, el, ELECTRICAL_SHARE_MAX,
                f"{el:.0%} of the level is at multiples of the line frequency: an electrical cause "
                "(motor air gap, supply, magnetic pull) that weights cannot fix; have the motor checked"))
    elif overall_rms_g is not None and overall_rms_g > 0.0:
        one_x_ms = a1 * a1 / 2.0
        orders_ms = sum(abs(complex(z)) ** 2 / 2.0 for z in orders_g)
        overall_ms = float(overall_rms_g) ** 2
        share = min(1.0, one_x_ms / overall_ms)
        findings.append(Finding(
            "1x share", share >= ONE_X_SHARE_MIN, share, ONE_X_SHARE_MIN,
            f"1x is only {share:.0%} of the overall level: other faults are present "
            "(bearings, looseness, misalignment, electrical); find them first"))
        non_sync = max(0.0, overall_ms - one_x_ms - orders_ms) / overall_ms
        findings.append(Finding(
            "non-synchronous", non_sync <= NON_SYNC_SHARE_MAX, non_sync, NON_SYNC_SHARE_MAX,
            f"{non_sync:.0%} of the level is not at running-speed orders: check bearings, "
            "rubs, belts and neighbouring machines"))
    if a1 > 0.0 and len(orders_g) >= 1:
        r2 = abs(complex(orders_g[0])) / a1
        findings.append(Finding(
            "2x", r2 <= TWO_X_RATIO_MAX, r2, TWO_X_RATIO_MAX,
            f"2x is {r2:.0%} of 1x: check shaft alignment and soft foot"))
    if a1 > 0.0 and len(orders_g) >= 2:
        r3 = max(abs(complex(z)) for z in orders_g[1:]) / a1
        findings.append(Finding(
            "3x and above", r3 <= HIGHER_RATIO_MAX, r3, HIGHER_RATIO_MAX,
            f"higher orders reach {r3:.0%} of 1x: check for looseness (mounting bolts, bearing fits, base)"))
    if len(per_rev_one_x_g) >= 2:
        sd = circular_sd_deg(per_rev_one_x_g)
        findings.append(Finding(
            "phase steadiness", sd <= PHASE_SD_MAX_DEG, sd, PHASE_SD_MAX_DEG,
            f"the 1x phase wanders {sd:.0f} deg from turn to turn: check the reference mark, "
            "a rub, or a speed near a resonance"))
    if other_pickup_one_x_g is not None and a1 > 0.0:
        a_other = abs(complex(other_pickup_one_x_g))
        ratio = max(a1, a_other) / max(min(a1, a_other), 1e-12)
        findings.append(Finding(
            "pickup ratio", ratio <= PICKUP_RATIO_MAX, ratio, PICKUP_RATIO_MAX,
            f"one direction is {ratio:.1f}x the other: check for a resonance or a loose or "
            "flexible support in the stronger direction"))
    if linearity is not None:
        ref, expected, measured = (complex(z) for z in linearity)
        change = abs(expected - ref)
        err = abs(measured - expected) / change if change > 0.0 else math.inf
        findings.append(Finding(
            "linear response", err <= LINEARITY_ERROR_MAX, err, LINEARITY_ERROR_MAX,
            f"the weight moved the 1x {err:.0%} away from what a linear machine would give: "
            "check looseness, a resonance or a changing speed before trusting the coefficients"))
    ok = all(f.ok for f in findings) and a1 > 0.0
    return Verdict(ok, findings)


def predicted_after_weight(reference_g: complex, trial_g: complex, trial_gmm: complex,
                           new_gmm: complex) -> complex:
    """The 1x a linear machine gives with ``new_gmm`` fitted instead of ``trial_gmm`` (both the
    complex unbalance ``mass_g * radius_mm * e^{j angle}`` of the weight, DEVELOPERS.md
    "Conventions"): the influence coefficient (trial - reference) / trial_gmm, times new_gmm,
    added to the reference.  For ``judge(linearity=(reference, predicted, measured))`` once a
    second weight (another trial, or the correction) is on."""
    if trial_gmm == 0:
        raise ValueError("the trial weight must not be zero")
    return complex(reference_g) + (complex(trial_g) - complex(reference_g)) / complex(trial_gmm) * complex(new_gmm)
