"""Raw capture parts of protocol version 2 (RAW frames, device -> host): a capture's BEGIN,
SAMPLES, EDGES and END parts parsed into :class:`RawPart`.  Implements firmware/PROTOCOL.md,
"Raw capture"; all numbers little-endian.  The parser raises only :class:`MessageError`.
"""

from __future__ import annotations

import struct
from dataclasses import dataclass

from runtrue.protocol.errors import MessageError


@dataclass(frozen=True)
class RawPart:
    """RAW: one part of a raw capture (``kind`` 0 BEGIN, 1 SAMPLES, 2 EDGES, 3 END).

    BEGIN: ``start_frame``, ``n_frames``, ``n_ch``, ``channel_mask``, ``n_edges``;
    SAMPLES: ``index`` (first frame of the block) and ``codes`` (count x n_ch ADC codes, interleaved);
    EDGES: ``index`` (first edge) and ``edges_q8`` (1/256 sample from the block's first frame);
    END: ``status`` (0 complete, 1 samples overwritten before sent, 2 streaming stopped).
    """

    cap_id: int
    kind: int
    index: int = 0
    count: int = 0
    start_frame: int = 0
    n_frames: int = 0
    n_ch: int = 0
    channel_mask: int = 0
    n_edges: int = 0
    codes: tuple[int, ...] = ()
    edges_q8: tuple[int, ...] = ()
    status: int = 0


RAW_BEGIN, RAW_SAMPLES, RAW_EDGES, RAW_END = 0, 1, 2, 3
_RAW_HEAD = struct.Struct("<BBHB")
_RAW_BEGIN = struct.Struct("<IHBBH")


def parse_raw(payload: bytes) -> RawPart:
    if len(payload) < _RAW_HEAD.size:
        raise MessageError(f"RAW payload of {len(payload)} bytes; the header alone is {_RAW_HEAD.size}")
    cap_id, kind, index, count = _RAW_HEAD.unpack_from(payload)
    data = payload[_RAW_HEAD.size :]
    if kind == RAW_BEGIN:
        if len(data) != _RAW_BEGIN.size:
            raise MessageError(f"RAW BEGIN of {len(payload)} bytes; it should be {_RAW_HEAD.size + _RAW_BEGIN.size}")
        start, n, n_ch, mask, n_edges = _RAW_BEGIN.unpack(data)
        if not 1 <= n_ch <= 3 or bin(mask).count("1") != n_ch:
            raise MessageError(f"RAW BEGIN channel mask {mask:#04x} does not match {n_ch} channel(s)")
        return RawPart(cap_id, kind, start_frame=start, n_frames=n, n_ch=n_ch, channel_mask=mask, n_edges=n_edges)
    if kind == RAW_SAMPLES:
        if len(data) % 2 or len(data) == 0:
            raise MessageError(f"RAW SAMPLES with {len(data)} data bytes (u16 codes expected)")
        return RawPart(cap_id, kind, index, count, codes=struct.unpack(f"<{len(data) // 2}H", data))
    if kind == RAW_EDGES:
        if len(data) != 4 * count:
            raise MessageError(f"RAW EDGES of {count} edge(s) should carry {4 * count} bytes, got {len(data)}")
        return RawPart(cap_id, kind, index, count, edges_q8=struct.unpack(f"<{count}i", data))
    if kind == RAW_END:
        if len(data) != 1:
            raise MessageError(f"RAW END should carry one status byte, got {len(data)}")
        return RawPart(cap_id, kind, status=data[0])
    raise MessageError(f"RAW part of unknown kind {kind}")
