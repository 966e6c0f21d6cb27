"""A captured output stream: every pixel a design emitted, where it fell, and what went wrong around it.

A capture is what travels from the simulator side (monitors, the fast-path harness, a file read back
from an exported testbench) to the scoreboard. It knows pixels, clocks and frame/line boundaries as the
design marked them, never filters. It never imports cocotb.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["UNKNOWN", "MAX_EVENTS", "Capture", "CaptureBuilder", "FrameView"]

UNKNOWN = -1
"""Pixel value stored for a sample whose data bus carried X or Z."""

MAX_EVENTS = 1000
"""At most this many entries are kept in a capture's event list (xz_control, de_in_blanking); the rest are counted."""


@dataclass
class FrameView:
    """One rebuilt output frame.

    Attributes:
        index: frame number, from 0, in output order.
        pixels: ``(height, width)`` int64 array; :data:`UNKNOWN` where X/Z arrived, 0 where nothing did.
        present: ``(height, width)`` bool array; True where a pixel arrived at that place.
        line_lengths: pixels that arrived on each output line, in order (any number of lines).
        clocks: ``(height, width)`` int64 array of the clock index each pixel arrived on; -1 if none.
    """

    index: int
    pixels: np.ndarray
    present: np.ndarray
    line_lengths: list[int]
    clocks: np.ndarray

    @property
    def line_count(self) -> int:
        """Lines that carried at least one pixel."""
        return len(self.line_lengths)


@dataclass
class Capture:
    """Everything one simulation run captured from a design's output.

    Per output sample (arrival order), parallel 1-D arrays:

    Attributes:
        values: pixel value, int64; :data:`UNKNOWN` where the data bus held X or Z.
        clock: clock index of arrival, counted from the first clock after reset.
        frame: output frame number the sample belongs to (from vsync or start-of-frame).
        line: line number inside that frame (from data-enable runs or end-of-line).
        column: position inside that line.
        meta: facts about the run, JSON-serialisable. Keys used by vkit (all optional):
            ``family`` ("video" or "stream"); ``simulator``; ``frames_sent`` (int);
            ``first_input_clock`` / ``first_output_clock`` (int, clock of the first pixel in / out);
            ``clocks_run`` (int); ``timed_out`` (bool) and ``timeout_clocks`` (int);
            ``xz_data_count`` (int, samples with X/Z on the data bus);
            ``xz_control`` (list of [clock, role] where a control output such as data-enable held X/Z);
            ``de_in_blanking`` (list of clocks where output data-enable was high while output vsync was active);
            ``input_vsync_count`` / ``output_vsync_count`` (int, sync pulses seen);
            ``input_hsync_per_frame`` / ``output_hsync_per_frame`` (list of int);
            ``stall_pixels`` (list of [frame, y, x]: input pixels that came right after a stall);
            ``backpressure_pixels`` (list of [frame, y, x]: output pixels that came right after the
            sink held ready low);
            ``latency_clocks`` (int, first output pixel clock minus first input pixel clock);
            ``notes`` (list of str, human-readable remarks from the capturing side).
    """

    values: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    clock: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    frame: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    line: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    column: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    meta: dict[str, Any] = field(default_factory=dict)

    def __len__(self) -> int:
        return int(self.values.size)

    @property
    def frame_count(self) -> int:
        """Output frames that carried at least one pixel."""
        return int(self.frame.max()) + 1 if self.frame.size else 0

    def frames(self, height: int, width: int) -> list[FrameView]:
        """Rebuild every captured frame into a ``(height, width)`` grid.

        Samples that fall outside the grid (a line too long, too many lines) are left out of
        ``pixels`` but still counted in ``line_lengths``, so the scoreboard can name the excess.
        """
        views = []
        for f in range(self.frame_count):
            sel = self.frame == f
            lines = self.line[sel]
            cols = self.column[sel]
            vals = self.values[sel]
            clks = self.clock[sel]
            pixels = np.zeros((height, width), np.int64)
            present = np.zeros((height, width), bool)
            clocks = np.full((height, width), -1, np.int64)
            inside = (lines >= 0) & (lines < height) & (cols >= 0) & (cols < width)
            pixels[lines[inside], cols[inside]] = vals[inside]
            present[lines[inside], cols[inside]] = True
            clocks[lines[inside], cols[inside]] = clks[inside]
            if lines.size:
                counts = np.bincount(lines, minlength=int(lines.max()) + 1)
                line_lengths = [int(c) for c in counts]
            else:
                line_lengths = []
            views.append(FrameView(f, pixels, present, line_lengths, clocks))
        return views

    def save(self, path: str | Path, compress: bool = True) -> Path:
        """Write the capture as one ``.npz`` file (arrays plus the meta as JSON).

        Args:
            path: the file.
            compress: zip-deflate the arrays (small files); False writes them plain, about 20 times
                faster for a 640x480 frame's capture. :meth:`load` reads both.
        """
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        with open(path, "wb") as fh:
            (np.savez_compressed if compress else np.savez)(
                fh,
                values=self.values,
                clock=self.clock,
                frame=self.frame,
                line=self.line,
                column=self.column,
                meta=np.array(json.dumps(self.meta)),
            )
        return path

    @classmethod
    def load(cls, path: str | Path) -> Capture:
        """Read a capture written by :meth:`save`."""
        with np.load(Path(path), allow_pickle=False) as z:
            return cls(
                values=z["values"].astype(np.int64),
                clock=z["clock"].astype(np.int64),
                frame=z["frame"].astype(np.int64),
                line=z["line"].astype(np.int64),
                column=z["column"].astype(np.int64),
                meta=json.loads(str(z["meta"])),
            )


class CaptureBuilder:
    """Collects samples one at a time (as a monitor sees them) and freezes them into a :class:`Capture`.

    Frame and line numbers are given by the caller: a monitor calls :meth:`new_frame` on a frame
    delimiter (vsync, start-of-frame) and :meth:`new_line` on a line delimiter (end of a data-enable
    run, end-of-line), then :meth:`add` per pixel.
    """

    def __init__(self, meta: dict[str, Any] | None = None) -> None:
        self.meta: dict[str, Any] = dict(meta or {})
        self._rows: list[tuple[int, int, int, int, int]] = []
        self._frame = 0
        self._line = 0
        self._column = 0
        self._frame_has_pixels = False
        self._line_has_pixels = False

    def new_frame(self) -> None:
        """Start a new frame, unless the current one is still empty."""
        if self._frame_has_pixels:
            self._frame += 1
        self._line = 0
        self._column = 0
        self._frame_has_pixels = False
        self._line_has_pixels = False

    def new_line(self) -> None:
        """Start a new line, unless the current one is still empty."""
        if self._line_has_pixels:
            self._line += 1
        self._column = 0
        self._line_has_pixels = False

    def add(self, value: int, clock: int) -> None:
        """Record one pixel (``UNKNOWN`` for X/Z) that arrived on ``clock``."""
        self._rows.append((value, clock, self._frame, self._line, self._column))
        self._column += 1
        self._frame_has_pixels = True
        self._line_has_pixels = True

    def build(self) -> Capture:
        """Freeze what was collected so far (callable more than once, e.g. for a partial capture)."""
        if self._rows:
            arr = np.array(self._rows, dtype=np.int64)
        else:
            arr = np.zeros((0, 5), np.int64)
        return Capture(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3], arr[:, 4], dict(self.meta))
