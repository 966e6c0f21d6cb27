"""The schedule -> words encoding: what the input bus carries on every clock, computed once for every path.

The per-clock cocotb sources (:mod:`vkit.sim.tb.video`, :mod:`vkit.sim.tb.stream`) and the fast-path
stimulus writer (:mod:`vkit.sim.fast.stimulus`) both take their words from here, so the two paths drive
identical buses: the same pixels, the same seeded garbage outside active video and on stall clocks, the
same gaps, the same sink back-pressure, and the same input-side facts (sync counts, stalled pixels).
Pure numpy; no simulator.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from vkit.video.bus import BusLayout
from vkit.video.timing import ClockSchedule, StallPattern

__all__ = [
    "BLANKING_MODES",
    "READY_CHUNK_CLOCKS",
    "video_data_words",
    "garbage_splits_evenly",
    "leading_edges",
    "sync_counts",
    "video_input_facts",
    "tiled_input_facts",
    "INPUT_LEVEL_ROLES",
    "input_levels",
    "idle_levels",
    "samples_between",
    "StreamTransfers",
    "stream_transfers",
    "ready_chunk",
    "ready_levels",
]

BLANKING_MODES: tuple[str, ...] = ("random", "constant")
"""What the data bus carries outside active video: seeded random words, or one constant word."""

READY_CHUNK_CLOCKS = 4096
"""Clocks of sink ready levels drawn per call of the generator (the draw order depends on it)."""


def _garbage(seed: int | np.random.Generator, layout: BusLayout, n: int) -> np.ndarray:
    """``n`` seeded random words of ``layout`` (numpy PCG64): the bus content nobody may sample.

    ``seed`` may be a Generator already in use: the words then continue its stream (see
    :func:`garbage_splits_evenly` for when drawing in parts gives the same words as one draw)."""
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(int(seed))
    return layout.random_words(rng, n)


def garbage_splits_evenly(bits: int, part_clocks: int) -> bool:
    """True when drawing the garbage words of a ``bits``-bit bus (one int64 a word, not :attr:`BusLayout.wide`)
    in parts of ``part_clocks`` words from one Generator gives the words of one draw. NumPy draws a
    power-of-two range without rejection: one 64-bit draw a word above 32 bits, one half of a 64-bit draw a
    word up to 32 bits (a part of odd length would drop the other half; checked against one draw in
    tests/test_capture_stream.py)."""
    return bits > 32 or part_clocks % 2 == 0


def video_data_words(
    sched: ClockSchedule,
    frames: np.ndarray,
    bus: BusLayout | str,
    *,
    blanking: str = "random",
    blanking_value: int = 0,
    seed: int | np.random.Generator = 0,
) -> np.ndarray:
    """The data-bus word of every clock of ``sched``.

    Args:
        sched: the per-clock schedule (:func:`vkit.video.timing.schedule`) of ``frames``, on the timing
            counted in bus clocks (:func:`vkit.video.bus.clock_timing`) when the bus carries several
            pixels a clock.
        frames: ``(N, H, W)`` (grey) or ``(N, H, W, 3)`` (RGB) samples of the active size in pixels.
        bus: the word layout (:class:`vkit.video.bus.BusLayout`), or a pixel format name for one pixel a
            clock in RGB order.
        blanking: "random": seeded random words on every clock that carries no pixel; "constant":
            ``blanking_value`` there, but still random words on stall clocks (data-enable high, valid low).
        blanking_value: the constant blanking word, >= 0.
        seed: seed of the random words (numpy PCG64), or a Generator whose stream they continue.

    Returns:
        int64 array of length ``sched.n_clocks``; ``(sched.n_clocks, lanes)`` pixel fields for a word wider
        than :data:`vkit.video.bus.MAX_WORD_BITS` (:attr:`BusLayout.wide`).
    """
    layout = BusLayout.of(bus)
    garbage = _garbage(seed, layout, sched.n_clocks)
    if blanking == "random":
        words = garbage
    else:
        words = layout.constant_words(blanking_value, sched.n_clocks)
        stall = sched.de & ~sched.valid
        words[stall] = garbage[stall]
    _place_pixels(words, sched, frames, layout)
    if sched.enable is not None:
        # a clock-enabled source holds each sample from the clock after the previous enable to its own
        words = words[_next_enabled(sched.enable)]
    return words


def _place_pixels(words: np.ndarray, sched: ClockSchedule, frames: np.ndarray, layout: BusLayout) -> None:
    """Put every frame's bus words on the clocks that carry them, a frame at a time (one frame's words and
    indices in memory, not the whole run's), the clocks found by the frame numbers, which never go down."""
    n = int(frames.shape[0])
    if not bool(np.all(sched.frame[1:] >= sched.frame[:-1])):  # not a schedule() result: all frames at once
        pix = sched.x >= 0
        words[pix] = layout.bus_words(frames)[sched.frame[pix], sched.y[pix], sched.x[pix]]
        return
    bounds = np.searchsorted(sched.frame, np.arange(n + 1, dtype=sched.frame.dtype))  # no int64 copy of the frames
    for f in range(n):
        lo, hi = int(bounds[f]), int(bounds[f + 1])
        pix = np.flatnonzero(sched.x[lo:hi] >= 0) + lo
        words[pix] = layout.bus_words(frames[f:f + 1])[0][sched.y[pix], sched.x[pix]]


