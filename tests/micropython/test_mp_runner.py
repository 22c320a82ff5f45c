"""Our Node runner for MicroPython maps exit codes and passes bytes through exactly."""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.micropython


def test_runner_is_micropython_and_passes_stdout_and_stdin_byte_exact(micropython) -> None:
    res = micropython(
        "import sys\n"
        "assert sys.implementation.name == 'micropython'\n"
        "data = open('/stdin', 'rb').read()\n"
        "sys.stdout.buffer.write(bytes([0, 255, 13, 10]) + data)\n"
        "print(sys.argv[1:])\n", "a b", stdin=b"\x00\x01\xfe")
    assert res.returncode == 0, res.stderr
    assert res.stdout == b"\x00\xff\r\n\x00\x01\xfe['a b']\n"


@pytest.mark.parametrize("script,code", [("import sys\nsys.exit(3)\n", 3),
                                         ("raise ValueError('broken meter')\n", 1),
                                         ("import sys\nsys.exit()\n", 0)])
def test_runner_maps_exceptions_and_exit_to_the_exit_code(micropython, script: str, code: int) -> None:
    res = micropython(script)
    assert res.returncode == code
    if code == 1:
        assert "ValueError: broken meter" in res.stderr
