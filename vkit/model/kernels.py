"""Linear 3x3 kernels (exact integer correlation) and 3x3 order filters (median, minimum, maximum)."""

from __future__ import annotations

from math import gcd
from typing import Any, Sequence

import numpy as np

from vkit.core.errors import ConfigError
from vkit.model.window import pad

__all__ = [
    "KERNELS",
    "Kernel",
    "check_kernel",
    "kernel_range",
    "correlate3x3",
    "correlate_padded",
    "median3x3",
    "minimum3x3",
    "maximum3x3",
]

Kernel = tuple[tuple[int, int, int], tuple[int, int, int], tuple[int, int, int]]


def _transpose(k: Kernel) -> Kernel:
    return tuple(tuple(k[c][r] for c in range(3)) for r in range(3))  # type: ignore[return-value]


_SOBEL_X: Kernel = ((-1, 0, 1), (-2, 0, 2), (-1, 0, 1))
_PREWITT_X: Kernel = ((-1, 0, 1), (-1, 0, 1), (-1, 0, 1))
_SCHARR_X: Kernel = ((-3, 0, 3), (-10, 0, 10), (-3, 0, 3))

KERNELS: dict[str, Kernel] = {
    "sobel_x": _SOBEL_X,
    "sobel_y": _transpose(_SOBEL_X),
    "prewitt_x": _PREWITT_X,
    "prewitt_y": _transpose(_PREWITT_X),
    "scharr_x": _SCHARR_X,
    "scharr_y": _transpose(_SCHARR_X),
    "box": ((1, 1, 1), (1, 1, 1), (1, 1, 1)),
    "gaussian": ((1, 2, 1), (2, 4, 2), (1, 2, 1)),
    "sharpen": ((0, -1, 0), (-1, 5, -1), (0, -1, 0)),
    "laplacian": ((0, 1, 0), (1, -4, 1), (0, 1, 0)),
}
"""Named 3x3 integer kernels in correlation orientation: ``out = sum p[r][c] * k[r][c]``.

``*_x`` responds positively to values rising to the right, ``*_y`` to values rising downwards (the
same sign as OpenCV ``Sobel(dx=1)`` / ``Sobel(dy=1)``). ``box`` sums 9 pixels and ``gaussian`` has a
gain of 16: a design divides afterwards.
"""


def check_kernel(kernel: Any) -> Kernel:
    """Return ``kernel`` (a name from :data:`KERNELS` or a 3x3 integer nested sequence) as a tuple of tuples."""
    if isinstance(kernel, str):
        if kernel not in KERNELS:
            raise ConfigError(f"kernel {kernel!r} is not known; use one of {', '.join(KERNELS)} or a 3x3 integer list")
        return KERNELS[kernel]
    arr = np.asarray(kernel)
    if arr.shape != (3, 3) or arr.dtype.kind not in "iu" and not (
        arr.dtype.kind == "f" and np.all(np.isfinite(arr)) and np.all(arr == np.round(arr))
    ):
        raise ConfigError(f"kernel {kernel!r} must be a 3x3 nested list of integers")
    return tuple(tuple(int(v) for v in row) for row in arr.tolist())  # type: ignore[return-value]


def kernel_range(kernel: Any, lo: int, hi: int) -> tuple[int, int]:
    """Lowest and highest correlation result for input pixels in ``[lo, hi]``.

    E.g. Sobel on 12-bit luma (0..4080) gives (-16320, 16320).
    """
    k = check_kernel(kernel)
    if lo > hi:
        raise ConfigError(f"input range [{lo}, {hi}] is empty; pass lo <= hi")
    low = high = 0
    for row in k:
        for w in row:
            low += w * (hi if w < 0 else lo)
            high += w * (hi if w > 0 else lo)
    return low, high


