"""How pixels sit in a data-bus word: the components of one pixel, and N pixels a clock side by side.

One word of a bus carrying ``lanes`` pixels a clock holds ``lanes`` pixel fields of ``pixel_bits``
each. With ``lane_order = "first_low"`` (the default) the first pixel of the group (the leftmost on
the line) sits in the least significant field; ``"first_high"`` puts it in the most significant one.
Inside a pixel field an RGB pixel holds its three components in ``component_order``, most significant
first (``"RGB"``: R in the top bits, B in the bottom ones; ``"BGR"`` the other way round). A Y'CbCr
pixel holds Y' in its low field and the colour differences above it: ``C << bits | Y`` for 4:2:2 (Cb
on even columns, Cr on odd), ``Cr << 2*bits | Cb << bits | Y`` for 4:4:4.

The model never sees any of this: sources pack frames into words here, and the monitors' captures
(one sample per bus word) are unpacked here into one sample per pixel.

A word of up to :data:`MAX_WORD_BITS` bits travels as one int64. A wider one (4 pixels a clock of
RGB888 are 96 bits, 8 of gray8 64) travels as its pixel fields: a ``(..., lanes)`` int64 array whose
column ``j`` is the field at bits ``j * pixel_bits`` upwards (:meth:`BusLayout.wide`). Writers take
either form as bit fields (:meth:`BusLayout.word_fields`), the per-clock sources as Python ints
(:meth:`BusLayout.word_list`).

References:
    Several pixels a clock, first pixel in the low lane, is common practice for parallel video at
    high resolutions (no source); so is naming the component order by the letters most significant
    first (no source).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.validate import fail, suggest, want_choice
from vkit.core.vocab import COMPONENT_ORDERS, PIXEL_FORMAT_BITS, components, is_rgb, is_ycbcr, sample_bits
from vkit.video.capture import UNKNOWN, Capture
from vkit.video.timing import VideoTiming, tiny

__all__ = ["LANE_COUNTS", "LANE_ORDERS", "MAX_WORD_BITS", "BusLayout", "clock_timing", "tiny_in_pixels", "unpack_capture",
           "split_lanes", "spread_kept_lanes", "spread_lanes"]

LANE_COUNTS: tuple[int, ...] = (1, 2, 4, 8)
"""Pixels a clock a bus may carry."""
LANE_ORDERS: tuple[str, ...] = ("first_low", "first_high")
"""Where the first pixel of a clock's group sits: the least or the most significant lane."""
MAX_WORD_BITS = 62
"""Widest bus word that travels as one int64, bits; a wider one travels as its pixel fields (:attr:`BusLayout.wide`)."""

WHERE = "bus layout"