def _next_enabled(enable: np.ndarray) -> np.ndarray:
    """For every clock, the index of the first enabled clock at or after it (the last clock is enabled)."""
    on = np.flatnonzero(enable)
    return on[np.searchsorted(on, np.arange(enable.size))]


INPUT_LEVEL_ROLES: tuple[str, ...] = ("in_hsync", "in_vsync", "in_de", "in_valid", "in_enable")
"""The input control roles whose pin levels :func:`input_levels` gives."""


def input_levels(sched: ClockSchedule, active_high: dict[str, bool]) -> dict[str, np.ndarray]:
    """The level on each input control pin on every clock, with the pin's own polarity.

    The schedule's syncs carry the timing's polarity (what the video standard puts on the wire); a pin
    that is active high is high during the pulse whatever the timing says, an active-low pin low.

    Args:
        sched: the schedule.
        active_high: role -> True when the pin is active high, for every role of :data:`INPUT_LEVEL_ROLES`.

    Returns:
        role -> bool level array of length ``sched.n_clocks``.
    """
    t = sched.timing
    asserted = {
        "in_hsync": sched.hsync == t.hsync_active_high,
        "in_vsync": sched.vsync == t.vsync_active_high,
        "in_de": sched.de,
        "in_valid": sched.valid,
        "in_enable": sched.enabled,
    }
    return {role: on if active_high[role] else ~on for role, on in asserted.items()}


def idle_levels(active_high: dict[str, bool]) -> dict[str, bool]:
    """The input pins' levels while no schedule plays (reset, drain): syncs, data-enable and valid
    inactive, the enable active (a clock-enabled design keeps flushing its pipeline)."""
    return {role: (role == "in_enable") == active_high[role] for role in INPUT_LEVEL_ROLES}


def samples_between(enable: np.ndarray | None, first: int | None, last: int | None) -> int | None:
    """Enabled input clocks in ``[first, last)``: a latency in samples; None when either end is unknown.

    Without an enable pattern (``enable`` None) every clock is a sample and this is ``last - first``; past
    the end of the schedule the enable stays high (the source leaves it on while the design drains).
    """
    if first is None or last is None:
        return None
    first, last = int(first), int(last)
    if enable is None:
        return last - first
    lo, hi = max(0, first), max(0, last)
    inside = int(np.count_nonzero(enable[lo:min(hi, enable.size)]))
    return inside + max(0, hi - max(lo, enable.size))


def leading_edges(level: np.ndarray, active: bool) -> np.ndarray:
    """Clock indices where ``level`` becomes ``active`` (the clock before index 0 counts as inactive)."""
    on = level if active else ~level
    prev = np.concatenate(([False], on[:-1]))
    return np.flatnonzero(on & ~prev)


