"""hardware/pinmap.toml is the one source of truth for pins: the firmware's board constants must
match it.  ADC input n is GPIO 26 + n (Raspberry Pi Ltd, *RP2040 Datasheet*, section 4.9:
"ADC inputs 0-3 are on GPIO26-29")."""

from __future__ import annotations

import re
import sys
from pathlib import Path

import pytest
from rp2040_fake import Rig

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    tomllib = pytest.importorskip("tomli")

ROOT = Path(__file__).parents[2]
PINMAP = tomllib.loads((ROOT / "hardware" / "pinmap.toml").read_text())
BOARD_SRC = (ROOT / "firmware" / "runtrue_fw" / "board_rp2040.py").read_text()

EXPECTED = {
    "PIN_ACCEL_CH0": PINMAP["accelerometer"]["ch0"]["gpio"],
    "PIN_ACCEL_CH1": PINMAP["accelerometer"]["ch1"]["gpio"],
    "PIN_ACCEL_CH2": PINMAP["accelerometer"]["ch2"]["gpio"],
    "PIN_REF": PINMAP["reference"]["input"]["gpio"],
    "PIN_SAFE_MODE": PINMAP["control"]["safe_mode"]["gpio"],
    "PIN_LED": PINMAP["control"]["led"]["gpio"],
}


def test_board_module_pin_constants_match_the_pin_map_in_the_source() -> None:
    found = {name: int(v) for name, v in re.findall(r"^(PIN_\w+) = const\((\d+)\)", BOARD_SRC, re.M)}
    assert found == EXPECTED


def test_board_module_pin_constants_match_the_pin_map_when_imported(rig: Rig) -> None:
    assert {name: getattr(rig.module, name) for name in EXPECTED} == EXPECTED


def test_the_board_claims_exactly_the_mapped_pins(rig: Rig) -> None:
    rig.board()
    assert rig.module.safe_mode_requested() is False  # pulled up, no jumper
    claimed = set(rig.module.machine.Pin.instances)
    assert claimed == set(EXPECTED.values())


def test_accelerometer_channels_sit_on_their_adc_inputs() -> None:
    for n in range(3):
        ch = PINMAP["accelerometer"][f"ch{n}"]
        assert ch["adc"] == n and ch["gpio"] == 26 + n


def test_no_pin_is_used_twice() -> None:
    gpios = list(EXPECTED.values())
    assert len(gpios) == len(set(gpios))
