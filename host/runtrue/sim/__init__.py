"""The simulator: a virtual machine (rotor physics) behind the real firmware, as a transport.

* :mod:`runtrue.sim.rotor`      rigid rotor on flexible supports, 1x response to unbalance
* :mod:`runtrue.sim.frontend`   the meter's anti-alias filter, ADC quantisation and clipping
* :mod:`runtrue.sim.scenarios`  the demo machines (our own inventions): ``SCENARIOS``
* :mod:`runtrue.sim.machine`    ``VirtualMachine``: speed, weights, signals and reference edges
* :mod:`runtrue.sim.board`      ``SimBoard``: the board layer driving the real firmware ``Meter``
* :mod:`runtrue.sim.transport`  ``SimTransport``: the simulated meter behind the host's Transport

Use::

    from runtrue.sim.transport import SimTransport
    t = SimTransport("roller", seed=1)          # or open_transport("sim:roller", seed=1)
    m = t.machine                               # the virtual machine
    wid = m.add_weight(0, 12.0, 135.0, 95.0)    # plane 0, 12 g at 135 deg from the mark
                                                # (against rotation), radius 95 mm
    m.expected_1x()                             # noise-free 1x per channel, g, amp e^{+j lag}
    m.true_residual_unbalance_gmm()             # per plane
    m.remove_weight(wid); m.speed_rpm; m.scenario.planes[0].radius_mm
    m.set_speed_rpm(1200.0, ramp_rpm_per_s=200.0); m.coast_down()
    t.unplug(); t.reopen(1.0)                   # pull and re-plug the simulated cable

``expected_1x`` is what the host reports without noise: lag after the active reference edge,
the anti-alias filter taken out (the host corrects it from INFO's ``fe``), including the
reference conditioning delay, with the ADC's
round-robin skew removed (the firmware corrects it).  Lag grows with speed through the filter
and the support dynamics, so compare at the speed measured.
"""

from runtrue.sim.source import register

__all__ = ["register"]
