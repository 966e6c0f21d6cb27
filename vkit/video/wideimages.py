"""Readers for images whose samples are wider than 8 bits: 16-bit PNG and PGM/PPM with a maxval above 255.

Pillow keeps only 8 bits of a 16-bit RGB PNG and misreads some wide PGM files, so these two
containers are decoded here, exactly.

References:
    PNG: ISO/IEC 15948:2004 (W3C PNG Specification, Second Edition): chunk layout, IHDR, the five
    filter types (None, Sub, Up, Average, Paeth) and the Paeth predictor, samples big-endian.
    Netpbm PGM/PPM: the netpbm format pages (P2/P3 plain, P5/P6 raw; raw samples are two bytes,
    most significant first, when maxval > 255).
"""

from __future__ import annotations

import struct
import zlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from vkit.core.errors import ConfigError

__all__ = ["WideImage", "read_wide"]

_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
_PNG_CHANNELS = {0: 1, 2: 3}  # colour type -> samples a pixel (grey, truecolour)


@dataclass(frozen=True)
class WideImage:
    """Samples read at their own width.

    Attributes:
        pixels: ``(H, W)`` or ``(H, W, 3)`` uint16.
        maxval: the largest value the file declares (a PGM/PPM maxval; 65535 for a 16-bit PNG).
        container: ``"png"`` or ``"netpbm"``.
    """

    pixels: np.ndarray
    maxval: int
    container: str


def read_wide(path: Path, max_pixels: int) -> WideImage | None:
    """The samples of a 16-bit PNG or a PGM/PPM with maxval > 255; None for any other file (8-bit ones
    included, which Pillow reads).

    Raises:
        ConfigError: a wide file that is cut short, interlaced, or over ``max_pixels``.
    """
    head = path.read_bytes()[:16]
    if head.startswith(_PNG_SIGNATURE):
        return _read_png16(path, max_pixels)
    if head[:2] in (b"P2", b"P3", b"P5", b"P6"):
        return _read_netpbm(path, max_pixels)
    return None


def _fail(path: Path, problem: str, fix: str) -> ConfigError:
    return ConfigError(f"image {path}: {problem}; {fix}")


def _png_chunks(data: bytes, path: Path) -> list[tuple[bytes, bytes]]:
    chunks, pos = [], len(_PNG_SIGNATURE)
    while pos + 8 <= len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        if len(body) != length:
            raise _fail(path, f"PNG chunk {kind!r} is cut short", "check the file is complete")
        chunks.append((kind, body))
        pos += 12 + length
        if kind == b"IEND":
            break
    return chunks


def _read_png16(path: Path, max_pixels: int) -> WideImage | None:
    data = path.read_bytes()
    chunks = _png_chunks(data, path)
    if not chunks or chunks[0][0] != b"IHDR":
        raise _fail(path, "PNG without an IHDR chunk first", "check the file is a PNG")
    width, height, depth, colour, _, _, interlace = struct.unpack(">IIBBBBB", chunks[0][1])
    if depth != 16:
        return None
    if colour not in _PNG_CHANNELS:
        raise _fail(path, f"16-bit PNG of colour type {colour} (alpha), vkit reads 16-bit grey or RGB",
                    "re-save it without alpha")
    if interlace:
        raise _fail(path, "16-bit PNG is interlaced", "re-save it without interlacing")
    if width * height > max_pixels:
        raise _fail(path, f"claims {width * height} pixels, over the limit of {max_pixels} (decompression-bomb guard)",
                    "raise max_pixels if you trust the file")
    channels = _PNG_CHANNELS[colour]
    raw = zlib.decompress(b"".join(body for kind, body in chunks if kind == b"IDAT"))
    stride = width * channels * 2
    if len(raw) < height * (stride + 1):
        raise _fail(path, "PNG image data is cut short", "check the file is complete")
    rows = _unfilter(np.frombuffer(raw, np.uint8)[: height * (stride + 1)].reshape(height, stride + 1), channels * 2, path)
    pixels = rows.view(">u2").astype(np.uint16).reshape((height, width, channels))
    return WideImage(pixels[..., 0] if channels == 1 else pixels, 65535, "png")


