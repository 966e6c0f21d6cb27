"""One simulation, described completely as data: the runner writes it as JSON, the cocotb entry reads it."""

from __future__ import annotations

import dataclasses
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.vocab import components, sample_bits
from vkit.video.bus import BusLayout, clock_timing, tiny_in_pixels
from vkit.model.luma import sample_dtype
from vkit.core.errors import ConfigError
from vkit.core.validate import suggest
from vkit.sim.signals import FAMILY_ROLES, KEEP_ROLES, SYNC_ROLES, SignalMap
from vkit.video.enables import EnablePattern
from vkit.video.formats import PIXEL_FORMAT_BITS
from vkit.video.timing import StallPattern, VideoTiming
from vkit.video.words import BLANKING_MODES

__all__ = ["SimCase", "CASE_ENV", "TIMEOUT_FACTOR", "TIMEOUT_MARGIN_CLOCKS", "error_file_for", "per_clock_start_ps"]

CASE_ENV = "VKIT_CASE"
"""Environment variable holding the path of the case JSON that :mod:`vkit.sim.tb.entry` runs."""

TIMEOUT_FACTOR = 4
"""Default timeout = this many times the expected clocks, plus :data:`TIMEOUT_MARGIN_CLOCKS`."""

TIMEOUT_MARGIN_CLOCKS = 2000
"""Clocks added to every default timeout, for pipeline latency and flushing."""


def error_file_for(capture_file: str | Path) -> Path:
    """The sidecar text file next to a capture that holds the one-line error of a failed run."""
    p = Path(capture_file)
    return p.with_name(p.stem + ".error.txt")


def per_clock_start_ps(clock_period_ns: float, reset_cycles: int) -> int:
    """Simulation time (ps) at which capture clock 0 starts on the per-clock path (:mod:`vkit.sim.tb.entry`).

    cocotb's clock rises at time 0 and that edge is the first of the ``reset_cycles`` reset edges, so the
    monitor starts on edge ``reset_cycles - 1``; capture clock ``k`` is the ``k + 1``-th rising edge after
    it. Every drive path numbers clocks the same way, so a wave rerun (always per clock) turns any
    capture's clocks into times with this. ``tests/test_waves_native.py`` holds it to what the
    simulator reports.
    """
    return int(round(clock_period_ns * 1000)) * (int(reset_cycles) - 1)


def _pattern(value: Any, what: str) -> StallPattern | None:
    if value is None:
        return None
    if isinstance(value, StallPattern):
        return value
    if not isinstance(value, dict):
        raise ConfigError(f"{what}: expected a table with probability, max_length, seed; got {type(value).__name__}")
    unknown = sorted(set(value) - {"probability", "max_length", "seed"})
    if unknown:
        raise ConfigError(f"{what}: unknown key(s) {', '.join(unknown)}; known keys are probability, max_length, seed")
    return StallPattern(**value)


