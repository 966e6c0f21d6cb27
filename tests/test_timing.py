"""Video timing presets against the published tables, and the per-clock schedule's invariants."""

from __future__ import annotations

import numpy as np
import pytest

from vkit.core.errors import ConfigError
from vkit.video.timing import PRESETS, StallPattern, VideoTiming, preset, schedule, tiny


# ---------------------------------------------------------------- presets against the standards


def test_vga_640x480_matches_vesa_dmt() -> None:
    t = preset("vga640x480p60")
    # VESA DMT 640x480@60: 800 clocks x 525 lines, hsync 96 clocks, vsync 2 lines, both negative.
    assert (t.h_total, t.v_total) == (800, 525)
    assert (t.h_front_porch, t.h_sync, t.h_back_porch) == (16, 96, 48)
    assert (t.v_front_porch, t.v_sync, t.v_back_porch) == (10, 2, 33)
    assert not t.hsync_active_high and not t.vsync_active_high
    # VESA DMT: 25.175 MHz / (800 * 525) = 59.94 Hz.
    assert t.refresh_hz == pytest.approx(59.94, abs=0.01)


def test_hd_1280x720_matches_cta861() -> None:
    t = preset("hd1280x720p60")
    # CTA-861 1280x720p60: 1650 x 750 total, hsync 40 clocks, vsync 5 lines, positive.
    assert (t.h_total, t.v_total) == (1650, 750)
    assert (t.h_sync, t.v_sync) == (40, 5)
    assert t.hsync_active_high and t.vsync_active_high
    # CTA-861: 74.25 MHz / (1650 * 750) = 60 Hz exactly.
    assert t.refresh_hz == pytest.approx(60.0, rel=1e-9)


def test_fhd_1920x1080_matches_cta861() -> None:
    t = preset("fhd1920x1080p60")
    # CTA-861 1920x1080p60: 2200 x 1125 total, hsync 44 clocks, vsync 5 lines, positive.
    assert (t.h_total, t.v_total) == (2200, 1125)
    assert (t.h_sync, t.v_sync) == (44, 5)
    assert t.hsync_active_high and t.vsync_active_high
    # CTA-861: 148.5 MHz / (2200 * 1125) = 60 Hz exactly.
    assert t.refresh_hz == pytest.approx(60.0, rel=1e-9)


def test_tiny_presets_and_split() -> None:
    t = preset("tiny32x24")
    assert (t.h_active, t.v_active) == (32, 24)
    assert (t.h_front_porch, t.h_sync, t.h_back_porch) == (2, 3, 3)
    assert (t.v_front_porch, t.v_sync, t.v_back_porch) == (1, 1, 1)
    assert t.refresh_hz is None
    assert PRESETS["tiny64x48"].h_active == 64
    small = tiny(4, 3, h_blank=1, v_blank_lines=2)
    assert (small.h_blank, small.v_blank, small.h_sync, small.v_front_porch) == (1, 2, 1, 1)


def test_str_and_dict_round_trip() -> None:
    t = preset("vga640x480p60")
    assert str(t) == "640x480 (800x525 total)"
    assert VideoTiming.from_dict(t.to_dict()) == t
    tt = preset("tiny32x24")
    assert VideoTiming.from_dict(tt.to_dict()) == tt
    over = VideoTiming.from_dict({"preset": "tiny32x24", "h_active": 16})
    assert (over.h_active, over.v_active) == (16, 24)
    assert over.name == "custom"
    vga = VideoTiming.from_dict({"preset": "vga640x480p60", "v_back_porch": 30})
    assert vga.pixel_clock_hz is None and vga.hsync_active_high is False
    assert VideoTiming.from_dict({"preset": "vga640x480p60", "h_active": 640}) == t


@pytest.mark.parametrize(
    "kwargs, word",
    [
        ({"h_active": 0}, "h_active"),
        ({"h_sync": 0}, "h_sync"),
        ({"h_front_porch": -1}, "h_front_porch"),
        ({"v_front_porch": 0}, "v_front_porch"),
        ({"v_sync": 0}, "v_sync"),
        ({"h_active": 3.5}, "integer"),
    ],
)
def test_bad_timing_is_one_clear_line(kwargs: dict, word: str) -> None:
    base = preset("tiny32x24").to_dict()
    base.update(kwargs)
    with pytest.raises(ConfigError) as err:
        VideoTiming(**base)
    assert word in str(err.value) and "\n" not in str(err.value)


def test_from_dict_rejects_unknown_keys_and_presets() -> None:
    with pytest.raises(ConfigError, match="hsync_width"):
        VideoTiming.from_dict({"preset": "tiny32x24", "hsync_width": 3})
    with pytest.raises(ConfigError, match="known presets"):
        preset("vga")
    with pytest.raises(ConfigError, match="missing"):
        VideoTiming.from_dict({"h_active": 3})


# ---------------------------------------------------------------- schedule


def _rising_edges(level: np.ndarray) -> int:
    return int(np.count_nonzero(level[1:] & ~level[:-1]) + int(level[0]))


