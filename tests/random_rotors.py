"""Random single-plane rotors for the amplitude-only (four-run) method, shared by its tests and
its benchmark so both draw the same rotors.

Invented, as the method's own model assumes: a linear rotor ``V_k = |a|·|u + T_k|`` with ``|u|``
log-uniform over 100-10,000 g·mm at any angle, ``|a|`` log-uniform over e^-8..e^-4 per g·mm, and the
trial unbalance 0.7-2 times ``|u|`` (log-uniform) at 0/120/240 deg from a random start.
"""

from __future__ import annotations

import math

import numpy as np


def amplitude_only_rotor(rng: np.random.Generator) -> tuple[complex, float, np.ndarray]:
    """(u in g·mm, |a| per g·mm, the four runs' trial unbalances in g·mm, the first none)."""
    u = math.exp(rng.uniform(math.log(100), math.log(10_000))) * np.exp(1j * rng.uniform(0, 2 * math.pi))
    a = math.exp(rng.uniform(-8, -4))
    ratio = math.exp(rng.uniform(math.log(0.7), math.log(2.0)))
    start = rng.uniform(0, 360)
    t = np.array([0j] + [abs(u) * ratio * np.exp(1j * math.radians(start + x)) for x in (0, 120, 240)])
    return complex(u), a, t
