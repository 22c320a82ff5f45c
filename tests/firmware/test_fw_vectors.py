"""The shared protocol vectors (tests/vectors/frames.json) are what the firmware encoder sends."""

from __future__ import annotations

import json
import struct

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
        assert (version, ftype, seq, payload.hex()) == (2, v["type"], v["seq"], v["payload"])
        f = v["fields"]
        if ftype == fr.T_REV:
            head = struct.unpack_from(fr.REV_HEADER_FMT, payload)
            assert head == (f["rev"], f["length_q8"], f["n_samples"], f["flags"], f["n_ch"],
                            f["channel_mask"], f["first_off_q8"], f["n_sums"])
            assert len(payload) == 16 + 70 * f["n_ch"]
            for k, sums in enumerate(f["sums"]):
                for j, want in enumerate(sums):
                    o = 16 + 70 * k + 5 * j
                    got = int.from_bytes(payload[o:o + 3], "little") + (int.from_bytes(payload[o + 3:o + 5], "little", signed=True) << 24)
                    assert got == want
        elif ftype == fr.T_STATUS:
            assert len(payload) == 27
            assert struct.unpack(fr.STATUS_FMT, payload) == tuple(f.values())
        elif ftype == fr.T_ACK:
            assert struct.unpack_from(fr.ACK_FMT, payload) == (f["cmd_seq"], f["cmd_type"], f["result"])
            assert payload[4:].decode() == f["message"]
        elif ftype in (fr.T_INFO, fr.T_SELFTEST):
            assert json.loads(payload) == f
        elif ftype == fr.T_TEXT:
            assert payload.decode() == f["text"]
