"""The words of vkit's interface that several layers check against, each defined once."""

from __future__ import annotations

__all__ = ["PIXEL_FORMAT_BITS", "DRIVE_MODES", "DRIVE_PATHS", "DRIVE_DEFAULT", "WAVE_MODES", "VERILOG_SUFFIXES", "VHDL_SUFFIXES", "HDL_SUFFIXES"]

PIXEL_FORMAT_BITS: dict[str, int] = {"gray8": 8, "rgb888": 24}
"""Pixel formats a design's data bus carries, with the bits of one pixel: 8-bit gray, 8:8:8 RGB."""

DRIVE_PATHS: tuple[str, ...] = ("clock", "fast", "native")
"""The ways a case can drive the design: ``clock`` (cocotb touches every clock), ``fast`` (the generated HDL
harness plays the stimulus under cocotb), ``native`` (the same harness as a plain executable)."""

DRIVE_DEFAULT = "auto"
"""The drive mode that picks, per case, the fastest of :data:`DRIVE_PATHS` that can run it."""

DRIVE_MODES: tuple[str, ...] = (DRIVE_DEFAULT, *DRIVE_PATHS)
"""What a config (``[run] path``), ``--path`` and ``RunOptions.drive`` accept: ``auto`` or one of :data:`DRIVE_PATHS`."""

WAVE_MODES: tuple[str, ...] = ("failing", "all", "off")
"""Which cases leave a waveform dump."""

VERILOG_SUFFIXES: tuple[str, ...] = (".v", ".sv", ".vh", ".svh", ".vlog")
"""File endings read as Verilog / SystemVerilog."""

VHDL_SUFFIXES: tuple[str, ...] = (".vhd", ".vhdl")
"""File endings read as VHDL."""

HDL_SUFFIXES: tuple[str, ...] = VERILOG_SUFFIXES + VHDL_SUFFIXES
