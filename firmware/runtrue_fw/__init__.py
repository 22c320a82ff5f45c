"""runtrue meter firmware: portable logic (no hardware imports) plus one board module.

Runs unchanged on the board (MicroPython, RP2040), under CPython (the simulator and the tests)
and under the MicroPython WebAssembly build (the tests).  See firmware/README.md.
"""

FW_VERSION = "0.2.0"  # protocol version 2
