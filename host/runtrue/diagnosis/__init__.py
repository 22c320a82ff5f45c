"""Before weights go on: is it unbalance, how severe is it, is the speed near a resonance?

* :mod:`runtrue.diagnosis.severity` — broadband velocity RMS, spectrum, and the evaluation zones
  A-D of ISO 20816-3 (machines over 15 kW) and the classes of ISO 10816-1 (small machines);
* :mod:`runtrue.diagnosis.verdict` — the "is it unbalance?" verdict with its reasons;
* :mod:`runtrue.diagnosis.resonance` — 1x against speed from a run-up or coast-down, resonances
  and the warning when the balancing speed is near one.

Pure functions on numbers and numpy arrays; no I/O, no UI.
"""
