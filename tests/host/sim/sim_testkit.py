"""Helpers for the simulator tests: quiet scenarios and an independent 1x fit.

The fit here is deliberately not the firmware's: a plain least-squares fit of [1, cos, sin] on
the rotation angle interpolated linearly in time between consecutive reference edges, so the
simulator's signals can be checked without trusting either the meter or ``expected_1x``.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from runtrue.sim.scenarios import SCENARIOS, Scenario


def quiet(name: str, **changes: object) -> Scenario:
    """Scenario ``name`` with no noise, interference, harmonics, drift, glitches or jitter."""
    sc = SCENARIOS[name]
    pickups = tuple(
        dataclasses.replace(p, noise_g=0.0, line_g=0.0, harmonics_g=(), dc_offset_g=0.0) for p in sc.pickups
    )
    base = dataclasses.replace(
        sc, pickups=pickups, speed_drift_frac=0.0, glitch_per_rev=0.0, missed_per_rev=0.0, edge_jitter_us=0.0
    )
    return dataclasses.replace(base, **changes)


def fit_1x(values: np.ndarray, t_s: np.ndarray, edge_t_s: np.ndarray) -> complex:
    """amp e^{+j lag} of the 1x in ``values`` sampled at ``t_s``, lag after the edges ``edge_t_s``
    (only samples between the first and last edge are used)."""
    edge_t_s = np.asarray(edge_t_s)
    inside = (t_s >= edge_t_s[0]) & (t_s < edge_t_s[-1])
    t = t_s[inside]
    y = values[inside]
    k = np.searchsorted(edge_t_s, t, side="right") - 1
    phi = 2 * np.pi * (t - edge_t_s[k]) / (edge_t_s[k + 1] - edge_t_s[k])
    basis = np.column_stack([np.ones_like(phi), np.cos(phi), np.sin(phi)])
    coef, *_ = np.linalg.lstsq(basis, y, rcond=None)
    return complex(coef[1], coef[2])


def record(machine, seconds: float, rate_hz: float = 20000.0, channels=None):
    """Noise-free-capable recording straight from the machine: (values (n, ch), t_s, edges)."""
    channels = list(range(len(machine.scenario.pickups))) if channels is None else channels
    t0 = machine.t_s
    n = int(seconds * rate_hz)
    values, edges = machine.generate(n, rate_hz, channels)
    t_s = t0 + np.arange(n) / rate_hz
    return values, t_s, edges
