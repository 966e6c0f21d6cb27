"""Stream source, sink and monitor: frames over valid/ready with start-of-frame and end-of-line markers."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from cocotb.triggers import RisingEdge

from vkit.sim.signals import SignalMap
from vkit.sim.tb._common import _Component, _FrameMonitor, _in_data_bits, _Source, bit_reader, word_reader
from vkit.video.capture import UNKNOWN, RunFacts
from vkit.video.bus import BusLayout
from vkit.video.formats import frames_array
from vkit.video.timing import StallPattern
from vkit.video.words import READY_CHUNK_CLOCKS, StreamTransfers, ready_chunk, stream_transfers

__all__ = ["StreamSource", "StreamSink", "StreamMonitor"]


class StreamSource(_Source):
    """Sends frames into a stream-family DUT: one word per transfer (``in_valid && in_ready`` on a rising edge).

    ``in_sof`` marks the first pixel of a frame, ``in_eol`` the last pixel of each line. Seeded random idle
    gaps (valid low, garbage data) come before a pixel with the gap pattern's probability. While valid is
    high and ready is low nothing changes: the word is held until it is taken.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "stream"); uses the ``in_*`` roles.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role; :meth:`send` waits until it is inactive.
        gaps: optional :class:`~vkit.video.timing.StallPattern`: chance of a gap before each pixel and its
            longest length in clocks, seeded.
        pixel_format: "gray8" or "rgb888"; None infers it from the frames.
        blanking: "random" drives seeded random words on ``in_data`` during gaps; "constant" drives
            ``blanking_value``.
        blanking_value: the constant gap word, >= 0.
        seed: seed of the garbage words driven during gaps.
        reset_active_high: reset polarity.
        stats: the :class:`~vkit.video.capture.RunFacts` the source writes into (``frames_sent``,
            ``first_input_clock``, ``stall_pixels`` = pixels that came right after a gap); pass the monitor's
            ``facts``.
        bus: the word layout (component order, pixels a transfer); None: one pixel a transfer.

    Clock numbering: clock 0 is the first rising edge after :meth:`send` starts.
    """

    family = "stream"

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        gaps: StallPattern | None = None,
        pixel_format: str | None = None,
        blanking: str = "random",
        blanking_value: int = 0,
        seed: int = 0,
        reset_active_high: bool = True,
        stats: RunFacts | None = None,
        bus: BusLayout | None = None,
    ) -> None:
        bits = _in_data_bits(pixel_format, bus)
        super().__init__(dut, signals, clock, reset, data_bits=bits, reset_active_high=reset_active_high)
        self._init_source(pixel_format, seed, stats, blanking, blanking_value, bus)
        self.gaps = gaps
        self.sent = 0
        """Words taken by the DUT so far."""
        for role in ("in_valid", "in_sof", "in_eol"):
            self._h[role].value = 0
        self._h["in_data"].value = 0

    def prepare(self, frames: Any) -> StreamTransfers:
        """Every transfer of ``frames`` (pixels, markers, gaps, idle words); records the run facts in ``stats``."""
        arr, fmt = frames_array(frames, self.pixel_format)
        self._check_data_width(fmt)
        t = stream_transfers(arr, self._layout(fmt), self.gaps, blanking=self.blanking, blanking_value=self.blanking_value,
                             seed=self.seed)
        self.stats.stall_pixels = t.stall_pixels
        self.stats.frames_sent = t.frames
        self.stats.first_input_clock = None
        return t

    def _ints(self, words: np.ndarray) -> list[int]:
        """Words as Python ints; a wide word comes as pixel fields, joined by the bus layout."""
        return self.bus.word_list(words) if words.ndim > 1 and self.bus is not None else words.tolist()

    async def send(self, frames: Any) -> None:
        """Send every pixel of ``frames``; returns once the DUT took the last word (valid then drops)."""
        t = self.prepare(frames)
        words, garbage = self._ints(t.data), self._ints(t.idle)
        gap = t.gaps.tolist()
        sof, eol = t.sof.astype(int).tolist(), t.eol.astype(int).tolist()
        await self._reset_released()
        h = self._h
        valid, data, s_sof, s_eol = h["in_valid"], h["in_data"], h["in_sof"], h["in_eol"]
        ready = bit_reader(h["in_ready"])
        edge = RisingEdge(self._clock)
        c = 0
        self.clocks = 0
        self.sent = 0
        valid_level = 0
        last_sof = last_eol = 0
        for i, word in enumerate(words):
            g = gap[i]
            if g:
                if valid_level:
                    valid.value = 0
                    valid_level = 0
                data.value = garbage[i]
                for _ in range(g):
                    await edge
                    c += 1
                    self.clocks = c
            if not valid_level:
                valid.value = 1
                valid_level = 1
            data.value = word
            if sof[i] != last_sof:
                s_sof.value = last_sof = sof[i]
            if eol[i] != last_eol:
                s_eol.value = last_eol = eol[i]
            while True:
                await edge
                c += 1
                self.clocks = c
                if ready() == 1:
                    break
            if i == 0:
                self.stats.first_input_clock = c - 1
            self.sent = i + 1
        valid.value = 0
        s_sof.value = 0
        s_eol.value = 0


class StreamSink(_Component):
    """Drives ``out_ready`` of a stream-family DUT with seeded random back-pressure.

    Before each clock, when ready is high, a ready-low run of 1..``max_length`` clocks (uniform) starts with
    the pattern's probability. Without a pattern ready stays high.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "stream"); uses ``out_ready``.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role (unused beyond the common shape).
        backpressure: optional :class:`~vkit.video.timing.StallPattern` (probability, max_length, seed).

    The pixels that waited on a low ready are recorded by :class:`StreamMonitor` as ``backpressure_pixels``
    (it sees valid, ready and the frame position together); the sink counts :attr:`low_clocks`.
    """

    family = "stream"
    _CHUNK = READY_CHUNK_CLOCKS

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        backpressure: StallPattern | None = None,
    ) -> None:
        super().__init__(dut, signals, clock, reset)
        self.backpressure = backpressure
        self.low_clocks = 0
        """Clocks on which the sink held ready low."""
        self._rng = np.random.default_rng(backpressure.seed if backpressure else 0)
        self._task: Any = None
        self._h["out_ready"].value = 1

    def _levels(self, carry: int) -> tuple[list[int], int]:
        """Ready levels for the next chunk of clocks, and the low clocks left over into the next chunk."""
        levels, left = ready_chunk(self._rng, self.backpressure, carry, self._CHUNK)
        return levels.astype(int).tolist(), left

    def start(self) -> None:
        """Start driving ready (idempotent)."""
        if self._task is None and self.backpressure is not None and self.backpressure.probability > 0:
            import cocotb

            self._task = cocotb.start_soon(self._run())

    def stop(self) -> None:
        """Stop the back-pressure and leave ready high."""
        if self._task is not None and not self._task.done():
            self._task.cancel()
        self._h["out_ready"].value = 1

    async def _run(self) -> None:
        ready = self._h["out_ready"]
        edge = RisingEdge(self._clock)
        level = 1
        carry = 0
        while True:
            levels, carry = self._levels(carry)
            for v in levels:
                if v != level:
                    ready.value = v
                    level = v
                await edge
                if not v:
                    self.low_clocks += 1


class StreamMonitor(_FrameMonitor):
    """Watches a stream-family DUT's output and rebuilds frames from ``out_sof`` / ``out_eol``.

    A transfer is a rising edge with ``out_valid`` and ``out_ready`` high. ``out_sof`` starts a new frame
    (before the pixel), ``out_eol`` ends the line (after the pixel). X/Z handling as in the video monitor.
    A transfer whose word waited at least one clock with valid high and ready low is listed in
    ``backpressure_pixels`` as ``[frame, line, column]``.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "stream"); uses the ``out_*`` roles.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role; :meth:`start` waits until it is inactive.
        expected_height: lines per frame; a frame is complete after that many end-of-line markers (without
            it, only when the next start-of-frame arrives).
        expected_width: pixels per line (recorded only), or None.
        reset_active_high: reset polarity.
        facts: the capture's run facts to start from (kept, not copied).
        bus: the lane layout of ``out_data``; needed when the word is over 62 bits (each lane is then
            recorded as a pixel as it is sampled, :attr:`splits_lanes`).
    """

    family = "stream"

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        expected_height: int | None = None,
        expected_width: int | None = None,
        reset_active_high: bool = True,
        facts: RunFacts | None = None,
        bus: BusLayout | None = None,
    ) -> None:
        super().__init__(dut, signals, clock, reset, reset_active_high=reset_active_high)
        self.bus = bus
        """The lane layout of ``out_data`` (needed for a word over 62 bits, split into pixels as sampled)."""
        self._init_monitor(expected_height, expected_width, facts, backpressure_pixels=[])
        self._frame = 0
        self._line = 0
        self._column = 0
        self._frame_pixels = 0

    # -- how a line and a frame end -------------------------------------------------------------------

    def _start_frame(self) -> None:
        """A start-of-frame marker on a transfer after pixels: the frame before it is over."""
        self._close_frame()
        self._frame += 1
        self._line = self._column = 0
        self._frame_pixels = 0

    def _end_line(self) -> None:
        """An end-of-line marker on a transfer: the line is over (after its pixel)."""
        self._builder.new_line()
        self._line += 1
        self._column = 0
        self._count_line()

    def _make_step(self) -> Callable[[], None]:
        """The per-edge sampling function (closures keep the hot path on local variables)."""
        h = self._h
        read_valid = bit_reader(h["out_valid"])
        read_ready = bit_reader(h["out_ready"])
        read_sof = bit_reader(h["out_sof"])
        read_eol = bit_reader(h["out_eol"])
        read_data = word_reader(h["out_data"])
        add = self._adder()
        facts = self.facts
        bp_pixels = facts.backpressure_pixels
        event_at = self._event_at
        held = False

        def step() -> None:
            nonlocal held
            c = self.clocks
            v = read_valid()
            if v < 0:
                event_at("xz_control", c, "out_valid")
                v = 0
            if v:
                r = read_ready()
                if r < 0:
                    event_at("xz_control", c, "out_ready")
                    r = 0
                if r:
                    sof = read_sof()
                    eol = read_eol()
                    if sof < 0:
                        event_at("xz_control", c, "out_sof")
                    if eol < 0:
                        event_at("xz_control", c, "out_eol")
                    if sof == 1 and self._frame_pixels:
                        self._start_frame()
                    value = read_data()
                    if value == UNKNOWN:
                        facts.xz_data_count += 1
                    if facts.first_output_clock is None:
                        facts.first_output_clock = c
                    if held:
                        bp_pixels.append([self._frame, self._line, self._column])
                    add(value, c)
                    self._frame_pixels += 1
                    self._column += 1
                    held = False
                    if eol == 1:
                        self._end_line()
                else:
                    held = True
            c += 1
            self.clocks = c
            if c == self._deadline:
                self._event.set()
            if c == self._clock_deadline:
                self._clock_event.set()

        return step