def sync_counts(hsync_edges: np.ndarray, vsync_edges: np.ndarray) -> list[int]:
    """Hsync leading edges per vsync period.

    Entry ``k`` counts the hsync leading edges after vsync leading edge ``k - 1`` (the start of the run for
    ``k = 0``) and before vsync leading edge ``k``; hsync pulses after the last vsync are not listed. The
    monitor counts its output the same way, so input and output lists compare entry by entry.
    """
    bounds = np.searchsorted(np.asarray(hsync_edges, np.int64), np.asarray(vsync_edges, np.int64), side="left")
    return [int(b) for b in np.diff(np.concatenate(([0], bounds)))]


def video_input_facts(sched: ClockSchedule, lanes: int = 1) -> dict[str, object]:
    """The Capture meta the video input side knows before the run: frames, first valid clock, stalls, syncs.

    With ``lanes`` pixels a clock, a stalled clock's column is given in pixels (its group's first pixel)."""
    t = sched.timing
    vs_edges = leading_edges(sched.vsync, t.vsync_active_high)
    hs_edges = leading_edges(sched.hsync, t.hsync_active_high)
    return {
        "frames_sent": int(sched.frames),
        "first_input_clock": int(np.argmax(sched.taken)) if sched.taken.any() else None,
        "stall_pixels": (sched.stall_pixels * np.array([1, 1, lanes])).tolist() if lanes > 1 else sched.stall_pixels.tolist(),
        "input_vsync_count": int(vs_edges.size),
        "input_hsync_per_frame": sync_counts(hs_edges, vs_edges),
        "input_first_vsync_clock": int(vs_edges[0]) if vs_edges.size else None,
        "input_first_hsync_clock": int(hs_edges[0]) if hs_edges.size else None,
    }


def _tiled_edges(level: np.ndarray, active: bool, frames: int) -> np.ndarray:
    """:func:`leading_edges` of ``level`` repeated ``frames`` times back to back, from one copy: a later copy
    starts with an edge only where the copy before it ended inactive."""
    edges = leading_edges(level, active)
    ends_on = bool(level[-1]) == active if level.size else False
    later = edges[1:] if edges.size and edges[0] == 0 and ends_on else edges
    return np.concatenate([edges, *(later + k * int(level.size) for k in range(1, frames))]).astype(np.int64)


def tiled_input_facts(one: ClockSchedule, frames: int, lanes: int = 1) -> dict[str, object]:
    """:func:`video_input_facts` of ``frames`` frames played back to back on the one-frame schedule ``one``
    (no stalls, no clock enable: every frame's clocks are the same), worked out from that one frame, so a long
    run of big frames never builds the whole run's schedule (a few bytes a clock)."""
    t = one.timing
    vs_edges = _tiled_edges(one.vsync, t.vsync_active_high, frames)
    hs_edges = _tiled_edges(one.hsync, t.hsync_active_high, frames)
    return {
        **video_input_facts(one, lanes),
        "frames_sent": int(frames),
        "input_vsync_count": int(vs_edges.size),
        "input_hsync_per_frame": sync_counts(hs_edges, vs_edges),
        "input_first_vsync_clock": int(vs_edges[0]) if vs_edges.size else None,
        "input_first_hsync_clock": int(hs_edges[0]) if hs_edges.size else None,
    }


@dataclass
class StreamTransfers:
    """Every transfer of a stream-family run, in order (all arrays one entry per pixel).

    Attributes:
        data: the pixel's data-bus word (int64; ``(n, lanes)`` pixel fields for a wide word, as
            :func:`video_data_words` gives).
        sof: start of frame (first pixel of each frame).
        eol: end of line (last pixel of each line).
        gaps: idle clocks (valid low) before the pixel is offered, int64.
        idle: the data word driven during those idle clocks (int64, or fields as ``data``).
        stall_pixels: ``[frame, line, column]`` of every pixel that came right after a gap.
        frames: frames in the run.
        keep: the per-lane valid mask of every transfer (int64, :meth:`BusLayout.line_keeps`), or None for a
            bus without one.
    """

    data: np.ndarray
    sof: np.ndarray
    eol: np.ndarray
    gaps: np.ndarray
    idle: np.ndarray
    stall_pixels: list[list[int]]
    frames: int
    keep: np.ndarray | None = None


