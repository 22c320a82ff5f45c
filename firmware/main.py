"""Board entry point of the runtrue meter: builds the RP2040 board layer and the portable Meter,
then runs the meter loop until the host sends the REPL command.

The way back to the MicroPython REPL (the loop ignores Ctrl-C, because 0x03 is an ordinary byte
inside binary frames):
  * the REPL command (0x89, firmware/PROTOCOL.md) -- ``runtrue device install`` sends it first;
  * or fit the SAFE_MODE jumper (GPIO22 to GND, hardware/pinmap.toml) and reset the board: this
    file then returns at once and leaves the REPL to mpremote or a terminal.
"""

from runtrue_fw import board_rp2040


def main():
    if board_rp2040.safe_mode_requested():
        print("runtrue: SAFE_MODE jumper fitted; meter not started, staying at the REPL")
        return
    from runtrue_fw.meter import Meter

    board = board_rp2040.Board()
    meter = Meter(board)
    board.run(meter)
    print("runtrue: meter stopped; MicroPython REPL")


main()
