"""Raw capture under MicroPython's unix port with the real viper emitter: the viper copy equals
the portable one, and a capture goes out allocation-free under heap_lock."""

from __future__ import annotations

import json

from capture_scripts import HEAP_LOCK_CAPTURE  # type: ignore[import-not-found]

COPY_SCRIPT = r"""
import json, random
from array import array
from runtrue_fw import capture as C
from runtrue_fw import capture_viper as V
random.seed(3)
bad = 0
for trial in range(30):
    nch = 1 + trial % 3
    ring = array("H", [random.randrange(65536) for _ in range(8192 * nch)])
    n = random.randrange(1, C.frames_per_chunk(nch) + 1)
    p = array("i", [n, nch, random.randrange(8192), 8192, 9])
    a = bytearray(248)
    b = bytearray(248)
    C.copy_frames_portable(ring, a, p)
    V.copy_frames(ring, b, p)
    if a != b:
        bad += 1
print(json.dumps({"bad": bad, "copy": C.COPY}))
"""


def test_viper_copy_equals_the_portable_one(unix_mp) -> None:
    res = unix_mp(COPY_SCRIPT)
    assert res.returncode == 0, res.stderr
    out = json.loads(res.stdout)
    assert out == {"bad": 0, "copy": "viper"}


def test_a_capture_goes_out_allocation_free_with_the_viper_copy(unix_mp) -> None:
    res = unix_mp(HEAP_LOCK_CAPTURE, heap="2m")   # room for the test harness decoding the frames
    assert res.returncode == 0, res.stderr
    locked, status, n_codes, n_edges, copy = res.stdout.split()
    assert (locked, int(status), int(n_codes), copy) == ("no-allocation", 0, 1200, "viper")
