"""Stimulus and expected-output files for the fast-path harness, from a :class:`~vkit.sim.case.SimCase`.

Everything here is numpy: a 640x480 frame at 800x525 timing (420,000 clocks) becomes a stimulus file
in a fraction of a second. The Verilog harness streams a binary file (``$fread``, big-endian words);
the VHDL harness reads hex text (one word per line). Word layouts are in :mod:`vkit.sim.fast.wire`; the
words themselves come from :mod:`vkit.video.words`, as the per-clock sources' do.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, BinaryIO, Callable

import numpy as np

from vkit.core.errors import ConfigError
from vkit.sim.case import SimCase
from vkit.sim.fast.wire import (
    GAP_BITS,
    MAX_IN_WIDTH,
    READY_WORDS,
    stream_word_bits,
    stream_word_fields,
    video_word_bits,
    video_word_fields,
    word_bytes,
)
from vkit.video.bus import BusLayout
from vkit.video.timing import ClockSchedule, schedule
from vkit.video.words import (
    INPUT_LEVEL_ROLES,
    StreamTransfers,
    idle_levels,
    ready_levels,
    stream_transfers,
    garbage_splits_evenly,
    video_data_words,
    video_input_facts,
)

__all__ = [
    "StimulusFiles",
    "drain_clocks",
    "stimulus_words_needed",
    "video_schedule_and_words",
    "stream_stimulus",
    "write_hex",
    "write_words_hex",
    "write_words",
    "write_stimulus",
    "streamed_stimulus",
    "expected_words",
    "expected_lane_fields",
    "write_expected",
    "fast_run_dir",
    "prepare_fast_run",
    "read_fast_run",
]

_DRAIN_MARGIN_CLOCKS = 64
"""Video: clocks watched after two more lines (pipeline latency beyond the line buffers; common practice, no source)."""


def drain_clocks(case: SimCase) -> int:
    """Clocks the harness keeps capturing after the last stimulus word (pipeline and line-buffer flush).

    Video: two lines plus 64 clocks (the last output line is flushed at the leading edge of vsync,
    which the schedule already contains). Stream: four lines plus 256 clocks, stretched by the
    average back-pressure; the harness stops earlier once every expected pixel arrived.
    """
    if case.family == "video":
        return 2 * case.video_timing().h_total + _DRAIN_MARGIN_CLOCKS
    factor = 1.0
    bp = case.backpressure_pattern()
    if bp is not None:
        factor = 1.0 + bp.probability * (bp.max_length + 1) / 2
    return int((4 * case.width + 256) * factor) + 256


def stimulus_words_needed(case: SimCase) -> int:
    """Player memory words the case needs (video: clocks of all frames; stream: transfers)."""
    n = case.frame_count()
    if case.family != "video":
        return n * case.width * case.height // case.pixels_per_clock
    t = case.video_timing()
    stalls = case.stall_pattern()
    enable = case.enable_pattern()
    if (stalls is None or stalls.probability == 0) and enable is None:
        return n * t.clocks_per_frame
    return schedule(t, n, stalls, enable).n_clocks


def video_schedule_and_words(case: SimCase) -> tuple[ClockSchedule, np.ndarray]:
    """The per-clock schedule and data-bus word of every clock, as the per-clock source drives them."""
    frames = case.load_frames()
    sched = schedule(case.video_timing(), int(frames.shape[0]), case.stall_pattern(), case.enable_pattern())
    words = video_data_words(sched, frames, case.bus_layout(), blanking=case.blanking,
                             blanking_value=case.blanking_value, seed=case.seed)
    return sched, words


def stream_stimulus(case: SimCase) -> StreamTransfers:
    """The stream family's transfers (pixels, markers, gaps, idle words), as the per-clock source sends them."""
    transfers = stream_transfers(case.load_frames(), case.bus_layout(), case.gap_pattern(), blanking=case.blanking,
                                 blanking_value=case.blanking_value, seed=case.seed, keep="in_keep" in case.signals)
    if transfers.gaps.max(initial=0) >= (1 << GAP_BITS):
        raise ConfigError(f"stream_gaps: a gap of {int(transfers.gaps.max())} clocks exceeds {(1 << GAP_BITS) - 1}; "
                          "lower max_length")
    return transfers


_HEX = np.frombuffer(b"0123456789abcdef", np.uint8)


