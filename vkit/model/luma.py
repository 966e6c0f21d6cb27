"""RGB to luma with integer weights, as a camera or display pipeline computes it, and presets."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from vkit.core.errors import ConfigError
from vkit.model.fixedpoint import check_rounding

__all__ = [
    "LumaWeights",
    "weights_from_coefficients",
    "BT601",
    "BT709",
    "OPENCV",
    "PRESETS",
    "REAL_COEFFICIENTS",
    "luma",
    "luma_float",
    "luma_range",
]


@dataclass(frozen=True)
class LumaWeights:
    """Integer luma weights: ``Y = (r*R + g*G + b*B) / 2**fraction_bits``.

    Attributes:
        r, g, b: non-negative integer weights of the red, green and blue components.
        fraction_bits: number of fraction bits of the weights (the weights sum to about
            ``2**fraction_bits``), 0..24.
        name: a short label used in reports.
    """

    r: int
    g: int
    b: int
    fraction_bits: int
    name: str = ""

    def __post_init__(self) -> None:
        for label, value in (("r", self.r), ("g", self.g), ("b", self.b)):
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 0:
                raise ConfigError(
                    f"luma weight {label}={value!r} must be an integer >= 0; give weights scaled by 2**fraction_bits"
                )
        if not isinstance(self.fraction_bits, (int, np.integer)) or not 0 <= self.fraction_bits <= 24:
            raise ConfigError(f"luma fraction_bits={self.fraction_bits!r} must be an integer in 0..24")

    @property
    def total(self) -> int:
        """Sum of the three weights (``2**fraction_bits`` for a gain of exactly 1)."""
        return int(self.r) + int(self.g) + int(self.b)

    def as_tuple(self) -> tuple[int, int, int]:
        """The weights as ``(r, g, b)``."""
        return int(self.r), int(self.g), int(self.b)


def weights_from_coefficients(
    coefficients: Sequence[float], fraction_bits: int, name: str = ""
) -> LumaWeights:
    """Quantise real luma coefficients to integers that sum to exactly ``2**fraction_bits``.

    Each coefficient is scaled by ``2**fraction_bits`` and floored; the units still missing to reach
    the total go to the coefficients with the largest remainders (largest-remainder rounding), so a
    white input keeps full scale.

    Args:
        coefficients: ``(kr, kg, kb)``, each >= 0, summing to 1 (e.g. 0.299, 0.587, 0.114).
        fraction_bits: fraction bits of the integer weights, 0..24.
        name: label for the result.
    """
    if len(coefficients) != 3 or any(c < 0 for c in coefficients):
        raise ConfigError(f"luma coefficients {tuple(coefficients)!r} must be three values >= 0 (kr, kg, kb)")
    if not math.isclose(sum(coefficients), 1.0, abs_tol=1e-9):
        raise ConfigError(f"luma coefficients {tuple(coefficients)!r} sum to {sum(coefficients)!r}; they must sum to 1")
    total = 1 << fraction_bits
    scaled = [c * total for c in coefficients]
    ints = [math.floor(s) for s in scaled]
    missing = total - sum(ints)
    order = sorted(range(3), key=lambda i: scaled[i] - ints[i], reverse=True)
    for i in order[:missing]:
        ints[i] += 1
    return LumaWeights(ints[0], ints[1], ints[2], fraction_bits, name)


REAL_COEFFICIENTS: dict[str, tuple[float, float, float]] = {
    "bt601": (0.299, 0.587, 0.114),  # ITU-R BT.601-7
    "bt709": (0.2126, 0.7152, 0.0722),  # ITU-R BT.709-6
    "opencv": (0.299, 0.587, 0.114),  # OpenCV's RGB2GRAY uses the BT.601 coefficients
}
"""Preset name to the standard's real ``(kr, kg, kb)``: what the integer weights approximate."""

BT601 = weights_from_coefficients(REAL_COEFFICIENTS["bt601"], 8, "bt601")
"""ITU-R BT.601 luma (Kr=0.299, Kb=0.114) with 8 fraction bits: 77, 150, 29."""
BT709 = weights_from_coefficients(REAL_COEFFICIENTS["bt709"], 8, "bt709")
"""ITU-R BT.709 luma (Kr=0.2126, Kb=0.0722) with 8 fraction bits: 54, 183, 19 (sum 256)."""
OPENCV = LumaWeights(9798, 19235, 3735, 15, "opencv")
"""The 15-fraction-bit set that reproduces OpenCV ``cvtColor(COLOR_RGB2GRAY)`` on 8-bit input, bit for bit."""
PRESETS: dict[str, LumaWeights] = {"bt601": BT601, "bt709": BT709, "opencv": OPENCV}
"""Preset name to weights."""


def _check_output_bits(output_bits: int) -> int:
    if isinstance(output_bits, bool) or not isinstance(output_bits, (int, np.integer)) or not 1 <= output_bits <= 24:
        raise ConfigError(f"luma output_bits={output_bits!r} must be an integer in 1..24")
    return int(output_bits)


