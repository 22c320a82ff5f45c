"""The simulator: a virtual machine (rotor physics) behind the real firmware, as a transport.

* :mod:`runtrue.sim.rotor`      rigid rotor on flexible supports, 1x response to unbalance
* :mod:`runtrue.sim.frontend`   anti-alias filter and ADC quantisation/clipping
* :mod:`runtrue.sim.scenarios`  the demo machines (our own inventions)
* :mod:`runtrue.sim.machine`    VirtualMachine: speed, weights, signals and reference edges
* :mod:`runtrue.sim.board`      SimBoard: the board layer driving the real firmware ``Meter``
* :mod:`runtrue.sim.transport`  SimTransport: the simulated meter behind the host's Transport
"""
