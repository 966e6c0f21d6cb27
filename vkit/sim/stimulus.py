"""Per-clock stimulus words and expected-output words for the fast-path harness, written as binary or hex files.

Everything here is numpy: a 640x480 frame at 800x525 timing (420,000 clocks) becomes a stimulus
file in a fraction of a second. The Verilog harness streams a binary file (``$fread``, big-endian
words); the VHDL harness reads hex text (one word per line). Word layouts are the ones :mod:`vkit.sim.harness` documents. The data words match
the per-clock video source (:mod:`vkit.sim.tb.video`): the same seed gives the same garbage on the bus
outside active video and on stall clocks.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.sim.harness import GAP_BITS, READY_WORDS, stream_word_bits, video_word_bits, word_bytes
from vkit.video.timing import ClockSchedule, StallPattern, VideoTiming, schedule, tiny

__all__ = [
    "READY_PATTERN_WORDS",
    "STREAM_TAIL_CLOCKS",
    "StimulusFiles",
    "case_timing",
    "drain_clocks",
    "stimulus_words_needed",
    "video_schedule_and_words",
    "video_stimulus_words",
    "stream_stimulus",
    "ready_pattern",
    "write_hex",
    "write_words",
    "write_stimulus",
    "expected_words",
    "write_expected",
    "fast_run_dir",
    "prepare_fast_run",
    "read_fast_run",
]

READY_PATTERN_WORDS = READY_WORDS
"""Clocks in the stream sink's ready pattern; the harness repeats it for longer runs."""

STREAM_TAIL_CLOCKS = 16  # same as vkit.sim.harness.STREAM_TAIL
"""Clocks the stream harness keeps capturing after every expected output pixel arrived."""


def _get(case: Any, key: str, default: Any = None) -> Any:
    if isinstance(case, dict):
        return case.get(key, default)
    return getattr(case, key, default)


def case_timing(case: Any) -> VideoTiming:
    """The case's video timing (``tiny(width, height)`` when it gives none)."""
    if hasattr(case, "video_timing"):
        return case.video_timing()
    t = _get(case, "timing")
    if t is None:
        return tiny(int(_get(case, "width")), int(_get(case, "height")))
    return VideoTiming.from_dict(t)


def _frames(case: Any) -> np.ndarray:
    if hasattr(case, "load_frames"):
        return case.load_frames()
    return np.load(Path(_get(case, "frames_file")), allow_pickle=False)


def _pixel_words(frames: np.ndarray, pixel_format: str) -> np.ndarray:
    """Bus words per pixel, int64 ``(N, H, W)``; rgb888 packed R<<16 | G<<8 | B (vkit.video.images.pack_rgb)."""
    if pixel_format == "rgb888":
        from vkit.video.images import pack_rgb

        return np.asarray(pack_rgb(frames), dtype=np.int64)
    return frames.astype(np.int64)


def _bits(case: Any) -> int:
    from vkit.sim.signals import pixel_bits

    return pixel_bits(str(_get(case, "pixel_format", "gray8")))


def _pattern(case: Any, key: str, method: str) -> StallPattern | None:
    if hasattr(case, method):
        return getattr(case, method)()
    value = _get(case, key)
    return StallPattern(**value) if value else None


def drain_clocks(case: Any) -> int:
    """Clocks the harness keeps capturing after the last stimulus word (pipeline and line-buffer flush).

    Video: two lines plus 64 clocks (the last output line is flushed at the leading edge of vsync,
    which the schedule already contains). Stream: four lines plus 256 clocks, stretched by the
    average back-pressure; the harness stops earlier once every expected pixel arrived.
    """
    if _get(case, "family", "video") == "video":
        return 2 * case_timing(case).h_total + 64
    width = int(_get(case, "width"))
    factor = 1.0
    bp = _pattern(case, "backpressure", "backpressure_pattern")
    if bp is not None:
        factor = 1.0 + bp.probability * (bp.max_length + 1) / 2
    return int((4 * width + 256) * factor) + 256


