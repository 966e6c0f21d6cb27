"""Video as data: timings, images, patterns, pixel formats, the words on the input bus and the captured output stream."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.video.capture": "Capture CaptureBuilder FrameView MAX_EVENTS RunFacts UNKNOWN",
    "vkit.video.formats": "frames_array pack_rgb pixel_bits PIXEL_FORMAT_BITS pixel_words unpack_rgb",
    "vkit.video.images": "DEFAULT_MAX_PIXELS load_image save_image to_uint8",
    "vkit.video.patterns": (
        "box checkerboard columns conveyor flat impulse make_pattern noise "
        "PATTERNS ramp_h ramp_v rows step to_rgb"
    ),
    "vkit.video.timing": "ClockSchedule preset PRESETS schedule StallPattern tiny VideoTiming",
    "vkit.video.words": (
        "BLANKING_MODES ready_levels stream_transfers StreamTransfers sync_counts "
        "video_data_words video_input_facts"
    ),
})
