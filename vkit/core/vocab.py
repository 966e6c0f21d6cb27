"""The words of vkit's interface that several layers check against, each defined once."""

from __future__ import annotations

__all__ = ["PIXEL_FORMAT_BITS", "SAMPLE_BITS_RANGE", "COMPONENT_ORDERS", "pixel_format_name", "sample_bits",
           "components", "is_rgb", "is_ycbcr", "DRIVE_MODES", "DRIVE_PATHS", "DRIVE_DEFAULT", "WAVE_MODES",
           "VERILOG_SUFFIXES", "VHDL_SUFFIXES", "HDL_SUFFIXES"]

SAMPLE_BITS_RANGE: tuple[int, int] = (1, 16)
"""Fewest and most bits of one sample (one grey value, or one colour component)."""


def pixel_format_name(kind: str, bits: int) -> str:
    """The name of a pixel format: ``gray<bits>`` (``gray10``), or ``rgb`` and the bits three times
    (``rgb888``, ``rgb101010``), as buses are commonly named (common practice, no source); Y'CbCr as
    ``ycbcr444_<bits>`` / ``ycbcr422_<bits>``."""
    if kind.startswith("ycbcr"):
        return f"{kind}_{bits}"
    return f"gray{bits}" if kind == "gray" else f"rgb{bits}{bits}{bits}"


_KIND_SAMPLES = {"gray": 1, "rgb": 3, "ycbcr444": 3, "ycbcr422": 2}
"""Samples a pixel carries on the bus, per kind of format (4:2:2: Y and one colour difference, Cb and Cr
taking turns)."""

PIXEL_FORMAT_BITS: dict[str, int] = {
    pixel_format_name(kind, b): b * n
    for kind, n in _KIND_SAMPLES.items() for b in range(SAMPLE_BITS_RANGE[0], SAMPLE_BITS_RANGE[1] + 1)
}
"""Pixel formats a design's data bus carries, with the bits of one pixel: ``gray1`` .. ``gray16``,
``rgb111`` .. ``rgb161616`` (``gray8`` and ``rgb888`` the common ones), ``ycbcr444_8`` .. and
``ycbcr422_8`` .. (Y'CbCr 4:4:4 and 4:2:2, ``_<bits>`` a sample)."""

_SAMPLE_BITS: dict[str, int] = {
    pixel_format_name(kind, b): b for kind in _KIND_SAMPLES for b in range(SAMPLE_BITS_RANGE[0], SAMPLE_BITS_RANGE[1] + 1)
}

COMPONENT_ORDERS: tuple[str, ...] = ("RGB", "RBG", "GRB", "GBR", "BRG", "BGR")
"""Orders of the colour components in a data word, most significant first (``RGB``: R high, B low)."""


def sample_bits(pixel_format: str) -> int:
    """Bits of one sample of ``pixel_format`` (``gray10`` -> 10, ``rgb888`` -> 8); 8 for an unknown name
    (the caller checks names against :data:`PIXEL_FORMAT_BITS`)."""
    return _SAMPLE_BITS.get(pixel_format, 8)


def is_rgb(pixel_format: str) -> bool:
    """True for the RGB formats (three components a pixel)."""
    return pixel_format.startswith("rgb")


def is_ycbcr(pixel_format: str) -> bool:
    """True for the Y'CbCr formats (4:4:4 and 4:2:2)."""
    return pixel_format.startswith("ycbcr")


def components(pixel_format: str) -> int:
    """Samples a pixel of ``pixel_format`` carries: 3 for RGB and Y'CbCr 4:4:4, 2 for 4:2:2, 1 for grey."""
    for kind, n in _KIND_SAMPLES.items():
        if pixel_format.startswith(kind):
            return n
    return 1

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
