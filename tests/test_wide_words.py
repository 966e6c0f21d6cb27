"""Wider words: samples of 1..16 bits, the component order, and N pixels a clock, against references
outside vkit (Python's own integers, OpenCV's image files, ITU-R BT.601, CTA-861 / VESA DMT timings)."""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from conftest import pack_capture
from vkit.core.errors import ConfigError
from vkit.core.vocab import PIXEL_FORMAT_BITS, sample_bits
from vkit.model.exact import run_model
from vkit.model.float_twin import run_float
from vkit.model.luma import BT601, luma, weights_from_coefficients
from vkit.model.spec import PipelineSpec
from vkit.model.widths import stage_ranges
from vkit.run.scaffold import _layout_guesses
from vkit.video.bus import BusLayout, clock_timing, tiny_in_pixels, unpack_capture
from vkit.video.formats import frames_array
from vkit.video.images import load_image
from vkit.video.patterns import make_pattern
from vkit.video.timing import PRESETS, schedule
from vkit.video.words import video_data_words


def test_pixel_formats_run_from_1_to_16_bits() -> None:
    assert PIXEL_FORMAT_BITS["gray10"] == 10 and PIXEL_FORMAT_BITS["rgb121212"] == 36
    assert sample_bits("rgb888") == 8 and sample_bits("gray16") == 16
    assert "gray17" not in PIXEL_FORMAT_BITS and "gray1" in PIXEL_FORMAT_BITS


@pytest.mark.parametrize("order", ["RGB", "BGR", "GBR", "RBG"])
def test_component_order_packs_like_big_endian_bytes(order: str) -> None:
    rgb = np.random.default_rng(1).integers(0, 256, (1, 3, 5, 3)).astype(np.uint8)
    words = BusLayout("rgb888", order).pixel_words(rgb)
    for y, x in ((0, 0), (2, 4), (1, 3)):
        comp = dict(zip("RGB", (int(v) for v in rgb[0, y, x])))
        # Reference: Python's int.from_bytes, most significant byte first, in the named order.
        assert int(words[0, y, x]) == int.from_bytes(bytes(comp[c] for c in order), "big")


def test_ten_bit_rgb_fields() -> None:
    rgb = np.array([[[1023, 1, 512]]], np.uint16)[None]
    # Reference: Python integers, R in bits 29..20, G in 19..10, B in 9..0.
    assert int(BusLayout("rgb101010").pixel_words(rgb)[0, 0, 0]) == (1023 << 20) | (1 << 10) | 512
    assert int(BusLayout("rgb101010", "BGR").pixel_words(rgb)[0, 0, 0]) == (512 << 20) | (1 << 10) | 1023


@pytest.mark.parametrize("lane_order", ["first_low", "first_high"])
def test_lanes_pack_and_a_capture_unpacks_back(lane_order: str) -> None:
    frames = np.random.default_rng(2).integers(0, 1024, (2, 4, 8)).astype(np.uint16)
    bus = BusLayout("gray10", lanes=4, lane_order=lane_order)
    words = bus.bus_words(frames)
    assert words.shape == (2, 4, 2)
    g = [int(v) for v in frames[0, 1, 4:8]]
    # Reference: Python integers; first_low puts pixel 0 in bits 9..0, first_high in bits 39..30.
    want = sum(v << (10 * (k if lane_order == "first_low" else 3 - k)) for k, v in enumerate(g))
    assert int(words[0, 1, 1]) == want
    cap = unpack_capture(pack_capture(list(words)), bus, bus.word_bits)
    views = cap.frames(4, 8)
    assert all(np.array_equal(v.pixels, f) for v, f in zip(views, frames))


def test_video_words_carry_pairs_on_the_clock_timing() -> None:
    frames = np.arange(2 * 4 * 8, dtype=np.uint8).reshape(2, 4, 8)
    bus = BusLayout("gray8", lanes=2)
    t = clock_timing(tiny_in_pixels(8, 4, 2), 2, 8, 4)
    sched = schedule(t, 2, None)
    words = video_data_words(sched, frames, bus, blanking="constant")
    first = int(np.argmax(sched.de))
    assert t.h_active == 4 and int(words[first]) == (1 << 8) | 0 and int(words[first + 1]) == (3 << 8) | 2


