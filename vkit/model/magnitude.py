"""Gradient magnitude from gx and gy: exact integer root, root table, and the cheap approximations."""

from __future__ import annotations

from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.model.fixedpoint import check_rounding

__all__ = [
    "METHODS",
    "sum_of_squares",
    "isqrt",
    "magnitude_exact",
    "magnitude_float",
    "root_table",
    "table_dtype",
    "table_address",
    "magnitude_table",
    "magnitude_abs_sum",
    "magnitude_max_min_half",
]

METHODS = ("exact", "table", "abs_sum", "max_min_half")
"""Magnitude methods: exact ``isqrt(gx^2+gy^2)``, a square-root table addressed by the shifted sum of
squares, ``|gx|+|gy|``, and ``max + min/2``."""


def _as_int_pair(gx: Any, gy: Any) -> tuple[np.ndarray, np.ndarray]:
    x, y = np.asarray(gx), np.asarray(gy)
    if x.shape != y.shape:
        raise ConfigError(f"gx has shape {x.shape} but gy has {y.shape}; pass gradients of one frame")
    if x.dtype.kind not in "iu" or y.dtype.kind not in "iu":
        raise ConfigError(f"gradients have dtypes {x.dtype}/{y.dtype}; expected integers (convert with astype)")
    return x, y


def _peak_abs(arr: np.ndarray) -> int:
    if arr.size == 0:
        return 0
    return max(abs(int(arr.min())), abs(int(arr.max())))


def sum_of_squares(gx: Any, gy: Any) -> np.ndarray:
    """Exact ``gx*gx + gy*gy``.

    Returns:
        int32 when the result fits (it does for Sobel on 12-bit luma: at most 2*16320^2 = 532,684,800),
        int64 otherwise.
    """
    x, y = _as_int_pair(gx, gy)
    peak = max(_peak_abs(x), _peak_abs(y))
    dtype = np.int32 if 2 * peak * peak < (1 << 31) else np.int64
    if 2 * peak * peak >= (1 << 63):
        raise ConfigError(f"gradient magnitude {peak} is too large for a 64-bit sum of squares; reduce the input range")
    out = np.multiply(x, x, dtype=dtype)
    out += np.multiply(y, y, dtype=dtype)
    return out


def isqrt(n: Any) -> np.ndarray:
    """Element-wise ``math.isqrt`` (floor square root) of non-negative integers below 2**62, as int64."""
    arr = np.asarray(n)
    if arr.dtype.kind not in "iu":
        raise ConfigError(f"isqrt needs integers, got dtype {arr.dtype}")
    if arr.size and int(arr.min()) < 0:
        raise ConfigError(f"isqrt got a negative value {int(arr.min())}; the input must be >= 0")
    if arr.size and int(arr.max()) >= (1 << 62):
        raise ConfigError(f"isqrt input {int(arr.max())} is 2**62 or more; it must be below 2**62")
    if not arr.size or int(arr.max()) < (1 << 52):
        # sqrt is correctly rounded, and below 2**52 a non-square n sits at least 1/(2*sqrt(n)) under
        # the next integer root, more than half a float64 ulp there: the floor is already exact.
        return np.sqrt(arr, dtype=np.float64).astype(np.int64)
    wide = arr.astype(np.int64)
    root = np.sqrt(wide.astype(np.float64)).astype(np.int64)
    # The float root can be one off either way (rounding, and float64 cannot hold every n > 2**53).
    root -= root * root > wide
    root += (root + 1) * (root + 1) <= wide
    return root


def magnitude_exact(gx: Any, gy: Any) -> np.ndarray:
    """``floor(sqrt(gx^2 + gy^2))``, integer-exact (same as ``math.isqrt``), int32."""
    total = sum_of_squares(gx, gy)
    if total.dtype == np.int32:
        # Below 2**31 the float64 root's floor is exact (see isqrt) and fits int32 directly.
        return np.sqrt(total, dtype=np.float64).astype(np.int32)
    root = isqrt(total)
    return root.astype(np.int32) if root.size == 0 or int(root.max()) < (1 << 31) else root


def magnitude_float(gx: Any, gy: Any) -> np.ndarray:
    """Real magnitude ``sqrt(gx^2 + gy^2)`` as float64 (the float twin of the integer methods)."""
    return np.hypot(np.asarray(gx, dtype=np.float64), np.asarray(gy, dtype=np.float64))


def table_dtype(data_bits: int) -> np.dtype:
    """Smallest unsigned NumPy dtype holding ``data_bits`` bits (1..64)."""
    if isinstance(data_bits, bool) or not isinstance(data_bits, (int, np.integer)) or not 1 <= data_bits <= 64:
        raise ConfigError(f"data_bits={data_bits!r} must be an integer in 1..64")
    for dtype in (np.uint8, np.uint16, np.uint32, np.uint64):
        if data_bits <= np.iinfo(dtype).bits:
            return np.dtype(dtype)
    raise AssertionError("unreachable")


def _check_address_bits(address_bits: int) -> int:
    if isinstance(address_bits, bool) or not isinstance(address_bits, (int, np.integer)) or not 1 <= address_bits <= 24:
        raise ConfigError(f"address_bits={address_bits!r} must be an integer in 1..24 (a table of 2..16M words)")
    return int(address_bits)


