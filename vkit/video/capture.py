"""A captured output stream: every pixel a design emitted, where it fell, and what went wrong around it.

A capture is what travels from the simulator side (monitors, the fast-path harness, a file read back
from an exported testbench) to the scoreboard. It knows pixels, clocks and frame/line boundaries as the
design marked them, never filters. It never imports cocotb.
"""

from __future__ import annotations

import copy
import dataclasses
import json
import warnings
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any, Mapping

import numpy as np

__all__ = ["UNKNOWN", "MAX_EVENTS", "Capture", "CaptureBuilder", "FrameView", "RunFacts", "lines_file_for",
           "read_lines_file"]

UNKNOWN = -1
"""Pixel value stored for a sample whose data bus carried X or Z."""

MAX_EVENTS = 1000
"""At most this many entries are kept in a capture's event list (xz_control, de_in_blanking); the rest are counted."""


@dataclass
class RunFacts:
    """Facts about one run that travel with its capture: what was sent, when, and what went wrong.

    Written by the capturing side (monitors and sources, the fast-path capture file reader, the native
    run), read by the scoreboard, the diagnosis and the runner. ``None`` means "not recorded". Clocks
    are counted from the first clock after reset.
    """

    family: str | None = None
    """Interface family: "video" or "stream"."""
    simulator: str | None = None
    """Simulator that ran the design ("icarus", "verilator", "ghdl", ...)."""
    path: str | None = None
    """Drive mode of a fast-path run ("fast" or "native"); None for the per-clock cocotb run."""
    clock_period_ns: float | None = None
    """Clock period of the run, ns."""
    frames_sent: int | None = None
    """Frames the source drove, frames."""
    first_input_clock: int | None = None
    """Clock of the first input pixel, clocks."""
    first_output_clock: int | None = None
    """Clock of the first output pixel, clocks."""
    latency_clocks: int | None = None
    """First output pixel clock minus first input pixel clock, clocks."""
    pixels_per_clock: int | None = None
    """Pixels the data buses carried a clock (the capture holds one sample a pixel); None: one."""
    out_data_bits: int | None = None
    """Width of the output data word, bits (all lanes of it)."""
    latency_samples: int | None = None
    """Input samples (enabled input clocks) from the first input pixel to the first output pixel, samples;
    equals ``latency_clocks`` for a design without a clock enable."""
    clocks_run: int | None = None
    """Clocks the run lasted, clocks."""
    timed_out: bool = False
    """True when not every frame came out before the run stopped."""
    timeout_clocks: int | None = None
    """The run's limit, clocks (a fast-path run reading its own timeout records the clocks it ran)."""
    start_time_ps: int | None = None
    """Simulation time of the monitor's start, ps; clock k is the (k+1)-th rising edge after it."""
    xz_data_count: int = 0
    """Output samples with X/Z on the data bus, samples."""
    xz_control: list[list[Any]] = field(default_factory=list)
    """``[clock, role]`` where a control output such as data-enable held X/Z (at most MAX_EVENTS)."""
    de_in_blanking: list[int] = field(default_factory=list)
    """Clocks where output data-enable was high while output vsync was active (at most MAX_EVENTS)."""
    input_vsync_count: int | None = None
    """Vsync pulses the source drove, pulses."""
    output_vsync_count: int | None = None
    """Vsync pulses the design emitted, pulses."""
    input_hsync_per_frame: list[int] | None = None
    """Hsync pulses the source drove in each frame, pulses."""
    input_first_vsync_clock: int | None = None
    """Clock of the source's first vsync leading edge, clocks."""
    input_first_hsync_clock: int | None = None
    """Clock of the source's first hsync leading edge, clocks."""
    output_hsync_per_frame: list[int] | None = None
    """Hsync pulses the design emitted in each frame, pulses."""
    output_vsync_clocks: list[int] | None = None
    """Clock of every output vsync leading edge, clocks (None: not recorded, an older capture)."""
    output_hsync_clocks: list[int] | None = None
    """Clock of every output hsync leading edge, clocks (None: not recorded, an older capture)."""
    stall_pixels: list[list[int]] = field(default_factory=list)
    """``[frame, y, x]`` of each input pixel that came right after a stall."""
    backpressure_pixels: list[list[int]] = field(default_factory=list)
    """``[frame, y, x]`` of each output pixel that came right after the sink held ready low."""
    error: str | None = None
    """One line: why the run stopped before it could be scored."""
    notes: list[str] = field(default_factory=list)
    """Human-readable remarks from the capturing side."""
    sim_outcome: dict[str, Any] | None = None
    """How the simulator ended when it was stopped at its wall-clock limit or by a signal: a
    :class:`vkit.sim.guard.GuardOutcome` as a dict (returncode, timed_out, seconds, limit_s); None when it
    ended by itself."""
    extra: dict[str, Any] = field(default_factory=dict)
    """Keys of a saved capture that are none of the fields above (kept so they are saved again)."""

    @property
    def latency_pixels(self) -> int | None:
        """:attr:`latency_clocks` counted in pixels (clocks times pixels a clock), or None."""
        return None if self.latency_clocks is None else self.latency_clocks * (self.pixels_per_clock or 1)

    @property
    def stop_clocks(self) -> int | None:
        """Clocks a timed-out run stopped after: ``timeout_clocks``, else ``clocks_run``; None if neither is known."""
        return self.timeout_clocks if self.timeout_clocks is not None else self.clocks_run

    def to_dict(self) -> dict[str, Any]:
        """The facts as a JSON-ready dict: every field that is not None, then the ``extra`` keys."""
        out = {f.name: getattr(self, f.name) for f in fields(self) if f.name != "extra"}
        out = {k: v for k, v in out.items() if v is not None}
        out.update((k, v) for k, v in self.extra.items() if k not in out)
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> RunFacts:
        """Read facts written by :meth:`to_dict` (or an older capture's meta); unknown keys go to ``extra``."""
        facts = cls()
        facts.update(data)
        return facts

    def update(self, data: Mapping[str, Any]) -> None:
        """Set the fields named by the keys of ``data`` (e.g. an input-side facts dict); unknown keys go to ``extra``."""
        for key, value in data.items():
            if key in _FACT_NAMES:
                setattr(self, key, value)
            else:
                self.extra[key] = value


