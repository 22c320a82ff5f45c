"""The shared protocol vectors (tests/vectors/frames.json) are what the firmware encoder sends."""

from __future__ import annotations

import json
import struct
from pathlib import Path

from make_frame_vectors import VECTORS, render  # type: ignore[import-not-found]
from runtrue_fw import frames as fr


def _doc() -> dict:
    return json.loads(VECTORS.read_text())


def test_firmware_encoder_reproduces_the_shared_vectors_byte_for_byte() -> None:
    assert VECTORS.read_text() == render(), (
        "tests/vectors/frames.json differs from the firmware encoder's output; if the protocol "
        "changed on purpose, run: .venv/bin/python tests/firmware/make_frame_vectors.py")


def test_vectors_document_their_schema_and_cover_the_edge_cases() -> None:
    doc = _doc()
    assert "wire" in doc["schema"] and "fields" in doc["schema"]
    names = {v["name"] for v in doc["vectors"]}
    types = {v["type"] for v in doc["vectors"]}
    assert {1, 2, 3, 4, 5, 6} <= types and set(range(0x81, 0x8A)) <= types
    assert {"seq_before_wrap", "seq_after_wrap", "text_max_length_all_zeros",
            "rev_payload_of_zeros_no_fit"} <= names
    longest = max(len(bytes.fromhex(v["wire"])) for v in doc["vectors"])
    assert longest <= fr.MAX_WIRE


def test_each_vector_decodes_to_its_fields() -> None:
    for v in _doc()["vectors"]:
        version, ftype, seq, payload = fr.decode_frame(bytes.fromhex(v["wire"]))
        assert (version, ftype, seq, payload.hex()) == (1, v["type"], v["seq"], v["payload"])
        f = v["fields"]
        if ftype == fr.T_REV:
            head = struct.unpack_from(fr.REV_HEADER_FMT, payload)
            assert head == (f["rev"], f["period_us"], f["n_samples"], f["flags"], f["n_ch"],
                            f["channel_mask"])
            assert len(payload) == 14 + 20 * f["n_ch"]
            for k, ch in enumerate(f["channels"]):
                got = struct.unpack_from(fr.REV_CHANNEL_FMT, payload, 14 + 20 * k)
                assert got == (ch["h1_re"], ch["h1_im"], ch["h2_re"], ch["h2_im"], ch["rms"])
        elif ftype == fr.T_STATUS:
            assert len(payload) == 23
            assert struct.unpack(fr.STATUS_FMT, payload) == tuple(f.values())
        elif ftype == fr.T_ACK:
            assert struct.unpack_from(fr.ACK_FMT, payload) == (f["cmd_seq"], f["cmd_type"], f["result"])
            assert payload[4:].decode() == f["message"]
        elif ftype in (fr.T_INFO, fr.T_SELFTEST):
            assert json.loads(payload) == f
        elif ftype == fr.T_TEXT:
            assert payload.decode() == f["text"]
