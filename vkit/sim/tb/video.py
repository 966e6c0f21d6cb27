"""Video source and monitor: frames in and out over sync, data-enable and pixel-valid, clock by clock."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from cocotb.triggers import Event

from vkit.video.capture import UNKNOWN
from vkit.core.errors import ConfigError
from vkit.sim.tb._common import _FrameMonitor, _in_data_bits, _Source, bit_reader, ticker, word_reader
from vkit.sim.signals import SignalMap, pixel_bits
from vkit.video.timing import ClockSchedule, StallPattern, VideoTiming, schedule

__all__ = ["VideoSource", "VideoMonitor", "frames_array", "sync_counts"]


def frames_array(frames: Any, pixel_format: str | None = None) -> tuple[np.ndarray, str]:
    """Stack ``frames`` into ``(N, H, W)`` (gray8) or ``(N, H, W, 3)`` (rgb888) uint8 and name the format.

    Args:
        frames: one frame or a sequence of frames, each uint8-valued ``(H, W)`` or ``(H, W, 3)``.
        pixel_format: "gray8", "rgb888" or None to infer from the shape.

    Raises:
        ConfigError: empty input, mixed shapes, values outside 0..255 or a shape/format mismatch.
    """
    arr = frames if isinstance(frames, np.ndarray) else np.asarray(frames)
    # A single frame is (H, W) or (H, W, 3); a 3-D array ending in 3 is one RGB frame unless gray8 was asked.
    if arr.ndim == 2 or (arr.ndim == 3 and arr.shape[-1] == 3 and pixel_format != "gray8"):
        arr = arr[None]
    if arr.dtype == object or arr.size == 0:
        raise ConfigError("frames: got no frames or frames of different shapes; give equal-size (H, W) or (H, W, 3) arrays")
    if arr.ndim == 4 and arr.shape[-1] == 3:
        fmt = "rgb888"
    elif arr.ndim == 3:
        fmt = "gray8"
    else:
        raise ConfigError(f"frames: shape {arr.shape} is not (N, H, W) or (N, H, W, 3); give uint8 gray or RGB frames")
    if pixel_format is not None and pixel_format != fmt:
        pixel_bits(pixel_format)
        raise ConfigError(
            f"frames: shape {arr.shape} is {fmt} but pixel_format is {pixel_format!r}; "
            f"give {'(N, H, W, 3)' if pixel_format == 'rgb888' else '(N, H, W)'} frames or change pixel_format"
        )
    if arr.dtype != np.uint8:
        if not np.issubdtype(arr.dtype, np.integer) or arr.min() < 0 or arr.max() > 255:
            raise ConfigError(f"frames: dtype {arr.dtype} with values outside 0..255; give uint8 frames")
        arr = arr.astype(np.uint8)
    return arr, fmt


def _pixel_words(frames: np.ndarray, fmt: str) -> np.ndarray:
    """Data-bus words per pixel, ``(N, H, W)`` int64 (rgb888 packed as R<<16 | G<<8 | B)."""
    if fmt == "rgb888":
        from vkit.video.images import pack_rgb

        return np.asarray(pack_rgb(frames), dtype=np.int64)
    return frames.astype(np.int64)


def _leading_edges(level: np.ndarray, active: bool) -> np.ndarray:
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
    bounds = np.searchsorted(hsync_edges, vsync_edges, side="left")
    return [int(b) for b in np.diff(np.concatenate(([0], bounds)))]


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
        pixel_format: "gray8" (8 bits) or "rgb888" (24 bits); None infers it from the first frames sent.
        blanking: "random" drives seeded random words on ``in_data`` outside active video; "constant" drives
            ``blanking_value``. Stall clocks always carry seeded random words (the design must ignore them).
        blanking_value: the constant blanking word, >= 0.
        seed: seed for the garbage words (numpy PCG64).
        reset_active_high: reset polarity.
        stats: a dict the source writes its run facts into (Capture meta keys: ``frames_sent``,
            ``first_input_clock``, ``stall_pixels``, ``input_vsync_count``, ``input_hsync_per_frame``);
            pass the monitor's :attr:`VideoMonitor.meta` so they land in its capture.

    Clock numbering: clock 0 is the first rising edge after :meth:`send` starts; a value of schedule
    entry ``i`` is sampled by the design on clock ``i``.
    """

    family = "video"

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
        stats: dict[str, Any] | None = None,
    ) -> None:
        if not isinstance(timing, VideoTiming):
            raise ConfigError("VideoSource: timing must be a vkit.video.timing.VideoTiming; build one with preset() or tiny()")
        if blanking not in ("random", "constant"):
            raise ConfigError(f"blanking = {blanking!r}; use 'random' or 'constant'")
        bits = _in_data_bits(pixel_format)
        super().__init__(dut, signals, clock, reset, data_bits=bits, reset_active_high=reset_active_high)
        self._init_source(pixel_format, seed, stats)
        if stalls is not None and stalls.probability > 0 and "in_valid" not in self._h:
            raise ConfigError(
                "stalls need a pixel-valid input but role 'in_valid' is not mapped; map in_valid or drop the stalls"
            )
        self.timing = timing
        self.stalls = stalls
        self.blanking = blanking
        self.blanking_value = int(blanking_value)
        self.schedule: ClockSchedule | None = None
        self._idle()

    def _idle(self) -> None:
        """Drive the blanking state: syncs inactive, data-enable and valid low, data at the blanking value."""
        t = self.timing
        self._h["in_vsync"].value = 0 if t.vsync_active_high else 1
        self._h["in_hsync"].value = 0 if t.hsync_active_high else 1
        self._h["in_de"].value = 0
        if "in_valid" in self._h:
            self._h["in_valid"].value = 0
        self._h["in_data"].value = self.blanking_value if self.blanking == "constant" else 0

    def prepare(self, frames: Any) -> tuple[ClockSchedule, np.ndarray]:
        """Build the schedule and the data word of every clock for ``frames`` (no simulation needed).

        Returns:
            (schedule, words): ``words`` is an int64 array of length ``schedule.n_clocks``.
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
        sched = schedule(t, int(arr.shape[0]), self.stalls)
        bits = pixel_bits(fmt)
        rng = np.random.default_rng(self.seed)
        garbage = rng.integers(0, 1 << bits, size=sched.n_clocks, dtype=np.int64)
        if self.blanking == "random":
            words = garbage
        else:
            words = np.full(sched.n_clocks, self.blanking_value, np.int64)
            stall = sched.de & ~sched.valid
            words[stall] = garbage[stall]
        pix = sched.x >= 0
        packed = _pixel_words(arr, fmt)
        words[pix] = packed[sched.frame[pix], sched.y[pix], sched.x[pix]]
        return sched, words

    async def send(self, frames: Any) -> None:
        """Drive all ``frames`` with the timing; returns after the last scheduled clock.

        Args:
            frames: one frame or a sequence of frames, uint8 ``(H, W)`` or ``(H, W, 3)``, of the timing's
                active size.
        """
        sched, words = self.prepare(frames)
        self.schedule = sched
        t = self.timing
        vs_edges = _leading_edges(sched.vsync, t.vsync_active_high)
        hs_edges = _leading_edges(sched.hsync, t.hsync_active_high)
        self.stats["frames_sent"] = int(sched.frames)
        self.stats["stall_pixels"] = sched.stall_pixels.tolist()
        self.stats["input_vsync_count"] = int(vs_edges.size)
        self.stats["input_hsync_per_frame"] = sync_counts(hs_edges, vs_edges)

        await self._reset_released()
        first_valid = int(np.argmax(sched.valid)) if sched.valid.any() else None
        self.stats["first_input_clock"] = first_valid

        h = self._h
        ctrl = [h["in_vsync"], h["in_hsync"], h["in_de"]]
        levels = [sched.vsync, sched.hsync, sched.de]
        if "in_valid" in h:
            ctrl.append(h["in_valid"])
            levels.append(sched.valid)
        lv = np.stack(levels).astype(np.int8)
        prev = np.concatenate((np.full((lv.shape[0], 1), -1, np.int8), lv[:, :-1]), axis=1)
        change_at = np.flatnonzero((lv != prev).any(axis=0)).tolist()
        change_vals = [tuple(int(v) for v in col) for col in lv[:, change_at].T]
        data = h["in_data"]
        word_list = words.tolist()

        n = sched.n_clocks
        change_at.append(n)  # sentinel
        state = {"i": 0, "k": 0, "next": change_at[0], "last": -1}
        done = Event()

        def drive(i: int) -> None:
            # Write schedule entry i (sampled by the design on clock i); only values that change.
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

        def step() -> None:
            i = state["i"] + 1
            state["i"] = i
            self.clocks = i
            if i < n:
                drive(i)
            else:
                # Leave the bus idle (the schedule ends in vertical back porch; only data-enable needs care).
                h["in_de"].value = 0
                if "in_valid" in h:
                    h["in_valid"].value = 0
                tick.remove(step)
                done.set()

        self.clocks = 0
        drive(0)
        tick = ticker(self._clock)
        tick.add(step)
        try:
            await done.wait()
        finally:
            tick.remove(step)


class VideoMonitor(_FrameMonitor):
    """Watches a video-family DUT's output every clock and rebuilds the frames it emits.

    A line ends when an ``out_de`` run ends; a frame starts at each leading edge of ``out_vsync`` (when
    ``out_vsync`` is not mapped, after ``expected_height`` lines). A pixel is a clock with ``out_de`` high
    (and ``out_valid`` high when mapped). X/Z on ``out_data`` stores :data:`~vkit.video.capture.UNKNOWN` and is
    counted; X/Z on a control output is listed in ``xz_control`` as ``[clock, role]`` and read as low.

    Args:
        dut: the cocotb top-level handle.
        signals: role -> DUT port (``SignalMap`` or dict, family "video"); uses ``out_de``, ``out_data`` and
            ``out_valid``, ``out_vsync``, ``out_hsync`` when mapped.
        clock: the clock handle, or None for the map's ``clock`` role.
        reset: the reset handle, or None for the map's ``reset`` role; :meth:`start` waits until it is
            inactive.
        expected_height: active lines per output frame, or None; needed when ``out_vsync`` is not mapped.
        expected_width: pixels per output line (only recorded in the meta), or None.
        vsync_active_high: polarity of ``out_vsync``.
        hsync_active_high: polarity of ``out_hsync``.
        reset_active_high: reset polarity.
        meta: initial capture meta (copied); sources may write into :attr:`meta` through their ``stats``.

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
        meta: dict[str, Any] | None = None,
    ) -> None:
        super().__init__(dut, signals, clock, reset, reset_active_high=reset_active_high)
        if "out_vsync" not in self._h and not expected_height:
            raise ConfigError(
                "video monitor: role 'out_vsync' is not mapped and expected_height is not given; "
                "map out_vsync or give expected_height so frames can be split"
            )
        self._init_monitor(
            expected_height, expected_width, meta, de_in_blanking=[], output_vsync_count=0, output_hsync_per_frame=[]
        )
        self._split_by_height = "out_vsync" not in self._h
        self.vsync_active_high = vsync_active_high
        self.hsync_active_high = hsync_active_high
        self._line_pixels = 0
        self._hs_count = 0

    # -- how a line and a frame end -------------------------------------------------------------------

    def _end_line(self) -> None:
        self._builder.new_line()
        if self._line_pixels:
            self._line_pixels = 0
            self._count_line()

    def _on_vsync(self) -> None:
        self.meta["output_vsync_count"] += 1
        self.meta["output_hsync_per_frame"].append(self._hs_count)
        self._hs_count = 0
        if self._lines_in_frame or self._line_pixels:
            self._line_pixels = 0
            self._close_frame()

    def _make_step(self) -> Callable[[], None]:
        """The per-edge sampling function (closures keep the hot path on local variables)."""
        h = self._h
        read_de = bit_reader(h["out_de"])
        read_valid = bit_reader(h["out_valid"]) if "out_valid" in h else None
        read_vs = bit_reader(h["out_vsync"]) if "out_vsync" in h else None
        read_hs = bit_reader(h["out_hsync"]) if "out_hsync" in h else None
        read_data = word_reader(h["out_data"])
        add = self._builder.add
        meta = self.meta
        event_at = self._event_at
        vs_on_level = 1 if self.vsync_active_high else 0
        hs_on_level = 1 if self.hsync_active_high else 0
        prev = {"de": 0, "vs": False, "hs": False}

        def step() -> None:
            c = self.clocks
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
                vs_on = vs == vs_on_level
                if vs_on and not prev["vs"]:
                    self._on_vsync()
                if vs_on and de:
                    event_at("de_in_blanking", c)
                prev["vs"] = vs_on
            if read_hs is not None:
                hs = read_hs()
                if hs < 0:
                    event_at("xz_control", c, "out_hsync")
                hs_on = hs == hs_on_level
                if hs_on and not prev["hs"]:
                    self._hs_count += 1
                prev["hs"] = hs_on
            if pix:
                value = read_data()
                if value == UNKNOWN:
                    meta["xz_data_count"] += 1
                if meta["first_output_clock"] is None:
                    meta["first_output_clock"] = c
                add(value, c)
                self._line_pixels += 1
            prev["de"] = de
            c += 1
            self.clocks = c
            if c == self._deadline:
                self._event.set()
            if c == self._clock_deadline:
                self._clock_event.set()

        return step
