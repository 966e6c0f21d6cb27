"""R'G'B' <-> Y'CbCr conversion of ITU-R BT.601 and BT.709, full and limited range, in integers and in floats.

The integer forms work the way RTL does: each coefficient is scaled by ``2**fraction_bits`` and
rounded; the sums are shifted back with half-up rounding, and results are clipped to the sample range.

References:
    ITU-R BT.601-7, Section 2.5: Kr = 0.299, Kb = 0.114; E'Y = Kr E'R + (1 - Kr - Kb) E'G + Kb E'B,
    E'Cb = (E'B - E'Y) / (2 (1 - Kb)), E'Cr = (E'R - E'Y) / (2 (1 - Kr)); quantised with n bits:
    Y = (219 E'Y + 16) 2**(n-8), Cb/Cr = (224 E'C + 128) 2**(n-8) ("limited" range).
    ITU-R BT.709-6, Part 2: the same with Kr = 0.2126, Kb = 0.0722.
    Full range (Y = E'Y (2**n - 1), C = E'C (2**n - 1) + 2**(n-1)) is the JPEG File Interchange Format
    (JFIF 1.02) convention, and what OpenCV ``cvtColor(COLOR_RGB2YCrCb)`` computes with BT.601's Kr, Kb
    (OpenCV puts Cr before Cb in its channels).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.validate import want_choice, want_int

__all__ = ["STANDARDS", "RANGES", "YCbCrCoding", "rgb_to_ycbcr", "ycbcr_to_rgb", "rgb_to_ycbcr_float",
           "ycbcr_to_rgb_float"]

STANDARDS: dict[str, tuple[float, float]] = {"bt601": (0.299, 0.114), "bt709": (0.2126, 0.0722)}
"""Standard name to its ``(Kr, Kb)`` (ITU-R BT.601-7, ITU-R BT.709-6)."""
RANGES: tuple[str, ...] = ("full", "limited")
"""Quantisation ranges: ``full`` (0 .. 2**n - 1 for Y and C) and ``limited`` (16..235 / 16..240 at 8 bits)."""

WHERE = "ycbcr"


@dataclass(frozen=True)
class YCbCrCoding:
    """One Y'CbCr coding: the standard's coefficients, the range, and the sample width.

    Attributes:
        standard: ``bt601`` or ``bt709``.
        range: ``full`` or ``limited``.
        bits: bits of each sample (RGB and YCbCr alike), 8..16.
    """

    standard: str = "bt601"
    range: str = "full"
    bits: int = 8

    def __post_init__(self) -> None:
        want_choice(WHERE, "standard", self.standard, tuple(STANDARDS))
        want_choice(WHERE, "range", self.range, RANGES)
        object.__setattr__(self, "bits", want_int(WHERE, "bits", self.bits, 8, 16))

    def levels(self) -> tuple[float, float, float, float]:
        """``(y_offset, y_span, c_offset, c_span)`` on the ``bits`` scale: ``Y = y_offset + y_span E'Y``,
        ``C = c_offset + c_span E'C``."""
        scale = float(1 << (self.bits - 8))
        if self.range == "limited":
            return 16 * scale, 219 * scale, 128 * scale, 224 * scale
        top = float((1 << self.bits) - 1)
        return 0.0, top, float(1 << (self.bits - 1)), top

    def forward(self) -> np.ndarray:
        """3x3 real matrix from ``(R, G, B)`` in 0..1 to ``(E'Y, E'Cb, E'Cr)``."""
        kr, kb = STANDARDS[self.standard]
        kg = 1.0 - kr - kb
        y = np.array([kr, kg, kb])
        cb = (np.array([0.0, 0.0, 1.0]) - y) / (2 * (1 - kb))
        cr = (np.array([1.0, 0.0, 0.0]) - y) / (2 * (1 - kr))
        return np.stack([y, cb, cr])