def test_timings_divide_into_clocks_or_say_why_not() -> None:
    # CTA-861 1920x1080p60: 1920 active, 88 front porch, 44 sync, 148 back porch (from memory): all / 4.
    t = clock_timing(PRESETS["fhd1920x1080p60"], 4, 1920, 1080)
    assert (t.h_active, t.h_front_porch, t.h_sync, t.h_back_porch) == (480, 22, 11, 37)
    assert t.h_total * 4 == 2200  # CTA-861: 2200 pixels a line
    with pytest.raises(ConfigError, match=r"h_sync = 3 pixels is not a multiple of pixels_per_clock = 2"):
        clock_timing(PRESETS["tiny32x24"], 2, 32, 24)
    with pytest.raises(ConfigError, match="not a divisor of the active width 30"):
        clock_timing(None, 4, 30, 24)
    assert BusLayout("rgb888", lanes=4).wide  # 96 bits: carried as pixel fields (tests/test_wide_bus.py)


def test_luma_of_ten_bit_rgb_follows_bt601() -> None:
    rgb = np.random.default_rng(3).integers(0, 1024, (16, 16, 3)).astype(np.uint16)
    fine = weights_from_coefficients((0.299, 0.587, 0.114), 16, "bt601")
    y = luma(rgb, fine, output_bits=10, input_bits=10)
    # Reference: ITU-R BT.601-7, E'Y = 0.299 R + 0.587 G + 0.114 B, on the same 10-bit scale: rounding
    # gives at most half an LSB, the 16-fraction-bit weights add at most 1023 * 3 / 2**17.
    real = 0.299 * rgb[..., 0] + 0.587 * rgb[..., 1] + 0.114 * rgb[..., 2]
    assert np.abs(y - real).max() <= 0.5 + 1023 * 3 / 2**17
    assert luma(np.full((1, 1, 3), 1023, np.uint16), BT601, 10, input_bits=10)[0, 0] == 1023


def test_sobel_widths_of_twelve_bit_grey() -> None:
    spec = PipelineSpec.from_dict({"name": "e12", "input": "gray12", "filter": {"kind": "sobel"},
                                   "magnitude": {"method": "exact"}, "output": {"bits": 12}})
    w = {s.name: s for s in stage_ranges(spec)}
    assert (w["input"].lo, w["input"].hi) == (0, 4095)
    # Sobel's gain is 4 (weights 1, 2, 1 on each side): |gx| <= 4 * 4095 (common practice, no source).
    assert (w["gx"].lo, w["gx"].hi, w["gx"].bits) == (-16380, 16380, 15)
    img = np.random.default_rng(4).integers(0, 4096, (12, 16)).astype(np.uint16)
    exact, twin = run_model(spec, img).output, run_float(spec, img).output
    assert np.abs(exact - twin).max() <= 1.0


def test_model_checks_the_sample_range() -> None:
    spec = PipelineSpec.from_dict({"name": "b10", "input": "gray10", "filter": {"kind": "box"}, "output": {"bits": 10}})
    with pytest.raises(ConfigError, match=r"10-bit samples \(0..1023\).*values 0..2000"):
        run_model(spec, np.array([[0, 2000]], np.int32))
    with pytest.raises(ConfigError, match="outside 0..1023"):
        frames_array(np.full((2, 2), 1024, np.uint16), "gray10")


def test_sixteen_bit_png_loads_at_ten_bits_checked_or_scaled(tmp_path) -> None:
    ten = np.random.default_rng(5).integers(0, 1024, (6, 7)).astype(np.uint16)
    cv2.imwrite(str(tmp_path / "ten.png"), ten)  # Reference writer: OpenCV, a 16-bit grey PNG
    assert np.array_equal(load_image(tmp_path / "ten.png", "gray10"), ten)
    full = (ten.astype(np.uint32) * 64).astype(np.uint16) + 63
    cv2.imwrite(str(tmp_path / "full.png"), full)
    with pytest.raises(ConfigError, match=r"up to \d+ on a scale of 0..65535.*convert"):
        load_image(tmp_path / "full.png", "gray10")
    scaled = load_image(tmp_path / "full.png", "gray10", convert=True)
    assert np.array_equal(scaled, np.round(full.astype(np.int64) * 1023 / 65535))