def stimulus_words_needed(case: Any) -> int:
    """Player memory words the case needs (video: clocks of all frames; stream: transfers)."""
    n = int(case.frame_count()) if hasattr(case, "frame_count") else int(_frames(case).shape[0])
    if _get(case, "family", "video") == "video":
        t = case_timing(case)
        stalls = _pattern(case, "stalls", "stall_pattern")
        if stalls is None or stalls.probability == 0:
            return n * t.clocks_per_frame
        return schedule(t, n, stalls).n_clocks
    return n * int(_get(case, "width")) * int(_get(case, "height"))


def video_schedule_and_words(case: Any) -> tuple[ClockSchedule, np.ndarray]:
    """The per-clock schedule and data-bus word of every clock, as the per-clock source drives them.

    Returns:
        (schedule, data): ``data`` is int64 of length ``schedule.n_clocks``: the pixel on pixel
        clocks; seeded random words (numpy PCG64, ``case.seed``) elsewhere when ``blanking`` is
        "random", else ``blanking_value`` with random words on stall clocks.
    """
    frames = _frames(case)
    fmt = str(_get(case, "pixel_format", "gray8"))
    t = case_timing(case)
    sched = schedule(t, int(frames.shape[0]), _pattern(case, "stalls", "stall_pattern"))
    bits = _bits(case)
    rng = np.random.default_rng(int(_get(case, "seed", 0)))
    garbage = rng.integers(0, 1 << bits, size=sched.n_clocks, dtype=np.int64)
    if _get(case, "blanking", "random") == "random":
        words = garbage
    else:
        words = np.full(sched.n_clocks, int(_get(case, "blanking_value", 0)), np.int64)
        stall = sched.de & ~sched.valid
        words[stall] = garbage[stall]
    pix = sched.x >= 0
    packed = _pixel_words(frames, fmt)
    words[pix] = packed[sched.frame[pix], sched.y[pix], sched.x[pix]]
    return sched, words


def video_stimulus_words(sched: ClockSchedule, data: np.ndarray, in_width: int) -> np.ndarray:
    """Pack per-clock ``{frame_mark, hsync, vsync, de, valid, data}`` words (uint64, see :mod:`vkit.sim.harness`)."""
    if in_width > 58:
        raise ConfigError(f"stimulus: input data width {in_width} bits is too wide for the player (max 58)")
    mark = np.zeros(sched.n_clocks, bool)
    mark[sched.frame_starts()] = True
    w = data.astype(np.uint64) & np.uint64((1 << in_width) - 1)
    for bit, arr in ((0, sched.valid), (1, sched.de), (2, sched.vsync), (3, sched.hsync), (4, mark)):
        w |= arr.astype(np.uint64) << np.uint64(in_width + bit)
    return w