def _check_rgb(image: Any, bits: int, what: str) -> np.ndarray:
    arr = np.asarray(image)
    if arr.ndim != 3 or arr.shape[2] != 3:
        raise ConfigError(f"{WHERE}: {what} has shape {arr.shape}; expected (height, width, 3)")
    if arr.dtype.kind not in "iu" or (arr.size and (int(arr.min()) < 0 or int(arr.max()) >= 1 << bits)):
        raise ConfigError(f"{WHERE}: {what} must hold integers in 0..{(1 << bits) - 1}; check the sample width")
    return arr.astype(np.int64)


def _round_shift(value: np.ndarray, shift: int) -> np.ndarray:
    return (value + (1 << (shift - 1))) >> shift


def rgb_to_ycbcr(rgb: Any, coding: YCbCrCoding = YCbCrCoding(), fraction_bits: int = 14) -> np.ndarray:
    """Integer R'G'B' -> Y'CbCr: ``(H, W, 3)`` samples in R, G, B order to int64 Y, Cb, Cr.

    Each output is ``offset + (sum of coefficient * sample) / (2**bits - 1)`` with the coefficients
    ``span * matrix * 2**fraction_bits`` rounded to integers, the sum shifted back half-up, then clipped
    to ``0 .. 2**bits - 1``.
    """
    arr = _check_rgb(rgb, coding.bits, "RGB image")
    y_off, y_span, c_off, c_span = coding.levels()
    top = (1 << coding.bits) - 1
    spans = np.array([y_span, c_span, c_span])[:, None] / top
    weights = np.rint(coding.forward() * spans * (1 << fraction_bits)).astype(np.int64)
    offsets = np.rint(np.array([y_off, c_off, c_off]) * (1 << fraction_bits)).astype(np.int64)
    acc = np.einsum("hwk,ck->hwc", arr, weights) + offsets
    return np.clip(_round_shift(acc, fraction_bits), 0, top)


def ycbcr_to_rgb(ycc: Any, coding: YCbCrCoding = YCbCrCoding(), fraction_bits: int = 14) -> np.ndarray:
    """Integer Y'CbCr -> R'G'B' (the inverse matrix, in the same fixed-point form), clipped to the range."""
    arr = _check_rgb(ycc, coding.bits, "YCbCr image")
    y_off, y_span, c_off, c_span = coding.levels()
    top = (1 << coding.bits) - 1
    inverse = np.linalg.inv(coding.forward()) * top / np.array([y_span, c_span, c_span])[None, :]
    weights = np.rint(inverse * (1 << fraction_bits)).astype(np.int64)
    centred = arr - np.rint(np.array([y_off, c_off, c_off])).astype(np.int64)
    return np.clip(_round_shift(np.einsum("hwk,ck->hwc", centred, weights), fraction_bits), 0, top)


def rgb_to_ycbcr_float(rgb: Any, coding: YCbCrCoding = YCbCrCoding()) -> np.ndarray:
    """Real-valued R'G'B' -> Y'CbCr on the ``bits`` scale (no rounding, no clipping)."""
    arr = np.asarray(rgb, dtype=np.float64) / ((1 << coding.bits) - 1)
    y_off, y_span, c_off, c_span = coding.levels()
    e = arr @ coding.forward().T
    return e * np.array([y_span, c_span, c_span]) + np.array([y_off, c_off, c_off])


def ycbcr_to_rgb_float(ycc: Any, coding: YCbCrCoding = YCbCrCoding()) -> np.ndarray:
    """Real-valued Y'CbCr -> R'G'B' on the ``bits`` scale (no rounding, no clipping)."""
    y_off, y_span, c_off, c_span = coding.levels()
    e = (np.asarray(ycc, dtype=np.float64) - np.array([y_off, c_off, c_off])) / np.array([y_span, c_span, c_span])
    return (e @ np.linalg.inv(coding.forward()).T) * ((1 << coding.bits) - 1)
