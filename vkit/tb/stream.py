"""Stream source, sink and monitor: frames over valid/ready with start-of-frame and end-of-line markers."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from cocotb.triggers import Event, RisingEdge

from vkit.capture import UNKNOWN, Capture, CaptureBuilder
from vkit.errors import ConfigError
from vkit.tb._common import MAX_EVENTS, bit_reader, resolve_component, wait_reset_released, word_reader
from vkit.tb.signals import SignalMap, pixel_bits
from vkit.tb.video import _pixel_words, frames_array
from vkit.timing import StallPattern

__all__ = ["StreamSource", "StreamSink", "StreamMonitor"]


class StreamSource:
    """Sends frames into a stream-family DUT: one word per transfer (``in_valid && in_ready`` on a rising edge).

    ``in_sof`` marks the first pixel of a frame, ``in_eol`` the last pixel of each line. Seeded random idle
    gaps (valid low, garbage data) come before a pixel with the gap pattern's probability. While valid is
    high and ready is low nothing changes: the word is held until it is taken.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "stream"); uses the ``in_*`` roles.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role; :meth:`send` waits until it is inactive.
        gaps: optional :class:`~vkit.timing.StallPattern`: chance of a gap before each pixel and its
            longest length in clocks, seeded.
        pixel_format: "gray8" or "rgb888"; None infers it from the frames.
        seed: seed of the garbage words driven during gaps.
        reset_active_high: reset polarity.
        stats: a dict the source writes Capture meta keys into (``frames_sent``, ``first_input_clock``,
            ``stall_pixels`` = pixels that came right after a gap); pass the monitor's ``meta``.

    Clock numbering: clock 0 is the first rising edge after :meth:`send` starts.
    """

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        gaps: StallPattern | None = None,
        pixel_format: str | None = None,
        seed: int = 0,
        reset_active_high: bool = True,
        stats: dict[str, Any] | None = None,
    ) -> None:
        bits = {"in_data": pixel_bits(pixel_format)} if pixel_format else None
        self.signals, self._h, self._clock, self._reset = resolve_component(
            dut, signals, "stream", clock, reset, bits
        )
        self.gaps = gaps
        self.pixel_format = pixel_format
        self.seed = int(seed)
        self.reset_active_high = reset_active_high
        self.stats: dict[str, Any] = stats if stats is not None else {}
        self.clocks = 0
        """Rising edges seen by the last :meth:`send` so far."""
        self.sent = 0
        """Words taken by the DUT so far."""
        for role in ("in_valid", "in_sof", "in_eol"):
            self._h[role].value = 0
        self._h["in_data"].value = 0

    async def send(self, frames: Any) -> None:
        """Send every pixel of ``frames``; returns once the DUT took the last word (valid then drops)."""
        arr, fmt = frames_array(frames, self.pixel_format)
        width = len(self._h["in_data"])
        if width < pixel_bits(fmt):
            raise ConfigError(
                f"role 'in_data' -> port {self.signals.roles['in_data']!r} is {width} bits wide but the pixel "
                f"format {fmt} needs {pixel_bits(fmt)} bits; widen the port or send gray8 frames"
            )
        n_frames, height, line = arr.shape[:3]
        words = _pixel_words(arr, fmt).ravel().tolist()
        idx = np.arange(len(words))
        sof = ((idx % (height * line)) == 0).astype(int).tolist()
        eol = ((idx % line) == line - 1).astype(int).tolist()
        if self.gaps is not None and self.gaps.probability > 0:
            gap_arr = self.gaps.draw(n_frames, height, line)
            self.stats["stall_pixels"] = np.argwhere(gap_arr > 0).astype(int).tolist()
            gap = gap_arr.ravel().tolist()
        else:
            self.stats["stall_pixels"] = []
            gap = [0] * len(words)
        garbage = np.random.default_rng(self.seed).integers(0, 1 << pixel_bits(fmt), size=len(words)).tolist()
        self.stats["frames_sent"] = int(n_frames)
        self.stats["first_input_clock"] = None

        await wait_reset_released(self._clock, self._reset, self.reset_active_high)
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
                self.stats["first_input_clock"] = c - 1
            self.sent = i + 1
        valid.value = 0
        s_sof.value = 0
        s_eol.value = 0


class StreamSink:
    """Drives ``out_ready`` of a stream-family DUT with seeded random back-pressure.

    Before each clock, when ready is high, a ready-low run of 1..``max_length`` clocks (uniform) starts with
    the pattern's probability. Without a pattern ready stays high.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "stream"); uses ``out_ready``.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role (unused beyond the common shape).
        backpressure: optional :class:`~vkit.timing.StallPattern` (probability, max_length, seed).

    The pixels that waited on a low ready are recorded by :class:`StreamMonitor` as ``backpressure_pixels``
    (it sees valid, ready and the frame position together); the sink counts :attr:`low_clocks`.
    """

    _CHUNK = 4096

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        backpressure: StallPattern | None = None,
    ) -> None:
        self.signals, self._h, self._clock, self._reset = resolve_component(dut, signals, "stream", clock, reset)
        self.backpressure = backpressure
        self.low_clocks = 0
        """Clocks on which the sink held ready low."""
        self._rng = np.random.default_rng(backpressure.seed if backpressure else 0)
        self._task: Any = None
        self._h["out_ready"].value = 1

    def _levels(self, carry: int) -> tuple[list[int], int]:
        """Ready levels for the next chunk of clocks, and the low clocks left over into the next chunk."""
        bp = self.backpressure
        n = self._CHUNK
        out = np.ones(n, np.int8)
        starts = self._rng.random(n) < bp.probability
        lengths = self._rng.integers(1, bp.max_length + 1, size=n)
        i = 0
        if carry:
            out[:carry] = 0
            i = carry
        left = 0
        while i < n:
            if starts[i]:
                end = i + int(lengths[i])
                out[i : min(end, n)] = 0
                left = max(0, end - n)
                i = end
            else:
                i += 1
        return out.tolist(), left

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


class StreamMonitor:
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
        meta: initial capture meta (copied).
    """

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
        meta: dict[str, Any] | None = None,
    ) -> None:
        self.signals, self._h, self._clock, self._reset = resolve_component(dut, signals, "stream", clock, reset)
        self.expected_height = expected_height
        self.expected_width = expected_width
        self.reset_active_high = reset_active_high
        self._builder = CaptureBuilder(meta)
        self.meta: dict[str, Any] = self._builder.meta
        self.meta.setdefault("family", "stream")
        self.meta.setdefault("notes", [])
        self.meta.update(
            xz_data_count=0,
            xz_control=[],
            backpressure_pixels=[],
            first_output_clock=None,
            clocks_run=0,
            timed_out=False,
        )
        self.clocks = 0
        """Rising edges watched so far."""
        self.frames_complete = 0
        """Output frames finished: ``expected_height`` end-of-lines seen, or closed by the next start-of-frame."""
        self._xz_total = 0
        self._frame = 0
        self._line = 0
        self._column = 0
        self._frame_pixels = 0
        self._lines_in_frame = 0
        self._frame_counted = False
        self._target: int | None = None
        self._deadline: int | None = None
        self._event = Event()
        self._clock_deadline: int | None = None
        self._clock_event = Event()
        self._task: Any = None

    def start(self) -> None:
        """Start watching (idempotent)."""
        if self._task is None:
            import cocotb

            self._task = cocotb.start_soon(self._run())

    def stop(self) -> None:
        """Stop watching; the capture keeps what was seen."""
        if self._task is not None and not self._task.done():
            self._task.cancel()

    def capture(self) -> Capture:
        """A :class:`~vkit.capture.Capture` of everything seen so far (partial while running)."""
        m = self.meta
        m["clocks_run"] = self.clocks
        if self._xz_total > MAX_EVENTS:
            note = f"xz_control: {self._xz_total} events, only the first {MAX_EVENTS} are listed"
            m["notes"] = [s for s in m["notes"] if not s.startswith("xz_control: ")] + [note]
        if m.get("first_output_clock") is not None and m.get("first_input_clock") is not None:
            m["latency_clocks"] = int(m["first_output_clock"]) - int(m["first_input_clock"])
        return self._builder.build()

    async def wait_clocks(self, n: int) -> None:
        """Wait ``n`` (>= 1) clocks as counted by the running monitor (cheaper than a separate edge loop)."""
        self.start()
        self._clock_deadline = self.clocks + max(1, int(n))
        self._clock_event.clear()
        await self._clock_event.wait()
        self._clock_deadline = None

    async def wait_frames(self, n: int, timeout_clocks: int) -> bool:
        """Wait until ``n`` output frames are complete or ``timeout_clocks`` clocks pass; never hangs.

        Returns:
            True when the frames arrived; False on timeout (meta ``timed_out`` and ``timeout_clocks`` set).
        """
        self.start()
        if self.frames_complete >= n:
            return True
        self._target = n
        self._deadline = self.clocks + int(timeout_clocks)
        self._event.clear()
        await self._event.wait()
        self._target = None
        self._deadline = None
        if self.frames_complete >= n:
            return True
        self.meta["timed_out"] = True
        self.meta["timeout_clocks"] = int(timeout_clocks)
        self.meta["notes"].append(
            f"timed out after {timeout_clocks} clocks with {self.frames_complete} of {n} output frames complete"
        )
        return False

    def _xz(self, clock: int, role: str) -> None:
        self._xz_total += 1
        if self._xz_total <= MAX_EVENTS:
            self.meta["xz_control"].append([clock, role])

    def _check_done(self) -> None:
        if self._target is not None and self.frames_complete >= self._target:
            self._event.set()

    async def _run(self) -> None:
        await wait_reset_released(self._clock, self._reset, self.reset_active_high)
        h = self._h
        edge = RisingEdge(self._clock)
        read_valid = bit_reader(h["out_valid"])
        read_ready = bit_reader(h["out_ready"])
        read_sof = bit_reader(h["out_sof"])
        read_eol = bit_reader(h["out_eol"])
        read_data = word_reader(h["out_data"])
        b = self._builder
        meta = self.meta
        bp_pixels = meta["backpressure_pixels"]
        held = False
        c = self.clocks
        while True:
            await edge
            v = read_valid()
            if v < 0:
                self._xz(c, "out_valid")
                v = 0
            if v:
                r = read_ready()
                if r < 0:
                    self._xz(c, "out_ready")
                    r = 0
                if r:
                    sof = read_sof()
                    eol = read_eol()
                    if sof < 0:
                        self._xz(c, "out_sof")
                    if eol < 0:
                        self._xz(c, "out_eol")
                    if sof == 1 and self._frame_pixels:
                        if not self._frame_counted:
                            self.frames_complete += 1
                        b.new_frame()
                        self._frame += 1
                        self._line = self._column = 0
                        self._frame_pixels = self._lines_in_frame = 0
                        self._frame_counted = False
                        self._check_done()
                    value = read_data()
                    if value == UNKNOWN:
                        meta["xz_data_count"] += 1
                    if meta["first_output_clock"] is None:
                        meta["first_output_clock"] = c
                    if held:
                        bp_pixels.append([self._frame, self._line, self._column])
                    b.add(value, c)
                    self._frame_pixels += 1
                    self._column += 1
                    held = False
                    if eol == 1:
                        b.new_line()
                        self._line += 1
                        self._column = 0
                        self._lines_in_frame += 1
                        if (
                            self.expected_height
                            and self._lines_in_frame == self.expected_height
                            and not self._frame_counted
                        ):
                            self.frames_complete += 1
                            self._frame_counted = True
                            self._check_done()
                else:
                    held = True
            c += 1
            self.clocks = c
            if c == self._deadline:
                self._event.set()
            if c == self._clock_deadline:
                self._clock_event.set()
