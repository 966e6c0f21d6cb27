"""Video as data: timings, images, patterns, pixel formats, the words on the input bus and the captured output stream."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

_HOME = {
    "BLANKING_MODES": "vkit.video.words",
    "Capture": "vkit.video.capture",
    "CaptureBuilder": "vkit.video.capture",
    "ClockSchedule": "vkit.video.timing",
    "DEFAULT_MAX_PIXELS": "vkit.video.images",
    "FrameView": "vkit.video.capture",
    "MAX_EVENTS": "vkit.video.capture",
    "PATTERNS": "vkit.video.patterns",
    "PIXEL_FORMAT_BITS": "vkit.video.formats",
    "PRESETS": "vkit.video.timing",
    "RunFacts": "vkit.video.capture",
    "StallPattern": "vkit.video.timing",
    "StreamTransfers": "vkit.video.words",
    "UNKNOWN": "vkit.video.capture",
    "VideoTiming": "vkit.video.timing",
    "box": "vkit.video.patterns",
    "checkerboard": "vkit.video.patterns",
    "columns": "vkit.video.patterns",
    "conveyor": "vkit.video.patterns",
    "flat": "vkit.video.patterns",
    "frames_array": "vkit.video.formats",
    "impulse": "vkit.video.patterns",
    "load_image": "vkit.video.images",
    "make_pattern": "vkit.video.patterns",
    "noise": "vkit.video.patterns",
    "pack_rgb": "vkit.video.formats",
    "pixel_bits": "vkit.video.formats",
    "pixel_words": "vkit.video.formats",
    "preset": "vkit.video.timing",
    "ramp_h": "vkit.video.patterns",
    "ramp_v": "vkit.video.patterns",
    "ready_levels": "vkit.video.words",
    "rows": "vkit.video.patterns",
    "save_image": "vkit.video.images",
    "schedule": "vkit.video.timing",
    "step": "vkit.video.patterns",
    "stream_transfers": "vkit.video.words",
    "sync_counts": "vkit.video.words",
    "tiny": "vkit.video.timing",
    "to_rgb": "vkit.video.patterns",
    "to_uint8": "vkit.video.images",
    "unpack_rgb": "vkit.video.formats",
    "video_data_words": "vkit.video.words",
    "video_input_facts": "vkit.video.words",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