def _separate(k: Kernel) -> tuple[list[int], list[int]] | None:
    """Integer ``(column, row)`` with ``k == outer(column, row)``, or None when ``k`` is not rank one."""
    pivot = next((r for r in range(3) if any(k[r])), None)
    if pivot is None:
        return None
    divisor = 0
    for w in k[pivot]:
        divisor = gcd(divisor, w)
    row = [w // divisor for w in k[pivot]]
    lead = next(j for j in range(3) if row[j])
    column = []
    for r in range(3):
        factor, rest = divmod(k[r][lead], row[lead])
        if rest or any(k[r][j] != factor * row[j] for j in range(3)):
            return None
        column.append(factor)
    return column, row


def _weighted_sum(terms: Sequence[tuple[int, np.ndarray]], dtype: np.dtype) -> np.ndarray:
    """``sum(w * view)`` with few full-size passes: taps sharing ``|w|`` are added first, then scaled once."""
    groups: dict[int, tuple[list[np.ndarray], list[np.ndarray]]] = {}
    for w, view in terms:
        if w:
            plus, minus = groups.setdefault(abs(w), ([], []))
            (plus if w > 0 else minus).append(view)
    out: np.ndarray | None = None
    # Groups with a positive tap go first, so "5*centre - neighbours" never needs a negation pass.
    for magnitude, (plus, minus) in sorted(groups.items(), key=lambda g: (not g[1][0], g[0])):
        sign = 1
        if not plus:
            plus, minus, sign = minus, [], -1
        if len(plus) == 1 and not minus:
            view = plus[0]
            if magnitude == 1:
                if out is None:
                    out = np.negative(view) if sign < 0 else view.copy()
                elif sign > 0:
                    out += view
                else:
                    out -= view
                continue
            if magnitude == 2 and out is not None:
                # Two in-place adds are cheaper than a full-size product temporary.
                for _ in range(2):
                    if sign > 0:
                        out += view
                    else:
                        out -= view
                continue
            acc = np.multiply(view, dtype.type(magnitude))
        else:
            if minus:
                acc = np.subtract(plus[0], minus[0])
                more_plus, more_minus = plus[1:], minus[1:]
            else:
                acc = np.add(plus[0], plus[1])
                more_plus, more_minus = plus[2:], []
            for view in more_plus:
                acc += view
            for view in more_minus:
                acc -= view
            if magnitude != 1:
                acc *= dtype.type(magnitude)
        if out is None:
            out = np.negative(acc, out=acc) if sign < 0 else acc
        elif sign > 0:
            out += acc
        else:
            out -= acc
    assert out is not None
    return out


def _work_dtype(arr: np.ndarray, k: Kernel) -> np.dtype:
    if arr.dtype.kind == "f":
        return np.dtype(np.float64)
    if arr.dtype.itemsize <= 2:
        info = np.iinfo(arr.dtype)
        lo, hi = int(info.min), int(info.max)
    else:
        lo, hi = (int(arr.min()), int(arr.max())) if arr.size else (0, 0)
    low, high = kernel_range(k, lo, hi)
    # Intermediate sums of a group never exceed the sum of |w| times the largest |pixel|.
    bound = sum(abs(w) for row in k for w in row) * max(abs(lo), abs(hi))
    return np.dtype(np.int32) if max(bound, -low, high) < (1 << 31) else np.dtype(np.int64)


def correlate_padded(padded: np.ndarray, kernel: Any) -> np.ndarray:
    """Correlate an already padded ``(H+2, W+2)`` array (from :func:`vkit.model.window.pad`) with a 3x3 kernel.

    The arithmetic happens in the dtype of ``padded``; pad with ``dtype=np.int32`` (or float64).
    Rank-one kernels (Sobel, Prewitt, Scharr, box, Gaussian) run as a row pass then a column pass.
    """
    k = check_kernel(kernel)
    dtype = padded.dtype
    height, width = padded.shape[0] - 2, padded.shape[1] - 2
    parts = _separate(k)
    if parts is not None:
        column, row = parts
        rows = _weighted_sum([(row[c], padded[:, c : c + width]) for c in range(3)], dtype)
        return _weighted_sum([(column[r], rows[r : r + height]) for r in range(3)], dtype)
    if not any(any(r) for r in k):
        return np.zeros((height, width), dtype=dtype)
    return _weighted_sum(
        [(k[r][c], padded[r : r + height, c : c + width]) for r in range(3) for c in range(3)], dtype
    )


def correlate3x3(img: np.ndarray, kernel: Any, border: str = "replicate", constant: float = 0) -> np.ndarray:
    """Exact 3x3 correlation ``out[y, x] = sum_{r,c} k[r][c] * p(y+r-1, x+c-1)``.

    Args:
        img: ``(H, W)`` integer or float image.
        kernel: a name from :data:`KERNELS` or a 3x3 nested sequence of integers (correlation
            orientation: ``k[0][0]`` weighs the up-left neighbour).
        border: a policy from :data:`vkit.model.window.BORDERS`.
        constant: value outside the image for the ``constant`` policy.

    Returns:
        ``(H, W)`` int32 for integer input (int64 only if the range needs it), float64 for float input.

    References:
        Equivalent to ``scipy.ndimage.correlate`` with the mode from :data:`vkit.model.window.SCIPY_MODES`,
        and to OpenCV ``filter2D`` / ``Sobel`` / ``Scharr`` with the matching ``borderType``.
    """
    k = check_kernel(kernel)
    arr = np.asarray(img)
    if arr.ndim != 2:
        raise ConfigError(f"image has shape {arr.shape}; expected a (height, width) array of one channel")
    work = _work_dtype(arr, k)
    if border == "constant" and arr.dtype.kind in "iu" and not float(constant).is_integer():
        raise ConfigError(f"border constant {constant!r} must be an integer for an integer image")
    return correlate_padded(pad(arr, border, constant, dtype=work), k)


def _sort3(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    lo_ab = np.minimum(a, b)
    hi_ab = np.maximum(a, b)
    lo = np.minimum(lo_ab, c)
    hi_c = np.maximum(lo_ab, c)
    mid = np.minimum(hi_ab, hi_c)
    hi = np.maximum(hi_ab, hi_c)
    return lo, mid, hi


def _median3(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
    return np.maximum(np.minimum(a, b), np.minimum(np.maximum(a, b), c))


def median3x3(img: np.ndarray, border: str = "replicate", constant: float = 0) -> np.ndarray:
    """3x3 median of every pixel, same dtype as ``img``.

    Each padded column triple is sorted once; the median of the nine is then
    ``median(max of the three lows, median of the three middles, min of the three highs)``.

    References:
        Equivalent to ``scipy.ndimage.median_filter(size=3)`` and OpenCV ``medianBlur(ksize=3)``
        (which uses replicate borders). The column-sort method is the classic hardware median of nine
        (A. W. Paeth, "Median finding on a 3x3 grid", Graphics Gems, 1990 -- from memory).
    """
    p = pad(img, border, constant)
    height, width = p.shape[0] - 2, p.shape[1] - 2
    lo, mid, hi = _sort3(p[0:height], p[1 : height + 1], p[2 : height + 2])
    lows = np.maximum(np.maximum(lo[:, 0:width], lo[:, 1 : width + 1]), lo[:, 2 : width + 2])
    mids = _median3(mid[:, 0:width], mid[:, 1 : width + 1], mid[:, 2 : width + 2])
    highs = np.minimum(np.minimum(hi[:, 0:width], hi[:, 1 : width + 1]), hi[:, 2 : width + 2])
    return _median3(lows, mids, highs)


def minimum3x3(img: np.ndarray, border: str = "replicate", constant: float = 0) -> np.ndarray:
    """3x3 minimum (grey erosion with a full 3x3 structuring element), same dtype as ``img``.

    References:
        Equivalent to ``scipy.ndimage.minimum_filter(size=3)`` with the matching mode.
    """
    return _extreme3x3(np.minimum, img, border, constant)


def maximum3x3(img: np.ndarray, border: str = "replicate", constant: float = 0) -> np.ndarray:
    """3x3 maximum (grey dilation with a full 3x3 structuring element), same dtype as ``img``.

    References:
        Equivalent to ``scipy.ndimage.maximum_filter(size=3)`` with the matching mode.
    """
    return _extreme3x3(np.maximum, img, border, constant)


def _extreme3x3(pick: np.ufunc, img: np.ndarray, border: str, constant: float) -> np.ndarray:
    """``pick`` (np.minimum or np.maximum) over each 3x3 window: down the columns first, then along the rows."""
    p = pad(img, border, constant)
    height, width = p.shape[0] - 2, p.shape[1] - 2
    col = pick(pick(p[0:height], p[1 : height + 1]), p[2 : height + 2])
    return pick(pick(col[:, 0:width], col[:, 1 : width + 1]), col[:, 2 : width + 2])
