"""Fixed-point helpers: rounding right shifts, saturation and the bits a value range needs."""

from __future__ import annotations

from typing import Any, Union

import numpy as np

from vkit.core.errors import ConfigError

__all__ = ["ROUNDING", "shift_round", "saturate", "bits_for_range", "check_rounding"]

ROUNDING = ("truncate", "half_up", "half_even")
"""Rounding modes of a right shift: ``truncate`` floors (``>>>`` on a signed value), ``half_up`` adds half an LSB
first, ``half_even`` rounds halves to the even neighbour (convergent rounding)."""

IntLike = Union[int, np.integer, np.ndarray]


def check_rounding(rounding: str) -> str:
    """Return ``rounding`` if it is one of :data:`ROUNDING`, else raise ConfigError."""
    if rounding not in ROUNDING:
        raise ConfigError(f"rounding {rounding!r} is not known; use one of {', '.join(ROUNDING)}")
    return rounding


def _check_shift(shift: Any) -> int:
    if isinstance(shift, bool) or not isinstance(shift, (int, np.integer)) or shift < 0:
        raise ConfigError(f"shift {shift!r} must be an integer >= 0 bits; pass a non-negative bit count")
    return int(shift)


def shift_round(x: IntLike, shift: int, rounding: str = "truncate") -> Any:
    """Arithmetic right shift of ``x`` by ``shift`` bits with the given rounding.

    Args:
        x: a Python int, NumPy integer or integer array (signed or unsigned).
        shift: bits to drop, >= 0. A shift of 0 returns ``x`` unchanged.
        rounding: ``"truncate"`` floors (what a signed ``>>>`` does, so -3 >> 1 == -2);
            ``"half_up"`` adds ``2**(shift-1)`` and then floors, so halves round towards +infinity;
            ``"half_even"`` adds ``2**(shift-1) - 1`` plus the kept LSB, so exact halves go to the even result.

    Returns:
        The shifted value, of the same kind as ``x`` (int for an int, array of the same dtype for an
        array). The caller picks a dtype wide enough for ``x + 2**(shift-1)``.
    """
    check_rounding(rounding)
    shift = _check_shift(shift)
    if shift == 0:
        return x
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        value = int(x)
        value += _round_constant(value, shift, rounding)
        return value >> shift
    arr = np.asarray(x)
    if arr.dtype.kind not in "iu":
        raise ConfigError(f"shift_round needs integers, got dtype {arr.dtype}; convert with astype(np.int32) first")
    if rounding == "truncate":
        return np.right_shift(arr, shift)
    kept_lsb = np.right_shift(arr, shift) & 1 if rounding == "half_even" else None
    arr = arr + arr.dtype.type(1 << (shift - 1))
    if kept_lsb is not None:  # half less one, plus the kept LSB: an exact half carries only onto an odd result
        arr -= arr.dtype.type(1)
        arr += kept_lsb
    return np.right_shift(arr, shift, out=arr)


def _round_constant(value: int, shift: int, rounding: str) -> int:
    """What to add to ``value`` before a floor shift by ``shift`` (>= 1) bits for the given rounding."""
    if rounding == "truncate":
        return 0
    half = 1 << (shift - 1)
    return half if rounding == "half_up" else half - 1 + ((value >> shift) & 1)


def saturate(x: IntLike, lo: int, hi: int) -> tuple[np.ndarray, np.ndarray]:
    """Clip ``x`` to ``[lo, hi]``.

    Args:
        x: integer or float values (scalar or array).
        lo: lowest value kept (inclusive).
        hi: highest value kept (inclusive), >= lo.

    Returns:
        ``(clipped, mask)``: the clipped values (same dtype as ``x``) and a bool array that is True
        where clipping engaged.
    """
    if lo > hi:
        raise ConfigError(f"saturate range [{lo}, {hi}] is empty; pass lo <= hi")
    arr = np.asarray(x)
    mask = (arr < lo) | (arr > hi)
    return np.clip(arr, lo, hi).astype(arr.dtype, copy=False), mask


def bits_for_range(lo: int, hi: int) -> tuple[int, bool]:
    """Smallest two's complement width that holds every integer in ``[lo, hi]``.

    Args:
        lo: lowest value (inclusive).
        hi: highest value (inclusive), >= lo.

    Returns:
        ``(bits, signed)``: ``signed`` is True when ``lo < 0``; e.g. (0, 4080) -> (12, False),
        (-16320, 16320) -> (15, True). The width is at least 1.
    """
    lo, hi = int(lo), int(hi)
    if lo > hi:
        raise ConfigError(f"value range [{lo}, {hi}] is empty; pass lo <= hi")
    if lo >= 0:
        return max(1, hi.bit_length()), False
    # A signed n-bit word holds -2**(n-1) .. 2**(n-1)-1.
    need_neg = (-lo - 1).bit_length() + 1
    need_pos = hi.bit_length() + 1 if hi > 0 else 1
    return max(need_neg, need_pos), True