def _paeth(a: int, b: int, c: int) -> int:
    p = a + b - c
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    return a if pa <= pb and pa <= pc else (b if pb <= pc else c)


def _unfilter(scan: np.ndarray, bpp: int, path: Path) -> np.ndarray:
    """Undo the per-line filters (first byte of each line) of PNG scanlines, ``bpp`` bytes a pixel."""
    height, stride = scan.shape[0], scan.shape[1] - 1
    out = np.zeros((height, stride), np.uint8)
    prev = np.zeros(stride, np.int64)
    for y in range(height):
        kind, line = int(scan[y, 0]), scan[y, 1:].astype(np.int64)
        if kind == 0:
            cur = line
        elif kind == 2:
            cur = (line + prev) & 0xFF
        elif kind in (1, 3, 4):
            cur = _unfilter_left(kind, line, prev, bpp)
        else:
            raise _fail(path, f"PNG line {y} has filter type {kind}, not 0..4", "check the file is a PNG")
        out[y] = cur
        prev = cur
    return out


def _unfilter_left(kind: int, line: np.ndarray, prev: np.ndarray, bpp: int) -> np.ndarray:
    """Sub (1), Average (3) and Paeth (4): each byte depends on the one ``bpp`` to its left."""
    cur = [0] * len(line)
    up = prev.tolist()
    raw = line.tolist()
    for i, value in enumerate(raw):
        left = cur[i - bpp] if i >= bpp else 0
        if kind == 1:
            pred = left
        elif kind == 3:
            pred = (left + up[i]) >> 1
        else:
            pred = _paeth(left, up[i], up[i - bpp] if i >= bpp else 0)
        cur[i] = (value + pred) & 0xFF
    return np.array(cur, np.int64)


def _netpbm_header(data: bytes) -> tuple[list[int], int]:
    """Magic number aside, the three header integers (width, height, maxval) and where the samples start."""
    values: list[int] = []
    pos = 2
    while len(values) < 3:
        while pos < len(data) and data[pos:pos + 1].isspace():
            pos += 1
        if data[pos:pos + 1] == b"#":
            while pos < len(data) and data[pos:pos + 1] not in (b"\n", b"\r"):
                pos += 1
            continue
        start = pos
        while pos < len(data) and data[pos:pos + 1].isdigit():
            pos += 1
        if start == pos:
            raise ValueError("header is not three integers")
        values.append(int(data[start:pos]))
    return values, pos + 1


def _read_netpbm(path: Path, max_pixels: int) -> WideImage | None:
    data = path.read_bytes()
    magic = data[:2]
    try:
        (width, height, maxval), start = _netpbm_header(data)
    except ValueError:
        raise _fail(path, "PGM/PPM header is not width, height and maxval", "check the file") from None
    if maxval <= 255:
        return None
    if maxval > 65535:
        raise _fail(path, f"maxval {maxval} is over 65535", "re-save it with 16-bit samples at most")
    if width * height > max_pixels:
        raise _fail(path, f"claims {width * height} pixels, over the limit of {max_pixels} (decompression-bomb guard)",
                    "raise max_pixels if you trust the file")
    channels = 3 if magic in (b"P3", b"P6") else 1
    count = width * height * channels
    if magic in (b"P5", b"P6"):
        body = data[start:start + 2 * count]
        samples = np.frombuffer(body, ">u2") if len(body) == 2 * count else np.zeros(0)
    else:
        samples = np.array(data[start:].split()[:count], dtype=np.int64)
    if samples.size != count:
        raise _fail(path, f"holds {samples.size} of its {count} samples", "check the file is complete")
    if int(samples.max(initial=0)) > maxval:
        raise _fail(path, f"has a sample above its maxval {maxval}", "check the file")
    shape = (height, width, 3) if channels == 3 else (height, width)
    return WideImage(samples.astype(np.uint16).reshape(shape), maxval, "netpbm")