@dataclass
class SimCase:
    """Everything one simulation needs, as JSON-friendly values.

    Attributes:
        family: "video" or "stream".
        signals: role -> DUT port name (see :data:`vkit.sim.signals.FAMILY_ROLES`).
        frames_file: a ``.npy`` of uint8 frames, ``(N, H, W)`` for gray8 or ``(N, H, W, 3)`` for rgb888.
        capture_file: where the ``.npz`` capture is written (always, even on timeout or error).
        width: active pixels per line, >= 1.
        height: active lines per frame, >= 1.
        pixel_format: "gray8" (8-bit bus) or "rgb888" (24-bit bus, R<<16 | G<<8 | B).
        timing: video timing as a dict (:meth:`VideoTiming.to_dict` fields or ``{"preset": name}``);
            None means ``vkit.video.timing.tiny(width, height)``. Video family only.
        stalls: video stalls ``{"probability", "max_length", "seed"}`` or None.
        stream_gaps: stream source idle gaps ``{"probability", "max_length", "seed"}`` or None.
        backpressure: stream sink ready-low runs ``{"probability", "max_length", "seed"}`` or None.
        blanking: "random" (seeded garbage on the data bus outside active video) or "constant".
        blanking_value: data word outside active video when ``blanking`` is "constant", >= 0.
        seed: seed of the garbage words.
        clock_period_ns: clock period in ns, > 0.
        reset_active_high: reset polarity.
        reset_cycles: rising edges with reset active, >= 1.
        timeout_clocks: clocks to wait for all output frames after the first input clock; None means
            ``TIMEOUT_FACTOR`` x the expected clocks + ``TIMEOUT_MARGIN_CLOCKS``.
        waveform_start_clock: first clock of a waveform window, or None (reserved for the runner).
        waveform_end_clock: last clock of a waveform window, or None.
        simulator: simulator name recorded in the capture meta, or None.
        label: a free name for logs and reports.
        parameters: parameter/generic values the design must have been built with; the per-clock test
            compares the integer ones with what the simulator shows before it starts.
        component_order: the colour components in a pixel field, most significant first ("RGB", "BGR", ...).
        pixels_per_clock: pixels the data buses carry a clock (1, 2, 4, 8); width, height and ``timing``
            stay in pixels.
        lane_order: "first_low" (the first pixel of a clock's group in the least significant lane) or
            "first_high".
        enable: the input clock-enable pattern (:meth:`EnablePattern.to_dict`), or None: every clock is a
            sample. Needs the ``in_enable`` role; video family only.
        polarity: role -> True when that pin is active high, for the pins whose polarity is given; the
            others are active high, except syncs, which follow the timing (:meth:`active_high`).
    """

    family: str
    signals: dict[str, str]
    frames_file: str
    capture_file: str
    width: int
    height: int
    pixel_format: str = "gray8"
    timing: dict[str, Any] | None = None
    stalls: dict[str, Any] | None = None
    stream_gaps: dict[str, Any] | None = None
    backpressure: dict[str, Any] | None = None
    blanking: str = "random"
    blanking_value: int = 0
    seed: int = 0
    clock_period_ns: float = 10.0
    reset_active_high: bool = True
    reset_cycles: int = 4
    timeout_clocks: int | None = None
    waveform_start_clock: int | None = None
    waveform_end_clock: int | None = None
    simulator: str | None = None
    label: str = ""
    parameters: dict[str, Any] = field(default_factory=dict)
    component_order: str = "RGB"
    pixels_per_clock: int = 1
    lane_order: str = "first_low"
    enable: dict[str, Any] | None = None
    polarity: dict[str, bool] = field(default_factory=dict)
    _frames_cache: np.ndarray | None = field(default=None, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.family not in FAMILY_ROLES:
            raise ConfigError(f"case family {self.family!r} is not known; use one of {', '.join(FAMILY_ROLES)}")
        if self.pixel_format not in PIXEL_FORMAT_BITS:
            raise ConfigError(f"case pixel_format {self.pixel_format!r} is not known; {suggest(self.pixel_format, PIXEL_FORMAT_BITS)}")
        if self.blanking not in BLANKING_MODES:
            raise ConfigError(f"case blanking {self.blanking!r}; use 'random' or 'constant'")
        for key in ("width", "height", "reset_cycles"):
            v = getattr(self, key)
            if isinstance(v, bool) or not isinstance(v, int) or v < 1:
                raise ConfigError(f"case {key} = {v!r}; give an integer >= 1")
        if not isinstance(self.clock_period_ns, (int, float)) or self.clock_period_ns <= 0:
            raise ConfigError(f"case clock_period_ns = {self.clock_period_ns!r}; give a positive number of ns")
        if self.timeout_clocks is not None and (not isinstance(self.timeout_clocks, int) or self.timeout_clocks < 1):
            raise ConfigError(f"case timeout_clocks = {self.timeout_clocks!r}; give an integer >= 1 or leave it out")
        if self.family != "video" and self.stalls:
            raise ConfigError("case stalls apply to the video family; use stream_gaps for the stream family")
        if self.family != "stream" and (self.stream_gaps or self.backpressure):
            raise ConfigError("case stream_gaps/backpressure apply to the stream family; use stalls for video")
        SignalMap(dict(self.signals), self.family)
        if self.enable is not None and (self.family != "video" or "in_enable" not in self.signals):
            raise ConfigError("case enable: an input enable pattern needs the video family and the 'in_enable' "
                              "role; map in_enable to the design's clock-enable port or drop the pattern")
        self.enable_pattern()
        self.stall_pattern()
        self.gap_pattern()
        self.backpressure_pattern()
        self.bus_layout()
        if self.family == "stream":
            self.bus_layout().check_width(self.width, keep=all(r in self.signals for r in KEEP_ROLES))
        if self.family == "video":
            t = self.pixel_timing()
            self.video_timing()
            if (t.h_active, t.v_active) != (self.width, self.height):
                raise ConfigError(
                    f"case timing is {t.h_active}x{t.v_active} but width x height is {self.width}x{self.height}; "
                    "make them agree"
                )

    # -- typed views ------------------------------------------------------------------------------------

    def signal_map(self) -> SignalMap:
        """The signals as a :class:`SignalMap` of this family."""
        return SignalMap(dict(self.signals), self.family)

    def pixel_timing(self) -> VideoTiming:
        """The timing counted in pixels, as given (when none is given, the tiny timing of the clocks,
        :func:`vkit.video.bus.tiny_in_pixels`, which is ``tiny(width, height)`` at one pixel a clock)."""
        if self.timing is None:
            return tiny_in_pixels(self.width, self.height, self.pixels_per_clock)
        return VideoTiming.from_dict(self.timing)

    def video_timing(self) -> VideoTiming:
        """The timing counted in bus clocks, the one the source plays (:func:`vkit.video.bus.clock_timing`);
        the pixel timing itself at one pixel a clock."""
        given = None if self.timing is None else VideoTiming.from_dict(self.timing)
        return clock_timing(given, self.pixels_per_clock, self.width, self.height)

    def bus_layout(self) -> BusLayout:
        """How pixels sit in the data words (:class:`vkit.video.bus.BusLayout`)."""
        return BusLayout(self.pixel_format, self.component_order, self.pixels_per_clock, self.lane_order)

    def stall_pattern(self) -> StallPattern | None:
        """Video stalls as a :class:`StallPattern`, or None."""
        return _pattern(self.stalls, "case stalls")

    def enable_pattern(self) -> EnablePattern | None:
        """The input clock-enable pattern, or None (every clock takes a sample)."""
        if self.enable is None:
            return None
        return EnablePattern.from_dict(self.enable, "case enable")

    def active_high(self, role: str) -> bool:
        """True when the pin of ``role`` is active high: as given in :attr:`polarity`; else the reset as
        :attr:`reset_active_high` says, the syncs as the video timing says, every other pin active high."""
        if role == "reset":
            return bool(self.reset_active_high)
        if role in self.polarity:
            return bool(self.polarity[role])
        if role in SYNC_ROLES and self.family == "video":
            t = self.video_timing()
            return bool(t.hsync_active_high if role.endswith("hsync") else t.vsync_active_high)
        return True

    def pin_polarity(self, roles: tuple[str, ...]) -> dict[str, bool]:
        """role -> :meth:`active_high` for each of ``roles``."""
        return {role: self.active_high(role) for role in roles}

    def gap_pattern(self) -> StallPattern | None:
        """Stream source gaps as a :class:`StallPattern`, or None."""
        return _pattern(self.stream_gaps, "case stream_gaps")

    def backpressure_pattern(self) -> StallPattern | None:
        """Stream sink back-pressure as a :class:`StallPattern`, or None."""
        return _pattern(self.backpressure, "case backpressure")

    def load_frames(self) -> np.ndarray:
        """Read ``frames_file``: uint8 ``(N, H, W)`` or ``(N, H, W, 3)`` matching width, height, pixel_format."""
        if self._frames_cache is not None:
            return self._frames_cache
        path = Path(self.frames_file)
        try:
            arr = np.load(path, allow_pickle=False)
        except FileNotFoundError:
            raise ConfigError(f"frames file {str(path)!r} does not exist; write the frames with numpy.save first") from None
        except ValueError as exc:
            raise ConfigError(f"frames file {str(path)!r} is not a plain .npy array ({exc}); save it with numpy.save") from None
        n = components(self.pixel_format)
        want = (self.height, self.width) + ((n,) if n > 1 else ())
        dtype = sample_dtype(sample_bits(self.pixel_format))
        if arr.ndim != len(want) + 1 or tuple(arr.shape[1:]) != want or arr.dtype != dtype:
            raise ConfigError(
                f"frames file {str(path)!r} holds {arr.dtype} {arr.shape}, expected {dtype} (N, {', '.join(map(str, want))}) "
                f"for {self.pixel_format} {self.width}x{self.height}; re-save the frames"
            )
        self._frames_cache = arr
        return arr

    def frame_count(self) -> int:
        """Number of frames in ``frames_file`` (read from the header only)."""
        arr = np.load(Path(self.frames_file), mmap_mode="r", allow_pickle=False)
        return int(arr.shape[0])

    def expected_clocks(self, frames: int | None = None) -> int:
        """Clocks the input side needs for all frames, stalls, gaps and back-pressure included (on average)."""
        n = self.frame_count() if frames is None else frames
        if self.family == "video":
            t = self.video_timing()
            base = n * t.clocks_per_frame
            stall = self.stall_pattern()
            extra = 0.0
            if stall is not None:
                extra = n * t.active_pixels * stall.probability * (stall.max_length + 1) / 2
            enable = self.enable_pattern()
            per_sample = enable.mean_clocks_per_sample() if enable is not None else 1.0
            return int((base + extra) * per_sample)
        pixels = n * self.width * self.height
        factor = 1.0
        for pat in (self.gap_pattern(), self.backpressure_pattern()):
            if pat is not None:
                factor *= 1 + pat.probability * (pat.max_length + 1) / 2
        return int(pixels * factor)

    def effective_timeout_clocks(self, frames: int | None = None) -> int:
        """``timeout_clocks`` if given, else the generous default described on the class."""
        if self.timeout_clocks is not None:
            return self.timeout_clocks
        return TIMEOUT_FACTOR * self.expected_clocks(frames) + TIMEOUT_MARGIN_CLOCKS

    # -- files ------------------------------------------------------------------------------------------

    def to_dict(self) -> dict[str, Any]:
        """All public fields as a JSON-friendly dict."""
        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self) if not f.name.startswith("_")}

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> SimCase:
        """Build a case from :meth:`to_dict` output; unknown keys are a ConfigError."""
        known = {f.name for f in dataclasses.fields(cls) if not f.name.startswith("_")}
        unknown = sorted(set(data) - known)
        if unknown:
            raise ConfigError(f"case: unknown key(s) {', '.join(unknown)}; known keys are {', '.join(sorted(known))}")
        try:
            return cls(**data)
        except TypeError as exc:
            raise ConfigError(f"case: {exc}; give every required key") from None

    def to_json(self, path: str | Path) -> Path:
        """Write the case as JSON (parent folders are created)."""
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(self.to_dict(), indent=2, sort_keys=True) + "\n")
        return path

    @classmethod
    def from_json(cls, path: str | Path) -> SimCase:
        """Read a case written by :meth:`to_json`."""
        path = Path(path)
        try:
            data = json.loads(path.read_text())
        except FileNotFoundError:
            raise ConfigError(f"case file {str(path)!r} does not exist; write it with SimCase.to_json") from None
        except json.JSONDecodeError as exc:
            raise ConfigError(f"case file {str(path)!r} is not valid JSON ({exc}); rewrite it with SimCase.to_json") from None
        if not isinstance(data, dict):
            raise ConfigError(f"case file {str(path)!r} does not hold a JSON object; rewrite it with SimCase.to_json")
        return cls.from_dict(data)
