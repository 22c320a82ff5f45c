"""Readings: vector averages of revolutions, their scatter and confidence, steadiness, units.

Conventions (DEVELOPERS.md): a reading is ``amp * e^{+j*lag}``, amp in g 1x peak, lag in
degrees of rotation after the reference mark.
"""

from __future__ import annotations

from runtrue.readings.average import ChannelReading, NoUsableRevolutions, Reading, vector_average
from runtrue.readings.confidence import ConfidenceEllipse, confidence_ellipse
from runtrue.readings.steadiness import Steadiness, SteadinessDetector, steadiness
from runtrue.readings.units import amp_phase, lag_deg, phasor

__all__ = [
    "ChannelReading", "ConfidenceEllipse", "NoUsableRevolutions", "Reading", "Steadiness",
    "SteadinessDetector", "amp_phase", "confidence_ellipse", "lag_deg", "phasor", "steadiness",
    "vector_average",
]