def root_table(address_bits: int, data_bits: int, scale: int = 1, rounding: str = "truncate") -> np.ndarray:
    """Square-root table: entry ``a`` is the root of ``a * scale``, saturated to ``2**data_bits - 1``.

    Args:
        address_bits: table depth is ``2**address_bits`` words, 1..24.
        data_bits: word width, 1..32.
        scale: integer multiplier of the address (``2**shift`` undoes an address shift), >= 1.
        rounding: ``"truncate"`` gives ``math.isqrt(a*scale)``; ``"half_up"`` gives
            ``floor(sqrt(a*scale) + 0.5)``, computed exactly as ``(isqrt(4*a*scale) + 1) // 2``.

    Returns:
        uint array (uint8/16/32 by ``data_bits``) of ``2**address_bits`` entries.
    """
    address_bits = _check_address_bits(address_bits)
    dtype = table_dtype(data_bits)
    if data_bits > 32:
        raise ConfigError(f"data_bits={data_bits} is more than a root table needs; use 1..32")
    check_rounding(rounding)
    if isinstance(scale, bool) or not isinstance(scale, (int, np.integer)) or scale < 1:
        raise ConfigError(f"root table scale={scale!r} must be an integer >= 1")
    if ((1 << address_bits) - 1) * int(scale) * 4 >= (1 << 62):
        raise ConfigError(f"root table scale={scale} with {address_bits} address bits overflows 62 bits; lower the scale")
    radicand = np.arange(1 << address_bits, dtype=np.int64) * int(scale)
    if rounding == "truncate":
        roots = isqrt(radicand)  # half_even below equals half_up: the root of an integer is never k + 1/2
    else:
        roots = (isqrt(4 * radicand) + 1) // 2
    np.minimum(roots, (1 << data_bits) - 1, out=roots)
    return roots.astype(dtype)


def table_address(sum_sq: Any, shift: int, address_bits: int) -> tuple[np.ndarray, np.ndarray]:
    """Table address ``min(sum_sq >> shift, 2**address_bits - 1)``.

    Args:
        sum_sq: non-negative integer sums of squares.
        shift: bits dropped before addressing, >= 0 (truncating shift).
        address_bits: table address width, 1..24.

    Returns:
        ``(address, clamped)``: int32 addresses and a bool mask, True where the address was clamped
        to the last entry.
    """
    address_bits = _check_address_bits(address_bits)
    if isinstance(shift, bool) or not isinstance(shift, (int, np.integer)) or shift < 0:
        raise ConfigError(f"table address shift={shift!r} must be an integer >= 0 bits")
    arr = np.asarray(sum_sq)
    if arr.dtype.kind not in "iu":
        raise ConfigError(f"sum of squares has dtype {arr.dtype}; expected integers")
    top = (1 << address_bits) - 1
    address = np.right_shift(arr, int(shift)) if shift else arr.copy()
    clamped = address > top
    np.minimum(address, top, out=address)
    return address.astype(np.int32, copy=False), clamped


def magnitude_table(
    gx: Any, gy: Any, shift: int, address_bits: int, table: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Magnitude through a root table: ``table[min((gx^2+gy^2) >> shift, 2**address_bits-1)]``.

    Returns:
        ``(magnitude, address, clamped)``: int32 magnitudes, int32 addresses, bool clamp mask.
    """
    address_bits = _check_address_bits(address_bits)
    tab = np.asarray(table)
    if tab.ndim != 1 or tab.shape[0] != (1 << address_bits):
        raise ConfigError(
            f"root table has shape {tab.shape} but {address_bits} address bits need {1 << address_bits} entries; "
            "build it with root_table(address_bits, ...)"
        )
    address, clamped = table_address(sum_of_squares(gx, gy), shift, address_bits)
    magnitude = np.take(tab.astype(np.int32), address)
    return magnitude, address, clamped


def _abs_dtype(x: np.ndarray, y: np.ndarray) -> type:
    """int32 when ``|x| + |y|`` cannot overflow it, else int64."""
    return np.int32 if _peak_abs(x) + _peak_abs(y) < (1 << 31) else np.int64


def magnitude_abs_sum(gx: Any, gy: Any) -> np.ndarray:
    """``|gx| + |gy|`` (the L1 norm; overestimates the true magnitude by up to sqrt(2)), int32."""
    x, y = _as_int_pair(gx, gy)
    dtype = _abs_dtype(x, y)
    out = np.abs(x.astype(dtype, copy=False))
    out += np.abs(y.astype(dtype, copy=False))
    return out


def magnitude_max_min_half(gx: Any, gy: Any) -> np.ndarray:
    """``max(|gx|,|gy|) + (min(|gx|,|gy|) >> 1)``, the alpha-max-plus-beta-min estimate with 1 and 1/2, int32."""
    x, y = _as_int_pair(gx, gy)
    dtype = _abs_dtype(x, y)
    ax, ay = np.abs(x.astype(dtype, copy=False)), np.abs(y.astype(dtype, copy=False))
    out = np.maximum(ax, ay)
    np.minimum(ax, ay, out=ax)
    ax >>= 1
    out += ax
    return out
