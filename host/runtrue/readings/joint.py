"""A reading's 1x from all its revolutions' sums at once (:func:`runtrue.readings.revmodel.fit_joint`).

Source: linear least squares / instrumental variables over the stacked revolutions, solved by
block elimination (G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed. 2013, section
3.2 -- from memory; T. Söderström and P. Stoica, *System Identification*, 1989, chapter 8 --
from memory); the model and the rest of its sources are in :mod:`runtrue.readings.revmodel`.

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

from collections.abc import Sequence
from typing import Any

import numpy as np

from runtrue.readings import revmodel


def joint_1x(revs: Sequence[Any], info: Any) -> tuple[list[complex], tuple[revmodel.LineCollision, ...]] | None:
    """Per channel the 1x in g (amp e^{+j lag}) of ``revs`` fitted together, and the line tones
    still too close to an order over their span; None when the revolutions do not allow it."""
    from runtrue.device.revfit import choose_terms

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
    collisions: tuple[revmodel.LineCollision, ...] = ()
    for ch in range(len(revs[0].h1)):
        inputs = [
            revmodel.RevInput(
                revmodel.RevGeometry(int(r.stats.n_samples), int(r.stats.length_q8), int(r.stats.first_off_q8), line_inc),
                r.stats.sums[ch], float(r.accel), int(r.first_sample))
            for r in revs
        ]
        try:
            fit = revmodel.fit_joint(inputs, orders=orders, line_hz=float(_field(info, "line_hz")),
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