def test_sixteen_bit_rgb_png_is_read_exactly(tmp_path) -> None:
    rgb = np.random.default_rng(6).integers(0, 4096, (5, 9, 3)).astype(np.uint16)
    rgb[0, 0] = (4095, 0, 17)
    # Reference: OpenCV writes (and reads back) 16-bit PNG in B, G, R order.
    cv2.imwrite(str(tmp_path / "c.png"), rgb[..., ::-1])
    got = load_image(tmp_path / "c.png", "rgb121212")
    assert np.array_equal(got, cv2.imread(str(tmp_path / "c.png"), cv2.IMREAD_UNCHANGED)[..., ::-1])
    assert np.array_equal(got, rgb)


@pytest.mark.parametrize("plain", [False, True])
def test_pgm_with_maxval_1023(tmp_path, plain: bool) -> None:
    img = np.random.default_rng(7).integers(0, 1024, (4, 6)).astype(np.uint16)
    path = tmp_path / "p.pgm"
    if plain:
        path.write_text("P2\n# ten-bit\n6 4\n1023\n" + " ".join(str(v) for v in img.ravel()) + "\n")
    else:
        path.write_bytes(b"P5 6 4 1023\n" + img.astype(">u2").tobytes())
    # Reference layout: the netpbm PGM format (samples most significant byte first when maxval > 255).
    assert np.array_equal(load_image(path, "gray10"), img)
    with pytest.raises(ConfigError, match="scale of 0..1023, not the 12-bit 0..4095"):
        load_image(path, "gray12")
    assert int(load_image(path, "gray12", convert=True).max()) == round(int(img.max()) * 4095 / 1023)


def test_eight_bit_file_for_a_ten_bit_design_needs_convert(tmp_path) -> None:
    cv2.imwrite(str(tmp_path / "g8.png"), np.full((3, 3), 255, np.uint8))
    with pytest.raises(ConfigError, match="8-bit samples but gray10 was asked.*convert"):
        load_image(tmp_path / "g8.png", "gray10")
    assert int(load_image(tmp_path / "g8.png", "gray10", convert=True).max()) == 1023


def test_patterns_generate_at_the_design_width() -> None:
    noise = make_pattern("noise", 24, 32, seed=1, bits=12)
    assert noise.dtype == np.uint16 and 3000 < int(noise.max()) <= 4095
    ramp = make_pattern("ramp_h", 2, 16, bits=10)
    assert int(ramp[0, 0]) == 0 and int(ramp[0, -1]) == 1023
    assert make_pattern("conveyor", 8, 8, seed=1, rgb=True, bits=10).dtype == np.uint16


def test_scaffold_guesses_the_lane_count_from_the_bus_width() -> None:
    assert _layout_guesses(16, 16)[0] == ("gray8", 2)
    assert _layout_guesses(20, 20)[0] == ("gray10", 2)
    assert _layout_guesses(48, 16)[0] == ("rgb888", 2)
    assert _layout_guesses(30, 10)[0] == ("rgb101010", 1)


def test_scaffold_reads_ycbcr_from_the_port_name() -> None:
    from vkit.run.scaffold import _ycbcr_guess

    assert _ycbcr_guess("cam_ycc", 16) == "ycbcr422_8"
    assert _ycbcr_guess("vid_yuv_i", 20) == "ycbcr422_10"
    assert _ycbcr_guess("cam_px", 16) is None


def test_stream_transfers_carry_one_group_each() -> None:
    from vkit.video.words import stream_transfers

    frames = np.arange(3 * 8, dtype=np.uint8).reshape(1, 3, 8)
    t = stream_transfers(frames, BusLayout("gray8", lanes=2))
    assert t.data.size == 12 and t.eol.nonzero()[0].tolist() == [3, 7, 11] and t.sof.nonzero()[0].tolist() == [0]
    assert int(t.data[1]) == (3 << 8) | 2  # Python integers: pixel 2 low, pixel 3 high
