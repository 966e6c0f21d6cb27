"""Frames built to tell a spec from its mutants: corners that drive gx and gy to their ends together,
gradient sweeps that read many table addresses, border rings that separate the border policies, colour
noise that separates luma weights and catches rounding. Spec-independent; uint8 arrays."""

from __future__ import annotations

import numpy as np

from vkit.core.errors import ConfigError

__all__ = ["KILLER_PARTS", "killers", "corner_sweep", "gradient_sweep", "border_rings", "colour_noise"]


def corner_sweep(height: int, width: int) -> np.ndarray:
    """Bright squares of falling level on black, 3x3 pixels every 5: each corner gives ``|gx| = |gy|``,
    the brightest at the top of both ranges (a diagonal edge is the only way to reach ``gx^2 + gy^2``'s top)."""
    out = np.zeros((height, width), dtype=np.uint8)
    spots = [(y, x) for y in range(1, height - 3, 5) for x in range(1, width - 3, 5)]
    levels = np.linspace(255, 120, num=max(1, len(spots))).round().astype(np.uint8)
    for (y, x), level in zip(spots, levels):
        out[y : y + 3, x : x + 3] = level
    return out


def gradient_sweep(height: int, width: int) -> np.ndarray:
    """``(x * (y + 1) * 7) mod 256``: a new slope on every line, so the sum of squares (and a table
    address) takes many values."""
    ys, xs = np.arange(height)[:, None], np.arange(width)[None, :]
    return ((xs * (ys + 1) * 7) % 256).astype(np.uint8)


def border_rings(height: int, width: int, seed: int = 0) -> np.ndarray:
    """Random inside; the outer ring bright and the next ring dark, alternating along the edge, so
    replicate (reads ring 0), mirror (reads ring 1), zero and a constant all differ."""
    rng = np.random.default_rng(seed)
    out = rng.integers(0, 256, size=(height, width), dtype=np.uint8)
    ring0 = np.zeros((height, width), dtype=bool)
    ring0[[0, -1], :] = True
    ring0[:, [0, -1]] = True
    ring1 = np.zeros_like(ring0)
    if height >= 3 and width >= 3:
        ring1[[1, -2], 1:-1] = True
        ring1[1:-1, [1, -2]] = True
        ring1 &= ~ring0
    alt = ((np.arange(height)[:, None] + np.arange(width)[None, :]) % 4 < 2)
    out[ring0] = np.where(alt, 255, 200)[ring0]
    out[ring1] = np.where(alt, 0, 60)[ring1]
    return out


def colour_noise(height: int, width: int, seed: int = 0) -> np.ndarray:
    """Uniform RGB noise ``(H, W, 3)``: every weight and every rounding of the luma matters somewhere."""
    rng = np.random.default_rng(seed + 0x6B)
    return rng.integers(0, 256, size=(height, width, 3), dtype=np.uint8)


KILLER_PARTS = ("corner_sweep", "gradient_sweep", "border_rings", "colour_noise")
"""The frames of :func:`killers`, in order: frame ``k`` of a case (seed ``s + k``) is part ``(s + k) mod 4``."""


def killers(height: int, width: int, seed: int = 0, rgb: bool = False) -> np.ndarray:
    """One frame of the mutant-killing set: part ``seed mod len(KILLER_PARTS)`` (see :data:`KILLER_PARTS`).

    Give four consecutive seeds (``seeds = [0, 2]`` with ``frames = 2``) for the whole set. Grey parts
    are copied into R, G, B for ``rgb``; ``colour_noise`` is taken to grey by BT.601 weights for ``gray``.
    """
    if isinstance(height, bool) or not isinstance(height, (int, np.integer)) or height < 1 or \
            isinstance(width, bool) or not isinstance(width, (int, np.integer)) or width < 1:
        raise ConfigError(f"killers pattern: {width!r}x{height!r} pixels; give integers >= 1 (32x24 or more kills best)")
    part = KILLER_PARTS[seed % len(KILLER_PARTS)]
    if part == "colour_noise":
        out = colour_noise(height, width, seed)
        if rgb:
            return out
        wide = out.astype(np.uint16)  # BT.601 8-bit weights 77/150/29 (ITU-R BT.601-7)
        return ((77 * wide[..., 0] + 150 * wide[..., 1] + 29 * wide[..., 2] + 128) >> 8).astype(np.uint8)
    gray = border_rings(height, width, seed) if part == "border_rings" else (
        corner_sweep(height, width) if part == "corner_sweep" else gradient_sweep(height, width))
    return np.repeat(gray[:, :, None], 3, axis=2) if rgb else gray