_FACT_NAMES = frozenset(f.name for f in fields(RunFacts)) - {"extra"}


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

    Per output sample (arrival order), parallel 1-D integer arrays (int64, or the smallest dtype that holds
    them: a capture read from the harness's file keeps an 8-bit bus's values in int16 and clocks and places in
    int32, 18 bytes a sample instead of 40, so ten 1920x1080 frames take 0.37 GB instead of 0.83 GB):

    Attributes:
        values: pixel value; :data:`UNKNOWN` where the data bus held X or Z.
        clock: clock index of arrival, counted from the first clock after reset.
        frame: output frame number the sample belongs to (from vsync or start-of-frame).
        line: line number inside that frame (from data-enable runs or end-of-line).
        column: position inside that line.
        facts: facts about the run (:class:`RunFacts`).
    """

    values: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    clock: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    frame: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    line: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    column: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    facts: RunFacts = field(default_factory=RunFacts)

    @property
    def meta(self) -> dict[str, Any]:
        """Deprecated: the run facts as a dict (a copy); read :attr:`facts` instead."""
        warnings.warn("Capture.meta is deprecated and will be removed; read Capture.facts (a RunFacts) instead",
                      DeprecationWarning, stacklevel=2)
        return self.facts.to_dict()

    def __len__(self) -> int:
        return int(self.values.size)

    @property
    def frame_count(self) -> int:
        """Output frames that carried at least one pixel."""
        return int(self.frame.max()) + 1 if self.frame.size else 0

    def frames(self, height: int, width: int) -> list[FrameView]:
        """Rebuild every captured frame into a ``(height, width)`` grid (:meth:`frame_view` of each)."""
        return [self.frame_view(f, height, width) for f in range(self.frame_count)]

    def with_facts(self, facts: RunFacts) -> Capture:
        """The same samples with other run facts (the arrays are shared, not copied)."""
        return dataclasses.replace(self, facts=facts)

    def samples_from_frame(self, first: int) -> int:
        """Samples that fell in frame ``first`` or any later one."""
        return int(np.count_nonzero(self.frame >= first)) if self.frame.size else 0

    def frame_part(self, index: int, names: tuple[str, ...]) -> tuple[np.ndarray, ...]:
        """The named per-sample arrays (``"values"``, ``"clock"``, ``"line"``, ...) of frame ``index``'s samples."""
        sel = self._frame_bounds(index)
        return tuple(getattr(self, name)[sel] for name in names)

    def _frame_bounds(self, index: int) -> slice | np.ndarray:
        """The samples of frame ``index``: a slice when frame numbers never go down (every capture vkit
        reads or records), else a mask."""
        if bool(np.all(self.frame[1:] >= self.frame[:-1])):
            # keys in the array's own dtype: mixed dtypes would make searchsorted copy the whole array
            lo, hi = np.searchsorted(self.frame, np.array([index, index + 1], self.frame.dtype))
            return slice(int(lo), int(hi))
        return self.frame == index

    def line_lengths(self, index: int) -> list[int]:
        """Pixels that arrived on each output line of frame ``index``, in order (:attr:`FrameView.line_lengths`
        without rebuilding the frame)."""
        (lines,) = self.frame_part(index, ("line",))
        return [int(c) for c in np.bincount(lines, minlength=int(lines.max()) + 1)] if lines.size else []

    def frame_view(self, index: int, height: int, width: int) -> FrameView:
        """Rebuild captured frame ``index`` into a ``(height, width)`` grid (empty when it carried no pixel).

        Samples that fall outside the grid (a line too long, too many lines) are left out of
        ``pixels`` but still counted in ``line_lengths``, so the scoreboard can name the excess.
        """
        values, clock, lines, cols = self.frame_part(index, ("values", "clock", "line", "column"))
        pixels = np.zeros((height, width), np.int64)
        present = np.zeros((height, width), bool)
        clocks = np.full((height, width), -1, np.int64)
        inside = (lines >= 0) & (lines < height) & (cols >= 0) & (cols < width)
        at = (lines[inside], cols[inside])
        pixels[at] = values[inside]
        present[at] = True
        clocks[at] = clock[inside]
        return FrameView(index, pixels, present, self.line_lengths(index), clocks)

    def save(self, path: str | Path, compress: bool = True) -> Path:
        """Write the capture as one ``.npz`` file (arrays plus the run facts as JSON under ``meta``).

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
                meta=np.array(json.dumps(self.facts.to_dict())),
            )
        return path

    @classmethod
    def load(cls, path: str | Path) -> Capture:
        """Read a capture written by :meth:`save` in the integer dtypes it was saved in (also by an older vkit:
        unknown meta keys land in ``facts.extra``)."""
        with np.load(Path(path), allow_pickle=False) as z:
            arrays = {name: _integers(z[name]) for name in ("values", "clock", "frame", "line", "column")}
            return cls(**arrays, facts=RunFacts.from_dict(json.loads(str(z["meta"]))))


def _integers(arr: np.ndarray) -> np.ndarray:
    """A saved array as it was when it is int16, int32 or int64, else as int64."""
    return arr if arr.dtype in (np.dtype(np.int16), np.dtype(np.int32), np.dtype(np.int64)) else arr.astype(np.int64)


class CaptureBuilder:
    """Collects samples one at a time (as a monitor sees them) and freezes them into a :class:`Capture`.

    Frame and line numbers are given by the caller: a monitor calls :meth:`new_frame` on a frame
    delimiter (vsync, start-of-frame) and :meth:`new_line` on a line delimiter (end of a data-enable
    run, end-of-line), then :meth:`add` per pixel.
    """

    def __init__(self, facts: RunFacts | None = None) -> None:
        self.facts: RunFacts = facts if facts is not None else RunFacts()
        """The run facts of the capture; writers (monitor, source) fill them in while it runs."""
        self._rows: list[tuple[int, int, int, int, int]] = []
        self._frame = 0
        self._line = 0
        self._column = 0
        self._frame_has_pixels = False
        self._line_has_pixels = False
        self._spill: Path | None = None
        self._spilled = 0

    def spill_to(self, path: str | Path) -> None:
        """From now on append every finished line to ``path`` (raw int64 rows of value, clock, frame, line,
        column), so a simulator killed mid-run still leaves the lines it finished (:func:`read_lines_file`)."""
        self._spill = Path(path)
        self._spill.parent.mkdir(parents=True, exist_ok=True)  # the capture file's folder may come later
        self._spill.write_bytes(b"")
        self._spilled = 0

    def _flush_lines(self) -> None:
        if self._spill is None or self._spilled == len(self._rows):
            return
        with open(self._spill, "ab") as out:
            np.asarray(self._rows[self._spilled:], np.int64).tofile(out)
        self._spilled = len(self._rows)

    def new_frame(self) -> None:
        """Start a new frame, unless the current one is still empty."""
        self._flush_lines()
        if self._frame_has_pixels:
            self._frame += 1
        self._line = 0
        self._column = 0
        self._frame_has_pixels = False
        self._line_has_pixels = False

    def new_line(self) -> None:
        """Start a new line, unless the current one is still empty."""
        self._flush_lines()
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
        return Capture(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3], arr[:, 4], copy.copy(self.facts))


def lines_file_for(capture_file: str | Path) -> Path:
    """Where a per-clock monitor appends its finished lines while the capture file is not yet written."""
    return Path(capture_file).with_suffix(".lines")


def read_lines_file(path: str | Path, facts: RunFacts | None = None) -> Capture:
    """The capture a killed simulator left in its lines file (:meth:`CaptureBuilder.spill_to`); a record cut
    short by the kill is dropped."""
    raw = np.fromfile(Path(path), dtype=np.int64)
    rows = raw[: len(raw) // 5 * 5].reshape(-1, 5)
    return Capture(rows[:, 0], rows[:, 1], rows[:, 2], rows[:, 3], rows[:, 4], facts or RunFacts())
