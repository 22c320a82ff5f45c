"""End to end on the simulator's virtual machine: the engine's correction, fitted by the
machine's physical geometry, really removes the unbalance.

The simulator (runtrue.sim.machine) is built from the rotor geometry (a weight at theta from the
mark, against rotation, passes a fixed pickup theta/Omega later), not from the engine's
convention; clockwise and counter-clockwise scenarios are both covered, so a sign error in
either convention would leave vibration behind here.
"""

from __future__ import annotations

import numpy as np
import pytest

sim_machine = pytest.importorskip("runtrue.sim.machine")
sim_scenarios = pytest.importorskip("runtrue.sim.scenarios")

from runtrue.balancing import Run, Weight, solve, suggest_trial_weight  # noqa: E402


@pytest.mark.parametrize("name", sorted(sim_scenarios.SCENARIOS))
def test_correction_fitted_by_geometry_removes_the_vibration(name: str) -> None:
    vm = sim_machine.VirtualMachine(name, seed=1)
    sc = vm.scenario
    n_planes = len(sc.planes)
    before = np.array(vm.expected_1x())
    runs = [Run([], list(before))]
    for p, plane in enumerate(sc.planes):
        trial = suggest_trial_weight(sc.rotor_mass_kg, sc.speed_rpm, plane.radius_mm, n_planes)
        w = Weight(p + 1, trial.mass_g, 30.0 + 50.0 * p, plane.radius_mm)
        wid = vm.add_weight(p, w.mass_g, w.angle_deg, w.radius_mm)
        runs.append(Run([w], vm.expected_1x()))
        vm.remove_weight(wid)
    sol = solve(runs)
    for c in sol.corrections:
        vm.add_weight(c.plane - 1, c.mass_g, c.angle_deg, c.radius_mm)
    after = np.array(vm.expected_1x())
    initial = [abs(p.initial_unbalance_gmm) for p in sc.planes]
    assert vm.true_residual_unbalance_gmm() == pytest.approx([0.0] * n_planes, abs=1e-6 * max(initial))
    assert np.max(np.abs(after)) < 1e-6 * np.max(np.abs(before))