def write_hex(path: str | Path, words: np.ndarray, bits: int) -> Path:
    """Write ``words`` (non-negative integers) one per line as zero-padded hex for ``$readmemh``.

    Args:
        path: output file.
        words: 1-D integer array, each < 2**bits.
        bits: word width in bits, 1..64; lines carry ceil(bits/4) digits.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    digits = max(1, (bits + 3) // 4)
    w = np.asarray(words).astype(np.uint64).reshape(-1)
    shifts = (np.arange(digits - 1, -1, -1, dtype=np.uint64) * np.uint64(4))[None, :]
    nib = ((w[:, None] >> shifts) & np.uint64(15)).astype(np.intp)
    chars = np.empty((w.size, digits + 1), np.uint8)
    chars[:, :digits] = _HEX[nib]
    chars[:, digits] = ord("\n")
    path.write_bytes(chars.tobytes())
    return path


def write_words(path: str | Path, fields: list[tuple[np.ndarray, int]], nbytes: int | None = None) -> Path:
    """Write words packed from bit fields as big-endian binary records, one per word, for ``$fread``.

    Args:
        path: output file.
        fields: ``(values, bits)`` from the least significant field up; values are non-negative
            integers (< 2**bits, bits <= 64), all arrays the same length.
        nbytes: bytes per record (default: the total bits rounded up to bytes).

    Returns:
        ``path``. Record ``i`` holds ``sum(values_k[i] << offset_k)`` in ``nbytes`` bytes, MSB first.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(_packed_bytes(fields, nbytes).tobytes())
    return path


def write_words_hex(path: str | Path, fields: list[tuple[np.ndarray, int]], nbytes: int | None = None,
                    digits: int | None = None) -> Path:
    """Write the records of :func:`write_words` as hex text instead, one record per line (``2 * nbytes``
    digits, most significant first), for a VHDL ``hread`` of ``8 * nbytes`` bits; ``digits``: only the
    last that many digits of each record (a ``hread`` of ``4 * digits`` bits; the fields must fit them)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    raw = _packed_bytes(fields, nbytes)
    chars = np.empty((raw.shape[0], 2 * raw.shape[1] + 1), np.uint8)
    chars[:, 0:-1:2] = _HEX[raw >> 4]
    chars[:, 1:-1:2] = _HEX[raw & 15]
    chars[:, -1] = ord("\n")
    if digits is not None:
        chars = chars[:, chars.shape[1] - 1 - int(digits):]
    path.write_bytes(np.ascontiguousarray(chars).tobytes())
    return path


_PACK_WORDS = 1 << 20
"""Words packed at a time: the packing's temporaries stay a few tens of MB however long the run."""


def _packed_bytes(fields: list[tuple[np.ndarray, int]], nbytes: int | None) -> np.ndarray:
    """The records of :func:`write_words` as an ``(n, nbytes)`` uint8 array, most significant byte first."""
    nbytes = int(nbytes or word_bytes(sum(b for _, b in fields)))
    n = int(np.asarray(fields[0][0]).size) if fields else 0
    out = np.zeros((n, nbytes), np.uint8)
    for lo in range(0, n, _PACK_WORDS):
        part = [(np.asarray(values).reshape(-1)[lo:lo + _PACK_WORDS], bits) for values, bits in fields]
        _pack_into(out[lo:lo + _PACK_WORDS], part, nbytes)
    return out


def _pack_into(out: np.ndarray, fields: list[tuple[np.ndarray, int]], nbytes: int) -> None:
    """Pack ``fields`` into the ``(k, nbytes)`` rows of ``out``."""
    offset = 0
    for values, bits in fields:
        v = np.asarray(values).astype(np.uint64).reshape(-1) & np.uint64((1 << bits) - 1)
        for byte in range(nbytes):
            lo = 8 * byte
            if lo >= offset + bits or lo + 8 <= offset:
                continue
            part = v >> np.uint64(lo - offset) if lo >= offset else v << np.uint64(offset - lo)
            out[:, nbytes - 1 - byte] |= (part & np.uint64(0xFF)).astype(np.uint8)
        offset += bits


