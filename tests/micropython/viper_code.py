"""The machine code of a module's viper functions, read from the .mpy file mpy-cross writes.

Format: MicroPython documentation, "MicroPython .mpy files" (reference/mpyfiles), .mpy version 6:
a 4-byte header ('M', version, features with the native architecture in bits 2-7, small-int
bits), the qstr and constant-object tables, then the module's raw code and its children, each as
a varint ``(length << 3) | (has children << 2) | kind`` followed by ``length`` bytes; a viper
child (kind 2) adds its scope flags as a varint, and its machine code starts at its first byte.
Only what the firmware's kernels use is accepted: module-level functions, no constants beyond the
runtime's function table and the singletons, no viper read-only data, BSS or relocations.
"""

from __future__ import annotations

import ast
from pathlib import Path

MPY_VERSION = 6
ARCH_ARMV6M = 4  # the RP2040's Cortex-M0+
_KIND_BYTECODE, _KIND_NATIVE, _KIND_VIPER, _KIND_ASM = 0, 1, 2, 3


class MpyFormatError(ValueError):
    """The file is not a version-6 .mpy of the shape read here."""


def _uint(b: bytes, i: int) -> tuple[int, int]:
    v = 0
    while True:
        if i >= len(b):
            raise MpyFormatError("file ends inside a number")
        c = b[i]
        i += 1
        v = (v << 7) | (c & 0x7F)
        if not c & 0x80:
            return v, i


def viper_functions(mpy: bytes) -> tuple[int, list[bytes]]:
    """(native architecture, machine code of each viper function in the order the module defines them)."""
    if len(mpy) < 4 or mpy[0] != ord("M") or mpy[1] != MPY_VERSION:
        raise MpyFormatError(f"not a version-{MPY_VERSION} .mpy file")
    arch = mpy[2] >> 2
    i = 4
    n_qstr, i = _uint(mpy, i)
    n_obj, i = _uint(mpy, i)
    for _ in range(n_qstr):
        v, i = _uint(mpy, i)
        if not v & 1:  # a qstr spelled out: length, bytes and a NUL (odd: a static qstr's number)
            i += (v >> 1) + 1
    for _ in range(n_obj):
        if mpy[i] > 4:  # 0 the runtime's function table, 1-4 None, False, True, Ellipsis
            raise MpyFormatError(f"constant object of type {mpy[i]} (only the kernels' shape is read)")
        i += 1
    found: list[bytes] = []

    def raw_code(i: int) -> int:
        kind_len, i = _uint(mpy, i)
        kind, has_children, n = kind_len & 3, kind_len & 4, kind_len >> 3
        data = mpy[i:i + n]
        i += n
        if kind == _KIND_NATIVE:
            _, i = _uint(mpy, i)  # prelude offset
        elif kind in (_KIND_VIPER, _KIND_ASM):
            flags, i = _uint(mpy, i)
            if flags:
                raise MpyFormatError("viper function with read-only data, BSS or relocations")
            if kind == _KIND_ASM:
                _, i = _uint(mpy, i)
                _, i = _uint(mpy, i)
        if kind == _KIND_VIPER:
            found.append(bytes(data))
        if has_children:
            n_children, i = _uint(mpy, i)
            for _ in range(n_children):
                i = raw_code(i)
        return i

    end = raw_code(i)
    if end != len(mpy):
        raise MpyFormatError(f"{len(mpy) - end} bytes left over after the module's code")
    return arch, found


def viper_names(source: Path) -> list[str]:
    """Names of the module-level functions decorated ``@micropython.viper``, in source order."""
    tree = ast.parse(source.read_text())
    return [node.name for node in tree.body if isinstance(node, ast.FunctionDef)
            and any(ast.unparse(d) == "micropython.viper" for d in node.decorator_list)]
