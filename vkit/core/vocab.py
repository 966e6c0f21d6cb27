"""The words of vkit's interface that several layers check against, each defined once."""

from __future__ import annotations

__all__ = ["PIXEL_FORMAT_BITS", "DRIVE_MODES", "WAVE_MODES", "VERILOG_SUFFIXES", "VHDL_SUFFIXES", "HDL_SUFFIXES"]

PIXEL_FORMAT_BITS: dict[str, int] = {"gray8": 8, "rgb888": 24}
"""Pixel formats a design's data bus carries, with the bits of one pixel: 8-bit gray, 8:8:8 RGB."""

DRIVE_MODES: tuple[str, ...] = ("clock", "fast", "native")
"""How a case drives the design: ``clock`` (cocotb touches every clock), ``fast`` (the generated HDL
harness plays the stimulus under cocotb), ``native`` (the same harness as a plain executable)."""

WAVE_MODES: tuple[str, ...] = ("failing", "all", "off")
"""Which cases leave a waveform dump."""

VERILOG_SUFFIXES: tuple[str, ...] = (".v", ".sv", ".vh", ".svh", ".vlog")
"""File endings read as Verilog / SystemVerilog."""

VHDL_SUFFIXES: tuple[str, ...] = (".vhd", ".vhdl")
"""File endings read as VHDL."""

HDL_SUFFIXES: tuple[str, ...] = VERILOG_SUFFIXES + VHDL_SUFFIXES