@pytest.mark.parametrize("name", ["tiny32x24", "vga640x480p60"])
def test_schedule_counts(name: str) -> None:
    t = preset(name)
    frames = 2
    s = schedule(t, frames)
    assert s.n_clocks == frames * t.clocks_per_frame == s.de.size
    assert np.array_equal(s.valid, s.de)
    hs_active = s.hsync if t.hsync_active_high else ~s.hsync
    vs_active = s.vsync if t.vsync_active_high else ~s.vsync
    for f in range(frames):
        sel = s.frame == f
        # one de clock per active pixel
        assert np.count_nonzero(s.de[sel]) == t.h_active * t.v_active
        # one hsync pulse per line, blanking lines included
        assert _rising_edges(hs_active[sel]) == t.v_total
        assert np.count_nonzero(hs_active[sel]) == t.v_total * t.h_sync
        # vsync lasts v_sync whole lines
        assert np.count_nonzero(vs_active[sel]) == t.v_sync * t.h_total
        assert _rising_edges(vs_active[sel]) == 1
    # data-enable and sync never overlap
    assert not np.any(s.de & (hs_active | vs_active))


def test_polarity_inverts_wire_levels() -> None:
    pos = tiny(8, 4)
    neg = VideoTiming(**{**pos.to_dict(), "hsync_active_high": False, "vsync_active_high": False})
    a, b = schedule(pos, 1), schedule(neg, 1)
    assert np.array_equal(a.hsync, ~b.hsync) and np.array_equal(a.vsync, ~b.vsync)
    assert np.array_equal(a.de, b.de)
    # negative sync idles high
    assert b.hsync[0] and b.vsync[0]


def _assert_raster(s) -> None:
    t = s.timing
    for f in range(s.frames):
        sel = (s.frame == f) & s.valid
        xs, ys = s.x[sel], s.y[sel]
        order = ys.astype(np.int64) * t.h_active + xs
        assert np.array_equal(order, np.arange(t.h_active * t.v_active))
    assert np.all(s.x[~s.valid] == -1) and np.all(s.y[~s.valid] == -1)


def test_schedule_raster_order_every_pixel_once() -> None:
    s = schedule(tiny(13, 7), 3)
    _assert_raster(s)
    assert s.stall_pixels.shape == (0, 3)
    assert list(s.frame_starts()) == [0, s.timing.clocks_per_frame, 2 * s.timing.clocks_per_frame]


def test_stalls_keep_pixels_and_only_lengthen_active_lines() -> None:
    t = tiny(16, 6, h_blank=5, v_blank_lines=4)
    st = StallPattern(probability=0.3, max_length=3, seed=7)
    s = schedule(t, 2, st)
    _assert_raster(s)
    plain = schedule(t, 2)
    n_stall = int(np.count_nonzero(s.de & ~s.valid))
    assert n_stall > 0
    assert s.n_clocks == plain.n_clocks + n_stall
    # blanking unchanged: same non-de clock count, same sync clock counts
    assert np.count_nonzero(~s.de) == np.count_nonzero(~plain.de)
    assert np.count_nonzero(s.hsync) == np.count_nonzero(plain.hsync)
    assert np.count_nonzero(s.vsync) == np.count_nonzero(plain.vsync)
    # every de run is one active line: h_active pixels plus that line's stalls
    edges = np.flatnonzero(np.diff(s.de.astype(np.int8), prepend=0, append=0))
    starts, ends = edges[::2], edges[1::2]
    assert len(starts) == 2 * t.v_active
    for a, b in zip(starts, ends):
        assert np.count_nonzero(s.valid[a:b]) == t.h_active
    # stall_pixels lists exactly the pixels preceded by a stall clock
    after = np.flatnonzero(s.valid[1:] & s.de[:-1] & ~s.valid[:-1]) + 1
    got = np.stack([s.frame[after], s.y[after], s.x[after]], axis=1)
    assert np.array_equal(got, s.stall_pixels)
    # a stall never exceeds max_length
    run = 0
    longest = 0
    for v, d in zip(s.valid, s.de):
        run = run + 1 if (d and not v) else 0
        longest = max(longest, run)
    assert 1 <= longest <= 3


def test_stalls_are_deterministic_per_seed() -> None:
    t = preset("tiny32x24")
    a = schedule(t, 1, StallPattern(0.2, 2, seed=5))
    b = schedule(t, 1, StallPattern(0.2, 2, seed=5))
    c = schedule(t, 1, StallPattern(0.2, 2, seed=6))
    assert np.array_equal(a.valid, b.valid) and np.array_equal(a.stall_pixels, b.stall_pixels)
    assert not np.array_equal(a.stall_pixels, c.stall_pixels)


def test_stall_probability_zero_is_plain() -> None:
    t = preset("tiny32x24")
    s = schedule(t, 1, StallPattern(0.0, 4, seed=1))
    assert np.array_equal(s.valid, s.de) and s.n_clocks == t.clocks_per_frame


def test_bad_stall_and_frames() -> None:
    with pytest.raises(ConfigError, match="probability"):
        StallPattern(probability=1.5)
    with pytest.raises(ConfigError, match="max_length"):
        StallPattern(probability=0.1, max_length=0)
    with pytest.raises(ConfigError, match="frames"):
        schedule(preset("tiny32x24"), 0)
