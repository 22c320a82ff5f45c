"""The lint gate is part of the test command: ruff over host, firmware and tests, and mypy with the
project's configuration (pyproject.toml: the host package, strict for the layers the numbers rest
on).  Each fails with the tool's own report."""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]


def _run_tool(module: str, *args: str, timeout_s: float) -> subprocess.CompletedProcess[str]:
    if importlib.util.find_spec(module) is None:
        pytest.fail(f"{module} is not installed: install the test tools with pip install -e '.[test]'",
                    pytrace=False)
    return subprocess.run([sys.executable, "-m", module, *args], cwd=REPO, capture_output=True, text=True,
                          timeout=timeout_s, check=False)


def test_ruff_finds_nothing_in_host_firmware_and_tests() -> None:
    result = _run_tool("ruff", "check", "--no-fix", "host", "firmware", "tests", timeout_s=120)
    if result.returncode != 0:
        pytest.fail(f"ruff check host firmware tests:\n{result.stdout}{result.stderr}", pytrace=False)


@pytest.mark.slow   # about 10 s without mypy's cache
def test_mypy_finds_nothing_in_the_host_package() -> None:
    result = _run_tool("mypy", timeout_s=600)
    if result.returncode != 0:
        pytest.fail(f"mypy (configured in pyproject.toml):\n{result.stdout}{result.stderr}", pytrace=False)