def _check_rgb(rgb: np.ndarray) -> np.ndarray:
    arr = np.asarray(rgb)
    if arr.ndim != 3 or arr.shape[2] != 3:
        raise ConfigError(f"RGB image has shape {arr.shape}; expected (height, width, 3) in R, G, B order")
    if arr.dtype != np.uint8:
        raise ConfigError(f"RGB image has dtype {arr.dtype}; expected uint8 (0..255 per component)")
    return arr


def luma_range(weights: LumaWeights, output_bits: int = 8, rounding: str = "half_up") -> tuple[int, int]:
    """Lowest and highest value :func:`luma` can return for 8-bit RGB input."""
    top = np.full((1, 1, 3), 255, dtype=np.uint8)
    return 0, int(luma(top, weights, output_bits, rounding)[0, 0])


def luma(
    rgb: np.ndarray, weights: LumaWeights, output_bits: int = 8, rounding: str = "half_up"
) -> np.ndarray:
    """Integer luma of an 8-bit RGB image.

    ``Y = round((r*R + g*G + b*B) * 2**(output_bits-8) / 2**fraction_bits)``, computed exactly as a
    right shift of the integer sum by ``fraction_bits - (output_bits - 8)`` bits (a left shift when
    that is negative). With BT.601 weights and ``output_bits=12`` the result spans 0..4080, i.e. the
    8-bit luma times 16 ("scaled luma").

    Args:
        rgb: ``(H, W, 3)`` uint8 image, components in R, G, B order, 0..255.
        weights: integer weights, e.g. :data:`BT601`.
        output_bits: bits of the result, 1..24; 8 gives the usual 0..255 luma.
        rounding: ``"half_up"`` (add half an LSB before the shift), ``"half_even"`` (ties to even) or ``"truncate"``.

    Returns:
        ``(H, W)`` int32 array.

    References:
        ITU-R BT.601-7 and ITU-R BT.709-6, luma equation ``E'Y = Kr*E'R + (1-Kr-Kb)*E'G + Kb*E'B``.
    """
    arr = _check_rgb(rgb)
    check_rounding(rounding)
    output_bits = _check_output_bits(output_bits)
    shift = weights.fraction_bits - (output_bits - 8)
    half = (1 << (shift - 1)) if (rounding != "truncate" and shift > 0) else 0
    peak = weights.total * 255 + half
    # uint16 halves the memory traffic when the sum fits (weights summing to 256 do: 65280 + 128).
    acc_type = np.uint16 if peak < (1 << 16) else (np.int32 if peak < (1 << 31) else np.int64)
    wr, wg, wb = (acc_type(w) for w in weights.as_tuple())
    acc = np.multiply(arr[..., 0], wr, dtype=acc_type)
    tmp = np.multiply(arr[..., 1], wg, dtype=acc_type)
    acc += tmp
    np.multiply(arr[..., 2], wb, dtype=acc_type, out=tmp)
    acc += tmp
    if shift > 0:
        if half:
            kept_lsb = (acc >> acc_type(shift)) & acc_type(1) if rounding == "half_even" else None
            acc += acc_type(half)
            if kept_lsb is not None:  # half less one plus the kept LSB: ties go to the even result
                acc -= acc_type(1)
                acc += kept_lsb
        acc >>= acc_type(shift)
    out = acc.astype(np.int32, copy=False) if acc_type != np.int64 else acc
    if shift < 0:
        out = out.astype(np.int64) << -shift
    if out.dtype != np.int32:
        if out.size and int(out.max()) >= (1 << 31):
            raise ConfigError(f"luma output_bits={output_bits} overflows int32 with these weights; lower output_bits")
        out = out.astype(np.int32)
    return out


def luma_float(
    rgb: np.ndarray, coefficients: Sequence[float] = (0.299, 0.587, 0.114), output_bits: int = 8
) -> np.ndarray:
    """Real-valued luma ``(kr*R + kg*G + kb*B) * 2**(output_bits-8)`` of an 8-bit RGB image (no rounding).

    Args:
        rgb: ``(H, W, 3)`` uint8 image in R, G, B order.
        coefficients: ``(kr, kg, kb)``; the default is ITU-R BT.601.
        output_bits: scale of the result (8 gives 0..255).

    Returns:
        ``(H, W)`` float64 array.
    """
    arr = _check_rgb(rgb)
    output_bits = _check_output_bits(output_bits)
    if len(coefficients) != 3:
        raise ConfigError(f"luma coefficients {tuple(coefficients)!r} must be three values (kr, kg, kb)")
    kr, kg, kb = (float(c) for c in coefficients)
    y = kr * arr[..., 0].astype(np.float64)
    y += kg * arr[..., 1]
    y += kb * arr[..., 2]
    if output_bits != 8:
        y *= 2.0 ** (output_bits - 8)
    return y
