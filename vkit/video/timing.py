"""Video timing: porches, sync pulses and data-enable, the presets, and a per-clock schedule with stalls."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from vkit.core.errors import ConfigError
from vkit.video.enables import EnablePattern

__all__ = [
    "VideoTiming",
    "StallPattern",
    "ClockSchedule",
    "PRESETS",
    "preset",
    "tiny",
    "schedule",
]

_INT_FIELDS = (
    "h_active",
    "h_front_porch",
    "h_sync",
    "h_back_porch",
    "v_active",
    "v_front_porch",
    "v_sync",
    "v_back_porch",
)
_PORCHES = ("h_front_porch", "h_back_porch", "v_front_porch", "v_back_porch")


@dataclass(frozen=True)
class VideoTiming:
    """One video format: active size, porches and sync widths, counted in pixel clocks and lines.

    Line layout (one line is ``h_total`` clocks)::

        | h_active (data-enable high) | h_front_porch | h_sync | h_back_porch |

    Frame layout (one frame is ``v_total`` lines)::

        | v_active lines | v_front_porch lines | v_sync lines | v_back_porch lines |

    Every line of the frame, blanking lines included, has the same horizontal layout, so hsync keeps
    pulsing once per line during vertical blanking. Vsync is asserted for whole lines: from the first
    clock of the first sync line to the last clock of the last sync line. Data-enable is high only in
    the active part of active lines.

    Attributes:
        h_active: active pixels per line, >= 1.
        h_front_porch: clocks between the last active pixel and the hsync pulse, >= 0.
        h_sync: hsync pulse width in clocks, >= 1.
        h_back_porch: clocks between the hsync pulse and the next line's first pixel, >= 0.
        v_active: active lines per frame, >= 1.
        v_front_porch: lines between the last active line and the vsync pulse, >= 1 (designs with a
            line buffer flush their last output line there).
        v_sync: vsync pulse width in lines, >= 1.
        v_back_porch: lines between the vsync pulse and the first active line, >= 0.
        hsync_active_high: True if hsync is high during the pulse; False for a negative sync.
        vsync_active_high: True if vsync is high during the pulse; False for a negative sync.
        name: a label for reports.
        pixel_clock_hz: nominal pixel clock in Hz, or None when the format has none (tiny timings).
    """

    h_active: int
    h_front_porch: int
    h_sync: int
    h_back_porch: int
    v_active: int
    v_front_porch: int
    v_sync: int
    v_back_porch: int
    hsync_active_high: bool = True
    vsync_active_high: bool = True
    name: str = "custom"
    pixel_clock_hz: float | None = field(default=None)

    def __post_init__(self) -> None:
        for key in _INT_FIELDS:
            value = getattr(self, key)
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
                raise ConfigError(
                    f"video timing {self.name!r}: {key} = {value!r} is not an integer; give a whole number of "
                    f"{'lines' if key.startswith('v_') else 'clocks'}"
                )
            low = 0 if key in _PORCHES else 1
            if value < low:
                raise ConfigError(
                    f"video timing {self.name!r}: {key} = {value} must be >= {low}; "
                    f"{'porches may be 0, everything else must be positive' if low == 0 else 'use a positive value'}"
                )
        if self.h_front_porch + self.h_sync + self.h_back_porch < 1:
            raise ConfigError(
                f"video timing {self.name!r}: horizontal blanking is 0 clocks; give at least 1 clock of "
                "front porch + sync + back porch"
            )
        if self.v_front_porch < 1:
            raise ConfigError(
                f"video timing {self.name!r}: v_front_porch = {self.v_front_porch} lines, need >= 1 because "
                "line-buffered designs flush their last line there; set v_front_porch to 1 or more"
            )
        for key in ("hsync_active_high", "vsync_active_high"):
            if not isinstance(getattr(self, key), (bool, np.bool_)):
                raise ConfigError(
                    f"video timing {self.name!r}: {key} = {getattr(self, key)!r} is not true/false; give a boolean"
                )
        if self.pixel_clock_hz is not None and not (
            isinstance(self.pixel_clock_hz, (int, float)) and self.pixel_clock_hz > 0
        ):
            raise ConfigError(
                f"video timing {self.name!r}: pixel_clock_hz = {self.pixel_clock_hz!r} must be a positive "
                "number of Hz or left out"
            )

    @property
    def h_blank(self) -> int:
        """Horizontal blanking in clocks (front porch + sync + back porch)."""
        return self.h_front_porch + self.h_sync + self.h_back_porch

    @property
    def v_blank(self) -> int:
        """Vertical blanking in lines (front porch + sync + back porch)."""
        return self.v_front_porch + self.v_sync + self.v_back_porch

    @property
    def h_total(self) -> int:
        """Clocks per line, active plus blanking."""
        return self.h_active + self.h_blank

    @property
    def v_total(self) -> int:
        """Lines per frame, active plus blanking."""
        return self.v_active + self.v_blank

    @property
    def clocks_per_frame(self) -> int:
        """Clocks per frame without stalls (``h_total * v_total``)."""
        return self.h_total * self.v_total

    @property
    def active_pixels(self) -> int:
        """Pixels per frame (``h_active * v_active``)."""
        return self.h_active * self.v_active

    @property
    def refresh_hz(self) -> float | None:
        """Frames per second at the nominal pixel clock, or None without one."""
        if self.pixel_clock_hz is None:
            return None
        return self.pixel_clock_hz / self.clocks_per_frame

    def to_dict(self) -> dict[str, Any]:
        """All fields as a plain dict (TOML/JSON friendly; ``pixel_clock_hz`` left out when None)."""
        out = dataclasses.asdict(self)
        if out["pixel_clock_hz"] is None:
            del out["pixel_clock_hz"]
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> VideoTiming:
        """Build a timing from a dict of field values.

        A ``"preset"`` key starts from that preset (see :data:`PRESETS`); the other keys override it
        (changing any size drops the preset's name and pixel clock unless they are given again).
        Without a preset every integer field must be given.

        Raises:
            ConfigError: an unknown key, a missing field or a bad value.
        """
        if not isinstance(data, Mapping):
            raise ConfigError(f"video timing: expected a table of fields, got {type(data).__name__}; give a dict")
        known = {f.name for f in dataclasses.fields(cls)}
        values = dict(data)
        base: dict[str, Any] = {}
        if "preset" in values:
            base = preset(str(values.pop("preset"))).to_dict()
        unknown = sorted(set(values) - known)
        if unknown:
            raise ConfigError(
                f"video timing: unknown key(s) {', '.join(unknown)}; known keys are preset, {', '.join(sorted(known))}"
            )
        if base and any(k in _INT_FIELDS and values[k] != base[k] for k in values):
            # a changed geometry is no longer the named standard: its name and pixel clock do not carry over
            base["name"] = "custom"
            base.pop("pixel_clock_hz", None)
        base.update(values)
        missing = [k for k in _INT_FIELDS if k not in base]
        if missing:
            raise ConfigError(
                f"video timing: missing {', '.join(missing)}; give them or start from a preset "
                f"({', '.join(PRESETS)})"
            )
        return cls(**base)

    def __str__(self) -> str:
        return f"{self.h_active}x{self.v_active} ({self.h_total}x{self.v_total} total)"


def tiny(width: int, height: int, h_blank: int = 8, v_blank_lines: int = 3) -> VideoTiming:
    """A small timing with short porches, for fast simulation.

    Args:
        width: active pixels per line, >= 1.
        height: active lines per frame, >= 1.
        h_blank: horizontal blanking in clocks, >= 1; split about 1/4 front porch, the rest halved
            between sync and back porch (8 gives 2/3/3).
        v_blank_lines: vertical blanking in lines, >= 2; split about 1/3 front porch (at least 1),
            the rest halved between sync and back porch (3 gives 1/1/1).

    Returns:
        A timing named ``tiny{width}x{height}`` with active-high syncs and no pixel clock.
    """
    if not isinstance(h_blank, int) or h_blank < 1:
        raise ConfigError(f"tiny timing: h_blank = {h_blank!r} clocks, need an integer >= 1 (sync needs a clock)")
    if not isinstance(v_blank_lines, int) or v_blank_lines < 2:
        raise ConfigError(
            f"tiny timing: v_blank_lines = {v_blank_lines!r}, need an integer >= 2 (1 front porch + 1 sync line)"
        )
    hfp = h_blank // 4
    hs = max(1, (h_blank - hfp) // 2)
    hbp = h_blank - hfp - hs
    vfp = max(1, v_blank_lines // 3)
    vs = max(1, (v_blank_lines - vfp) // 2)
    vbp = v_blank_lines - vfp - vs
    return VideoTiming(width, hfp, hs, hbp, height, vfp, vs, vbp, True, True, f"tiny{width}x{height}")


# The broadcast/monitor presets below are written from memory (VESA DMT and CTA-861 tables); the
# tests check their totals and refresh rates, naming the standard beside each check.
PRESETS: dict[str, VideoTiming] = {
    # VESA DMT 640x480 @ 60 Hz, both syncs negative, 25.175 MHz (from memory)
    "vga640x480p60": VideoTiming(640, 16, 96, 48, 480, 10, 2, 33, False, False, "vga640x480p60", 25_175_000.0),
    # CTA-861 format 4, 1280x720p @ 60 Hz, syncs positive, 74.25 MHz (from memory)
    "hd1280x720p60": VideoTiming(1280, 110, 40, 220, 720, 5, 5, 20, True, True, "hd1280x720p60", 74_250_000.0),
    # CTA-861 format 16, 1920x1080p @ 60 Hz, syncs positive, 148.5 MHz (from memory)
    "fhd1920x1080p60": VideoTiming(
        1920, 88, 44, 148, 1080, 4, 5, 36, True, True, "fhd1920x1080p60", 148_500_000.0
    ),
    "tiny32x24": tiny(32, 24),
    "tiny64x48": tiny(64, 48),
}
"""Named timings: the standard formats plus tiny ones for fast simulation."""


def preset(name: str) -> VideoTiming:
    """Return the preset timing called ``name`` (a key of :data:`PRESETS`).

    Raises:
        ConfigError: no such preset; the message lists the known names.
    """
    try:
        return PRESETS[name]
    except KeyError:
        raise ConfigError(f"video timing: unknown preset {name!r}; known presets are {', '.join(PRESETS)}") from None


@dataclass(frozen=True)
class StallPattern:
    """Seeded random stalls inside active video, for interfaces with a pixel-valid signal.

    Before every active pixel, with ``probability``, 1..``max_length`` extra clocks (uniform) are
    inserted in which data-enable stays high and valid is low. The active part of that line gets
    longer; the blanking intervals keep their length.

    Attributes:
        probability: chance of a stall before each pixel, 0.0..1.0.
        max_length: longest stall in clocks, >= 1.
        seed: seed of the random generator (numpy PCG64); the same seed gives the same stalls.
    """

    probability: float = 0.0
    max_length: int = 1
    seed: int = 0

    def __post_init__(self) -> None:
        if not isinstance(self.probability, (int, float)) or not 0.0 <= float(self.probability) <= 1.0:
            raise ConfigError(f"stall pattern: probability = {self.probability!r}, expected a number in 0.0..1.0")
        if isinstance(self.max_length, bool) or not isinstance(self.max_length, int) or self.max_length < 1:
            raise ConfigError(f"stall pattern: max_length = {self.max_length!r} clocks, expected an integer >= 1")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise ConfigError(f"stall pattern: seed = {self.seed!r}, expected an integer >= 0")

    def draw(self, frames: int, height: int, width: int) -> np.ndarray:
        """Stall lengths in clocks before each pixel, ``(frames, height, width)`` int32 (0 = none)."""
        rng = np.random.default_rng(self.seed)
        shape = (frames, height, width)
        hit = rng.random(shape, dtype=np.float32) < self.probability if self.probability < 1.0 else np.ones(shape, bool)
        out = np.zeros(shape, dtype=np.int32)
        out[hit] = rng.integers(1, self.max_length + 1, size=int(hit.sum()), dtype=np.int32)
        return out


@dataclass(frozen=True, eq=False)
class ClockSchedule:
    """What a video source drives on every clock, as parallel 1-D arrays (one entry per clock).

    Attributes:
        timing: the timing it was built from.
        frames: number of frames.
        hsync: hsync level on the wire (polarity applied), bool.
        vsync: vsync level on the wire (polarity applied), bool.
        de: data-enable, high in the active part of active lines (stall clocks included), bool.
        valid: pixel-valid, high when a pixel is transferred; equals ``de`` without stalls, bool.
        x: active pixel column transferred on that clock, int32, -1 when none.
        y: active pixel line transferred on that clock, int32, -1 when none.
        frame: frame number of that clock, int32, from 0.
        n_clocks: number of clocks.
        stall_pixels: ``(n, 3)`` int32 rows of (frame, y, x) of the pixels that came right after a
            stall, in transfer order; empty without stalls.
        enable: the input clock enable of every clock, bool; None when every clock takes a sample (no
            enable pattern). With a pattern, the clocks before each enabled clock repeat that sample's
            levels (syncs, data-enable, valid) and carry ``x = y = -1``: the sample is taken on its
            enabled clock only.
    """

    timing: VideoTiming
    frames: int
    hsync: np.ndarray
    vsync: np.ndarray
    de: np.ndarray
    valid: np.ndarray
    x: np.ndarray
    y: np.ndarray
    frame: np.ndarray
    n_clocks: int
    stall_pixels: np.ndarray
    enable: np.ndarray | None = None

    @property
    def enabled(self) -> np.ndarray:
        """The input enable of every clock (all True without an enable pattern), bool."""
        return self.enable if self.enable is not None else np.ones(self.n_clocks, bool)

    @property
    def taken(self) -> np.ndarray:
        """Clocks on which the design takes a pixel: an enabled clock with a pixel on the bus, bool."""
        return self.x >= 0

    def frame_starts(self) -> np.ndarray:
        """Index of the first clock of each frame, int64 array of length ``frames``."""
        if self.frame.size == 0:
            return np.zeros(0, np.int64)
        # compared in place (a bool a clock), not np.diff (two int copies of a long run's clocks)
        return np.concatenate(([0], np.flatnonzero(self.frame[1:] != self.frame[:-1]) + 1)).astype(np.int64)


def schedule(timing: VideoTiming, frames: int = 1, stalls: StallPattern | None = None,
             enable: EnablePattern | None = None) -> ClockSchedule:
    """Build the per-clock drive schedule for ``frames`` frames of ``timing``.

    Frames follow each other with no gap; each starts at its first active line (back porch lines
    come at the end of the previous frame, see :class:`VideoTiming`). Built with numpy only: a
    1920x1080 schedule of 2 frames takes a fraction of a second.

    Args:
        timing: the video timing.
        frames: number of frames, >= 1.
        stalls: optional stall pattern; None or probability 0 gives ``valid == de``.
        enable: optional clock-enable pattern (:class:`~vkit.video.enables.EnablePattern`): every raster
            sample (blanking included, stall clocks included) is held for its gap of disabled clocks and
            taken on the enabled clock that ends it.

    Returns:
        The :class:`ClockSchedule`.
    """
    if isinstance(frames, bool) or not isinstance(frames, (int, np.integer)) or frames < 1:
        raise ConfigError(f"schedule: frames = {frames!r}, expected an integer >= 1")
    t = timing
    lv = _frame_levels(t, int(frames))
    stall_pixels = np.zeros((0, 3), dtype=np.int32)
    if stalls is not None and stalls.probability > 0.0:
        lengths = stalls.draw(frames, t.v_active, t.h_active)
        lv = _stretch(lv, lengths)
        f_idx, y_idx, x_idx = np.nonzero(lengths)
        stall_pixels = np.stack([f_idx, y_idx, x_idx], axis=1).astype(np.int32)
    ce = None
    if enable is not None:
        lv, ce = _hold_for_enable(lv, enable.gaps(int(lv["de"].size)))
    hs = lv["hs"] if t.hsync_active_high else ~lv["hs"]
    vs = lv["vs"] if t.vsync_active_high else ~lv["vs"]
    return ClockSchedule(
        timing=t,
        frames=int(frames),
        hsync=np.ascontiguousarray(hs),
        vsync=np.ascontiguousarray(vs),
        de=lv["de"],
        valid=lv["valid"],
        x=lv["x"],
        y=lv["y"],
        frame=lv["fr"],
        n_clocks=int(lv["de"].size),
        stall_pixels=stall_pixels,
        enable=ce,
    )


def _frame_levels(t: VideoTiming, frames: int) -> dict[str, np.ndarray]:
    """Per-clock de, hsync, vsync (active high), pixel position and frame of ``frames`` frames without stalls."""
    ht, vt = t.h_total, t.v_total
    col = np.arange(ht, dtype=np.int32)
    line = np.arange(vt, dtype=np.int32)
    line_de = col < t.h_active
    line_hs = (col >= t.h_active + t.h_front_porch) & (col < t.h_active + t.h_front_porch + t.h_sync)
    vs_start = t.v_active + t.v_front_porch
    frame_vs = (line >= vs_start) & (line < vs_start + t.v_sync)
    frame_active = line < t.v_active
    # One frame as (v_total, h_total) grids, then tiled over frames.
    de_f = frame_active[:, None] & line_de[None, :]
    grids = {
        "de": de_f,
        "hs": np.broadcast_to(line_hs[None, :], (vt, ht)),
        "vs": np.broadcast_to(frame_vs[:, None], (vt, ht)),
        "x": np.where(de_f, col[None, :], -1).astype(np.int32),
        "y": np.where(de_f, line[:, None], -1).astype(np.int32),
    }
    lv = {k: np.tile(a.ravel(), frames) for k, a in grids.items()}
    lv["fr"] = np.repeat(np.arange(frames, dtype=np.int32), t.clocks_per_frame)
    lv["valid"] = lv["de"].copy()
    return lv


def _stretch(lv: dict[str, np.ndarray], lengths: np.ndarray) -> dict[str, np.ndarray]:
    """Insert ``lengths[f, y, x]`` stall clocks before each pixel: copies of its clock with valid low."""
    de = lv["de"]
    # Repeat each pixel clock 1 + stall times; the leading copies are the stall clocks.
    counts = np.ones(de.size, dtype=np.int32)
    counts[de] += lengths.ravel()
    src = np.repeat(np.arange(de.size, dtype=np.int32), counts)
    ends = np.cumsum(counts, dtype=np.int64)
    out = {k: lv[k][src] for k in ("de", "hs", "vs", "fr")}
    out["valid"] = np.zeros(src.size, dtype=bool)
    out["valid"][ends - 1] = de
    for k in ("x", "y"):
        out[k] = np.full(src.size, -1, dtype=np.int32)
        out[k][ends - 1] = lv[k]
    return out


def _hold_for_enable(lv: dict[str, np.ndarray], gaps: np.ndarray) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Hold each sample for ``gaps[i]`` disabled clocks before its enabled clock; returns (levels, enable)."""
    counts = 1 + gaps.astype(np.int64)
    src = np.repeat(np.arange(counts.size, dtype=np.int64), counts)
    ends = np.cumsum(counts) - 1
    out = {k: lv[k][src] for k in ("de", "hs", "vs", "fr", "valid")}
    ce = np.zeros(src.size, dtype=bool)
    ce[ends] = True
    for k in ("x", "y"):
        out[k] = np.full(src.size, -1, dtype=np.int32)
        out[k][ends] = lv[k]
    return out, ce
