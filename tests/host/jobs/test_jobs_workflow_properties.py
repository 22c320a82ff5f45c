"""Property tests: on any plausible linear rotor the workflow ends within the grade.

Random rotors (hypothesis): one or two planes, influence coefficients with each plane acting
mostly on its own pickup (as on a real machine with a pickup at each bearing), any initial
unbalance, small measurement noise, trials removed or left on.  Noise-free enough that the
method must succeed; a failure here is a workflow bug (wrong bookkeeping of weights, angles or
runs), not bad luck.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from jobs_fakes import LinearRotor, polar

from runtrue.balancing import permissible_unbalance
from runtrue.jobs import BalanceJob, JobStore, Machine, Pickup, PlaneSpec

pytestmark = pytest.mark.slow

angles = st.floats(0.0, 359.9)


@st.composite
def rotors(draw: st.DrawFn) -> tuple[Machine, LinearRotor, bool]:
    n = draw(st.sampled_from([1, 2]))
    mass_kg = draw(st.floats(2.0, 200.0))
    speed = draw(st.floats(600.0, 6000.0))
    radius = draw(st.floats(40.0, 300.0))
    positions = draw(st.sampled_from([None, 6, 8, 12]))
    planes = [PlaneSpec(radius, count=positions) if positions else PlaneSpec(radius, continuous=True) for _ in range(n)]
    machine = Machine("random rotor", mass_kg, speed, planes, pickups=[Pickup(str(i + 1)) for i in range(n)],
                      grade=draw(st.sampled_from(["G2.5", "G6.3", "G16"])))
    own = [draw(st.floats(2e-5, 5e-4)) for _ in range(n)]
    h = [[polar(own[i] * (1.0 if i == j else draw(st.floats(0.0, 0.4))), draw(angles)) for j in range(n)]
         for i in range(n)]
    perm = permissible_unbalance(float(machine.grade[1:]), mass_kg, speed, planes=n).per_plane_gmm
    u0 = [polar(perm[0] * draw(st.floats(2.0, 40.0)), draw(angles)) for _ in range(n)]
    noise = min(abs(h[i][i]) for i in range(n)) * min(perm) * 0.01  # 1 % of the permissible, in g
    if draw(st.booleans()):  # a shop stock: 1-2-5 pieces, the smallest a fifth of the permissible mass
        from runtrue.jobs import StockPiece

        base = min(perm) / radius / 5.0
        machine.stock = [StockPiece(base * k, 12) for k in (1, 2, 5, 10, 20, 50)]
        for p in machine.planes:
            p.max_pieces_per_position = 4
    return machine, LinearRotor(h, u0, speed, noise_g=noise, seed=draw(st.integers(0, 1000))), draw(st.booleans())


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rotors())
def test_any_plausible_rotor_is_balanced_within_its_grade(case: tuple[Machine, LinearRotor, bool]) -> None:
    machine, rotor, trial_removed = case
    with JobStore(":memory:") as store:
        job = BalanceJob.start(store, machine, trial_removed=trial_removed)
        while job.step != "done":
            assert len(job.runs) < 12
            job.record_run(rotor.reading(job.planned_weights()))
        res = job.result()
        assert res.passed is True, (res.residual_unbalance_gmm, res.permissible_unbalance_gmm, job.state.warnings)
        left = rotor.unbalance_gmm(job.runs[-1].weights)
        assert all(abs(u) <= p * 1.05 for u, p in zip(left, res.permissible_unbalance_gmm))
        for w in job.runs[-1].weights:
            assert w.mass_g >= 0 and 0 <= w.angle_deg < 360 and math.isfinite(w.mass_g)
