"""Pixel formats: how many bus bits a pixel takes and how frames become data-bus words.

References:
    8:8:8 RGB packed red-high (``R << 16 | G << 8 | B``) is common practice for 24-bit parallel
    video buses, no source.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.vocab import PIXEL_FORMAT_BITS, components, is_rgb, is_ycbcr, sample_bits
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
    """Data-bus words per pixel, int64 ``(N, H, W)``: grey samples as they are, RGB packed R high, B low
    (``rgb888``: as :func:`pack_rgb`). Another component order: :class:`vkit.video.bus.BusLayout`."""
    pixel_bits(pixel_format)
    arr = np.asarray(frames).astype(np.int64)
    if not is_rgb(pixel_format):
        return arr
    bits = sample_bits(pixel_format)
    return (arr[..., 0] << (2 * bits)) | (arr[..., 1] << bits) | arr[..., 2]


def frames_array(frames: Any, pixel_format: str | None = None) -> tuple[np.ndarray, str]:
    """Stack ``frames`` into ``(N, H, W)`` (grey) or ``(N, H, W, 3)`` (RGB) samples and name the format.

    Args:
        frames: one frame or a sequence of frames, each ``(H, W)`` or ``(H, W, 3)``.
        pixel_format: a pixel format name, or None to infer ``gray8`` / ``rgb888`` from the shape.

    Returns:
        The frames as uint8 (samples of up to 8 bits) or uint16 (9..16 bits), and the format's name.

    Raises:
        ConfigError: empty input, mixed shapes, values outside the format's range or a shape/format mismatch.
    """
    arr = frames if isinstance(frames, np.ndarray) else np.asarray(frames)
    if pixel_format is not None and is_ycbcr(pixel_format):
        return _ycbcr_frames(arr, pixel_format), pixel_format
    rgb = None if pixel_format is None else is_rgb(pixel_format)
    # A single frame is (H, W) or (H, W, 3); a 3-D array ending in 3 is one RGB frame unless grey was asked.
    if arr.ndim == 2 or (arr.ndim == 3 and arr.shape[-1] == 3 and rgb is not False):
        arr = arr[None]
    if arr.dtype == object or arr.size == 0:
        raise ConfigError("frames: got no frames or frames of different shapes; give equal-size (H, W) or (H, W, 3) arrays")
    shape_rgb = _format_of_shape(arr.shape) == "rgb888"
    fmt = pixel_format if pixel_format is not None else ("rgb888" if shape_rgb else "gray8")
    pixel_bits(fmt)
    if shape_rgb != is_rgb(fmt):
        raise ConfigError(
            f"frames: shape {arr.shape} is {'RGB' if shape_rgb else 'grey'} but pixel_format is {fmt!r}; "
            f"give {'(N, H, W, 3)' if is_rgb(fmt) else '(N, H, W)'} frames or change pixel_format"
        )
    bits = sample_bits(fmt)
    dtype, top = np.dtype(np.uint8 if bits <= 8 else np.uint16), (1 << bits) - 1
    if arr.dtype != dtype or bits not in (8, 16):
        if not np.issubdtype(arr.dtype, np.integer) or arr.min() < 0 or arr.max() > top:
            raise ConfigError(f"frames: dtype {arr.dtype} with values outside 0..{top}; give {bits}-bit samples ({dtype})")
        arr = arr.astype(dtype)
    return arr, fmt


def _ycbcr_frames(arr: np.ndarray, pixel_format: str) -> np.ndarray:
    """Y'CbCr frames ``(N, H, W, 2 | 3)`` (a single frame gets its N axis) in their sample dtype."""
    n, bits = components(pixel_format), sample_bits(pixel_format)
    if arr.ndim == 3:
        arr = arr[None]
    if arr.ndim != 4 or arr.shape[-1] != n or arr.size == 0:
        raise ConfigError(f"frames: shape {arr.shape} is not (N, H, W, {n}) of {pixel_format}; "
                          "give Y, C (4:2:2) or Y, Cb, Cr (4:4:4) samples a pixel")
    top = (1 << bits) - 1
    if not np.issubdtype(arr.dtype, np.integer) or arr.min() < 0 or arr.max() > top:
        raise ConfigError(f"frames: values outside 0..{top}; give {bits}-bit samples")
    return arr.astype(np.uint8 if bits <= 8 else np.uint16)


def _format_of_shape(shape: tuple[int, ...]) -> str:
    if len(shape) == 4 and shape[-1] == 3:
        return "rgb888"
    if len(shape) == 3:
        return "gray8"
    raise ConfigError(f"frames: shape {shape} is not (N, H, W) or (N, H, W, 3); give uint8 gray or RGB frames")
