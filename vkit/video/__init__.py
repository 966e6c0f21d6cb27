"""Video as data: timings, images, patterns and the captured output stream."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

_HOME = {
    "Capture": "vkit.video.capture",
    "CaptureBuilder": "vkit.video.capture",
    "ClockSchedule": "vkit.video.timing",
    "DEFAULT_MAX_PIXELS": "vkit.video.images",
    "FrameView": "vkit.video.capture",
    "PATTERNS": "vkit.video.patterns",
    "PRESETS": "vkit.video.timing",
    "StallPattern": "vkit.video.timing",
    "UNKNOWN": "vkit.video.capture",
    "VideoTiming": "vkit.video.timing",
    "box": "vkit.video.patterns",
    "checkerboard": "vkit.video.patterns",
    "columns": "vkit.video.patterns",
    "conveyor": "vkit.video.patterns",
    "flat": "vkit.video.patterns",
    "impulse": "vkit.video.patterns",
    "load_image": "vkit.video.images",
    "make_pattern": "vkit.video.patterns",
    "noise": "vkit.video.patterns",
    "pack_rgb": "vkit.video.images",
    "preset": "vkit.video.timing",
    "ramp_h": "vkit.video.patterns",
    "ramp_v": "vkit.video.patterns",
    "rows": "vkit.video.patterns",
    "save_image": "vkit.video.images",
    "schedule": "vkit.video.timing",
    "step": "vkit.video.patterns",
    "tiny": "vkit.video.timing",
    "to_rgb": "vkit.video.patterns",
    "to_uint8": "vkit.video.images",
    "unpack_rgb": "vkit.video.images",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
