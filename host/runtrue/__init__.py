"""runtrue: balance rotors in place with a USB vibration meter and a terminal application.

Layers, each a sub-package: transport -> protocol -> device -> readings -> balancing ->
allocation -> jobs -> tui/cli.  The simulator (``runtrue.sim``) is a transport like any other.
"""

__version__ = "0.1.0"
