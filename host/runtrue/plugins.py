"""The plug-ins that ship with runtrue, loaded by the programs that put runtrue together (the
command line, the application's tests): lower layers never name a plug-in; they find what a
plug-in offers through the registry it registered with.

* the simulator (:mod:`runtrue.sim`) registers the ``sim:NAME`` ports with
  :mod:`runtrue.transport.registry`.

Deployment (:mod:`runtrue.deploy`) needs no registration: only the ``runtrue device`` command
uses it.
"""

from __future__ import annotations

from runtrue import sim


def load() -> None:
    """Register every plug-in (again: harmless).  Cheap: nothing heavy is imported."""
    sim.register()
