"""Video source and monitor: frames in and out over sync, data-enable and pixel-valid, clock by clock."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from cocotb.triggers import Event

from vkit.core.errors import ConfigError
from vkit.sim.signals import SignalMap
from vkit.sim.tb._common import _FrameMonitor, _in_data_bits, _Source, bit_reader, ticker, word_reader
from vkit.video.capture import UNKNOWN, RunFacts
from vkit.video.bus import BusLayout, clock_timing
from vkit.video.formats import frames_array
from vkit.video.enables import EnablePattern
from vkit.video.timing import ClockSchedule, StallPattern, VideoTiming, schedule
from vkit.video.words import INPUT_LEVEL_ROLES, idle_levels, input_levels, video_data_words, video_input_facts

__all__ = ["VideoSource", "VideoMonitor"]


class VideoSource(_Source):
    """Drives frames into a video-family DUT with a :class:`~vkit.video.timing.VideoTiming` and optional stalls.

    Every per-clock value (syncs, data-enable, valid, data word) comes from a precomputed numpy
    schedule; the clock loop only writes the few values that change.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "video"); uses ``in_vsync``, ``in_hsync``,
            ``in_de``, ``in_data`` and ``in_valid`` when mapped.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role (if any); ``send`` waits until it is
            inactive.
        timing: the video timing (required).
        stalls: optional :class:`~vkit.video.timing.StallPattern` (needs ``in_valid``).
        pixel_format: a pixel format name (``gray8``, ``rgb101010``); None infers gray8 or rgb888 from the
            first frames sent.
        blanking: "random" drives seeded random words on ``in_data`` outside active video; "constant" drives
            ``blanking_value``. Stall clocks always carry seeded random words (the design must ignore them).
        blanking_value: the constant blanking word, >= 0.
        seed: seed for the garbage words (numpy PCG64).
        reset_active_high: reset polarity.
        stats: the :class:`~vkit.video.capture.RunFacts` the source writes its run facts into
            (``frames_sent``, ``first_input_clock``, ``stall_pixels``, ``input_vsync_count``,
            ``input_hsync_per_frame``); pass the monitor's :attr:`VideoMonitor.facts` so they land in its capture.
        bus: the word layout (:class:`vkit.video.bus.BusLayout`: component order, pixels a clock); the
            timing stays in pixels and is divided into clocks here. None: one pixel a clock.
        enable: optional :class:`~vkit.video.enables.EnablePattern` driven on ``in_enable`` (needs that role):
            every raster sample, blanking included, is held until its enabled clock.
        active_high: role -> pin polarity for ``in_hsync``, ``in_vsync``, ``in_de``, ``in_valid``, ``in_enable``
            (True = active high); roles left out are active high, syncs left out follow the timing.

    Clock numbering: clock 0 is the first rising edge after :meth:`send` starts; a value of schedule
    entry ``i`` is sampled by the design on clock ``i``.
    """

    family = "video"
    enable: EnablePattern | None = None
    """The input clock-enable pattern, or None (every clock takes a sample)."""

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        timing: VideoTiming,
        stalls: StallPattern | None = None,
        pixel_format: str | None = None,
        blanking: str = "random",
        blanking_value: int = 0,
        seed: int = 0,
        reset_active_high: bool = True,
        stats: RunFacts | None = None,
        bus: BusLayout | None = None,
        enable: EnablePattern | None = None,
        active_high: Mapping[str, bool] | None = None,
    ) -> None:
        if not isinstance(timing, VideoTiming):
            raise ConfigError("VideoSource: timing must be a vkit.video.timing.VideoTiming; build one with preset() or tiny()")
        bits = _in_data_bits(pixel_format, bus)
        super().__init__(dut, signals, clock, reset, data_bits=bits, reset_active_high=reset_active_high)
        self._init_source(pixel_format, seed, stats, blanking, blanking_value, bus)
        if stalls is not None and stalls.probability > 0 and "in_valid" not in self._h:
            raise ConfigError(
                "stalls need a pixel-valid input but role 'in_valid' is not mapped; map in_valid or drop the stalls"
            )
        if enable is not None and "in_enable" not in self._h:
            raise ConfigError("an enable pattern needs a clock-enable input but role 'in_enable' is not mapped; "
                              "map in_enable or drop the pattern")
        self.timing = timing
        self.stalls = stalls
        self.enable = enable
        given = dict(active_high or {})
        sync_default = {"in_hsync": timing.hsync_active_high, "in_vsync": timing.vsync_active_high}
        self.active_high = {r: bool(given.get(r, sync_default.get(r, True))) for r in INPUT_LEVEL_ROLES}
        self.schedule: ClockSchedule | None = None
        self._idle()

    def _idle(self) -> None:
        """Drive the blanking state: syncs inactive, data-enable and valid inactive, the enable active,
        data at the blanking value."""
        for role, level in idle_levels(self.active_high).items():
            if role in self._h:
                self._h[role].value = int(level)
        self._h["in_data"].value = self.blanking_value if self.blanking == "constant" else 0

    def prepare(self, frames: Any) -> tuple[ClockSchedule, np.ndarray]:
        """Build the schedule and the data word of every clock for ``frames`` (no simulation needed).

        Returns:
            (schedule, words): ``words`` is an int64 array of length ``schedule.n_clocks`` (or its pixel
            fields, ``(n_clocks, lanes)``, for a word wider than 62 bits; :attr:`BusLayout.wide`).
        """
        arr, fmt = frames_array(frames, self.pixel_format)
        if self.pixel_format is None:
            self._check_data_width(fmt)
        t = self.timing
        if arr.shape[1] != t.v_active or arr.shape[2] != t.h_active:
            raise ConfigError(
                f"frames are {arr.shape[2]}x{arr.shape[1]} but timing {t.name!r} is {t.h_active}x{t.v_active}; "
                "give frames of the timing's active size or change the timing"
            )
        bus = self._layout(fmt)
        sched = schedule(clock_timing(t, bus.lanes, t.h_active, t.v_active), int(arr.shape[0]), self.stalls, self.enable)
        words = video_data_words(sched, arr, bus, blanking=self.blanking, blanking_value=self.blanking_value,
                                 seed=self.seed)
        return sched, words

    async def send(self, frames: Any) -> None:
        """Drive all ``frames`` with the timing; returns after the last scheduled clock.

        Args:
            frames: one frame or a sequence of frames, uint8 ``(H, W)`` or ``(H, W, 3)``, of the timing's
                active size.
        """
        sched, words = self.prepare(frames)
        self.schedule = sched
        facts = video_input_facts(sched, self.bus.lanes if self.bus is not None else 1)
        first_valid = facts.pop("first_input_clock")
        self.stats.update(facts)
        await self._reset_released()
        self.stats.first_input_clock = first_valid
        done = Event()
        # a wide word comes as pixel fields, only from a bus layout that says how to join them
        step = self._make_player(sched, self.bus.word_list(words) if words.ndim > 1 else words.tolist(), done)
        self.clocks = 0
        step(first=True)
        tick = ticker(self._clock)
        tick.add(step)
        try:
            await done.wait()
        finally:
            tick.remove(step)

    def _control_changes(self, sched: ClockSchedule) -> tuple[list[Any], list[int], list[tuple[int, ...]]]:
        """The control handles, the clocks where any of their levels changes, and the levels from there on."""
        h = self._h
        pins = input_levels(sched, self.active_high)
        roles = [r for r in INPUT_LEVEL_ROLES if r in h]
        ctrl = [h[r] for r in roles]
        lv = np.stack([pins[r] for r in roles]).astype(np.int8)
        prev = np.concatenate((np.full((lv.shape[0], 1), -1, np.int8), lv[:, :-1]), axis=1)
        change_at = np.flatnonzero((lv != prev).any(axis=0)).tolist()
        change_vals = [tuple(int(v) for v in col) for col in lv[:, change_at].T]
        return ctrl, change_at, change_vals

    def _make_player(self, sched: ClockSchedule, word_list: list[int], done: Event) -> Callable[..., None]:
        """The per-edge function that drives schedule entry ``i`` (sampled by the design on clock ``i``)."""
        h = self._h
        ctrl, change_at, change_vals = self._control_changes(sched)
        data = h["in_data"]
        n = sched.n_clocks
        change_at.append(n)  # sentinel
        state = {"i": 0, "k": 0, "next": change_at[0], "last": -1}

        def drive(i: int) -> None:
            # Only values that change are written.
            if i == state["next"]:
                k = state["k"]
                for handle, value in zip(ctrl, change_vals[k]):
                    handle.value = value
                state["k"] = k + 1
                state["next"] = change_at[k + 1]
            w = word_list[i]
            if w != state["last"]:
                data.value = w
                state["last"] = w

        def step(first: bool = False) -> None:
            if first:
                drive(0)
                return
            i = state["i"] + 1
            state["i"] = i
            self.clocks = i
            if i < n:
                drive(i)
            else:
                # Leave the bus idle (the schedule ends in vertical back porch; only data-enable needs care).
                idle = idle_levels(self.active_high)
                for role in ("in_de", "in_valid", "in_enable"):
                    if role in h:
                        h[role].value = int(idle[role])
                ticker(self._clock).remove(step)
                done.set()

        return step


class VideoMonitor(_FrameMonitor):
    """Watches a video-family DUT's output every clock and rebuilds the frames it emits.

    A line ends when an ``out_de`` run ends; a frame starts at each leading edge of ``out_vsync`` (when
    ``out_vsync`` is not mapped, after ``expected_height`` lines). A pixel is a clock with ``out_de`` high
    (and ``out_valid`` high when mapped). With ``out_enable`` mapped, the outputs are sampled only on the
    clocks the output enable is active: the other clocks hold no sample. X/Z on ``out_data`` stores
    :data:`~vkit.video.capture.UNKNOWN` and is counted; X/Z on a control output is listed in ``xz_control`` as
    ``[clock, role]`` and read as inactive. The clocks of the output sync leading edges are kept in the run
    facts (``output_vsync_clocks``, ``output_hsync_clocks``) so the scoreboard can tell reset fill from frames.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "video"); uses ``out_de``, ``out_data`` and
            ``out_valid``, ``out_vsync``, ``out_hsync``, ``out_enable`` when mapped.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role; :meth:`start` waits until it is
            inactive.
        expected_height: active lines per output frame, or None; needed when ``out_vsync`` is not mapped.
        expected_width: pixels per output line (recorded only), or None.
        vsync_active_high: polarity of the ``out_vsync`` pin.
        hsync_active_high: polarity of the ``out_hsync`` pin.
        reset_active_high: reset polarity.
        facts: the capture's run facts to start from (kept, not copied); sources write into :attr:`facts`
            through their ``stats``.
        active_high: role -> pin polarity of ``out_de``, ``out_valid``, ``out_enable`` (left out: active high).
        bus: the lane layout of ``out_data``; needed when the word is over 62 bits (each lane is then
            recorded as a pixel as it is sampled, :attr:`splits_lanes`).

    Clock numbering: clock 0 is the first rising edge after :meth:`start`; values are sampled on the edge.
    """

    family = "video"
    _EVENT_KEYS = ("xz_control", "de_in_blanking")

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any = None,
        reset: Any = None,
        *,
        expected_height: int | None = None,
        expected_width: int | None = None,
        vsync_active_high: bool = True,
        hsync_active_high: bool = True,
        reset_active_high: bool = True,
        facts: RunFacts | None = None,
        active_high: Mapping[str, bool] | None = None,
        bus: BusLayout | None = None,
    ) -> None:
        super().__init__(dut, signals, clock, reset, reset_active_high=reset_active_high)
        self.bus = bus
        """The lane layout of ``out_data`` (needed for a word over 62 bits, split into pixels as sampled)."""
        if "out_vsync" not in self._h and not expected_height:
            raise ConfigError(
                "video monitor: role 'out_vsync' is not mapped and expected_height is not given; "
                "map out_vsync or give expected_height so frames can be split"
            )
        # a sync output the design does not have is not counted (None), so it is not compared with the input's
        self._init_monitor(
            expected_height, expected_width, facts, de_in_blanking=[],
            output_vsync_count=0 if "out_vsync" in self._h else None,
            output_hsync_per_frame=[] if "out_vsync" in self._h and "out_hsync" in self._h else None,
            output_vsync_clocks=[], output_hsync_clocks=[],
        )
        self._split_by_height = "out_vsync" not in self._h
        self.vsync_active_high = vsync_active_high
        self.hsync_active_high = hsync_active_high
        given = dict(active_high or {})
        self.active_high = {r: bool(given.get(r, True)) for r in ("out_de", "out_valid", "out_enable")}
        self._line_pixels = 0
        self._hs_count = 0

    # -- how a line and a frame end -------------------------------------------------------------------

    def _end_line(self) -> None:
        self._builder.new_line()
        if self._line_pixels:
            self._line_pixels = 0
            self._count_line()

    def _on_vsync(self, clock: int) -> None:
        self.facts.output_vsync_count += 1
        self.facts.output_vsync_clocks.append(clock)
        if self.facts.output_hsync_per_frame is not None:
            self.facts.output_hsync_per_frame.append(self._hs_count)
        self._hs_count = 0
        if self._lines_in_frame or self._line_pixels:
            self._line_pixels = 0
            self._close_frame()

    def _level_reader(self, role: str, high: bool) -> Callable[[], int] | None:
        """A reader of ``role``'s asserted state: 1 asserted, 0 not, -1 X/Z; None when the role is not mapped."""
        if role not in self._h:
            return None
        read = bit_reader(self._h[role])
        if high:
            return read
        return lambda: 1 - v if (v := read()) >= 0 else v

    def _make_sample(self) -> Callable[[int], None]:
        """The function that samples the outputs on one (enabled) clock ``c``."""
        read_de = self._level_reader("out_de", self.active_high["out_de"])
        read_valid = self._level_reader("out_valid", self.active_high["out_valid"])
        read_vs = self._level_reader("out_vsync", self.vsync_active_high)
        read_hs = self._level_reader("out_hsync", self.hsync_active_high)
        read_data = word_reader(self._h["out_data"])
        add = self._adder()
        facts = self.facts
        event_at = self._event_at
        prev = {"de": 0, "vs": False, "hs": False}

        def sample(c: int) -> None:
            de = read_de()
            if de < 0:
                event_at("xz_control", c, "out_de")
                de = 0
            pix = de
            if read_valid is not None and de:
                v = read_valid()
                if v < 0:
                    event_at("xz_control", c, "out_valid")
                    v = 0
                pix = v
            if prev["de"] and not de:
                self._end_line()
            if read_vs is not None:
                vs = read_vs()
                if vs < 0:
                    event_at("xz_control", c, "out_vsync")
                vs_on = vs == 1
                if vs_on and not prev["vs"]:
                    self._on_vsync(c)
                if vs_on and de:
                    event_at("de_in_blanking", c)
                prev["vs"] = vs_on
            if read_hs is not None:
                hs = read_hs()
                if hs < 0:
                    event_at("xz_control", c, "out_hsync")
                hs_on = hs == 1
                if hs_on and not prev["hs"]:
                    self._hs_count += 1
                    facts.output_hsync_clocks.append(c)
                prev["hs"] = hs_on
            if pix:
                value = read_data()
                if value == UNKNOWN:
                    facts.xz_data_count += 1
                if facts.first_output_clock is None:
                    facts.first_output_clock = c
                add(value, c)
                self._line_pixels += 1
            prev["de"] = de

        return sample

    def _make_step(self) -> Callable[[], None]:
        """The per-edge function: samples on clocks the output enable allows, then advances the clock count."""
        sample = self._make_sample()
        read_en = self._level_reader("out_enable", self.active_high["out_enable"])

        def step() -> None:
            c = self.clocks
            en = 1 if read_en is None else read_en()
            if en == 1:
                sample(c)
            elif en < 0:
                self._event_at("xz_control", c, "out_enable")
            c += 1
            self.clocks = c
            if c == self._deadline:
                self._event.set()
            if c == self._clock_deadline:
                self._clock_event.set()

        return step
