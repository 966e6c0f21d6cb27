"""Frames rebuilt from an interface watched clock by clock: what a passive scoreboard sees.

A passive scoreboard has no schedule of its own: it samples a design's input and output on every rising
clock edge (live in a simulator, or read back from a waveform dump) and rebuilds the frames from the
levels it saw. Both sides are rebuilt by the same :class:`FrameRebuilder`, fed per-clock levels in chunks
of any length; a frame comes out as soon as a delimiter closes it, so a long run holds at most the frame
being received. The rules are the per-clock monitors' (:mod:`vkit.sim.tb.video`, :mod:`vkit.sim.tb.stream`):

- video: a pixel is a clock with data-enable high (and pixel-valid high when mapped); a line ends when a
  data-enable run ends; a frame starts at the leading edge of vsync. With a clock enable mapped, only the
  clocks it enables are samples (the others hold none). The leading edges of vsync and hsync are kept with
  the frame they close, counted as the monitors count them (:func:`vkit.video.words.sync_counts`).
- stream: a pixel is a clock with valid and ready high; start-of-frame on a pixel starts a new frame
  before it, end-of-line ends the line after it. With a per-lane valid mask mapped (``keep``), each word
  keeps its mask, and only the lanes it marks become pixels (:meth:`FramePixels.pixels`).

Numbers only: no signals, no simulator, no filters.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from vkit.core.errors import ConfigError
from vkit.video.bus import BusLayout, split_lanes, spread_kept_lanes, spread_lanes
from vkit.video.capture import MAX_EVENTS, UNKNOWN, Capture, RunFacts

__all__ = ["SIDE_ROLES", "WORD_ROLES", "Levels", "FramePixels", "FrameRebuilder"]

SIDE_ROLES: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "video": (("vsync", "de", "data"), ("valid", "hsync", "enable")),
    "stream": (("valid", "ready", "sof", "eol", "data"), ("keep",)),
}
"""Per family: (required, optional) roles of one side, without the ``in_`` / ``out_`` prefix: only what the
rebuild reads (a line ends with its data-enable run; hsync is only counted, as the driven run counts it). The
video side needs vsync: with nothing but data-enable a passive watcher cannot tell where a frame ends. A stream's
``keep`` is its per-lane valid mask (``in_keep`` / ``out_keep``, :data:`vkit.sim.signals.KEEP_ROLES`)."""

WORD_ROLES = ("data", "keep")
"""Roles whose level is a word (``data``, a lane mask), not a 1-bit pin: never inverted by a pin polarity."""


@dataclass
class Levels:
    """Per-clock samples of one side of an interface, in clock order (one chunk of a run).

    Attributes:
        first_clock: clock index of entry 0, counted from the first watched clock.
        roles: role without its side prefix (``"de"``, ``"data"``, ...) -> int64 array, one entry per clock;
            a 1-bit role holds 0, 1 or -1 for X/Z, ``data`` holds the word (``keep`` the lane mask) or
            :data:`~vkit.video.capture.UNKNOWN` for X/Z.
    """

    first_clock: int
    roles: dict[str, np.ndarray]

    def __len__(self) -> int:
        return int(next(iter(self.roles.values())).size) if self.roles else 0

    def asserted(self, active_high: dict[str, bool]) -> Levels:
        """The levels with each 1-bit role read as asserted (1) or not (0): roles whose pin is active low
        (``active_high[role]`` False) are inverted; X/Z (-1) and the words (``data``, ``keep``) are kept as they are."""
        low = [r for r, high in active_high.items() if not high and r in self.roles and r not in WORD_ROLES]
        if not low:
            return self
        roles = dict(self.roles)
        for r in low:
            v = roles[r]
            roles[r] = np.where(v < 0, v, 1 - v)
        return Levels(self.first_clock, roles)


@dataclass
class FramePixels:
    """One rebuilt frame as it arrived: every pixel with its clock, line and column.

    Attributes:
        index: frame number, from 0, in arrival order.
        values: pixel words, int64 (:data:`UNKNOWN` for X/Z).
        clocks: clock of each pixel.
        lines: line of each pixel inside the frame.
        columns: column of each pixel inside its line.
        closed: True when a frame delimiter after it was seen (the next vsync or start-of-frame).
        line_ended: True when its last line was ended (data-enable fell, end-of-line).
        held: ``[y, x]`` of pixels that came right after a stall (input side: data-enable high with
            pixel-valid low, or valid low on a stream) or waited on ready (stream output side).
        events: ``name -> [clock, role]`` or clocks of what went wrong around the frame (``xz_control``,
            ``de_in_blanking``), at most :data:`~vkit.video.capture.MAX_EVENTS` each.
        vsync_clocks: clocks of the vsync leading edges from the one that closed the frame before up to the one
            that closed this frame (video; empty on a stream; None when the side has no vsync).
        hsync_clocks: clocks of the hsync leading edges in the same span, before the closing vsync edge (video,
            hsync mapped), else None.
        keeps: the per-lane valid mask of each word (a stream with ``keep`` mapped; -1 for X/Z), else None.
    """

    index: int
    values: np.ndarray
    clocks: np.ndarray
    lines: np.ndarray
    columns: np.ndarray
    closed: bool
    line_ended: bool
    held: list[list[int]] = field(default_factory=list)
    events: dict[str, list] = field(default_factory=dict)
    vsync_clocks: list[int] | None = field(default_factory=list)
    hsync_clocks: list[int] | None = None
    keeps: np.ndarray | None = None

    @property
    def line_lengths(self) -> list[int]:
        """Pixels on each line, in order."""
        return np.bincount(self.lines).tolist() if self.lines.size else []

    @property
    def shape(self) -> tuple[int, int] | None:
        """``(height, width)`` when every line carries the same number of pixels, else None."""
        lengths = self.line_lengths
        if not lengths or min(lengths) != max(lengths):
            return None
        return len(lengths), lengths[0]

    def image(self, bus: BusLayout | str) -> np.ndarray:
        """The frame as an input image, its samples as the model takes them (:meth:`BusLayout.samples`): one
        data word a pixel, or ``bus.lanes`` pixels a word split as the active flow packs them (with lane masks,
        only the lanes each word's mask marks, :meth:`pixels`).

        Raises:
            ConfigError: the lines are not all the same length, or a pixel carried X/Z or bits the format lacks.
        """
        layout = BusLayout.of(bus)
        if (self.values == UNKNOWN).any():
            y = int(self.lines[np.argmax(self.values == UNKNOWN)])
            raise ConfigError(f"input frame {self.index}: X/Z on the data bus in line {y}; the design's input "
                              "must carry known pixels (check the upstream stage's reset)")
        kept = self.pixels(layout, layout.word_bits) if self.keeps is not None and layout.lanes > 1 else None
        lines = kept.line if kept is not None else self.lines
        lengths = np.bincount(lines).tolist() if lines.size else []
        if not lengths or min(lengths) != max(lengths):
            raise ConfigError(
                f"input frame {self.index}: lines of {min(lengths or [0])} to {max(lengths or [0])} pixels; a frame "
                "needs lines of one length: check the input data-enable / end-of-line and the signal paths")
        shape = (len(lengths), lengths[0])
        try:
            if kept is not None:
                return layout.samples(kept.values.reshape(shape))
            return layout.samples(layout.split_words(self.values.reshape(shape)))
        except ConfigError as exc:
            raise ConfigError(f"input frame {self.index}: {exc}") from None

    def pixels(self, bus: BusLayout, bus_bits: int, facts: RunFacts | None = None) -> Capture:
        """The frame as a one-frame capture of one sample a pixel: each word of ``bus_bits`` split into its
        ``bus.lanes`` fields (:func:`~vkit.video.bus.split_lanes`), and with lane masks only the lanes each mask
        marks, columns counting the kept pixels (:func:`~vkit.video.bus.spread_kept_lanes`, as the driven capture
        reader applies them; a mask that held X/Z keeps every lane, as the per-clock monitor does)."""
        cap = self.capture(facts if facts is not None else RunFacts())
        if bus.lanes == 1:
            return cap
        lane_values = split_lanes(cap.values, bus, bus_bits)
        if self.keeps is None:
            return spread_lanes(cap, lane_values)
        return spread_kept_lanes(cap, lane_values, self.keeps, bus)

    def capture(self, facts: RunFacts) -> Capture:
        """The frame as a one-frame :class:`~vkit.video.capture.Capture` (frame number 0) with ``facts``."""
        zeros = np.zeros(self.values.size, np.int64)
        return Capture(self.values, self.clocks, zeros, self.lines, self.columns, facts)


@dataclass
class _Carry:
    """What one chunk hands to the next: the last levels for edge detection and the numbering so far."""

    de: bool = False
    vsync: bool = False
    hsync: bool = False
    stalled: bool = False
    line_pending: bool = False
    frame_pending: bool = False
    started: bool = False
    frame: int = 0
    global_line: int = 0
    frame_first_line: int = 0
    column: int = -1
    frame_lines: int = 0


class FrameRebuilder:
    """Rebuilds the frames of one side of an interface from per-clock levels fed in chunks.

    Levels are read as asserted (1) or not: invert active-low pins first (:meth:`Levels.asserted`).

    Args:
        family: "video" or "stream".
        output: True for the design's output side (X/Z control events and data-enable in vertical blanking
            are recorded; a stream's ``held`` lists back-pressure), False for its input side (``held``
            lists the pixels right after a stall).
        vsync_active_high: polarity of vsync and hsync (video) when the levels were not made asserted.
        lines_per_frame: for a video output without vsync: frame number -> its lines (the input frame of that
            number; None while not known). A frame then ends after that many lines, as the per-clock monitor
            ends one after the expected height.
    """

    def __init__(self, family: str, output: bool, *, vsync_active_high: bool = True,
                 lines_per_frame: Callable[[int], int | None] | None = None) -> None:
        if family not in SIDE_ROLES:
            raise ConfigError(f"family {family!r} is not known; use one of {', '.join(SIDE_ROLES)}")
        self.family = family
        self.output = output
        self.vsync_level = 1 if vsync_active_high else 0
        self.lines_per_frame = lines_per_frame
        self._c = _Carry()
        self._blocks: list[tuple[np.ndarray, ...]] = []
        self._events: dict[str, list] = {"xz_control": [], "de_in_blanking": []}
        self._vs_edges: list[np.ndarray] | None = []
        self._hs_edges: list[np.ndarray] | None = None
        self.event_totals: dict[str, int] = {"xz_control": 0, "de_in_blanking": 0}
        """Events seen over the whole run (the lists kept per frame are bounded)."""
        self.frames_out = 0
        """Frames handed out so far (closed ones by :meth:`feed`, the last by :meth:`finish`)."""
        self.clocks_seen = 0
        """Clocks fed so far."""

    # -- public ---------------------------------------------------------------------------------------

    def feed(self, levels: Levels) -> list[FramePixels]:
        """Take the next chunk of levels; return the frames it closed, in order."""
        n = len(levels)
        if n == 0:
            return []
        self.clocks_seen += n
        levels, at_clock = self._enabled(levels)
        if len(levels) == 0:
            return []
        if self.family == "video":
            pix, line_b, frame_b, held, vs_after = self._video(levels, at_clock)
        else:
            pix, line_b, frame_b, held, vs_after = self._stream(levels, at_clock)
        values = levels.roles["data"][pix]
        clocks = at_clock[pix]
        keeps = levels.roles["keep"][pix] if "keep" in levels.roles else None
        if self.output and keeps is not None and (keeps < 0).any():  # read on transfers only, as the monitor does
            self._event("xz_control", [[int(k), "out_keep"] for k in clocks[keeps < 0]])
        closed = self._number(values, clocks, line_b, frame_b, held, keeps)
        if vs_after and self._blocks:  # a vsync after the last pixel closes the frame being received
            closed.append(self._emit(closed_by_delimiter=True))
        return closed

    def finish(self) -> FramePixels | None:
        """The frame still being received when the run ended (``closed`` False), or None."""
        if not self._blocks:
            return None
        return self._emit(closed_by_delimiter=False)

    # -- one chunk, per family ------------------------------------------------------------------------

    def _enabled(self, lv: Levels) -> tuple[Levels, np.ndarray]:
        """The chunk's samples and the clock of each: with a clock enable, only its enabled clocks (the clocks
        the per-clock monitor samples; X/Z on an output enable is listed), else every clock."""
        clock = np.arange(len(lv), dtype=np.int64) + lv.first_clock
        if "enable" not in lv.roles:
            return lv, clock
        en = lv.roles["enable"]
        if self.output and (en < 0).any():
            self._event("xz_control", [[int(k), "out_enable"] for k in clock[en < 0]])
        keep = en == 1
        roles = {r: v[keep] for r, v in lv.roles.items() if r != "enable"}
        return Levels(lv.first_clock, roles), clock[keep]

    def _bit(self, levels: Levels, role: str, at_clock: np.ndarray, where: np.ndarray | None = None) -> np.ndarray:
        """Role ``role`` as bool (X/Z read as low, and listed on the output side where ``where`` holds)."""
        raw = levels.roles[role]
        bad = raw < 0
        if self.output and bad.any():
            if where is not None:
                bad = bad & where
            self._event("xz_control", [[int(c), "out_" + role] for c in at_clock[bad]])
        return raw == 1

    def _sync_edges(self, lv: Levels, at_clock: np.ndarray, vs: np.ndarray, vs_rise: np.ndarray) -> None:
        """Keep the clocks of the vsync and hsync leading edges of the chunk (the monitor's counting)."""
        if lv.roles["vsync"].size and lv.roles["vsync"][0] == -2:
            self._vs_edges = None  # no vsync: nothing to count
        else:
            self._vs_edges.append(at_clock[vs_rise])
        if "hsync" not in lv.roles:
            return
        hs_raw = lv.roles["hsync"]
        if self.output and (hs_raw < 0).any():
            self._event("xz_control", [[int(k), "out_hsync"] for k in at_clock[hs_raw < 0]])
        hs = hs_raw == self.vsync_level  # levels made asserted, or both syncs of one polarity
        hs_prev = np.concatenate(([self._c.hsync], hs[:-1]))
        if self._hs_edges is None:
            self._hs_edges = []
        self._hs_edges.append(at_clock[hs & ~hs_prev])
        self._c.hsync = bool(hs[-1])

    def _video(self, lv: Levels, at_clock: np.ndarray) -> tuple[np.ndarray, ...]:
        c = self._c
        de = self._bit(lv, "de", at_clock)
        pix = de & self._bit(lv, "valid", at_clock, de) if "valid" in lv.roles else de.copy()
        if "vsync" not in lv.roles:
            if self.lines_per_frame is None:
                raise ConfigError("a video side without vsync needs the lines of each frame; map its vsync")
            lv = Levels(lv.first_clock, {**lv.roles, "vsync": np.zeros(len(lv), np.int64) - 2})  # never asserted
        vs_raw = lv.roles["vsync"]
        if self.output and (vs_raw == -1).any():
            self._event("xz_control", [[int(k), "out_vsync"] for k in at_clock[vs_raw == -1]])
        vs = vs_raw == self.vsync_level
        de_prev = np.concatenate(([c.de], de[:-1]))
        vs_prev = np.concatenate(([c.vsync], vs[:-1]))
        vs_rise = vs & ~vs_prev
        self._sync_edges(lv, at_clock, vs, vs_rise)
        line_ev = np.cumsum((de_prev & ~de) | vs_rise)
        frame_ev = np.cumsum(vs_rise)
        if self.output:
            self._event("de_in_blanking", [int(k) for k in at_clock[vs & de]])
        stalled = de & ~pix
        stalled_prev = np.concatenate(([c.stalled], stalled[:-1]))
        at = np.flatnonzero(pix)
        held = stalled_prev[at] if not self.output else np.zeros(at.size, bool)
        line_b = np.diff(np.concatenate(([0], line_ev[at]))) > 0
        frame_b = np.diff(np.concatenate(([0], frame_ev[at]))) > 0
        last_l = line_ev[at[-1]] if at.size else 0
        last_f = frame_ev[at[-1]] if at.size else 0
        if line_b.size:
            line_b[0] |= c.line_pending
            frame_b[0] |= c.frame_pending
        vs_after = bool(frame_ev[-1] > last_f)
        c.line_pending = bool(line_ev[-1] > last_l) or (c.line_pending and not at.size)
        c.frame_pending = vs_after or (c.frame_pending and not at.size)
        c.de, c.vsync, c.stalled = bool(de[-1]), bool(vs[-1]), bool(stalled[-1])
        return pix, line_b | frame_b, frame_b, held, vs_after

    def _stream(self, lv: Levels, at_clock: np.ndarray) -> tuple[np.ndarray, ...]:
        c = self._c
        valid = self._bit(lv, "valid", at_clock)
        ready = self._bit(lv, "ready", at_clock, valid)
        pix = valid & ready
        sof = self._bit(lv, "sof", at_clock, pix)
        eol = self._bit(lv, "eol", at_clock, pix)
        at = np.flatnonzero(pix)
        # input: valid low on the clock before (a gap); output: valid high and ready low (back-pressure)
        before = ~valid if not self.output else valid & ~ready
        prev = np.concatenate(([c.stalled], before[:-1]))
        held = prev[at]
        frame_b = sof[at]
        eol_at = eol[at]
        line_b = np.concatenate(([c.line_pending], eol_at[:-1])) if at.size else np.zeros(0, bool)
        if at.size:
            c.line_pending = bool(eol_at[-1])
        c.stalled = bool(before[-1])
        return pix, line_b | frame_b, frame_b, held, False

    # -- numbering (shared) ---------------------------------------------------------------------------

    def _number(self, values: np.ndarray, clocks: np.ndarray, line_b: np.ndarray, frame_b: np.ndarray,
                held: np.ndarray, keeps: np.ndarray | None = None) -> list[FramePixels]:
        """Give each pixel its frame, line and column (the rules of CaptureBuilder), keep the open frame's
        pixels (and lane masks, when read), and return the frames a later pixel closed."""
        c = self._c
        n = values.size
        if n == 0:
            return []
        first_ever = not c.started
        if not c.started:  # nothing to end before the first pixel
            line_b[0] = frame_b[0] = False
            c.started = True
        if self.lines_per_frame is not None and self.family == "video" and self._vs_edges is None:
            frame_b = self._split_by_lines(line_b, first_ever)
        frame = c.frame + np.cumsum(frame_b)
        gline = c.global_line + np.cumsum(line_b)
        first_line = np.maximum.accumulate(np.where(frame_b, gline, c.frame_first_line))
        idx = np.arange(n)
        start = np.maximum.accumulate(np.where(line_b, idx, -1))
        column = np.where(start < 0, c.column + 1 + idx, idx - start)
        lines = gline - first_line
        c.frame, c.global_line = int(frame[-1]), int(gline[-1])
        c.frame_first_line, c.column = int(first_line[-1]), int(column[-1])
        closed: list[FramePixels] = []
        cuts = np.flatnonzero(np.diff(frame)) + 1
        for lo, hi in zip(np.concatenate(([0], cuts)), np.concatenate((cuts, [n]))):
            if lo > 0 or (frame_b[0] and self._blocks):
                if self._blocks:
                    closed.append(self._emit(closed_by_delimiter=True, until_clock=int(clocks[lo])))
            self._blocks.append((values[lo:hi], clocks[lo:hi], lines[lo:hi], column[lo:hi], held[lo:hi],
                                 None if keeps is None else keeps[lo:hi]))
        return closed

    def _split_by_lines(self, line_b: np.ndarray, first_ever: bool) -> np.ndarray:
        """Frame starts of a side without vsync: a line that starts once the frame holds its input frame's lines
        starts the next frame (one step a line, not a clock)."""
        c = self._c
        frame_b = np.zeros(line_b.size, bool)
        starts = np.flatnonzero(line_b).tolist()
        if first_ever:
            c.frame_lines = 1
        frame = c.frame
        for i in starts:
            height = self.lines_per_frame(frame)
            if height is not None and c.frame_lines >= height:
                frame_b[i] = True
                frame += 1
                c.frame_lines = 1
            else:
                c.frame_lines += 1
        return frame_b

    def _emit(self, closed_by_delimiter: bool, until_clock: int | None = None) -> FramePixels:
        """Hand out the frame being received and forget its pixels."""
        *parts, masks = zip(*self._blocks)
        values, clocks, lines, columns, held = (np.concatenate(p) for p in parts)
        keeps = None if masks[0] is None else np.concatenate(masks)
        self._blocks = []
        events = {}
        for key, items in self._events.items():
            clock_of = (lambda e: e[0]) if key == "xz_control" else (lambda e: e)
            mine = [e for e in items if until_clock is None or clock_of(e) < until_clock]
            self._events[key] = [e for e in items if until_clock is not None and clock_of(e) >= until_clock]
            events[key] = mine[:MAX_EVENTS]
        line_ended = self._c.line_pending or self._c.frame_pending or until_clock is not None
        at = np.flatnonzero(held)
        vs, hs = self._take_sync_edges(int(clocks[-1]), closed_by_delimiter)
        frame = FramePixels(
            index=self.frames_out, values=values, clocks=clocks, lines=lines, columns=columns,
            closed=closed_by_delimiter, line_ended=bool(line_ended),
            held=[[int(lines[k]), int(columns[k])] for k in at], events=events, vsync_clocks=vs, hsync_clocks=hs,
            keeps=keeps,
        )
        self.frames_out += 1
        return frame

    def _take_sync_edges(self, last_pixel_clock: int, closed: bool) -> tuple[list[int] | None, list[int] | None]:
        """The sync leading edges of the frame being handed out: every vsync edge up to the first one after its
        last pixel (the edge that closed it) and the hsync edges before that one; later edges stay."""
        if self._vs_edges is None:
            return None, None
        vs = np.concatenate(self._vs_edges) if self._vs_edges else np.zeros(0, np.int64)
        after = np.flatnonzero(vs > last_pixel_clock)
        cut = int(after[0]) + 1 if (closed and after.size) else vs.size
        mine, self._vs_edges = vs[:cut], [vs[cut:]]
        if self._hs_edges is None:
            return mine.tolist(), None
        hs = np.concatenate(self._hs_edges)
        end = np.searchsorted(hs, mine[-1], side="left") if (closed and mine.size) else hs.size
        self._hs_edges = [hs[end:]]
        return mine.tolist(), hs[:end].tolist()

    def _event(self, key: str, items: list) -> None:
        """Keep events until their frame is handed out (bounded: a stuck signal must not fill memory)."""
        self.event_totals[key] += len(items)
        room = MAX_EVENTS - len(self._events[key])
        if room > 0:
            self._events[key].extend(items[:room])
