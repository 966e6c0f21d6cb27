"""3x3 neighbourhoods of an image under a border policy, as views of one padded array."""

from __future__ import annotations

from typing import Any, Optional

import numpy as np

from vkit.core.errors import ConfigError

__all__ = ["BORDERS", "PAD_LIKE_REPLICATE", "ring_mask", "SCIPY_MODES", "OPENCV_BORDERS", "check_border", "pad", "interior_mask", "taps", "taps_of_padded"]

BORDERS = ("replicate", "zero", "constant", "mirror", "reflect", "passthrough", "unchecked")
"""Border policies: what a 3x3 window sees beyond the image edge.

``replicate`` repeats the edge pixel; ``zero`` reads 0; ``constant`` reads a given value; ``mirror``
reflects about the edge pixel without repeating it (d c b | a b c d | c b a); ``reflect`` reflects
about the edge itself, so the edge sample is repeated (c b a | a b c | c b a); with a one-pixel pad it
reads exactly what ``replicate`` reads, so a 3x3 design cannot tell the two apart. ``passthrough``: the
output on the one-pixel frame is the input sample itself (see :mod:`vkit.model.exact`); the window pads
like ``replicate``, which only the frame's own outputs would see. ``unchecked`` pads like
``replicate`` but the outer 1-pixel ring is not compared (see :func:`interior_mask`). ``unchecked``
stays last.
"""

PAD_LIKE_REPLICATE = ("replicate", "reflect", "passthrough", "unchecked")
"""Policies whose one-pixel pad repeats the edge sample."""

SCIPY_MODES = {"replicate": "nearest", "zero": "constant", "constant": "constant", "mirror": "mirror",
               "reflect": "reflect", "passthrough": "nearest", "unchecked": "nearest"}
"""Border policy to the equivalent ``scipy.ndimage`` ``mode`` of its window pad (``cval`` = 0 for zero,
the constant for constant). SciPy has no pass-through: its entry is the pad the window reads."""

OPENCV_BORDERS = {"replicate": "BORDER_REPLICATE", "zero": "BORDER_CONSTANT", "constant": "BORDER_CONSTANT",
                  "mirror": "BORDER_REFLECT_101", "reflect": "BORDER_REFLECT", "passthrough": "BORDER_REPLICATE",
                  "unchecked": "BORDER_REPLICATE"}
"""Border policy to the name of the equivalent OpenCV ``borderType`` constant of its window pad."""


def check_border(border: str) -> str:
    """Return ``border`` if it is one of :data:`BORDERS`, else raise ConfigError."""
    if border not in BORDERS:
        raise ConfigError(f"border policy {border!r} is not known; use one of {', '.join(BORDERS)}")
    return border


def _check_image(img: Any) -> np.ndarray:
    arr = np.asarray(img)
    if arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 1:
        raise ConfigError(f"image has shape {arr.shape}; expected a non-empty (height, width) array of one channel")
    if arr.dtype.kind not in "iuf":
        raise ConfigError(f"image has dtype {arr.dtype}; expected an integer or float array")
    return arr


def _check_constant(constant: Any, dtype: np.dtype) -> None:
    if dtype.kind in "iu":
        info = np.iinfo(dtype)
        if not float(constant).is_integer() or not info.min <= constant <= info.max:
            raise ConfigError(
                f"border constant {constant!r} does not fit the image dtype {dtype} ({info.min}..{info.max}); "
                "pass an in-range integer"
            )


def pad(img: np.ndarray, border: str, constant: float = 0, dtype: Optional[Any] = None) -> np.ndarray:
    """Pad an image by one pixel on every side according to a border policy.

    Args:
        img: ``(H, W)`` integer or float image.
        border: one of :data:`BORDERS`. ``mirror`` matches ``scipy.ndimage`` mode ``"mirror"`` and
            OpenCV ``BORDER_REFLECT_101``; ``reflect`` matches mode ``"reflect"`` and ``BORDER_REFLECT``;
            ``replicate``, ``passthrough`` and ``unchecked`` match mode ``"nearest"`` and
            ``BORDER_REPLICATE``; ``zero``/``constant`` match mode ``"constant"`` / ``BORDER_CONSTANT``.
        constant: the value read outside the image for ``constant`` (ignored otherwise).
        dtype: dtype of the result (default: the image's); converting here saves one pass.

    Returns:
        A new ``(H+2, W+2)`` array.
    """
    arr = _check_image(img)
    check_border(border)
    out_dtype = np.dtype(dtype) if dtype is not None else arr.dtype
    height, width = arr.shape
    out = np.empty((height + 2, width + 2), dtype=out_dtype)
    out[1:-1, 1:-1] = arr
    if border in ("zero", "constant"):
        value = 0 if border == "zero" else constant
        _check_constant(value, out_dtype)
        out[0, :] = value
        out[-1, :] = value
        out[1:-1, 0] = value
        out[1:-1, -1] = value
        return out
    if border == "mirror":
        # d c b | a b c d | c b a; a 1-pixel-wide axis has nothing to mirror and repeats itself.
        top, bottom = (1, -2) if height > 1 else (0, -1)
        left, right = (2, -3) if width > 1 else (1, -2)
        out[0, 1:-1] = arr[top]
        out[-1, 1:-1] = arr[bottom]
        out[:, 0] = out[:, left]
        out[:, -1] = out[:, right]
        return out
    # replicate, reflect, passthrough, unchecked: a one-pixel pad repeats the edge sample
    out[0, 1:-1] = arr[0]
    out[-1, 1:-1] = arr[-1]
    out[:, 0] = out[:, 1]
    out[:, -1] = out[:, -2]
    return out


def interior_mask(height: int, width: int, border: str) -> np.ndarray:
    """Pixels whose value is defined by the border policy: all of them, except the outer ring for ``unchecked``.

    Returns:
        ``(height, width)`` bool array; False where the scoreboard must not compare.
    """
    check_border(border)
    if height < 1 or width < 1:
        raise ConfigError(f"frame size {width}x{height} is empty; pass width and height >= 1")
    mask = np.ones((height, width), dtype=bool)
    if border == "unchecked":
        mask[0, :] = False
        mask[-1, :] = False
        mask[:, 0] = False
        mask[:, -1] = False
    return mask


def ring_mask(height: int, width: int) -> np.ndarray:
    """The one-pixel frame of a ``(height, width)`` image: True on the first and last row and column."""
    ring = np.zeros((height, width), dtype=bool)
    ring[[0, -1], :] = True
    ring[:, [0, -1]] = True
    return ring


def taps_of_padded(padded: np.ndarray) -> list[list[np.ndarray]]:
    """The nine ``(H, W)`` views of a ``(H+2, W+2)`` padded array: ``p[r][c]`` is pixel ``(y+r-1, x+c-1)``."""
    height, width = padded.shape[0] - 2, padded.shape[1] - 2
    return [[padded[r : r + height, c : c + width] for c in range(3)] for r in range(3)]


def taps(img: np.ndarray, border: str, constant: float = 0) -> list[list[np.ndarray]]:
    """The 3x3 window of every pixel as nine ``(H, W)`` views of one padded array.

    ``p[r][c][y, x]`` is the pixel at ``(y + r - 1, x + c - 1)`` with the border policy applied, so
    ``p[1][1]`` is the image itself and ``p[0][0]`` is the up-left neighbour.
    """
    return taps_of_padded(pad(img, border, constant))
