"""Test helpers that run under both CPython and MicroPython (copied into the WebAssembly FS)."""
