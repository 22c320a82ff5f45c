"""Raw capture under the real MicroPython interpreter (the WebAssembly port, portable copy): the
same RAW frames as under CPython, and sending a capture allocates nothing under heap_lock."""

from __future__ import annotations

import json

import pytest
from capture_scripts import HEAP_LOCK_CAPTURE  # type: ignore[import-not-found]
from rtlib.drive import capture_scenario  # type: ignore[import-not-found]

pytestmark = pytest.mark.micropython

CASES = [dict(n_capture=1000, request_at=640, n_frames=2600),
         dict(channels=[(0.5, 30.0, 0.1, 200.0, 0.2), (0.25, 300.0, 0.05, 10.0, -0.1),
                        (1.0, 181.0, 0.0, 0.0, 0.0)], n_capture=300, request_at=128, n_frames=1200)]


def test_raw_capture_is_the_same_under_micropython_as_under_cpython(micropython) -> None:
    script = ("import json\nfrom rtlib.drive import capture_scenario\n"
              f"for case in {CASES!r}:\n"
              "    raw, revs, per_pass, ack, sh, edges = capture_scenario(**case)\n"
              "    print(json.dumps([raw, len(revs), per_pass, list(ack)]))\n")
    res = micropython(script)
    assert res.returncode == 0, res.stderr
    lines = res.text.splitlines()
    assert len(lines) == len(CASES)
    for case, line in zip(CASES, lines):
        raw, n_revs, per_pass, ack = json.loads(line)
        py = capture_scenario(**case)
        assert raw == json.loads(json.dumps(py[0]))
        assert n_revs == len(py[1]) and per_pass == py[2] and ack == list(py[3])
        assert raw["status"] == 0




def test_sending_a_capture_allocates_nothing_under_heap_lock(micropython) -> None:
    res = micropython(HEAP_LOCK_CAPTURE)
    assert res.returncode == 0, res.stderr
    locked, status, n_codes, n_edges, copy = res.text.split()
    assert locked == "no-allocation"
    assert (int(status), int(n_codes)) == (0, 2 * 600)
    assert int(n_edges) > 5
    assert copy == "portable"
