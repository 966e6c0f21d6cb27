"""The fast path's wire format: stimulus word layouts, the ready pattern, capture records and file names.

The bottom of the fast path: the stimulus writer, the HDL generators and the capture reader all take
their bit positions and sizes from here.

Video stimulus word, MSB first: ``{enable, frame_mark, hsync, vsync, de, valid, data[IW-1:0]}`` (one per
clock; the control bits are pin levels, each pin's polarity applied; ``frame_mark`` is 1 on the first clock
of each frame and only drives the harness's ``frame_pulse``).
Stream stimulus word, MSB first: ``{idle_data[IW-1:0], gap[GAP_BITS-1:0], sof, eol, data[IW-1:0]}`` (one
per transfer: ``gap`` idle clocks driving ``idle_data`` before the transfer); a design with per-lane valid
masks (``in_keep``) has ``keep[LANES-1:0]`` on top of that. Binary stimulus files hold
big-endian words of :func:`word_bytes` bytes (``$fread``); hex files one word per line (``$readmemh``).

Binary capture file (little-endian 32-bit words, as Verilog ``%u`` writes them): a header of four words,
:data:`CAPTURE_MAGIC`, :data:`CAPTURE_VERSION`, the family (0 video, 1 stream) and the output data width
in bits; then one record of :func:`capture_record_bytes` bytes per event: the clock, ``kind | code << 8``
(kind an ASCII letter; code 1 on a ``P`` record means X/Z data, on an ``X`` record it indexes
:data:`CAPTURE_ROLES`) and :func:`capture_data_words` data words, least significant first. With an output
lane mask (``out_keep``) every ``P`` record is followed by an ``M`` record whose data is the word's mask.
"""

from __future__ import annotations

import numpy as np

from vkit.core.vocab import PIXEL_FORMAT_BITS
from vkit.video.bus import LANE_COUNTS, BusLayout
from vkit.video.timing import ClockSchedule
from vkit.video.words import StreamTransfers, input_levels

__all__ = [
    "CAPTURE_SPILL_NAME",
    "HARNESS",
    "TOPLEVEL",
    "MAX_IN_WIDTH",
    "GAP_BITS",
    "READY_WORDS",
    "STREAM_TAIL_CLOCKS",
    "CAPTURE_MAGIC",
    "CAPTURE_VERSION",
    "CAPTURE_ROLES",
    "CAPTURE_BIN_NAME",
    "CAPTURE_TEXT_NAME",
    "FAMILY_CODES",
    "video_bit",
    "video_word_bits",
    "stream_word_bits",
    "word_bytes",
    "capture_data_words",
    "capture_record_bytes",
    "capture_file_name",
    "video_word_fields",
    "stream_word_fields",
    "pack_fields",
]

HARNESS = "vkit_harness"
"""Name of the generated harness module/entity (ports clk, rst, load; used by exported testbenches)."""

TOPLEVEL = "vkit_fast_top"
"""Name of the self-clocked wrapper around :data:`HARNESS`: the simulation toplevel on the fast path."""

MAX_IN_WIDTH = max(LANE_COUNTS) * max(PIXEL_FORMAT_BITS.values())
"""Widest input data bus the player takes, bits: the widest word a bus layout makes (8 pixels a clock of 48-bit RGB)."""

GAP_BITS = 16
"""Bits of the idle-gap count in a stream word (longest gap: 65535 clocks)."""

READY_WORDS = 65536
"""Clocks in the stream sink's ready pattern; the harness repeats it for longer runs."""

STREAM_TAIL_CLOCKS = 16
"""Clocks the stream harness keeps capturing after every expected output pixel arrived."""

CAPTURE_MAGIC = 0x42434B56
"""First 32-bit word of a binary capture file (bytes "VKCB" in file order)."""

CAPTURE_VERSION = 1
"""Binary capture format version (second header word)."""

CAPTURE_ROLES = ("", "out_de", "out_valid", "out_vsync", "out_hsync", "in_ready", "out_sof", "out_eol", "out_enable")
"""Role names of the X events in a binary capture, by code (record byte 5)."""

CAPTURE_BIN_NAME = "capture.bin"
"""File name of the Verilog harness's capture inside a run folder (binary records)."""

CAPTURE_SPILL_NAME = "capture.spill"
"""Folder inside a run folder where the capture reader keeps decoded samples until the capture is saved
(:class:`vkit.video.stored.CaptureSpill`)."""

CAPTURE_TEXT_NAME = "capture.txt"
"""File name of the VHDL harness's capture inside a run folder (text lines)."""

FAMILY_CODES = {"video": 0, "stream": 1}
"""Family code in the third word of a binary capture header."""

