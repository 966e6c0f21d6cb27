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
from vkit.core.vocab import COMPONENT_ORDERS, PIXEL_FORMAT_BITS, is_rgb, is_ycbcr, sample_bits
from vkit.video.capture import UNKNOWN, Capture
from vkit.video.timing import VideoTiming, tiny

__all__ = ["LANE_COUNTS", "LANE_ORDERS", "MAX_WORD_BITS", "BusLayout", "clock_timing", "tiny_in_pixels", "unpack_capture"]

LANE_COUNTS: tuple[int, ...] = (1, 2, 4, 8)
"""Pixels a clock a bus may carry."""
LANE_ORDERS: tuple[str, ...] = ("first_low", "first_high")
"""Where the first pixel of a clock's group sits: the least or the most significant lane."""
MAX_WORD_BITS = 62
"""Widest bus word, bits: words travel as int64 through the schedule, the stimulus writer and the capture."""

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
        if self.word_bits > MAX_WORD_BITS:
            raise fail(WHERE, "pixels_per_clock", self.lanes,
                       f"too many for {self.pixel_format}: {self.lanes} x {self.pixel_bits} = {self.word_bits} bits, "
                       f"over the {MAX_WORD_BITS}-bit word vkit carries", "use fewer pixels a clock")

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

    def bus_words(self, frames: np.ndarray) -> np.ndarray:
        """The bus word of every clock of active video, int64 ``(N, H, W // lanes)``."""
        pix = self.pixel_words(frames)
        width = pix.shape[-1]
        if width % self.lanes:
            raise fail(WHERE, "pixels_per_clock", self.lanes, f"not a divisor of the active width {width} pixels",
                       "give a width that is a multiple of the pixels a clock")
        groups = pix.reshape(pix.shape[:-1] + (width // self.lanes, self.lanes))
        out = np.zeros(groups.shape[:-1], np.int64)
        for lane in range(self.lanes):
            out |= groups[..., lane] << self.lane_shift(lane)
        return out

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


def unpack_capture(capture: Capture, layout: BusLayout, bus_bits: int) -> Capture:
    """A capture of bus words (one sample a clock) as one sample a pixel.

    Each word of ``bus_bits`` splits into ``layout.lanes`` fields of ``bus_bits // lanes`` bits; the
    pixel of lane ``k`` of the word at column ``c`` lands at column ``c * lanes + k``, with the word's
    clock. A word that held X or Z gives :data:`~vkit.video.capture.UNKNOWN` in every lane.

    Raises:
        ConfigError: ``bus_bits`` is not a multiple of the lane count.
    """
    lanes = layout.lanes
    if lanes == 1:
        return capture
    if bus_bits % lanes:
        raise fail(WHERE, "pixels_per_clock", lanes, f"not a divisor of the {bus_bits}-bit output bus",
                   "give an output bus of pixels_per_clock equal fields")
    field = bus_bits // lanes
    mask = (1 << field) - 1
    words = capture.values
    lane_vals = [np.where(words == UNKNOWN, UNKNOWN, (words >> layout.lane_shift(k, field)) & mask) for k in range(lanes)]
    values = np.stack(lane_vals, axis=1).reshape(-1)
    column = (capture.column[:, None] * lanes + np.arange(lanes)[None, :]).reshape(-1)
    rep = [np.repeat(a, lanes) for a in (capture.clock, capture.frame, capture.line)]
    return Capture(values.astype(np.int64), rep[0], rep[1], rep[2], column.astype(np.int64), capture.facts)
