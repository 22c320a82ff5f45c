"""runtrue: balance rotors in place with a USB vibration meter and a terminal application.

Layers, each a sub-package: transport -> protocol -> device -> readings -> balancing ->
allocation -> jobs -> tui/cli.  The simulator (``runtrue.sim``) is a plug-in: it registers its
``sim:NAME`` ports with ``runtrue.transport.registry`` (``runtrue.plugins.load()``) and is then
a transport like any other.
"""

__version__ = "0.1.0"
