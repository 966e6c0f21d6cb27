"""How big a frame and a case may be, checked before any pixel is made.

A case holds its input frames, the model's stage arrays, the capture and the scoreboard's arrays in
memory at once, and the simulator plays every pixel clock by clock. These limits turn a size that would
exhaust the machine (``frames = 1000000000``, a 100000x100000 pattern) into one line naming the limit
and its reason, at config time, instead of a MemoryError or a run that grows until it is killed.
"""

from __future__ import annotations

import os

from vkit.core.validate import fail

__all__ = [
    "MAX_FRAME_PIXELS",
    "MAX_FRAMES",
    "BYTES_PER_PIXEL",
    "MEMORY_SHARE",
    "memory_budget",
    "check_frame_size",
    "check_case_size",
]

MAX_FRAME_PIXELS = 7680 * 4320
"""Pixels per frame: 8K UHD, the largest image format of ITU-R BT.2020 (7680x4320, value from memory).
A 3x3 window filter meets nothing in a bigger frame that a smaller one does not show, and a frame this
size already takes minutes to simulate clock by clock."""
MAX_FRAMES = 10_000
"""Frames per case: each frame is scored and reported on its own; a longer run is better split into
seeds or cases, which run in parallel and report separately (common practice, no source)."""
BYTES_PER_PIXEL = 200
"""Memory a case needs per input pixel, bytes: input frame and model stages (about 25 B for the edge
preset, measured with tracemalloc), capture arrays (5 x int64 = 40 B), the clock path's per-sample
records (about 120 B of Python tuples), rounded up."""
MEMORY_SHARE = 0.5
"""Share of the machine's physical memory one case may plan to use: a run has several workers and the
simulator needs memory of its own (common practice, no source)."""
_FALLBACK_MEMORY = 4 * 2**30
"""Physical memory assumed when the system does not say (4 GiB)."""


def memory_budget() -> int:
    """Bytes one case may use: :data:`MEMORY_SHARE` of the physical memory (4 GiB assumed when unknown)."""
    try:
        total = os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, OSError, ValueError):
        total = _FALLBACK_MEMORY
    return int(max(total, 1) * MEMORY_SHARE)


def _gb(n: float) -> str:
    return f"{n / 1e9:,.1f} GB"


def check_frame_size(where: str, key: str, width: int, height: int) -> None:
    """Raise one ConfigError line when ``width`` x ``height`` is over :data:`MAX_FRAME_PIXELS`."""
    if width * height > MAX_FRAME_PIXELS:
        raise fail(where, key, f"{width}x{height}",
                   f"{width * height} pixels, over the limit of {MAX_FRAME_PIXELS} pixels a frame (8K UHD, "
                   "7680x4320: a 3x3 filter shows nothing new in a bigger frame)", "use a smaller size")


def check_case_size(where: str, frames: int, width: int, height: int, budget: int | None = None) -> None:
    """Raise one ConfigError line when a case of ``frames`` frames of ``width`` x ``height`` is too big.

    Args:
        where: the table the user edits (``"vkit.toml [stimulus]"``).
        frames: frames per case.
        width / height: frame size, pixels.
        budget: bytes a case may use (default :func:`memory_budget`).
    """
    check_frame_size(where, "size", width, height)
    if frames > MAX_FRAMES:
        raise fail(where, "frames", frames, f"over the limit of {MAX_FRAMES} frames a case (each frame is scored "
                   "and reported on its own)", "use fewer frames, or more seeds for more runs")
    budget = memory_budget() if budget is None else budget
    need = frames * width * height * BYTES_PER_PIXEL
    if need > budget:
        raise fail(where, "frames", frames,
                   f"{frames * width * height} pixels a case at {width}x{height}, about {_gb(need)} of memory "
                   f"({BYTES_PER_PIXEL} bytes a pixel for frames, model stages and capture), over the budget of "
                   f"{_gb(budget)} ({MEMORY_SHARE:.0%} of this machine's memory)",
                   "use fewer frames or a smaller size")