def ready_pattern(pattern: StallPattern | None, words: int = READY_PATTERN_WORDS) -> np.ndarray:
    """The sink's per-clock ready levels (bool, ``words`` long), the same draw as the per-clock sink.

    Before each clock with ready high, a ready-low run of 1..``max_length`` clocks starts with
    ``pattern.probability``; the draws come from numpy PCG64 seeded with ``pattern.seed`` in chunks of
    4096 clocks, exactly as :class:`vkit.sim.tb.stream.StreamSink` makes them, so both paths see the same
    back-pressure for the first ``words`` clocks (the harness then repeats the pattern).
    """
    if pattern is None or pattern.probability == 0:
        return np.ones(words, bool)
    rng = np.random.default_rng(pattern.seed)
    chunk = 4096
    out = np.ones(((words + chunk - 1) // chunk) * chunk, bool)
    carry = 0
    for base in range(0, out.size, chunk):
        starts = rng.random(chunk) < pattern.probability
        lengths = rng.integers(1, pattern.max_length + 1, size=chunk)
        seg = out[base:base + chunk]
        i = 0
        if carry:
            seg[:carry] = False
            i = carry
        carry = 0
        for j in np.flatnonzero(starts[i:]) + i:
            if j < i:
                continue
            end = int(j) + int(lengths[j])
            seg[j:min(end, chunk)] = False
            carry = max(0, end - chunk)
            i = end
    return out[:words]


@dataclass
class _Stream:
    pixels: np.ndarray  # {sof, eol, data}
    gaps: np.ndarray  # {idle, gap}
    idle: np.ndarray
    ready: np.ndarray
    stall_pixels: list[list[int]]


def stream_stimulus(case: Any) -> _Stream:
    """Stream family: per-transfer pixel words, idle gaps and idle data, and the sink's ready pattern."""
    frames = _frames(case)
    fmt = str(_get(case, "pixel_format", "gray8"))
    n, h, w = int(frames.shape[0]), int(frames.shape[1]), int(frames.shape[2])
    data = _pixel_words(frames, fmt).reshape(-1)
    gaps_p = _pattern(case, "stream_gaps", "gap_pattern")
    gaps = gaps_p.draw(n, h, w).reshape(-1).astype(np.int64) if gaps_p else np.zeros(data.size, np.int64)
    if gaps.max(initial=0) >= (1 << GAP_BITS):
        raise ConfigError(f"stream_gaps: a gap of {int(gaps.max())} clocks exceeds {(1 << GAP_BITS) - 1}; lower max_length")
    rng = np.random.default_rng(int(_get(case, "seed", 0)))
    idle = rng.integers(0, 1 << _bits(case), size=data.size, dtype=np.int64)
    if _get(case, "blanking", "random") != "random":
        idle[:] = int(_get(case, "blanking_value", 0))
    col = np.tile(np.arange(w), n * h)
    row = np.tile(np.repeat(np.arange(h), w), n)
    sof = (col == 0) & (row == 0)
    eol = col == w - 1
    bits = _bits(case)
    pixels = (data.astype(np.uint64) | (eol.astype(np.uint64) << np.uint64(bits)) | (sof.astype(np.uint64) << np.uint64(bits + 1)))
    gap_words = gaps.astype(np.uint64) | (idle.astype(np.uint64) << np.uint64(GAP_BITS))
    ready = ready_pattern(_pattern(case, "backpressure", "backpressure_pattern"))
    f_idx, y_idx, x_idx = np.unravel_index(np.flatnonzero(gaps), (n, h, w))
    stalls = np.stack([f_idx, y_idx, x_idx], axis=1).astype(int).tolist()
    return _Stream(pixels, gap_words, idle, ready, stalls)


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
    total = sum(b for _, b in fields)
    nbytes = int(nbytes or word_bytes(total))
    n = int(np.asarray(fields[0][0]).size) if fields else 0
    out = np.zeros((n, nbytes), np.uint8)
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
    path.write_bytes(out.tobytes())
    return path


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
        expect_pixels: output pixels expected (frames x width x height).
        input_meta: Capture meta the input side knows (frames_sent, first_input_clock,
            stall_pixels, input_vsync_count, input_hsync_per_frame).
        ready_levels: stream ready pattern (bool array), for the back-pressure pixels; None for video.
        language: "verilog" (binary stimulus) or "vhdl" (hex stimulus).
        hsync_active_high / vsync_active_high: sync polarity of the timing (video).
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

    def plusargs(self, capture: str | Path) -> list[str]:
        """Verilog plusargs for ``vkit_harness`` (capture file path included)."""
        args = [f"+vkit_stim={self.stim}", f"+vkit_capture={capture}", f"+vkit_drain={self.drain}",
                f"+vkit_timeout={self.timeout}", f"+vkit_expect={self.expect_pixels}",
                f"+vkit_hs_high={int(self.hsync_active_high)}", f"+vkit_vs_high={int(self.vsync_active_high)}"]
        if self.ready is not None:
            args += [f"+vkit_ready={self.ready}", f"+vkit_ready_words={self.ready_words}"]
        return args

    def generics(self, capture: str | Path) -> dict[str, Any]:
        """VHDL generics for ``vkit_harness`` / ``vkit_fast_top`` (GHDL ``-gNAME=VALUE``, given at run time)."""
        return {"STIM_FILE": str(self.stim), "CAPTURE_FILE": str(capture), "WORDS": self.words,
                "DEPTH": max(1, self.words), "DRAIN": self.drain, "TIMEOUT": self.timeout,
                "HS_HIGH": int(self.hsync_active_high), "VS_HIGH": int(self.vsync_active_high)}


def _leading_edges(level: np.ndarray, active: bool) -> np.ndarray:
    on = level if active else ~level
    prev = np.concatenate(([False], on[:-1]))
    return np.flatnonzero(on & ~prev)


def _sync_counts(hs_edges: np.ndarray, vs_edges: np.ndarray) -> list[int]:
    bounds = np.searchsorted(hs_edges, vs_edges, side="left")
    return [int(b) for b in np.diff(np.concatenate(([0], bounds)))]


def write_stimulus(case: Any, out_dir: str | Path, in_width: int | None = None, language: str = "verilog") -> StimulusFiles:
    """Write the case's stimulus files into ``out_dir`` and return what the harness run needs.

    Args:
        case: a :class:`vkit.sim.case.SimCase`.
        out_dir: folder for ``stim.bin`` (Verilog) or ``stim.hex`` (VHDL), and ``ready.hex`` for the
            stream family.
        in_width: input data bus bits (default: the pixel format's bits).
        language: "verilog" or "vhdl" (video only): which harness reads the files.
    """
    if language not in ("verilog", "vhdl"):
        raise ConfigError(f"stimulus: language {language!r} is not known; use 'verilog' or 'vhdl'")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    in_width = int(in_width or _bits(case))
    width, height = int(_get(case, "width")), int(_get(case, "height"))
    timeout_rel = case.effective_timeout_clocks() if hasattr(case, "effective_timeout_clocks") else _get(case, "timeout_clocks")
    drain = drain_clocks(case)
    if _get(case, "family", "video") == "video":
        sched, data = video_schedule_and_words(case)
        t = sched.timing
        if language == "vhdl":
            words = video_stimulus_words(sched, data, in_width)
            stim = write_hex(out / "stim.hex", words, video_word_bits(in_width))
        else:
            mark = np.zeros(sched.n_clocks, bool)
            mark[sched.frame_starts()] = True
            stim = write_words(out / "stim.bin", [(data, in_width), (sched.valid, 1), (sched.de, 1), (sched.vsync, 1),
                                                  (sched.hsync, 1), (mark, 1)])
        first = int(np.argmax(sched.valid)) if sched.valid.any() else None
        vs_edges = _leading_edges(sched.vsync, t.vsync_active_high)
        hs_edges = _leading_edges(sched.hsync, t.hsync_active_high)
        meta = {
            "frames_sent": int(sched.frames),
            "first_input_clock": first,
            "stall_pixels": sched.stall_pixels.tolist(),
            "input_vsync_count": int(vs_edges.size),
            "input_hsync_per_frame": _sync_counts(hs_edges, vs_edges),
        }
        timeout = int(timeout_rel) + (first or 0) if timeout_rel else 0
        return StimulusFiles(stim, None, int(sched.n_clocks), 1, drain, timeout,
                             int(sched.frames) * width * height, meta, None, language,
                             bool(t.hsync_active_high), bool(t.vsync_active_high))
    if language != "verilog":
        raise ConfigError("stimulus: the stream family has a Verilog harness only; use a Verilog simulator")
    bits = _bits(case)
    if in_width != bits:
        raise ConfigError(f"stimulus: stream input bus is {in_width} bits but the pixel format has {bits}; "
                          "give a design whose input width matches the pixel format")
    s = stream_stimulus(case)
    stim = write_words(out / "stim.bin", [(s.pixels, bits + 2), (s.gaps, GAP_BITS + bits)],
                       word_bytes(stream_word_bits(in_width)))
    ready = write_hex(out / "ready.hex", s.ready.astype(np.uint64), 1)
    first_gap = int(s.gaps[0] & np.uint64((1 << GAP_BITS) - 1)) if s.gaps.size else 0
    frames_sent = s.pixels.size // (width * height)
    meta = {"frames_sent": int(frames_sent), "first_input_clock": None, "stall_pixels": s.stall_pixels,
            "first_gap_clocks": first_gap}
    timeout = int(timeout_rel) if timeout_rel else 0
    return StimulusFiles(stim, ready, int(s.pixels.size), int(s.ready.size), drain, timeout,
                         int(s.pixels.size), meta, s.ready, language)


def expected_words(expected: np.ndarray, mask: np.ndarray | None, out_width: int) -> np.ndarray:
    """Expected-output words ``{check, value[out_width-1:0]}`` per output pixel in output (raster) order.

    Args:
        expected: ``(F, H, W)`` or ``(H, W)`` non-negative integer model output.
        mask: bool, ``(H, W)`` or ``(F, H, W)``; False where the pixel is not checked (border). None = all.
        out_width: output data bus bits.
    """
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
    return e.astype(np.uint64).reshape(-1) | (m.reshape(-1).astype(np.uint64) << np.uint64(out_width))


def write_expected(path: str | Path, expected: np.ndarray, mask: np.ndarray | None, out_width: int) -> Path:
    """Write :func:`expected_words` as a ``$readmemh`` file (``out_width + 1`` bits per line)."""
    return write_hex(path, expected_words(expected, mask, out_width), out_width + 1)


def fast_run_dir(case: Any) -> Path:
    """The folder a fast-path run keeps its stimulus files in: beside the capture, ``<stem>_fast/``."""
    cap = Path(str(_get(case, "capture_file")))
    return cap.parent / (cap.stem + "_fast")


def prepare_fast_run(case: Any, in_width: int | None = None, language: str = "verilog") -> StimulusFiles:
    """Write the fast-path stimulus files of ``case`` into :func:`fast_run_dir` (once) and describe them.

    The runner calls this (through :func:`vkit.sim.harness.fast_test_args`) before starting the
    simulator, to get the plusargs (Verilog, :meth:`StimulusFiles.plusargs`) or generics (VHDL,
    :meth:`StimulusFiles.generics`); the cocotb test (:mod:`vkit.sim.tb.fast`) reads the description back
    with :func:`read_fast_run`. Files are rewritten only when a fingerprint of the case, the width
    and the language changed.
    """
    import json

    out = fast_run_dir(case)
    key = _case_key(case, in_width, language)
    found = read_fast_run(case, key)
    if found is not None:
        return found
    stim = write_stimulus(case, out, in_width, language)
    (out / "stimulus.json").write_text(json.dumps({
        "case": key,
        "paths": {"stim": str(stim.stim), "ready": str(stim.ready) if stim.ready else None},
        "words": stim.words, "ready_words": stim.ready_words, "drain": stim.drain, "timeout": stim.timeout,
        "expect_pixels": stim.expect_pixels, "input_meta": stim.input_meta, "language": stim.language,
        "hs_high": stim.hsync_active_high, "vs_high": stim.vsync_active_high,
    }))
    return stim


def read_fast_run(case: Any, key: str | None = None) -> StimulusFiles | None:
    """The stimulus :func:`prepare_fast_run` wrote for ``case`` (any width/language when ``key`` is None), or None."""
    import json

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
                         data["hs_high"], data["vs_high"])


def _case_key(case: Any, in_width: int | None = None, language: str = "verilog") -> str:
    """A fingerprint of everything in the case that shapes the stimulus (and of the frames file)."""
    import hashlib
    import json

    data = case.to_dict() if hasattr(case, "to_dict") else dict(case)
    frames = Path(str(data.get("frames_file")))
    stat = frames.stat() if frames.is_file() else None
    keep = {k: data.get(k) for k in ("family", "frames_file", "width", "height", "pixel_format", "timing", "stalls",
                                     "stream_gaps", "backpressure", "blanking", "blanking_value", "seed", "timeout_clocks")}
    keep["frames_stat"] = [stat.st_size, stat.st_mtime_ns] if stat else None
    keep["in_width"] = in_width
    keep["language"] = language
    return hashlib.sha256(json.dumps(keep, sort_keys=True, default=str).encode()).hexdigest()
