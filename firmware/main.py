"""Board entry point of the runtrue meter: builds the RP2040 board layer and the portable Meter,
then runs the meter loop until the host sends the REPL command.

The way back to the MicroPython REPL (the loop ignores Ctrl-C, because 0x03 is an ordinary byte
inside binary frames):
  * the REPL command (0x89, firmware/PROTOCOL.md) -- ``runtrue device install`` sends it first;
  * or fit the SAFE_MODE jumper (GPIO22 to GND, hardware/pinmap.toml) and reset the board: this
    file then returns at once and leaves the REPL to mpremote or a terminal.
"""

import micropython

try:
    micropython.alloc_emergency_exception_buf(100)  # a traceback from the hard edge IRQ, if ever
except AttributeError:  # a port without it
    pass

from runtrue_fw import buffers

RING = buffers.meter_ring(3)  # first, while the heap is in one piece (firmware/README.md, Memory)

from runtrue_fw import board_rp2040  # noqa: E402


def main():
    if board_rp2040.safe_mode_requested():
        print("runtrue: SAFE_MODE jumper fitted; meter not started, staying at the REPL")
        return
    board = board_rp2040.Board()
    from runtrue_fw.meter import Meter

    meter = Meter(board, ring=RING)
    board.run(meter)
    print("runtrue: meter stopped; MicroPython REPL")


main()
