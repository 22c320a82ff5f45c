"""The JSON commands round their output one of two ways, each by its name: significant figures
(``solve``, ``tolerance``) or decimal places (``allocate``)."""

from __future__ import annotations

import pytest

from runtrue.cli.jsonio import round_places, round_sig, round_sig_angle_deg


@pytest.mark.parametrize(("x", "figures", "out"), [
    (1234.5678, 3, 1230.0), (0.000123456789, 6, 0.000123457), (98.69604401089358, 6, 98.696), (0.0, 6, 0.0),
])
def test_significant_figures(x: float, figures: int, out: float) -> None:
    assert round_sig(x, figures) == out


def test_angles_round_then_wrap() -> None:
    assert round_sig_angle_deg(359.99999999) == 0.0  # not 360.0
    assert round_sig_angle_deg(41.23456789) == 41.2346
    assert round_sig_angle_deg(-30.0) == 330.0


def test_decimal_places() -> None:
    assert round_places(2.3456789, 4) == 2.3457
    assert round_places(1234.5678901234) == 1234.567890
    assert round_places(12.0, 3) == 12.0