def stream_transfers(
    frames: np.ndarray,
    bus: BusLayout | str,
    gaps: StallPattern | None = None,
    *,
    blanking: str = "random",
    blanking_value: int = 0,
    seed: int = 0,
    keep: bool = False,
) -> StreamTransfers:
    """The stream source's transfers: pixels in raster order with their markers, idle gaps and idle words.

    Args:
        frames: ``(N, H, W)`` or ``(N, H, W, 3)`` samples.
        bus: the word layout, or a pixel format name (one pixel a transfer). With several pixels a
            transfer, a transfer carries one group, and ``eol`` marks the group that ends a line.
        gaps: chance and longest length of an idle gap before each pixel (seeded), or None for none.
        blanking: "random" (seeded random idle words) or "constant" (``blanking_value``).
        blanking_value: the constant idle word.
        seed: seed of the random idle words (numpy PCG64).
        keep: the bus has a per-lane valid mask: a line may end in a partly filled beat (its empty lanes carry
            seeded random fields) and :attr:`StreamTransfers.keep` holds each transfer's mask. Gaps are then
            drawn a beat (``gaps.draw`` over the beats of a line).
    """
    layout = BusLayout.of(bus)
    words = layout.bus_words(frames, fill_seed=seed + 1 if keep else None)
    n, h, w = (int(v) for v in words.shape[:3])
    data = words.reshape((n * h * w,) + words.shape[3:])
    gap_arr = gaps.draw(n, h, w) if gaps is not None else np.zeros((n, h, w), np.int64)
    idle = _garbage(seed, layout, n * h * w)
    if blanking != "random":
        idle = layout.constant_words(blanking_value, n * h * w)
    index = np.arange(n * h * w)
    return StreamTransfers(
        data=data,
        sof=index % (h * w) == 0,
        eol=index % w == w - 1,
        gaps=gap_arr.reshape(-1).astype(np.int64),
        idle=idle,
        stall_pixels=np.argwhere(gap_arr > 0).astype(int).tolist(),
        frames=n,
        keep=np.tile(layout.line_keeps(int(np.asarray(frames).shape[2])), n * h) if keep else None,
    )


def ready_chunk(
    rng: np.random.Generator, pattern: StallPattern, carry: int, clocks: int = READY_CHUNK_CLOCKS
) -> tuple[np.ndarray, int]:
    """The sink's ready levels for the next ``clocks`` clocks, and the low clocks that spill into the next chunk.

    Before each clock with ready high, a ready-low run of 1..``max_length`` clocks (uniform) starts with
    ``pattern.probability``. One call draws ``clocks`` start chances, then ``clocks`` lengths, from ``rng``.

    Args:
        rng: the sink's generator (numpy PCG64 seeded with ``pattern.seed``), advanced by the call.
        pattern: the back-pressure pattern.
        carry: low clocks left over from the previous chunk.
        clocks: chunk length.

    Returns:
        (levels, carry): bool ready levels, and the low clocks left for the next chunk.
    """
    starts = rng.random(clocks) < pattern.probability
    lengths = rng.integers(1, pattern.max_length + 1, size=clocks)
    out = np.ones(clocks, bool)
    out[:carry] = False
    i = carry
    left = 0
    for j in np.flatnonzero(starts[i:]) + i:
        if j < i:
            continue
        end = int(j) + int(lengths[j])
        out[j:min(end, clocks)] = False
        left = max(0, end - clocks)
        i = end
    return out, left


def ready_levels(pattern: StallPattern | None, clocks: int) -> np.ndarray:
    """The first ``clocks`` ready levels of a sink with back-pressure ``pattern`` (all high without one)."""
    if pattern is None or pattern.probability == 0:
        return np.ones(clocks, bool)
    rng = np.random.default_rng(pattern.seed)
    chunks: list[np.ndarray] = []
    carry = 0
    for _ in range((clocks + READY_CHUNK_CLOCKS - 1) // READY_CHUNK_CLOCKS):
        levels, carry = ready_chunk(rng, pattern, carry)
        chunks.append(levels)
    return np.concatenate(chunks)[:clocks] if chunks else np.ones(0, bool)