@dataclass
class StimulusFiles:
    """The files and numbers one harness run needs.

    Attributes:
        stim: video: per-clock words; stream: per-transfer words (binary for Verilog, hex for VHDL).
        ready: stream ready pattern (hex, one bit per line), or None.
        words: words in ``stim``.
        ready_words: entries in ``ready`` (1 for video).
        drain: clocks captured after the stimulus.
        timeout: harness timeout in clocks from clock 0 (0 = none).
        expect_pixels: output words expected (frames x width x height / pixels a clock).
        input_meta: Capture meta the input side knows (frames_sent, first_input_clock,
            stall_pixels, input_vsync_count, input_hsync_per_frame).
        ready_levels: stream ready pattern (bool array), for the back-pressure pixels; None for video.
        language: "verilog" (binary stimulus) or "vhdl" (hex stimulus).
        hsync_active_high / vsync_active_high: polarity of the output sync pins (video).
        idle: the input pins' levels while nothing plays, as a bit mask (bit 0 hsync, 1 vsync, 2 data-enable,
            3 valid, 4 enable; :func:`vkit.video.words.idle_levels`), video.
    """

    stim: Path
    ready: Path | None
    words: int
    ready_words: int
    drain: int
    timeout: int
    expect_pixels: int
    input_meta: dict[str, Any] = field(default_factory=dict)
    ready_levels: np.ndarray | None = None
    language: str = "verilog"
    hsync_active_high: bool = True
    vsync_active_high: bool = True
    idle: int = 0b10000

    def plusargs(self, capture: str | Path) -> list[str]:
        """Verilog plusargs for ``vkit_harness`` (capture file path included)."""
        args = [f"+vkit_stim={self.stim}", f"+vkit_capture={capture}", f"+vkit_drain={self.drain}",
                f"+vkit_timeout={self.timeout}", f"+vkit_expect={self.expect_pixels}",
                f"+vkit_hs_high={int(self.hsync_active_high)}", f"+vkit_vs_high={int(self.vsync_active_high)}",
                f"+vkit_idle={self.idle}"]
        if self.ready is not None:
            args += [f"+vkit_ready={self.ready}", f"+vkit_ready_words={self.ready_words}"]
        return args

    def generics(self, capture: str | Path) -> dict[str, Any]:
        """VHDL generics for ``vkit_harness`` / ``vkit_fast_top`` (GHDL ``-gNAME=VALUE``, given at run time)."""
        common = {"STIM_FILE": str(self.stim), "CAPTURE_FILE": str(capture), "WORDS": self.words,
                  "DRAIN": self.drain, "TIMEOUT": self.timeout}
        if self.ready is not None:  # stream
            return {**common, "READY_FILE": str(self.ready), "RWORDS": self.ready_words, "EXPECT": self.expect_pixels}
        return {**common, "DEPTH": max(1, self.words), "HS_HIGH": int(self.hsync_active_high),
                "VS_HIGH": int(self.vsync_active_high), "IDLE": self.idle}

    def to_json(self, key: str) -> str:
        """The description :func:`read_fast_run` reads back, for the case fingerprint ``key``."""
        return json.dumps({
            "case": key,
            "paths": {"stim": str(self.stim), "ready": str(self.ready) if self.ready else None},
            "words": self.words, "ready_words": self.ready_words, "drain": self.drain, "timeout": self.timeout,
            "expect_pixels": self.expect_pixels, "input_meta": self.input_meta, "language": self.language,
            "hs_high": self.hsync_active_high, "vs_high": self.vsync_active_high, "idle": self.idle,
        })


