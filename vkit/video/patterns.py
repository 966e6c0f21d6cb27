"""Verification test patterns and the procedural conveyor-belt demo scene, all as uint8 arrays."""

from __future__ import annotations

import inspect
from typing import Any, Callable, Sequence

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.vocab import components, is_rgb, is_ycbcr, sample_bits
from vkit.model.luma import sample_dtype
from vkit.model.ycbcr import YCbCrCoding, rgb_to_ycbcr
from vkit.video.killers import killers
from vkit.video.limits import check_frame_size

__all__ = [
    "PATTERNS",
    "make_pattern",
    "impulse",
    "step",
    "checkerboard",
    "box",
    "ramp_h",
    "ramp_v",
    "columns",
    "rows",
    "noise",
    "flat",
    "conveyor",
    "to_rgb",
    "to_bits",
    "ycbcr_frame",
    "pattern_in_format",
]


def _check_size(height: int, width: int) -> None:
    for key, value in (("height", height), ("width", width)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
            raise ConfigError(f"pattern: {key} = {value!r} pixels; give an integer >= 1")


def _check_level(key: str, value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not 0 <= value <= 255:
        raise ConfigError(f"pattern: {key} = {value!r}; give an integer in 0..255")
    return int(value)


def to_rgb(gray: np.ndarray) -> np.ndarray:
    """Copy a ``(H, W)`` uint8 image into R, G and B: ``(H, W, 3)`` uint8 (luma of it is the gray again)."""
    return np.repeat(np.asarray(gray, dtype=np.uint8)[:, :, None], 3, axis=2)


# ---------------------------------------------------------------- verification patterns (gray)


def impulse(height: int, width: int, value: int = 255) -> np.ndarray:
    """Black image with one pixel of ``value`` at ``(height // 2, width // 2)``; shows a filter's kernel."""
    _check_size(height, width)
    out = np.zeros((height, width), dtype=np.uint8)
    out[height // 2, width // 2] = _check_level("value", value)
    return out


def step(height: int, width: int, direction: str = "right", low: int = 0, high: int = 255) -> np.ndarray:
    """A step edge through the middle of the image.

    Args:
        direction: the side that is bright: ``"right"`` (columns >= width // 2 are ``high``),
            ``"left"`` (columns < width // 2), ``"down"`` (lines >= height // 2), ``"up"``
            (lines < height // 2). Everything else is ``low``.
        low: dark level, 0..255.
        high: bright level, 0..255.
    """
    _check_size(height, width)
    lo, hi = _check_level("low", low), _check_level("high", high)
    ys, xs = np.arange(height)[:, None], np.arange(width)[None, :]
    masks = {
        "right": np.broadcast_to(xs >= width // 2, (height, width)),
        "left": np.broadcast_to(xs < width // 2, (height, width)),
        "down": np.broadcast_to(ys >= height // 2, (height, width)),
        "up": np.broadcast_to(ys < height // 2, (height, width)),
    }
    if direction not in masks:
        raise ConfigError(f"step pattern: direction = {direction!r}; use left, right, up or down")
    return np.where(masks[direction], hi, lo).astype(np.uint8)


def checkerboard(height: int, width: int, cell: int = 4, low: int = 0, high: int = 255) -> np.ndarray:
    """Squares of ``cell`` x ``cell`` pixels, ``low`` in the top-left square, alternating with ``high``."""
    _check_size(height, width)
    if isinstance(cell, bool) or not isinstance(cell, (int, np.integer)) or cell < 1:
        raise ConfigError(f"checkerboard pattern: cell = {cell!r} pixels; give an integer >= 1")
    lo, hi = _check_level("low", low), _check_level("high", high)
    parity = (np.arange(height)[:, None] // cell + np.arange(width)[None, :] // cell) % 2
    return np.where(parity == 1, hi, lo).astype(np.uint8)


def box(height: int, width: int, low: int = 0, high: int = 255, margin: int | None = None) -> np.ndarray:
    """A ``high`` rectangle on a ``low`` background, ``margin`` pixels in from every side (default a quarter).

    At the box corners both gradients of a 3x3 difference kernel are large at once, so the sum of their
    squares is near its largest value; straight step edges only drive one of them.
    """
    _check_size(height, width)
    lo, hi = _check_level("low", low), _check_level("high", high)
    my = height // 4 if margin is None else margin
    mx = width // 4 if margin is None else margin
    out = np.full((height, width), lo, np.uint8)
    out[my : max(my, height - my), mx : max(mx, width - mx)] = hi
    return out


def _ramp(n: int) -> np.ndarray:
    if n == 1:
        return np.zeros(1, dtype=np.uint8)
    return np.floor(np.arange(n) * (255.0 / (n - 1)) + 0.5).astype(np.uint8)


def ramp_h(height: int, width: int) -> np.ndarray:
    """Horizontal ramp: column ``x`` is ``round(255 * x / (width - 1))``, 0 at the left, 255 at the right."""
    _check_size(height, width)
    return np.ascontiguousarray(np.broadcast_to(_ramp(width)[None, :], (height, width)))


def ramp_v(height: int, width: int) -> np.ndarray:
    """Vertical ramp: line ``y`` is ``round(255 * y / (height - 1))``, 0 at the top, 255 at the bottom."""
    _check_size(height, width)
    return np.ascontiguousarray(np.broadcast_to(_ramp(height)[:, None], (height, width)))


def _stripes(n: int, stripe: int) -> np.ndarray:
    if isinstance(stripe, bool) or not isinstance(stripe, (int, np.integer)) or stripe < 1:
        raise ConfigError(f"stripe pattern: stripe = {stripe!r} pixels; give an integer >= 1")
    return (((np.arange(n) // stripe) % 2) * 255).astype(np.uint8)


def columns(height: int, width: int, stripe: int = 1) -> np.ndarray:
    """Alternating 0/255 columns, each ``stripe`` pixels wide, starting with 0 at the left.

    ``stripe=1`` drives second-difference kernels (sharpen, Laplacian) to their extremes;
    ``stripe=2`` makes the pixels left and right of every column differ by 255, driving
    first-difference kernels (Sobel, Prewitt) to their extremes on every interior column.
    """
    _check_size(height, width)
    return np.ascontiguousarray(np.broadcast_to(_stripes(width, stripe)[None, :], (height, width)))


def rows(height: int, width: int, stripe: int = 1) -> np.ndarray:
    """Alternating 0/255 lines, each ``stripe`` lines high, starting with 0 at the top (see :func:`columns`)."""
    _check_size(height, width)
    return np.ascontiguousarray(np.broadcast_to(_stripes(height, stripe)[:, None], (height, width)))


def noise(height: int, width: int, seed: int = 0, rgb: bool = False, bits: int = 8) -> np.ndarray:
    """Uniform random values ``0 .. 2**bits - 1`` (numpy PCG64 seeded with ``seed``); RGB draws each
    channel. uint8 up to 8 bits, uint16 above."""
    _check_size(height, width)
    shape = (height, width, 3) if rgb else (height, width)
    return np.random.default_rng(seed).integers(0, 1 << bits, size=shape, dtype=sample_dtype(bits))


PATTERN_CODING = "bt601"
"""The Y'CbCr coding RGB patterns are converted with for a Y'CbCr design (full range): any coding gives
valid frames; the model filters Y' as it comes and passes Cb, Cr through."""


def ycbcr_frame(rgb: np.ndarray, pixel_format: str, coding: YCbCrCoding | None = None) -> np.ndarray:
    """An RGB picture ``(H, W, 3)`` (a pattern or an image file) as the samples of a Y'CbCr format: 4:4:4
    ``(H, W, 3)`` Y, Cb, Cr, or 4:2:2 ``(H, W, 2)`` Y, C with C = Cb on even columns and Cr on odd ones,
    both taken from the even (co-sited) pixel of each pair (ITU-R BT.601-7 4:2:2 sampling).

    ``rgb`` holds samples of ``max(8, bits)`` bits; ``coding`` gives the standard and range (the spec's
    ``[coding]``, :attr:`vkit.model.spec.PipelineSpec.ycbcr_coding`); None: BT.601 full range."""
    bits = sample_bits(pixel_format)
    standard, rng = (coding.standard, coding.range) if coding is not None else (PATTERN_CODING, "full")
    ycc = rgb_to_ycbcr(rgb, YCbCrCoding(standard, rng, max(8, bits)))  # rgb drawn at max(8, bits)
    if bits < 8:
        ycc >>= 8 - bits
    if components(pixel_format) == 3:
        return ycc.astype(sample_dtype(bits))
    width = ycc.shape[1]
    c = np.empty(ycc.shape[:2], np.int64)
    c[:, 0::2] = ycc[:, 0::2, 1]
    c[:, 1::2] = ycc[:, 0:width - (width % 2):2, 2] if width % 2 == 0 else ycc[:, 0:width - 1:2, 2]
    return np.stack([ycc[..., 0], c], axis=-1).astype(sample_dtype(bits))


def to_bits(img: np.ndarray, bits: int) -> np.ndarray:
    """An 8-bit image on the scale of ``bits``-bit samples: ``floor(v * (2**bits - 1) / 255 + 1/2)``,
    so black stays 0 and full scale stays full scale (uint8 up to 8 bits, uint16 above)."""
    dtype = sample_dtype(bits)
    if bits == 8:
        return np.asarray(img, dtype=np.uint8)
    top = (1 << bits) - 1
    return ((np.asarray(img, dtype=np.int64) * (2 * top) + 255) // 510).astype(dtype)


def flat(height: int, width: int, value: int | Sequence[int] = 128, rgb: bool = False) -> np.ndarray:
    """One level everywhere; ``value`` may be an (R, G, B) triple, which implies RGB."""
    _check_size(height, width)
    if isinstance(value, (list, tuple, np.ndarray)):
        levels = [_check_level("value", int(v)) for v in value]
        if len(levels) != 3:
            raise ConfigError(f"flat pattern: value {value!r} is not one level or an (R, G, B) triple")
        return np.broadcast_to(np.array(levels, dtype=np.uint8), (height, width, 3)).copy()
    level = _check_level("value", value)
    return np.full((height, width, 3) if rgb else (height, width), level, dtype=np.uint8)


# ---------------------------------------------------------------- the conveyor-belt demo scene


_CARDBOARD = np.array(
    [(196, 154, 108), (181, 137, 90), (205, 172, 128), (165, 124, 84), (214, 190, 150), (150, 112, 76)],
    dtype=np.float32,
)


def _smooth_profile(rng: np.random.Generator, n: int, knots: int) -> np.ndarray:
    """A smooth random 1-D profile of length ``n`` in about -1..1 (linear between random knots)."""
    k = max(2, knots)
    pts = rng.uniform(-1.0, 1.0, size=k + 1).astype(np.float32)
    return np.interp(np.linspace(0, k, n), np.arange(k + 1), pts).astype(np.float32)


def _rows(lo: float, hi: float, h: int) -> slice:
    """Rows that a horizontal band from ``lo`` to ``hi`` (pixels, with a 2-pixel margin) touches."""
    return slice(max(0, int(np.floor(lo)) - 2), max(0, min(h, int(np.ceil(hi)) + 3)))


def _box_alpha(u: np.ndarray, v: np.ndarray, half_u: float, half_v: float, soft: float) -> np.ndarray:
    """Coverage of a rectangle |u| <= half_u, |v| <= half_v with edges ramped over ``soft`` pixels."""
    au = np.clip((half_u - np.abs(u)) / soft + 0.5, 0.0, 1.0)
    av = np.clip((half_v - np.abs(v)) / soft + 0.5, 0.0, 1.0)
    return au * av


def conveyor(height: int, width: int, seed: int = 0, rgb: bool = True) -> np.ndarray:
    """Overhead camera view of a conveyor belt carrying parcels, drawn procedurally.

    The belt runs left to right across the middle of the frame, with ribs across it and faint
    streaks along it; metal side rails with bolts edge it; a painted floor with a yellow safety line
    lies beyond. Three to six cardboard parcels sit on the belt, each turned a little, with a tape
    strip along it, a shipping label carrying a barcode-like block of bars and two lines of
    print, a soft shadow to the lower right and bevelled edges. Mild vignetting and Gaussian
    sensor noise (sigma about 2 levels) finish it. Everything is drawn with numpy masks on
    coordinate grids; a 1920x1080 scene takes well under a second.

    Args:
        height: lines, >= 1.
        width: pixels per line, >= 1.
        seed: scene seed; the same seed draws the same scene, different seeds differ.
        rgb: True for ``(H, W, 3)``; False for gray ``(H, W)`` as
            ``(77 R + 150 G + 29 B + 128) >> 8`` (BT.601 luma weights scaled to 256, common practice).

    Returns:
        uint8 array.
    """
    _check_size(height, width)
    rng = np.random.default_rng(seed)
    sc = _Scene(int(height), int(width))
    sc.belt_top = 0.15 * sc.h + rng.uniform(-0.02, 0.02) * sc.h
    sc.belt_bot = 0.85 * sc.h + rng.uniform(-0.02, 0.02) * sc.h
    sc.rail = max(1.5, 0.045 * sc.h)
    _draw_floor(sc, rng)
    _draw_belt(sc, rng)
    _draw_rails(sc)
    parcels = _place_parcels(sc, rng)
    _draw_shadows(sc, parcels)
    for parcel in parcels:
        _draw_parcel(sc, parcel)
    return _camera(sc, rng, rgb)


class _Scene:
    """The conveyor picture being drawn: float RGB canvas, coordinate grids and the belt's place."""

    def __init__(self, h: int, w: int) -> None:
        self.h, self.w = h, w
        self.s = float(min(h, w))
        self.ys = np.arange(h, dtype=np.float32)[:, None]
        self.xs = np.arange(w, dtype=np.float32)[None, :]
        self.img = np.empty((h, w, 3), dtype=np.float32)
        self.belt_top = self.belt_bot = self.rail = 0.0


def _draw_floor(sc: _Scene, rng: np.random.Generator) -> None:
    """Painted concrete with slow mottling and a yellow safety line on each side of the belt."""
    h, w, ys = sc.h, sc.w, sc.ys
    mottle = _smooth_profile(rng, w, 7)[None, :] * 0.5 + _smooth_profile(rng, h, 5)[:, None] * 0.5
    floor = np.array([78, 82, 78], dtype=np.float32)
    sc.img[:] = floor + (6.0 * mottle)[:, :, None]
    line_off = sc.rail + max(1.0, 0.04 * h)
    line_w = max(1.0, 0.018 * h)
    for edge, sign in ((sc.belt_top, -1.0), (sc.belt_bot, 1.0)):
        centre = edge + sign * (line_off + line_w)
        rs = _rows(centre - line_w, centre + line_w, h)
        a = np.clip(line_w / 2 - np.abs(ys[rs] - centre) + 0.5, 0.0, 1.0)[:, :, None]
        sc.img[rs] = sc.img[rs] * (1 - a) + np.array([200, 170, 40], dtype=np.float32) * a


def _draw_belt(sc: _Scene, rng: np.random.Generator) -> None:
    """Dark rubber, ribs across the direction of travel, streaks along it."""
    h, w, ys, xs = sc.h, sc.w, sc.ys, sc.xs
    period = max(4.0, w / 48.0)
    phase = rng.uniform(0, period)
    rib = (0.5 + 0.5 * np.cos(2 * np.pi * (xs + phase) / period)) ** 6
    streak = _smooth_profile(rng, h, max(2, h // 6))[:, None]
    rs = _rows(sc.belt_top, sc.belt_bot, h)
    on_belt = ((ys[rs] >= sc.belt_top) & (ys[rs] < sc.belt_bot)).astype(np.float32)[:, :, None]
    belt_level = 50.0 + 14.0 * rib + 4.0 * streak[rs]
    belt = belt_level[:, :, None] + np.array([0.0, 2.0, 5.0], dtype=np.float32)
    sc.img[rs] = sc.img[rs] * (1 - on_belt) + belt * on_belt


def _draw_rails(sc: _Scene) -> None:
    """Side rails of brushed metal: rounded shading, bolts at a fixed pitch."""
    rail, xs = sc.rail, sc.xs
    pitch = max(6.0, sc.w / 11.0)
    bolt_r = max(0.8, rail * 0.22)
    for top in (sc.belt_top - rail, sc.belt_bot):
        rs = _rows(top, top + rail, sc.h)
        ys = sc.ys[rs]
        centre = top + rail / 2
        t = np.clip((ys - centre) / (rail / 2), -1.0, 1.0)
        inside = np.clip(rail / 2 - np.abs(ys - centre) + 0.5, 0.0, 1.0)[:, :, None]
        metal = (150.0 + 40.0 * (1 - t * t) - 25.0 * t) * np.ones_like(xs)
        metal = metal + 3.0 * np.sin(xs * 0.9 + ys * 0.05)
        bx = (xs - pitch / 2) % pitch - pitch / 2
        d = np.sqrt(bx * bx + (ys - centre) ** 2)
        bolt = np.clip(bolt_r - d + 0.5, 0.0, 1.0)
        metal = metal * (1 - bolt) + (95.0 + 60.0 * np.clip(-(bx + (ys - centre)) / (bolt_r + 1e-6), 0, 1)) * bolt
        metal3 = metal[:, :, None] + np.array([0.0, 2.0, 6.0], dtype=np.float32)
        sc.img[rs] = sc.img[rs] * (1 - inside) + metal3 * inside


def _place_parcels(sc: _Scene, rng: np.random.Generator) -> list[tuple[Any, ...]]:
    """Three to six parcels, one per slot along the belt, turned a little: (cx, cy, half_u, half_v, theta, colour, seed)."""
    n = int(rng.integers(3, 7))
    belt_h = sc.belt_bot - sc.belt_top
    slots = np.linspace(0.03 * sc.w, 0.97 * sc.w, n + 1)
    parcels = []
    for i in range(n):
        sw = slots[i + 1] - slots[i]
        a = sw * rng.uniform(0.55, 0.85)
        b = min(belt_h * rng.uniform(0.35, 0.7), belt_h * 0.8)
        cx = (slots[i] + slots[i + 1]) / 2 + rng.uniform(-1, 1) * (sw - a) / 3
        cy = (sc.belt_top + sc.belt_bot) / 2 + rng.uniform(-1, 1) * (belt_h - b) / 3
        theta = rng.uniform(-0.26, 0.26)
        colour = _CARDBOARD[rng.integers(len(_CARDBOARD))] + rng.uniform(-8, 8, size=3).astype(np.float32)
        parcels.append((cx, cy, a / 2, b / 2, theta, colour, rng.integers(0, 2**31)))
    return parcels


def _local(sc: _Scene, cx: float, cy: float, half_u: float, half_v: float, theta: float, grow: float
           ) -> tuple[tuple[slice, slice], np.ndarray, np.ndarray] | None:
    """The canvas box around a turned rectangle and its (u, v) coordinates there; None when off the canvas."""
    r = np.hypot(half_u, half_v) + grow + 1.0
    y0, y1 = max(0, int(cy - r)), min(sc.h, int(cy + r) + 2)
    x0, x1 = max(0, int(cx - r)), min(sc.w, int(cx + r) + 2)
    if y0 >= y1 or x0 >= x1:
        return None
    yy = sc.ys[y0:y1] - cy
    xx = sc.xs[:, x0:x1] - cx
    c, sn = np.cos(theta), np.sin(theta)
    return (slice(y0, y1), slice(x0, x1)), xx * c + yy * sn, -xx * sn + yy * c


def _draw_shadows(sc: _Scene, parcels: list[tuple[Any, ...]]) -> None:
    """A soft shadow to the lower right of every parcel."""
    soft = max(1.0, 0.035 * sc.s)
    off_x, off_y = 0.018 * sc.s, 0.028 * sc.s
    for cx, cy, hu, hv, theta, _, _ in parcels:
        got = _local(sc, cx + off_x, cy + off_y, hu, hv, theta, soft)
        if got is None:
            continue
        box, u, v = got
        shade = 0.55 * _box_alpha(u, v, hu, hv, soft * 2)
        sc.img[box] *= (1 - shade)[:, :, None]


def _draw_parcel(sc: _Scene, parcel: tuple[Any, ...]) -> None:
    """One parcel: bevelled cardboard, the flap seam under a tape strip, and a shipping label."""
    cx, cy, hu, hv, theta, colour, pseed = parcel
    got = _local(sc, cx, cy, hu, hv, theta, 1.0)
    if got is None:
        return
    box, u, v = got
    prng = np.random.default_rng(pseed)
    cover = _box_alpha(u, v, hu, hv, 1.0)[:, :, None]
    edge = np.minimum(hu - np.abs(u), hv - np.abs(v))
    bevel = np.clip(edge / max(1.0, 0.02 * sc.s), 0.0, 1.0)
    light = 1.0 + 0.06 * (-u / hu - v / hv) / 2
    body = colour * ((0.82 + 0.18 * bevel) * light)[:, :, None]
    tape_half = max(0.75, hv * prng.uniform(0.14, 0.22))
    tape_colour = colour * 0.55 + np.array([215, 185, 135], dtype=np.float32) * 0.45 + 12.0
    ta = np.clip(tape_half - np.abs(v) + 0.5, 0.0, 1.0)[:, :, None]
    body = body * (1 - ta) + tape_colour * ((0.9 + 0.1 * bevel) * light)[:, :, None] * ta
    seam = np.clip(0.6 - np.abs(v), 0.0, 1.0)[:, :, None] * 0.25
    body = body * (1 - seam)
    label = _label(u, v, hu, hv, tape_half, prng)
    if label is not None:
        la, paper = label
        body = body * (1 - la) + paper * light[:, :, None] * la
    sc.img[box] = sc.img[box] * (1 - cover) + body * cover


def _label(u: np.ndarray, v: np.ndarray, hu: float, hv: float, tape_half: float, prng: np.random.Generator
           ) -> tuple[np.ndarray, np.ndarray] | None:
    """A shipping label on one side of the tape: (cover, picture) with a barcode block and two lines of print."""
    side = 1.0 if prng.random() < 0.5 else -1.0
    margin = max(1.0, 0.08 * hv)
    room = hv - tape_half - 2 * margin
    lw = 2 * hu * prng.uniform(0.3, 0.45)
    lh = room * prng.uniform(0.6, 0.9)
    if lh < 3.0 or lw < 4.0:
        return None
    lu0 = prng.uniform(-hu + margin, hu - margin - lw)
    lv_mid = side * (tape_half + margin + lh / 2)
    lu = u - (lu0 + lw / 2)
    lv = (v - lv_mid) * side  # grows away from the tape
    la = _box_alpha(lu, lv, lw / 2, lh / 2, 1.0)[:, :, None]
    paper = np.array([238, 236, 228], dtype=np.float32)
    pad = max(0.5, 0.08 * min(lw, lh))
    bar_u0 = -lw / 2 + pad
    module = max(1.0, (lw - 2 * pad) / 64.0)
    bits = prng.integers(0, 2, size=int((lw - 2 * pad) / module) + 2)
    bits[0] = 1
    idx = np.clip(((lu - bar_u0) / module).astype(np.int32), 0, len(bits) - 1)
    in_bars = (np.abs(lu) <= lw / 2 - pad) & (lv >= -lh / 2 + pad) & (lv <= -lh / 2 + pad + 0.55 * lh)
    ink = (in_bars & (bits[idx] == 1)).astype(np.float32)
    for frac in (0.72, 0.86):
        row_v = -lh / 2 + frac * lh
        glyph = max(1.0, 2.5 * module)
        chars = prng.integers(0, 2, size=int(lw / glyph) + 2)
        gidx = np.clip(((lu + lw / 2) / glyph).astype(np.int32), 0, len(chars) - 1)
        text = (np.abs(lv - row_v) <= max(0.5, 0.04 * lh)) & (np.abs(lu) <= lw / 2 - pad)
        ink = np.maximum(ink, (text & (chars[gidx] == 1)).astype(np.float32) * 0.8)
    return la, paper * (1 - ink[:, :, None]) + np.float32(28.0) * ink[:, :, None]


def _camera(sc: _Scene, rng: np.random.Generator, rgb: bool) -> np.ndarray:
    """Optics and sensor: vignetting, Gaussian noise, rounding to uint8; gray by BT.601 weights when asked."""
    h, w, img = sc.h, sc.w, sc.img
    r2 = ((sc.xs - w / 2) / (w / 2 + 1e-6)) ** 2 + ((sc.ys - h / 2) / (h / 2 + 1e-6)) ** 2
    img *= (1.0 - 0.08 * r2)[:, :, None]
    grain = rng.standard_normal((h, w, 3), dtype=np.float32)
    grain *= 2.0
    img += grain
    img += 0.5
    np.floor(img, out=img)
    out = np.clip(img, 0, 255).astype(np.uint8)
    if rgb:
        return out
    wide = out.astype(np.uint16)
    return ((77 * wide[..., 0] + 150 * wide[..., 1] + 29 * wide[..., 2] + 128) >> 8).astype(np.uint8)


def _step_factory(direction: str) -> Callable[..., np.ndarray]:
    def gen(height: int, width: int, low: int = 0, high: int = 255) -> np.ndarray:
        return step(height, width, direction, low, high)

    gen.__name__ = f"step_{direction}"
    gen.__doc__ = f"Step edge, bright side {direction} (see :func:`step`)."
    return gen


PATTERNS: dict[str, Callable[..., np.ndarray]] = {
    "impulse": impulse,
    "step_left": _step_factory("left"),
    "step_right": _step_factory("right"),
    "step_up": _step_factory("up"),
    "step_down": _step_factory("down"),
    "checkerboard": checkerboard,
    "box": box,
    "ramp_h": ramp_h,
    "ramp_v": ramp_v,
    "columns": columns,
    "rows": rows,
    "noise": noise,
    "flat": flat,
    "conveyor": conveyor,
    "killers": killers,  # frames that kill spec mutants (vkit.video.killers)
}
"""Pattern name -> generator taking ``(height, width, **options)`` and returning uint8."""


def make_pattern(
    name: str, height: int, width: int, seed: int = 0, rgb: bool | None = None, bits: int = 8, **options: Any
) -> np.ndarray:
    """Make the pattern called ``name`` (a key of :data:`PATTERNS`) at a sample width of ``bits``.

    ``noise`` draws at ``bits`` bits; every other pattern is drawn at 8 bits (its levels, like ``low``
    and ``high``, on that scale) and scaled with :func:`to_bits`.

    Args:
        name: pattern name.
        height: lines, >= 1.
        width: pixels per line, >= 1.
        seed: used by the seeded patterns (``noise``, ``conveyor``), ignored by the others.
        rgb: True for ``(H, W, 3)``, False for ``(H, W)``; None takes the pattern's own default
            (RGB for ``conveyor``, gray for the rest). Gray-only patterns are copied into R, G, B.
        **options: the pattern's own keyword arguments (``cell``, ``value``, ``low``, ``high``).

    Raises:
        ConfigError: unknown name or option, or a size over :data:`vkit.video.limits.MAX_FRAME_PIXELS`.
    """
    try:
        gen = PATTERNS[name]
    except KeyError:
        raise ConfigError(f"pattern: unknown name {name!r}; known patterns are {', '.join(PATTERNS)}") from None
    params = inspect.signature(gen).parameters
    kwargs = dict(options)
    unknown = [k for k in kwargs if k not in params or k in ("height", "width", "seed", "rgb", "bits")]
    if unknown:
        allowed = [k for k in params if k not in ("height", "width", "seed", "rgb", "bits")]
        raise ConfigError(
            f"pattern {name!r}: unknown option(s) {', '.join(unknown)}; it takes {', '.join(allowed) or 'no options'}"
        )
    check_frame_size(f"pattern {name!r}", "size", width, height)
    if "seed" in params:
        kwargs["seed"] = seed
    if "bits" in params:
        return gen(height, width, rgb=bool(rgb), bits=bits, **kwargs)
    if "rgb" in params:
        if rgb is not None:
            kwargs["rgb"] = rgb
        return to_bits(gen(height, width, **kwargs), bits)
    out = gen(height, width, **kwargs)
    return to_bits(to_rgb(out) if rgb else out, bits)


def pattern_in_format(name: str, height: int, width: int, pixel_format: str, seed: int = 0,
                      coding: YCbCrCoding | None = None, **options: Any) -> np.ndarray:
    """Pattern ``name`` as a design in ``pixel_format`` takes it: gray or RGB at the format's sample width,
    or Y'CbCr converted from RGB drawn at 8 bits or more with ``coding`` (:func:`ycbcr_frame`); the format's
    sample dtype."""
    bits = sample_bits(pixel_format)
    ycc = is_ycbcr(pixel_format)
    img = make_pattern(name, height, width, seed=seed, rgb=is_rgb(pixel_format) or ycc,
                       bits=max(8, bits) if ycc else bits, **options)
    if ycc:
        img = ycbcr_frame(img, pixel_format, coding)
    return np.ascontiguousarray(img, dtype=sample_dtype(bits))
