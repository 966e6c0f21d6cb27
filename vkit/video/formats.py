"""Pixel formats: how many bus bits a pixel takes and how frames become data-bus words.

References:
    8:8:8 RGB packed red-high (``R << 16 | G << 8 | B``) is common practice for 24-bit parallel
    video buses, no source.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.vocab import PIXEL_FORMAT_BITS
from vkit.core.validate import suggest

__all__ = ["PIXEL_FORMAT_BITS", "pixel_bits", "pack_rgb", "unpack_rgb", "pixel_words", "frames_array"]

"""Input data bus bits each pixel format needs (rgb888 packs R<<16 | G<<8 | B)."""


def pixel_bits(pixel_format: str) -> int:
    """Bits of the input data bus needed by ``pixel_format`` ("gray8" -> 8, "rgb888" -> 24)."""
    try:
        return PIXEL_FORMAT_BITS[pixel_format]
    except KeyError:
        raise ConfigError(
            f"pixel_format {pixel_format!r} is not known; {suggest(pixel_format, sorted(PIXEL_FORMAT_BITS))}"
        ) from None


def pack_rgb(rgb: np.ndarray) -> np.ndarray:
    """Pack 8:8:8 RGB into pixel-bus words: ``R << 16 | G << 8 | B`` (red in bits 23..16, blue in 7..0).

    Args:
        rgb: ``(..., 3)`` integer array with values 0..255, channel order R, G, B.

    Returns:
        ``uint32`` array of shape ``rgb.shape[:-1]``.
    """
    a = np.asarray(rgb)
    if a.ndim < 1 or a.shape[-1] != 3:
        raise ConfigError(f"pack_rgb: shape {a.shape} has no trailing axis of 3 (R, G, B); pass (..., 3)")
    if not np.issubdtype(a.dtype, np.integer) or (a.size and (a.min() < 0 or a.max() > 255)):
        raise ConfigError("pack_rgb: channels must be integers in 0..255; scale with vkit.video.images.to_uint8 first")
    w = a.astype(np.uint32)
    return (w[..., 0] << 16) | (w[..., 1] << 8) | w[..., 2]


def unpack_rgb(words: np.ndarray) -> np.ndarray:
    """Split pixel-bus words ``R << 16 | G << 8 | B`` into a ``(..., 3)`` uint8 R, G, B array.

    Raises:
        ConfigError: a word is negative or has bits above bit 23 set.
    """
    w = np.asarray(words)
    if not np.issubdtype(w.dtype, np.integer):
        raise ConfigError(f"unpack_rgb: dtype {w.dtype} is not an integer type; pass 24-bit integer words")
    if w.size and (w.min() < 0 or w.max() > 0xFFFFFF):
        raise ConfigError("unpack_rgb: words must be in 0..0xFFFFFF (24-bit 8:8:8 RGB); mask or check the bus width")
    w = w.astype(np.uint32)
    return np.stack([(w >> 16) & 0xFF, (w >> 8) & 0xFF, w & 0xFF], axis=-1).astype(np.uint8)


def pixel_words(frames: np.ndarray, pixel_format: str) -> np.ndarray:
    """Data-bus words per pixel, int64 ``(N, H, W)``: gray8 as is, rgb888 packed by :func:`pack_rgb`."""
    if pixel_format == "rgb888":
        return np.asarray(pack_rgb(frames), dtype=np.int64)
    return np.asarray(frames).astype(np.int64)


def frames_array(frames: Any, pixel_format: str | None = None) -> tuple[np.ndarray, str]:
    """Stack ``frames`` into ``(N, H, W)`` (gray8) or ``(N, H, W, 3)`` (rgb888) uint8 and name the format.

    Args:
        frames: one frame or a sequence of frames, each uint8-valued ``(H, W)`` or ``(H, W, 3)``.
        pixel_format: "gray8", "rgb888" or None to infer from the shape.

    Raises:
        ConfigError: empty input, mixed shapes, values outside 0..255 or a shape/format mismatch.
    """
    arr = frames if isinstance(frames, np.ndarray) else np.asarray(frames)
    # A single frame is (H, W) or (H, W, 3); a 3-D array ending in 3 is one RGB frame unless gray8 was asked.
    if arr.ndim == 2 or (arr.ndim == 3 and arr.shape[-1] == 3 and pixel_format != "gray8"):
        arr = arr[None]
    if arr.dtype == object or arr.size == 0:
        raise ConfigError("frames: got no frames or frames of different shapes; give equal-size (H, W) or (H, W, 3) arrays")
    fmt = _format_of_shape(arr.shape)
    if pixel_format is not None and pixel_format != fmt:
        pixel_bits(pixel_format)
        raise ConfigError(
            f"frames: shape {arr.shape} is {fmt} but pixel_format is {pixel_format!r}; "
            f"give {'(N, H, W, 3)' if pixel_format == 'rgb888' else '(N, H, W)'} frames or change pixel_format"
        )
    if arr.dtype != np.uint8:
        if not np.issubdtype(arr.dtype, np.integer) or arr.min() < 0 or arr.max() > 255:
            raise ConfigError(f"frames: dtype {arr.dtype} with values outside 0..255; give uint8 frames")
        arr = arr.astype(np.uint8)
    return arr, fmt


def _format_of_shape(shape: tuple[int, ...]) -> str:
    if len(shape) == 4 and shape[-1] == 3:
        return "rgb888"
    if len(shape) == 3:
        return "gray8"
    raise ConfigError(f"frames: shape {shape} is not (N, H, W) or (N, H, W, 3); give uint8 gray or RGB frames")