def _write_video(case: SimCase, out: Path, in_width: int, language: str, timeout_rel: int | None) -> StimulusFiles:
    """Video: one word per clock of the schedule."""
    if in_width > MAX_IN_WIDTH:
        raise ConfigError(f"stimulus: input data width {in_width} bits is too wide for the player (max {MAX_IN_WIDTH})")
    pins = case.pin_polarity(INPUT_LEVEL_ROLES)
    if language == "verilog" and _frame_by_frame(case):
        path = out / "stim.bin"
        with open(path, "wb") as fh:
            _video_words_into(fh, case, in_width, pins)
        return _video_files(case, path, language, timeout_rel, schedule(case.video_timing(), case.frame_count()))
    sched, data = video_schedule_and_words(case)
    fields = video_word_fields(sched, data, in_width, pins, case.bus_layout())
    if language == "vhdl":
        stim = write_words_hex(out / "stim.hex", fields, digits=(video_word_bits(in_width) + 3) // 4)
    else:
        stim = write_words(out / "stim.bin", fields)
    return _video_files(case, stim, language, timeout_rel, sched)


def _video_files(case: SimCase, stim: Path, language: str, timeout_rel: int | None, sched: ClockSchedule) -> StimulusFiles:
    """The description of a video stimulus in ``stim`` played on ``sched``."""
    meta = video_input_facts(sched, case.pixels_per_clock)
    first = meta["first_input_clock"]
    timeout = int(timeout_rel) + (first or 0) if timeout_rel else 0
    pins = case.pin_polarity(INPUT_LEVEL_ROLES)
    idle = idle_levels(pins)
    return StimulusFiles(stim, None, int(sched.n_clocks), 1, drain_clocks(case), timeout,
                         int(sched.frames) * case.width * case.height // case.pixels_per_clock, meta, None, language,
                         case.active_high("out_hsync"), case.active_high("out_vsync"),
                         sum(int(idle[r]) << i for i, r in enumerate(INPUT_LEVEL_ROLES)))


def _frame_by_frame(case: SimCase) -> bool:
    """True when every frame of the case's video stimulus has the same schedule (no stalls, no clock enable)
    and the garbage words drawn a frame at a time equal one draw for the run."""
    stalls = case.stall_pattern()
    if (stalls is not None and stalls.probability > 0) or case.enable_pattern() is not None:
        return False
    layout = case.bus_layout()
    return not layout.wide and garbage_splits_evenly(layout.word_bits, case.video_timing().clocks_per_frame)


def _video_words_into(fh: BinaryIO, case: SimCase, in_width: int, pins: dict[str, bool]) -> None:
    """The words of :func:`video_schedule_and_words` written to ``fh`` a frame at a time (one schedule of one
    frame, the garbage words continuing one Generator), so memory holds one frame's words, not the run's."""
    frames = case.load_frames()
    one = schedule(case.video_timing(), 1)
    rng = np.random.default_rng(int(case.seed))
    for f in range(int(frames.shape[0])):
        data = video_data_words(one, frames[f:f + 1], case.bus_layout(), blanking=case.blanking,
                                blanking_value=case.blanking_value, seed=rng)
        fh.write(_packed_bytes(video_word_fields(one, data, in_width, pins, case.bus_layout()), None).tobytes())


def streamed_stimulus(case: SimCase, stim: Path, in_width: int | None = None
                      ) -> tuple[StimulusFiles, Callable[[BinaryIO], None]] | None:
    """A video stimulus the Verilog harness can read from ``stim`` while Python writes it (a pipe): its
    description, and the function that writes its words to an open file. None when the case's words cannot be
    written a frame at a time (stalls, a clock enable), or it is no video case: write the file first then."""
    width = int(in_width or case.bus_layout().word_bits)
    if case.family != "video" or width > MAX_IN_WIDTH or not _frame_by_frame(case):
        return None
    pins = case.pin_polarity(INPUT_LEVEL_ROLES)
    files = _video_files(case, stim, "verilog", case.effective_timeout_clocks(),
                         schedule(case.video_timing(), case.frame_count()))
    return files, lambda fh: _video_words_into(fh, case, width, pins)


def _write_stream(case: SimCase, out: Path, in_width: int, language: str, timeout_rel: int | None) -> StimulusFiles:
    """Stream: one word per transfer, and the sink's ready pattern."""
    bits = case.bus_layout().word_bits
    if in_width != bits:
        raise ConfigError(f"stimulus: stream input bus is {in_width} bits but the pixel format has {bits}; "
                          "give a design whose input width matches the pixel format")
    s = stream_stimulus(case)
    write, name = (write_words_hex, "stim.hex") if language == "vhdl" else (write_words, "stim.bin")
    keep_bits = case.bus_layout().lanes if s.keep is not None else 0
    stim = write(out / name, stream_word_fields(s, in_width, case.bus_layout()),
                 word_bytes(stream_word_bits(in_width, keep_bits)))
    levels = ready_levels(case.backpressure_pattern(), READY_WORDS)
    ready = write_hex(out / "ready.hex", levels.astype(np.uint64), 1)
    meta = {"frames_sent": s.frames, "first_input_clock": None, "stall_pixels": s.stall_pixels,
            "first_gap_clocks": int(s.gaps[0]) if s.gaps.size else 0}
    timeout = int(timeout_rel) if timeout_rel else 0
    transfers = int(s.data.shape[0])
    return StimulusFiles(stim, ready, transfers, int(levels.size), drain_clocks(case), timeout,
                         transfers, meta, levels, language)


def write_stimulus(case: SimCase, out_dir: str | Path, in_width: int | None = None, language: str = "verilog") -> StimulusFiles:
    """Write the case's stimulus files into ``out_dir`` and return what the harness run needs.

    Args:
        case: the case.
        out_dir: folder for ``stim.bin`` (Verilog) or ``stim.hex`` (VHDL), and ``ready.hex`` for the
            stream family.
        in_width: input data bus bits (default: the pixel format's bits).
        language: "verilog" or "vhdl": which harness reads the files.
    """
    if language not in ("verilog", "vhdl"):
        raise ConfigError(f"stimulus: language {language!r} is not known; use 'verilog' or 'vhdl'")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    width = int(in_width or case.bus_layout().word_bits)
    write = _write_video if case.family == "video" else _write_stream
    return write(case, out, width, language, case.effective_timeout_clocks())


def _expected_frames(expected: np.ndarray, mask: np.ndarray | None, out_width: int) -> tuple[np.ndarray, np.ndarray]:
    """The expected output as ``(F, H, W)`` int64 values and its check mask, both checked."""
    e = np.asarray(expected)
    if e.ndim == 2:
        e = e[None]
    if e.ndim != 3:
        raise ConfigError(f"expected output: shape {e.shape} is not (F, H, W) or (H, W); give model output frames")
    if e.size and (e.min() < 0 or e.max() >= (1 << out_width)):
        raise ConfigError(
            f"expected output: values {int(e.min())}..{int(e.max())} do not fit the {out_width}-bit output bus; "
            "give the right out_width"
        )
    m = np.ones(e.shape, bool) if mask is None else np.broadcast_to(np.asarray(mask, bool), e.shape)
    return e.astype(np.int64), m


def expected_words(expected: np.ndarray, mask: np.ndarray | None, out_width: int) -> np.ndarray:
    """Expected-output words ``{check, value[out_width-1:0]}`` per output pixel in output (raster) order.

    Args:
        expected: ``(F, H, W)`` or ``(H, W)`` non-negative integer model output.
        mask: bool, ``(H, W)`` or ``(F, H, W)``; False where the pixel is not checked (border). None = all.
        out_width: output data bus bits.
    """
    e, m = _expected_frames(expected, mask, out_width)
    return e.astype(np.uint64).reshape(-1) | (m.reshape(-1).astype(np.uint64) << np.uint64(out_width))


def expected_lane_fields(expected: np.ndarray, mask: np.ndarray | None, out_width: int,
                         bus: BusLayout, keep: bool = False) -> list[tuple[np.ndarray, int]]:
    """Expected-output words of a bus carrying ``bus.lanes`` pixels a word, as bit fields (least significant
    first): ``{check[lanes-1:0], value[out_width-1:0]}`` per output word in output order, where field ``j``
    (bits ``j * f .. j * f + f - 1``, ``f = out_width // lanes``) holds the pixel the lane order puts there and
    check bit ``j`` says whether that pixel is checked.

    ``keep=True`` (a design with per-lane valid masks): a line need not be a whole number of words; its last
    word's empty lanes are unchecked, and ``keep[lanes-1:0]`` on top gives each word's expected mask
    (:meth:`BusLayout.line_keeps`, bit ``j`` beside field ``j``).
    """
    lanes = bus.lanes
    if out_width % lanes:
        raise ConfigError(f"expected output: the {out_width}-bit output bus does not split into {lanes} equal "
                          "lanes; give an output bus of pixels_per_clock equal fields")
    e, m = _expected_frames(expected, mask, out_width // lanes)
    width = e.shape[-1]
    if width % lanes and not keep:
        raise ConfigError(f"expected output: width {width} is not a multiple of {lanes} pixels a clock")
    pad = [(0, 0), (0, 0), (0, bus.padded_width(width) - width)]
    e, m = np.pad(e, pad), np.pad(m, pad)  # the empty lanes of a line's last word: zero and unchecked
    field = out_width // lanes
    groups = e.reshape(-1, lanes)
    checks = m.reshape(-1, lanes)
    # field j of the word holds the pixel whose lane shift is j * field
    order = [next(k for k in range(lanes) if bus.lane_shift(k, field) == j * field) for j in range(lanes)]
    fields = [(groups[:, k], field) for k in order] + [(checks[:, k], 1) for k in order]
    if keep:
        fields.append((np.tile(bus.line_keeps(width), e.shape[0] * e.shape[1]), lanes))
    return fields


def write_expected(path: str | Path, expected: np.ndarray, mask: np.ndarray | None, out_width: int,
                   bus: BusLayout | None = None, keep: bool = False) -> tuple[Path, int]:
    """Write the expected output as a ``$readmemh`` file: :func:`expected_words` (``out_width + 1`` bits a line),
    or with several pixels a word :func:`expected_lane_fields` (``out_width + lanes`` bits a line, ``+ lanes``
    more with ``keep``). Returns the file and its number of lines (output words)."""
    if bus is None or bus.lanes == 1:
        words = expected_words(expected, mask, out_width)
        return write_hex(path, words, out_width + 1), int(words.size)
    fields = expected_lane_fields(expected, mask, out_width, bus, keep)
    bits = sum(b for _, b in fields)
    return write_words_hex(path, fields, digits=(bits + 3) // 4), int(fields[0][0].size)


def fast_run_dir(case: SimCase) -> Path:
    """The folder a fast-path run keeps its stimulus files in: beside the capture, ``<stem>_fast/``."""
    cap = Path(case.capture_file)
    return cap.parent / (cap.stem + "_fast")


def prepare_fast_run(case: SimCase, in_width: int | None = None, language: str = "verilog") -> StimulusFiles:
    """Write the fast-path stimulus files of ``case`` into :func:`fast_run_dir` (once) and describe them.

    The runner calls this (through :func:`vkit.sim.fast.build.fast_test_args`) before starting the
    simulator, to get the plusargs (Verilog, :meth:`StimulusFiles.plusargs`) or generics (VHDL,
    :meth:`StimulusFiles.generics`); the cocotb test (:mod:`vkit.sim.tb.fast`) reads the description back
    with :func:`read_fast_run`. Files are rewritten only when a fingerprint of the case, the width
    and the language changed.
    """
    key = _case_key(case, in_width, language)
    found = read_fast_run(case, key)
    if found is not None:
        return found
    out = fast_run_dir(case)
    stim = write_stimulus(case, out, in_width, language)
    (out / "stimulus.json").write_text(stim.to_json(key))
    return stim


def read_fast_run(case: SimCase, key: str | None = None) -> StimulusFiles | None:
    """The stimulus :func:`prepare_fast_run` wrote for ``case`` (any width/language when ``key`` is None), or None."""
    info = fast_run_dir(case) / "stimulus.json"
    if not info.is_file():
        return None
    data = json.loads(info.read_text())
    if (key is not None and data.get("case") != key) or not all(Path(p).is_file() for p in data["paths"].values() if p):
        return None
    ready = None
    if data["paths"].get("ready"):
        ready = np.frombuffer(Path(data["paths"]["ready"]).read_bytes(), np.uint8)[0::2] == ord("1")
    paths = {k: Path(v) if v else None for k, v in data["paths"].items()}
    return StimulusFiles(paths["stim"], paths["ready"], data["words"], data["ready_words"], data["drain"],
                         data["timeout"], data["expect_pixels"], data["input_meta"], ready, data["language"],
                         data["hs_high"], data["vs_high"], data.get("idle", 0b10000))


_KEY_FIELDS = ("family", "frames_file", "width", "height", "pixel_format", "timing", "stalls", "stream_gaps",
               "backpressure", "blanking", "blanking_value", "seed", "timeout_clocks", "enable", "polarity",
               "reset_active_high")
"""The case fields that shape the stimulus."""


def _case_key(case: SimCase, in_width: int | None = None, language: str = "verilog") -> str:
    """A fingerprint of everything in the case that shapes the stimulus (and of the frames file)."""
    data = case.to_dict()
    frames = Path(str(data.get("frames_file")))
    stat = frames.stat() if frames.is_file() else None
    keep = {k: data.get(k) for k in _KEY_FIELDS}
    keep["frames_stat"] = [stat.st_size, stat.st_mtime_ns] if stat else None
    keep["in_width"] = in_width
    keep["language"] = language
    return hashlib.sha256(json.dumps(keep, sort_keys=True, default=str).encode()).hexdigest()
