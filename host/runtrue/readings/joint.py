"""A reading's 1x from all its revolutions' sums at once (:func:`fit_joint`, :func:`joint_1x`).

Source: linear least squares / instrumental variables over the stacked revolutions, solved by
block elimination (G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed. 2013, section
3.2 -- from memory; T. Söderström and P. Stoica, *System Identification*, 1989, chapter 8 --
from memory); the per-revolution model and the rest of its sources are in
:mod:`runtrue.device.revmodel`.

Why: a line tone near a running-speed order (100 Hz and 4x at 1470 rpm) cannot be told apart
within one revolution, and even far from any order the line terms cost one revolution's fit so
much precision that the host leaves them out (``runtrue.device.revfit``), so hum leaks into
every revolution's 1x and averages out only as its phase walks against the rotor's.  Fitted
over all the revolutions of a reading, with the orders and each line tone common to all, the
tone stands apart and the 1x keeps the precision of a fit without it (tests/bench/bench_crb.py
prints both).

Used when every revolution averaged carries its sums and lies in one unbroken run of samples
(``Revolution.stats``, ``first_sample``, ``run_id``; the device client fills them in); otherwise
the reading is the plain vector average.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from runtrue.device.revfit import choose_terms
from runtrue.device.revmodel import (
    COLLISION_CYCLES,
    COLUMN_NAMES,
    N_HARMONICS,
    N_LINE,
    TURN,
    LineCollision,
    RevGeometry,
    harmonic_columns,
    line_collisions,
    line_columns,
    meter_basis,
    model_basis,
    sums_to_projections,
)
from runtrue_fw import basis as fwb


@dataclass(frozen=True)
class RevInput:
    """One revolution of a joint fit: where its samples are, the meter's sums of one channel, its
    acceleration (turns per sample^2) and the index of its first sample since START (so that the
    line tone's phase can be carried from one revolution to the next)."""

    geom: RevGeometry
    sums: Sequence[int]
    accel: float = 0.0
    first_sample: int = 0


@dataclass(frozen=True)
class JointResult:
    """A reading fitted from several revolutions' sums at once.

    ``orders``: the running-speed orders at the reference speed (the root mean square of the
    revolutions' mean speeds), codes; ``lines``: the line tones, codes, phase at sample 0.
    """

    orders: dict[int, complex]
    lines: dict[int, complex]
    cov_unit: np.ndarray = field(repr=False)  # of the stacked parameters / sigma^2
    crlb_unit: np.ndarray = field(repr=False)
    index: dict[str, int] = field(default_factory=dict)  # shared column name -> stacked index
    collisions: tuple[LineCollision, ...] = ()
    speed_ref: float = 0.0  # the reference speed, turns per sample


def _rotation(phase_turns: float) -> np.ndarray:
    """M with (c_local, s_local) = M (c, s) for a tone c cos(t) + s sin(t) seen from a local angle
    psi = t - phase."""
    a = 2.0 * math.pi * phase_turns
    return np.array([[math.cos(a), math.sin(a)], [-math.sin(a), math.cos(a)]])


def fit_joint(
    revs: Sequence[RevInput],
    *,
    orders: Sequence[int] = range(1, N_HARMONICS + 1),
    line_hz: float = 0.0,
    speed_hz: float = 0.0,
    amp_exponent: float = 2.0,
    with_cov: bool = True,
) -> JointResult:
    """Fit several revolutions of a steady reading together, from their sums: each revolution has
    its own dc; the running-speed orders are common to all (each revolution's scaled by the
    square of its mean speed over the reference speed, the unbalance force), on the modelled
    angle (IV form, as :func:`runtrue.device.revmodel.fit_revolution`); each line tone is ONE sinusoid across all of
    them (amplitude and phase constant, phase carried by the sample count with the meter's
    quantised ``line_inc``).  A tone near an order, which one revolution cannot tell from it,
    stands apart once its phase has walked against the rotor's over the revolutions.

    Block elimination of the normal equations (the revolutions' own dc solved in terms of the
    common parameters; G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed. 2013,
    section 3.2, block LU -- from memory).  A line term is left out (and reported) when it stays
    within ``COLLISION_CYCLES`` cycles of an order over the whole span of the revolutions.
    The revolutions need not be consecutive; ``first_sample`` places each one in time.
    """
    n = len(revs)
    if n == 0:
        raise ValueError("no revolutions to fit")
    line_inc = revs[0].geom.line_inc
    lines: list[int] = []
    collisions: list[LineCollision] = []
    if line_inc:
        for c in line_collisions(speed_hz, line_hz, orders):
            if c.gap_pct / 100.0 * c.order * n < COLLISION_CYCLES:
                collisions.append(c)
        dropped = {c.line_term for c in collisions}
        lines = [m for m in range(1, N_LINE + 1) if m not in dropped]
    order_cols = [c for k in orders for c in harmonic_columns(k)]
    line_cols = [c for m in lines for c in line_columns(m)]
    shared_cols = order_cols + line_cols
    n_sh = len(shared_cols)
    speeds = np.array([1.0 / rv.geom.length_samples for rv in revs])
    speed_ref = float(np.sqrt(np.mean(speeds**2)))
    n_par = n + n_sh  # each revolution's dc, then the shared columns
    s_mat = np.zeros((n_sh, n_sh))
    s_rhs = np.zeros(n_sh)
    per_rev = []
    size = n_par if with_cov else 0
    big_a = np.zeros((size, size))  # instruments^T model (stacked)
    big_z = np.zeros((size, size))  # instruments^T instruments
    big_t = np.zeros((size, size))  # model^T model: Fisher information / sigma^2
    for r, rv in enumerate(revs):
        phi = meter_basis(rv.geom)
        theta = model_basis(rv.geom, rv.accel, amp_exponent) if rv.accel else phi
        # the shared parameters seen from this revolution: orders scaled, tones rotated
        tr = np.zeros((n_sh, n_sh))
        scale = (speeds[r] / speed_ref) ** amp_exponent
        n_o = len(order_cols)
        tr[:n_o, :n_o] = np.eye(n_o) * scale
        for j, m in enumerate(lines):
            phase = ((m * line_inc) & fwb.TURN_MASK) * rv.first_sample % (fwb.TURN_MASK + 1) / TURN
            i0 = n_o + 2 * j
            tr[i0:i0 + 2, i0:i0 + 2] = _rotation(phase)
        b = sums_to_projections(rv.sums, [0] + shared_cols)
        z0, zs = phi[:, 0], phi[:, shared_cols] @ tr  # instruments (the meter's basis)
        t0, ts = theta[:, 0], theta[:, shared_cols] @ tr  # the model
        a00 = float(z0 @ t0)
        a0s = z0 @ ts
        as0 = zs.T @ t0
        s_mat += zs.T @ ts - np.outer(as0, a0s) / a00
        b_s = tr.T @ b[1:]
        s_rhs += b_s - as0 * b[0] / a00
        per_rev.append((a00, a0s, b[0]))
        if not with_cov:
            continue
        idx = [r] + list(range(n, n_par))
        zi = np.column_stack([z0, zs])
        ti = np.column_stack([t0, ts])
        big_a[np.ix_(idx, idx)] += zi.T @ ti
        big_z[np.ix_(idx, idx)] += zi.T @ zi
        big_t[np.ix_(idx, idx)] += ti.T @ ti
    shared = np.linalg.solve(s_mat, s_rhs)
    pos = {c: i for i, c in enumerate(shared_cols)}
    orders_out = {k: complex(shared[pos[harmonic_columns(k)[0]]], shared[pos[harmonic_columns(k)[1]]]) for k in orders}
    lines_out = {m: complex(shared[pos[line_columns(m)[0]]], shared[pos[line_columns(m)[1]]]) for m in lines}
    if with_cov:
        a_inv = np.linalg.inv(big_a)
        cov = a_inv @ big_z @ a_inv.T
        crlb = np.linalg.inv(big_t)
    else:  # the estimate only (a reading's mean): skip the stacked covariance
        cov = crlb = np.zeros((0, 0))
    index = {COLUMN_NAMES[c]: n + i for i, c in enumerate(shared_cols)}
    return JointResult(orders_out, lines_out, cov, crlb, index, tuple(collisions), speed_ref)


def joint_1x(revs: Sequence[Any], info: Any) -> tuple[list[complex], tuple[LineCollision, ...]] | None:
    """Per channel the 1x in g (amp e^{+j lag}) of ``revs`` fitted together, and the line tones
    still too close to an order over their span; None when the revolutions do not allow it."""
    if len(revs) < 2 or info is None:
        return None
    run = revs[0].run_id
    if any(r.stats is None or r.first_sample < 0 or r.run_id != run or not r.h1_per_code for r in revs):
        return None
    line_inc = int(_field(info, "line_inc"))
    n_orders = []
    for r in revs:
        terms = choose_terms(int(r.stats.n_samples), line_inc)
        if terms is None:
            return None
        n_orders.append(terms.orders)
    orders = range(1, min(n_orders) + 1)
    speed_hz = float(np.mean([r.speed_rpm for r in revs])) / 60.0
    out: list[complex] = []
    collisions: tuple[LineCollision, ...] = ()
    for ch in range(len(revs[0].h1)):
        inputs = [
            RevInput(
                RevGeometry(int(r.stats.n_samples), int(r.stats.length_q8), int(r.stats.first_off_q8), line_inc),
                r.stats.sums[ch], float(r.accel), int(r.first_sample))
            for r in revs
        ]
        try:
            fit = fit_joint(inputs, orders=orders, line_hz=float(_field(info, "line_hz")),
                                     speed_hz=speed_hz, with_cov=False)
        except np.linalg.LinAlgError:
            return None
        per_code = complex(np.mean([r.h1_per_code[ch] for r in revs]))
        out.append(fit.orders[1] * per_code)
        collisions = fit.collisions
    return out, collisions


def _field(info: Any, name: str) -> float:
    """A number from the meter's INFO, as a DeviceInfo or its dict (0 when absent)."""
    value = info.get(name, 0) if isinstance(info, dict) else getattr(info, name, 0)
    return value or 0
