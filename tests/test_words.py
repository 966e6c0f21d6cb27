"""The schedule -> words encoding (vkit.video.words) and the fast path's wire format, against the timing standards."""

from __future__ import annotations

import numpy as np

from vkit.sim.fast.wire import pack_fields, video_bit, video_word_bits, video_word_fields
from vkit.video.formats import pack_rgb, pixel_bits, pixel_words
from vkit.video.timing import StallPattern, preset, schedule
from vkit.video.words import ready_chunk, ready_levels, stream_transfers, video_data_words, video_input_facts


def _frames(n: int, h: int, w: int, seed: int = 1) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 256, (n, h, w), dtype=np.uint8)


def test_vga_input_facts_match_the_dmt_timing() -> None:
    # VESA DMT 640x480 @ 60 Hz (also CTA-861 format 1): 800 clocks per line (640 active + 16 front
    # porch + 96 sync + 48 back porch), 525 lines (480 + 10 + 2 + 33), hsync and vsync negative.
    t = preset("vga640x480p60")
    sched = schedule(t, 2)
    facts = video_input_facts(sched)
    assert sched.n_clocks == 2 * 800 * 525
    assert facts["frames_sent"] == 2
    assert facts["first_input_clock"] == 0  # a frame starts at its first active pixel
    assert facts["input_vsync_count"] == 2  # one vsync leading edge per frame
    # every line, blanking lines included, carries one hsync pulse; the first vsync comes after
    # 480 active + 10 front porch lines, the second 525 lines later
    assert facts["input_hsync_per_frame"] == [490, 525]
    assert facts["stall_pixels"] == []
    # negative polarity: the sync lines idle high and pulse low for 96 clocks / 2 lines
    assert sched.hsync[:640].all() and (~sched.hsync[656:752]).all() and sched.hsync[752:800].all()
    assert (~sched.vsync[490 * 800:492 * 800]).all() and sched.vsync[:490 * 800].all()


def test_pixels_land_on_data_enable_clocks_and_blanking_is_seeded() -> None:
    t = preset("tiny32x24")
    frames = _frames(2, 24, 32)
    sched = schedule(t, 2)
    words = video_data_words(sched, frames, "gray8", blanking="random", seed=7)
    again = video_data_words(sched, frames, "gray8", blanking="random", seed=7)
    np.testing.assert_array_equal(words, again)
    np.testing.assert_array_equal(words[sched.de], frames.reshape(-1))  # raster order, frame after frame
    const = video_data_words(sched, frames, "gray8", blanking="constant", blanking_value=16)
    assert (const[~sched.de] == 16).all()  # BT.601 black level as a constant blanking word
    np.testing.assert_array_equal(const[sched.de], words[sched.de])


def test_stall_clocks_carry_garbage_even_with_constant_blanking() -> None:
    t = preset("tiny32x24")
    frames = _frames(1, 24, 32)
    sched = schedule(t, 1, StallPattern(probability=0.3, max_length=3, seed=2))
    words = video_data_words(sched, frames, "gray8", blanking="constant", blanking_value=0, seed=5)
    stall = sched.de & ~sched.valid
    assert stall.any()
    np.testing.assert_array_equal(words[sched.valid], frames.reshape(-1))
    assert (words[~sched.de] == 0).all()
    assert words[stall].any()  # seeded random words, so the design cannot rely on them
    assert len(video_input_facts(sched)["stall_pixels"]) == sched.stall_pixels.shape[0] > 0


def test_rgb888_words_are_red_high() -> None:
    # 8:8:8 RGB packed R << 16 | G << 8 | B on a 24-bit bus (common practice, no source).
    rgb = np.array([[[[0x12, 0x34, 0x56]]]], np.uint8)
    assert pixel_bits("rgb888") == 24 and pixel_bits("gray8") == 8
    assert int(pixel_words(rgb, "rgb888")[0, 0, 0]) == 0x123456 == int(pack_rgb(rgb)[0, 0, 0])


def test_video_word_layout() -> None:
    # {frame_mark, hsync, vsync, de, valid, data}: MSB first, as the harness reads it.
    t = preset("tiny32x24")
    sched = schedule(t, 1)
    data = video_data_words(sched, _frames(1, 24, 32), "gray8")
    packed = pack_fields(video_word_fields(sched, data, 8))
    assert video_word_bits(8) == 14
    np.testing.assert_array_equal(packed & 0xFF, data.astype(np.uint64))
    for flag, level in (("valid", sched.valid), ("de", sched.de), ("vsync", sched.vsync), ("hsync", sched.hsync)):
        np.testing.assert_array_equal((packed >> np.uint64(video_bit(flag, 8))) & np.uint64(1), level.astype(np.uint64))
    marks = np.flatnonzero((packed >> np.uint64(video_bit("frame_mark", 8))) & np.uint64(1))
    assert marks.tolist() == [0]


def test_stream_markers_and_gaps() -> None:
    frames = _frames(2, 3, 4)
    t = stream_transfers(frames, "gray8", StallPattern(probability=0.5, max_length=2, seed=3), seed=1)
    assert np.flatnonzero(t.sof).tolist() == [0, 12]
    assert np.flatnonzero(t.eol).tolist() == [3, 7, 11, 15, 19, 23]
    np.testing.assert_array_equal(t.data, frames.reshape(-1))
    assert len(t.stall_pixels) == int((t.gaps > 0).sum()) and t.gaps.max() <= 2


def test_ready_levels_are_the_sink_draw_chunk_by_chunk() -> None:
    p = StallPattern(probability=0.1, max_length=5, seed=9)
    whole = ready_levels(p, 10000)
    rng = np.random.default_rng(p.seed)
    parts, carry = [], 0
    for _ in range(3):
        levels, carry = ready_chunk(rng, p, carry)
        parts.append(levels)
    np.testing.assert_array_equal(whole, np.concatenate(parts)[:10000])
    assert (~whole).any() and whole.any()
    assert ready_levels(None, 5).all()