@dataclass(frozen=True)
class BusLayout:
    """The layout of one data-bus word.

    Attributes:
        pixel_format: a name of :data:`vkit.core.vocab.PIXEL_FORMAT_BITS` (``gray10``, ``rgb888``).
        component_order: the letters R, G, B most significant first (RGB formats only matter).
        lanes: pixels a clock, one of :data:`LANE_COUNTS`.
        lane_order: ``"first_low"`` or ``"first_high"``.
    """

    pixel_format: str = "gray8"
    component_order: str = "RGB"
    lanes: int = 1
    lane_order: str = "first_low"

    def __post_init__(self) -> None:
        if self.pixel_format not in PIXEL_FORMAT_BITS:
            raise fail(WHERE, "pixel_format", self.pixel_format, "not a pixel format",
                       suggest(str(self.pixel_format), list(PIXEL_FORMAT_BITS)))
        order = str(self.component_order).upper()
        want_choice(WHERE, "component_order", order, COMPONENT_ORDERS)
        object.__setattr__(self, "component_order", order)
        if isinstance(self.lanes, bool) or not isinstance(self.lanes, int) or self.lanes not in LANE_COUNTS:
            raise fail(WHERE, "pixels_per_clock", self.lanes, "not a lane count",
                       f"use one of {', '.join(map(str, LANE_COUNTS))}")
        want_choice(WHERE, "lane_order", self.lane_order, LANE_ORDERS)

    @classmethod
    def of(cls, bus: BusLayout | str) -> BusLayout:
        """``bus`` itself, or the one-lane, RGB-ordered layout of a pixel format name."""
        return bus if isinstance(bus, BusLayout) else cls(bus)

    @property
    def pixel_bits(self) -> int:
        """Bits of one pixel field."""
        return PIXEL_FORMAT_BITS[self.pixel_format]

    @property
    def sample_bits(self) -> int:
        """Bits of one sample (one grey value or one colour component)."""
        return sample_bits(self.pixel_format)

    @property
    def word_bits(self) -> int:
        """Bits of the whole bus word: ``lanes * pixel_bits``."""
        return self.lanes * self.pixel_bits

    @property
    def wide(self) -> bool:
        """True when a word is wider than :data:`MAX_WORD_BITS`: words are then ``(..., lanes)`` arrays of
        pixel fields, column ``j`` the field at bits ``j * pixel_bits`` upwards."""
        return self.word_bits > MAX_WORD_BITS

    def lane_shift(self, lane: int, field_bits: int | None = None) -> int:
        """Lowest bit of pixel ``lane`` (0 = the first pixel of the group) in a word of ``field_bits`` fields."""
        bits = self.pixel_bits if field_bits is None else field_bits
        return bits * (lane if self.lane_order == "first_low" else self.lanes - 1 - lane)

    def pixel_words(self, frames: np.ndarray) -> np.ndarray:
        """The pixel field of every pixel, int64 ``(N, H, W)``: a grey sample as is, an RGB pixel's
        components packed in :attr:`component_order`."""
        arr = np.asarray(frames)  # widened a component at a time: no int64 copy of the whole RGB stack
        if is_ycbcr(self.pixel_format):  # Y' in the low field, the colour differences above it in order
            bits = self.sample_bits
            return sum((arr[..., k].astype(np.int64) << (bits * k) for k in range(arr.shape[-1])),
                       np.zeros(arr.shape[:-1], np.int64))
        if not is_rgb(self.pixel_format):
            return arr.astype(np.int64)
        bits = self.sample_bits
        out = np.zeros(arr.shape[:-1], np.int64)
        for rank, letter in enumerate(self.component_order):
            out |= arr[..., "RGB".index(letter)].astype(np.int64) << (bits * (2 - rank))
        return out

    def bus_words(self, frames: np.ndarray, fill_seed: int | None = None) -> np.ndarray:
        """The bus word of every clock of active video, int64 ``(N, H, W // lanes)``; a :attr:`wide` word as
        its pixel fields, ``(N, H, W // lanes, lanes)``.

        Args:
            frames: ``(N, H, W)`` or ``(N, H, W, 3)`` samples.
            fill_seed: None: ``W`` must be a multiple of the lanes. A seed: a line may end in a partly filled
                beat (a bus with a per-lane valid mask, :meth:`line_keeps`); its empty lanes carry seeded
                random pixel fields (numpy PCG64), which nobody may take.
        """
        pix = self.pixel_words(frames)
        width = pix.shape[-1]
        self.check_width(width, keep=fill_seed is not None)
        if width % self.lanes:
            rng = np.random.default_rng(int(fill_seed))
            extra = rng.integers(0, 1 << self.pixel_bits, size=pix.shape[:-1] + (self.padded_width(width) - width,),
                                 dtype=np.int64)
            pix = np.concatenate([pix, extra], axis=-1)
            width = pix.shape[-1]
        groups = pix.reshape(pix.shape[:-1] + (width // self.lanes, self.lanes))
        if self.wide:  # fields in bit order: the first pixel lowest for first_low, highest for first_high
            return np.ascontiguousarray(groups if self.lane_order == "first_low" else groups[..., ::-1])
        out = np.zeros(groups.shape[:-1], np.int64)
        for lane in range(self.lanes):
            out |= groups[..., lane] << self.lane_shift(lane)
        return out

    def check_width(self, width: int, keep: bool = False) -> None:
        """Raise ConfigError when a line of ``width`` pixels is not a whole number of beats and the bus has no
        per-lane valid mask (``keep``) to mark the partly filled last beat."""
        if int(width) % self.lanes and not keep:
            raise fail(WHERE, "pixels_per_clock", self.lanes, f"not a divisor of the active width {width} pixels",
                       "give a width that is a multiple of the pixels a clock, or map the stream's per-lane "
                       "valid masks (in_keep and out_keep) so a line may end in a partly filled beat")

    def keep_mask(self, pixels: int) -> int:
        """The per-lane valid mask of a beat whose first ``pixels`` lanes (in pixel order) hold pixels: bit
        ``k`` of the mask sits beside lane ``k`` of the word, so it follows :attr:`lane_order` as the lanes do
        (``first_low``: 4 lanes, 2 pixels -> ``0b0011``; ``first_high`` -> ``0b1100``)."""
        return sum(1 << self.lane_shift(lane, 1) for lane in range(min(max(int(pixels), 0), self.lanes)))

    def kept_lanes(self, mask: int) -> list[int]:
        """The lanes (pixel order, 0 = first pixel) whose bit is set in the valid mask ``mask``."""
        return [lane for lane in range(self.lanes) if (int(mask) >> self.lane_shift(lane, 1)) & 1]

    def padded_width(self, width: int) -> int:
        """``width`` pixels rounded up to whole beats: the lanes a line fills when its last beat is partly filled."""
        return -(-int(width) // self.lanes) * self.lanes

    def line_keeps(self, width: int) -> np.ndarray:
        """The valid mask of every beat of a line of ``width`` pixels, int64 ``(ceil(width / lanes),)``:
        every lane kept, but the last beat keeps the ``width % lanes`` remaining pixels (when any)."""
        beats = self.padded_width(width) // self.lanes
        out = np.full(beats, self.keep_mask(self.lanes), np.int64)
        if width % self.lanes:
            out[-1] = self.keep_mask(width % self.lanes)
        return out

    def split_words(self, words: np.ndarray) -> np.ndarray:
        """The inverse of :meth:`bus_words` for words of up to :data:`MAX_WORD_BITS` bits: bus words ``(..., C)``
        -> pixel fields ``(..., C * lanes)``, int64 (split by :func:`split_lanes`, as a capture is)."""
        if self.wide:  # Python ints (an object array), as a watched bus word wider than int64 is read
            return self._split_wide(np.asarray(words, object))
        w = np.asarray(words, np.int64)
        fields = split_lanes(w.reshape(-1), self, self.word_bits)
        return fields.reshape(w.shape[:-1] + (w.shape[-1] * self.lanes,))

    def _split_wide(self, words: np.ndarray) -> np.ndarray:
        """:meth:`split_words` for :attr:`wide` words held as Python ints: ``(..., C)`` -> ``(..., C * lanes)``."""
        mask = (1 << self.pixel_bits) - 1
        lanes = [(words >> self.lane_shift(k)) & mask for k in range(self.lanes)]
        fields = np.stack(lanes, axis=-1).astype(np.int64)
        return fields.reshape(words.shape[:-1] + (words.shape[-1] * self.lanes,))

    def samples(self, fields: np.ndarray) -> np.ndarray:
        """The inverse of :meth:`pixel_words`: pixel fields -> samples, ``(...)`` grey, ``(..., 3)`` RGB (R, G, B),
        ``(..., 2 | 3)`` Y'CbCr (Y' first); uint8 for samples of up to 8 bits, else uint16.

        Raises:
            ConfigError: a field is negative or wider than the pixel.
        """
        f = np.asarray(fields, np.int64)
        if f.size and (f.min() < 0 or f.max() >> self.pixel_bits):
            raise fail(WHERE, "data word", int(f.max() if f.min() >= 0 else f.min()),
                       f"outside the {self.pixel_bits}-bit pixel of {self.pixel_format}",
                       "map the data bus of the pixel format, or set pixel_format to the bus's format")
        bits = self.sample_bits
        mask = (1 << bits) - 1
        dtype = np.uint8 if bits <= 8 else np.uint16
        if is_ycbcr(self.pixel_format):
            return np.stack([(f >> (bits * k)) & mask for k in range(components(self.pixel_format))], -1).astype(dtype)
        if not is_rgb(self.pixel_format):
            return f.astype(dtype)
        by_letter = {letter: (f >> (bits * (2 - rank))) & mask for rank, letter in enumerate(self.component_order)}
        return np.stack([by_letter[c] for c in "RGB"], axis=-1).astype(dtype)

    def random_words(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` uniformly random words (``(n,)``, or ``(n, lanes)`` fields when :attr:`wide`) drawn from ``rng``."""
        if self.wide:
            return rng.integers(0, 1 << self.pixel_bits, size=(n, self.lanes), dtype=np.int64)
        return rng.integers(0, 1 << self.word_bits, size=n, dtype=np.int64)

    def constant_words(self, value: int, n: int) -> np.ndarray:
        """``n`` copies of the word ``value`` (>= 0), in the form words of this layout take."""
        if not self.wide:
            return np.full(n, int(value), np.int64)
        mask = (1 << self.pixel_bits) - 1
        fields = [(int(value) >> (self.pixel_bits * j)) & mask for j in range(self.lanes)]
        return np.tile(np.array(fields, np.int64), (n, 1))

    def word_fields(self, words: np.ndarray, bits: int | None = None) -> list[tuple[np.ndarray, int]]:
        """Words as ``(values, bits)`` bit fields, least significant first, each 64 bits at most (what the
        stimulus writers pack). ``bits``: the bus the words go on, when wider than :attr:`word_bits` (the
        top bits are zero)."""
        total = self.word_bits if bits is None else int(bits)
        if not self.wide:
            return [(words, min(total, 64))] + _zero_fields(words.shape[0], total - 64)
        cols = [(words[:, j], self.pixel_bits) for j in range(self.lanes)]
        return cols + _zero_fields(words.shape[0], total - self.word_bits)

    def word_list(self, words: np.ndarray) -> list[int]:
        """Words as Python ints (what a cocotb handle takes), from either form."""
        if not self.wide:
            return np.asarray(words).tolist()
        shifts = [self.pixel_bits * j for j in range(self.lanes)]
        return [sum(v << s for v, s in zip(row, shifts)) for row in np.asarray(words).tolist()]

    def describe(self) -> str:
        """The layout in words, lane by lane, e.g. ``2 pixels a clock of gray10: pixel 0 in bits 9..0,
        pixel 1 in bits 19..10``."""
        comp = f", components {self.component_order} high to low" if is_rgb(self.pixel_format) else ""
        parts = [f"pixel {lane} in bits {self.lane_shift(lane) + self.pixel_bits - 1}..{self.lane_shift(lane)}"
                 for lane in range(self.lanes)]
        return (f"{self.lanes} pixel{'s' if self.lanes > 1 else ''} a clock of {self.pixel_format}{comp}: "
                + ", ".join(parts))

    def describe_output(self, out_bits: int) -> str:
        """The output word's layout in words: ``lanes`` fields of ``out_bits``, in the same lane order."""
        parts = [f"pixel {lane} in bits {self.lane_shift(lane, out_bits) + out_bits - 1}..{self.lane_shift(lane, out_bits)}"
                 for lane in range(self.lanes)]
        return f"{self.lanes * out_bits}-bit output word of {self.lanes} x {out_bits}-bit pixels: " + ", ".join(parts)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (the report's ``bus`` table)."""
        return {"pixel_format": self.pixel_format, "component_order": self.component_order,
                "pixels_per_clock": self.lanes, "lane_order": self.lane_order, "word_bits": self.word_bits,
                "layout": self.describe()}


def _zero_fields(n: int, bits: int) -> list[tuple[np.ndarray, int]]:
    """``bits`` zero bits as fields of 32 bits at most (none when ``bits`` <= 0)."""
    zero = np.zeros(n, np.int64)
    return [(zero, min(32, bits - k)) for k in range(0, max(0, bits), 32)]


def clock_timing(timing: VideoTiming | None, lanes: int, width: int, height: int) -> VideoTiming:
    """The timing counted in bus clocks: every horizontal count divided by ``lanes``.

    ``None`` stands for ``tiny(width, height)`` given in clocks (``tiny(width // lanes, height)``), so
    the default timing of a case fits any lane count.

    Raises:
        ConfigError: the active width or a horizontal porch or sync is not a multiple of ``lanes``.
    """
    if width % lanes:
        raise fail(WHERE, "pixels_per_clock", lanes, f"not a divisor of the active width {width} pixels",
                   "give a width that is a multiple of the pixels a clock")
    if timing is None:
        return tiny(width // lanes, height)
    if lanes == 1:
        return timing
    counts = {"h_active": timing.h_active, "h_front_porch": timing.h_front_porch, "h_sync": timing.h_sync,
              "h_back_porch": timing.h_back_porch}
    for key, value in counts.items():
        if value % lanes:
            raise ConfigError(
                f"timing {timing.name or ''}: {key} = {value} pixels is not a multiple of pixels_per_clock = {lanes}; "
                f"give a timing whose active width and porches divide by {lanes} (e.g. {value - value % lanes + lanes})"
            )
    return replace(timing, **{k: v // lanes for k, v in counts.items()})


def tiny_in_pixels(width: int, height: int, lanes: int = 1) -> VideoTiming:
    """The tiny timing of a bus carrying ``lanes`` pixels a clock, counted in pixels: ``tiny(width // lanes,
    height)`` with every horizontal count times ``lanes``, named ``tiny{width}x{height}`` (so its porches
    divide by ``lanes``). At one pixel a clock it is :func:`vkit.video.timing.tiny` itself."""
    if lanes == 1 or width % lanes:
        return tiny(width, height)
    t = tiny(width // lanes, height)
    return replace(t, h_active=width, h_front_porch=t.h_front_porch * lanes, h_sync=t.h_sync * lanes,
                   h_back_porch=t.h_back_porch * lanes, name=f"tiny{width}x{height}")


def split_lanes(words: np.ndarray, layout: BusLayout, bus_bits: int, unknown: np.ndarray | None = None) -> np.ndarray:
    """The pixel of every lane of captured bus words, int64 ``(n, lanes)`` in pixel order (lane 0 = first pixel).

    Args:
        words: ``(n,)`` int64 words (:data:`~vkit.video.capture.UNKNOWN` for X/Z) of a bus up to
            :data:`MAX_WORD_BITS` bits, or ``(n, k)`` 32-bit limbs, least significant first, of a wider one.
        layout: the lane count and order.
        bus_bits: the bus width; each lane holds ``bus_bits // lanes`` bits.
        unknown: bool ``(n,)``, words that held X or Z (limbs only; words mark them with UNKNOWN).

    Raises:
        ConfigError: ``bus_bits`` is not a multiple of the lane count.
    """
    lanes = layout.lanes
    if bus_bits % lanes:
        raise fail(WHERE, "pixels_per_clock", lanes, f"not a divisor of the {bus_bits}-bit output bus",
                   "give an output bus of pixels_per_clock equal fields")
    field = bus_bits // lanes
    shifts = [layout.lane_shift(k, field) for k in range(lanes)]
    w = np.asarray(words)
    if w.ndim == 1:
        bad = w == UNKNOWN
        out = np.stack([(w >> s) & ((1 << field) - 1) for s in shifts], axis=1)
    else:
        bad = np.zeros(w.shape[0], bool) if unknown is None else np.asarray(unknown, bool)
        out = np.stack([_limb_field(w, s, field) for s in shifts], axis=1)
    out[bad] = UNKNOWN
    return out.astype(np.int64)


def _limb_field(limbs: np.ndarray, shift: int, bits: int) -> np.ndarray:
    """Bits ``shift .. shift + bits - 1`` of words held as 32-bit limbs ``(n, k)``, least significant first."""
    lo = shift // 32
    k = limbs.shape[1]
    out = np.zeros(limbs.shape[0], np.uint64)
    for j in range(lo, min(k, (shift + bits + 31) // 32)):  # the limbs the field touches, at most 3
        offset = 32 * j - shift
        part = limbs[:, j].astype(np.uint64)
        out |= part << np.uint64(offset) if offset >= 0 else part >> np.uint64(-offset)
    return (out & np.uint64((1 << bits) - 1)).astype(np.int64)


def spread_lanes(capture: Capture, lane_values: np.ndarray) -> Capture:
    """``capture`` (one entry a bus word) as one sample a pixel, the pixels being ``lane_values`` (``(n, lanes)``,
    :func:`split_lanes`): lane ``k`` of the word at column ``c`` lands at column ``c * lanes + k``, with the
    word's clock."""
    lanes = int(lane_values.shape[1])
    column = (capture.column[:, None] * lanes + np.arange(lanes)[None, :]).reshape(-1)
    rep = [np.repeat(a, lanes) for a in (capture.clock, capture.frame, capture.line)]
    return Capture(lane_values.reshape(-1).astype(np.int64), rep[0], rep[1], rep[2], column.astype(np.int64),
                   capture.facts)


def spread_kept_lanes(capture: Capture, lane_values: np.ndarray, masks: np.ndarray, layout: BusLayout) -> Capture:
    """As :func:`spread_lanes`, keeping only the lanes each word's per-lane valid mask marks (``masks``, one a
    word, bit ``k`` beside lane ``k``, :meth:`BusLayout.keep_mask`); columns count the kept pixels of a line."""
    full = spread_lanes(capture, lane_values)
    bits = np.array([layout.lane_shift(k, 1) for k in range(layout.lanes)], np.int64)
    kept = ((np.asarray(masks, np.int64)[:, None] >> bits[None, :]) & 1).astype(bool).reshape(-1)
    frame, line = full.frame[kept], full.line[kept]
    starts = np.ones(frame.size, bool)
    starts[1:] = (frame[1:] != frame[:-1]) | (line[1:] != line[:-1])
    index = np.arange(frame.size)
    column = index - np.maximum.accumulate(np.where(starts, index, 0))
    return Capture(full.values[kept], full.clock[kept], frame, line, column.astype(np.int64), capture.facts)


def unpack_capture(capture: Capture, layout: BusLayout, bus_bits: int) -> Capture:
    """A capture of bus words (one sample a clock, up to :data:`MAX_WORD_BITS` bits) as one sample a pixel.

    Each word of ``bus_bits`` splits into ``layout.lanes`` fields of ``bus_bits // lanes`` bits
    (:func:`split_lanes`, :func:`spread_lanes`). A word that held X or Z gives
    :data:`~vkit.video.capture.UNKNOWN` in every lane.

    Raises:
        ConfigError: ``bus_bits`` is not a multiple of the lane count.
    """
    if layout.lanes == 1:
        return capture
    return spread_lanes(capture, split_lanes(capture.values, layout, bus_bits))