_VIDEO_FLAGS = ("valid", "de", "vsync", "hsync", "frame_mark", "enable")
"""The flag bits above the data in a video word, least significant first."""


def video_bit(flag: str, in_width: int) -> int:
    """Bit position of ``flag`` ("valid", "de", "vsync", "hsync", "frame_mark", "enable") in a video word."""
    return in_width + _VIDEO_FLAGS.index(flag)


def video_word_bits(in_width: int) -> int:
    """Bits of one video stimulus word: data plus valid, de, vsync, hsync, the frame mark and the enable."""
    return in_width + len(_VIDEO_FLAGS)


def stream_word_bits(in_width: int, keep_bits: int = 0) -> int:
    """Bits of one stream stimulus word: data, eol, sof, the gap count and the idle data (and ``keep_bits``
    of per-lane valid mask on top, for a design that takes one)."""
    return 2 * in_width + GAP_BITS + 2 + keep_bits


def word_bytes(bits: int) -> int:
    """Bytes of one binary stimulus word of ``bits`` bits (``$fread`` reads whole bytes)."""
    return max(1, (bits + 7) // 8)


def capture_data_words(out_width: int) -> int:
    """32-bit words of output data in one binary capture record: ``ceil(out_width / 32)``."""
    return max(1, (int(out_width) + 31) // 32)


def capture_record_bytes(out_width: int) -> int:
    """Bytes of one binary capture record: clock word, kind/code word, then the data words."""
    return 8 + 4 * capture_data_words(out_width)


def capture_file_name(language: str) -> str:
    """The capture file a harness of ``language`` writes: binary for Verilog, text for VHDL."""
    return CAPTURE_TEXT_NAME if language == "vhdl" else CAPTURE_BIN_NAME


def _data_fields(data: np.ndarray, in_width: int, bus: BusLayout | None) -> list[tuple[np.ndarray, int]]:
    """The data words as fields of 64 bits at most: a wide word's pixel fields (:attr:`BusLayout.wide`), zero-padded
    to ``in_width``."""
    if bus is None:
        bus = BusLayout("gray8")  # one int64 word a clock: any layout that is not wide splits it the same way
    return bus.word_fields(np.asarray(data), in_width)


def video_word_fields(sched: ClockSchedule, data: np.ndarray, in_width: int,
                      active_high: dict[str, bool] | None = None,
                      bus: BusLayout | None = None) -> list[tuple[np.ndarray, int]]:
    """The video word of every clock as ``(values, bits)`` fields, least significant first.

    ``active_high`` gives the input pins' polarity (:func:`vkit.video.words.input_levels`); None: syncs as
    the timing says, the rest active high. ``bus``: the layout of ``data`` (needed when its words are
    wide, i.e. given as pixel fields).
    """
    mark = np.zeros(sched.n_clocks, bool)
    mark[sched.frame_starts()] = True
    t = sched.timing
    polarity = active_high or {"in_hsync": t.hsync_active_high, "in_vsync": t.vsync_active_high, "in_de": True,
                               "in_valid": True, "in_enable": True}
    pins = input_levels(sched, polarity)
    flags = {"valid": pins["in_valid"], "de": pins["in_de"], "vsync": pins["in_vsync"], "hsync": pins["in_hsync"],
             "frame_mark": mark, "enable": pins["in_enable"]}
    return [*_data_fields(data, in_width, bus), *((flags[name], 1) for name in _VIDEO_FLAGS)]


def stream_word_fields(transfers: StreamTransfers, in_width: int,
                       bus: BusLayout | None = None) -> list[tuple[np.ndarray, int]]:
    """The stream word of every transfer as ``(values, bits)`` fields, least significant first (``bus`` as in
    :func:`video_word_fields`)."""
    keep = [] if transfers.keep is None or bus is None else [(transfers.keep, bus.lanes)]
    return [*_data_fields(transfers.data, in_width, bus), (transfers.eol, 1), (transfers.sof, 1),
            (transfers.gaps, GAP_BITS), *_data_fields(transfers.idle, in_width, bus), *keep]


def pack_fields(fields: list[tuple[np.ndarray, int]]) -> np.ndarray:
    """Pack ``(values, bits)`` fields (least significant first, 64 bits at most in all) into uint64 words."""
    n = int(np.asarray(fields[0][0]).size) if fields else 0
    out = np.zeros(n, np.uint64)
    offset = 0
    for values, bits in fields:
        v = np.asarray(values).astype(np.uint64).reshape(-1) & np.uint64((1 << bits) - 1)
        out |= v << np.uint64(offset)
        offset += bits
    return out
