"""R'G'B' <-> Y'CbCr against OpenCV where it has the conversion, and the published levels elsewhere."""

from __future__ import annotations

from pathlib import Path

import cv2
import numpy as np
import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.core.errors import ConfigError
from vkit.model.spec import PipelineSpec
from vkit.model.ycbcr import YCbCrCoding, rgb_to_ycbcr, rgb_to_ycbcr_float, ycbcr_to_rgb, ycbcr_to_rgb_float


def _rgb(seed: int = 1, top: int = 256) -> np.ndarray:
    img = np.random.default_rng(seed).integers(0, top, (24, 32, 3)).astype(np.uint8 if top <= 256 else np.uint16)
    img[0, :8] = [(0, 0, 0), (top - 1,) * 3, (top - 1, 0, 0), (0, top - 1, 0), (0, 0, top - 1),
                  (top - 1, top - 1, 0), (0, top - 1, top - 1), (top - 1, 0, top - 1)]
    return img


def test_bt601_full_range_is_opencv_rgb2ycrcb() -> None:
    rgb = _rgb()
    ours = rgb_to_ycbcr(rgb, YCbCrCoding("bt601", "full", 8))
    # Reference: OpenCV cv2.cvtColor COLOR_RGB2YCrCb (BT.601 coefficients, full range, delta 128);
    # its channels are Y, Cr, Cb. OpenCV rounds Cr and Cb from its already-rounded Y: one LSB apart at most.
    ycrcb = cv2.cvtColor(rgb, cv2.COLOR_RGB2YCrCb).astype(np.int64)
    assert np.array_equal(ours[..., 0], ycrcb[..., 0])
    assert np.abs(ours[..., 1] - ycrcb[..., 2]).max() <= 1 and np.abs(ours[..., 2] - ycrcb[..., 1]).max() <= 1


def test_bt601_full_range_back_to_rgb_is_opencv_ycrcb2rgb() -> None:
    ycc = rgb_to_ycbcr(_rgb(2), YCbCrCoding("bt601", "full", 8))
    back = ycbcr_to_rgb(ycc, YCbCrCoding("bt601", "full", 8))
    # Reference: OpenCV cv2.cvtColor COLOR_YCrCb2RGB on the same samples (Cr before Cb).
    ref = cv2.cvtColor(ycc[..., [0, 2, 1]].astype(np.uint8), cv2.COLOR_YCrCb2RGB).astype(np.int64)
    assert np.abs(back - ref).max() <= 1


@pytest.mark.parametrize("standard, red", [("bt601", (81, 90, 240)), ("bt709", (63, 102, 240))])
def test_limited_range_levels_of_the_published_colour_bars(standard: str, red: tuple[int, int, int]) -> None:
    coding = YCbCrCoding(standard, "limited", 8)
    bars = np.array([[[0, 0, 0], [255, 255, 255], [255, 0, 0]]], np.uint8)
    out = rgb_to_ycbcr(bars, coding)
    # Reference: ITU-R BT.601-7 / BT.709-6 8-bit quantisation: black Y 16, white Y 235, C 128 at grey;
    # 100% red is (81, 90, 240) in BT.601 and (63, 102, 240) in BT.709 (the published colour-bar levels,
    # from memory).
    assert out[0, 0].tolist() == [16, 128, 128] and out[0, 1].tolist() == [235, 128, 128]
    assert tuple(out[0, 2].tolist()) == red


def test_ten_bit_limited_range_levels() -> None:
    coding = YCbCrCoding("bt709", "limited", 10)
    out = rgb_to_ycbcr(np.array([[[0, 0, 0], [1023, 1023, 1023], [0, 0, 1023]]], np.uint16), coding)
    # Reference: ITU-R BT.709-6, 10-bit: black 64, nominal peak 940, colour difference 64..960 around 512.
    assert out[0, 0].tolist() == [64, 512, 512] and out[0, 1].tolist() == [940, 512, 512]
    assert out[0, 2, 1] == 960  # pure blue: Cb at its top, 512 + 448


@pytest.mark.parametrize("standard", ["bt601", "bt709"])
@pytest.mark.parametrize("rng", ["full", "limited"])
@pytest.mark.parametrize("bits", [8, 10, 12])
def test_integer_forms_track_the_real_matrices(standard: str, rng: str, bits: int) -> None:
    coding = YCbCrCoding(standard, rng, bits)
    rgb = _rgb(3, 1 << bits)
    ycc = rgb_to_ycbcr(rgb, coding)
    real = rgb_to_ycbcr_float(rgb, coding)
    # The defining equations of ITU-R BT.601-7 / BT.709-6 in floats: the integers are their rounding,
    # give or take the 14-fraction-bit coefficients (half a unit each, on three samples up to the top).
    top = (1 << bits) - 1
    assert np.abs(ycc - real).max() <= 0.5 + 1.5 * top / 2**14 + 1e-9
    back = ycbcr_to_rgb(ycc, coding)
    assert np.abs(back - rgb.astype(np.int64)).max() <= (2 if rng == "limited" else 1) << (bits - 8)
    assert np.allclose(ycbcr_to_rgb_float(real, coding), rgb, atol=1e-6)


def test_out_of_range_samples_are_refused() -> None:
    with pytest.raises(ConfigError, match="0..255"):
        rgb_to_ycbcr(np.full((1, 1, 3), 300), YCbCrCoding("bt601", "full", 8))
    with pytest.raises(ConfigError, match="standard"):
        YCbCrCoding("bt2020")


# ------------------------------------------------------------------ Y'CbCr inputs of a pipeline spec

def _ycc_spec(fmt: str, chroma: str, kind: str = "min") -> PipelineSpec:
    return PipelineSpec.from_dict({"name": "ycc", "input": fmt, "chroma": chroma, "filter": {"kind": kind},
                                   "output": {"bits": 8}})


def test_422_luma_is_filtered_and_chroma_passes_above_it() -> None:
    import scipy.ndimage as ndi

    from vkit.model.exact import run_model

    img = np.random.default_rng(9).integers(0, 256, (12, 16, 2)).astype(np.uint8)
    out = run_model(_ycc_spec("ycbcr422_8", "pass"), img).output.astype(np.int64)
    # Reference: scipy.ndimage.minimum_filter, size 3, mode "nearest" (replicate), on Y' alone.
    y = ndi.minimum_filter(img[..., 0], size=3, mode="nearest").astype(np.int64)
    assert np.array_equal(out, y | (img[..., 1].astype(np.int64) << 8))
    dropped = run_model(_ycc_spec("ycbcr422_8", "drop"), img).output
    assert np.array_equal(dropped, y)


def test_444_chroma_word_order() -> None:
    from vkit.model.exact import run_model

    img = np.random.default_rng(10).integers(0, 256, (6, 8, 3)).astype(np.uint8)
    out = run_model(_ycc_spec("ycbcr444_8", "pass", "max"), img).output
    # Reference: Python integers: Y' in bits 7..0, Cb in 15..8, Cr in 23..16.
    y = int(out[2, 3]) & 0xFF
    assert int(out[2, 3]) == y | (int(img[2, 3, 1]) << 8) | (int(img[2, 3, 2]) << 16)
    assert _ycc_spec("ycbcr444_8", "pass").output_word_bits == 24


def test_chroma_key_only_for_ycbcr_inputs() -> None:
    from vkit.model.spec import PipelineSpec

    with pytest.raises(ConfigError, match="chroma = 'pass' is only for a Y'CbCr input"):
        PipelineSpec.from_dict({"name": "g", "input": "gray8", "chroma": "pass", "filter": {"kind": "min"}})
    with pytest.raises(ConfigError, match="luma .* not used with ycbcr422_8"):
        PipelineSpec.from_dict({"name": "g", "input": "ycbcr422_8", "luma": {}, "filter": {"kind": "min"}})


def test_422_frames_take_cb_and_cr_from_the_even_pixel() -> None:
    from vkit.video.bus import BusLayout
    from vkit.video.patterns import ycbcr_frame

    rgb = np.random.default_rng(11).integers(0, 256, (2, 6, 3)).astype(np.uint8)
    full = rgb_to_ycbcr(rgb, YCbCrCoding("bt601", "full", 8))
    f = ycbcr_frame(rgb, "ycbcr422_8")
    # ITU-R BT.601-7 4:2:2: Cb and Cr co-sited with the even (first) luma sample of each pair.
    assert np.array_equal(f[..., 0], full[..., 0])
    assert np.array_equal(f[:, 0::2, 1], full[:, 0::2, 1]) and np.array_equal(f[:, 1::2, 1], full[:, 0::2, 2])
    word = BusLayout("ycbcr422_8").pixel_words(f[None])[0]
    assert int(word[1, 3]) == int.from_bytes(bytes([int(f[1, 3, 1]), int(f[1, 3, 0])]), "big")  # {C, Y}


_IMAGE_CONFIG = """
[run]
simulators = ["icarus"]
jobs = 1
cache_dir = "{cache}"
path = "native"
waves = "off"

[designs.luma422]
top = "belt_luma422"
sources = ["{rtl}/lane_rows.v", "{rtl}/belt_luma422.v"]
family = "video"
pixel_format = "ycbcr422_8"
parameters = {{ MAX_WIDTH = 1024 }}

[designs.luma422.spec]
name = "luma422_erode_709"
input = "ycbcr422_8"
chroma = "pass"
coding = {{ standard = "{standard}", range = "{range}" }}
filter = {{ kind = "min" }}
output = {{ bits = 8 }}

[designs.luma422.ports]
clock = "clk"
reset = "rst"
in_vsync = "cam_vs"
in_hsync = "cam_hs"
in_de = "cam_de"
in_valid = "cam_dv"
in_data = "cam_ycc"
out_de = "res_de"
out_valid = "res_dv"
out_data = "res_ycc"

[stimulus]
images = ["{image}"]
size = [32, 24]
frames = 1
"""


def _image_cases(tmp: Path, standard: str, rng: str, cache: Path) -> tuple[Path, list, np.ndarray]:
    from PIL import Image

    from vkit.run.config import expand_matrix, load_config
    from vkit.video.patterns import make_pattern

    rgb = make_pattern("conveyor", 24, 32, seed=3, rgb=True)
    Image.fromarray(rgb, "RGB").save(tmp / "belt.png")
    cfg = tmp / "luma422.toml"
    cfg.write_text(_IMAGE_CONFIG.format(cache=cache.as_posix(), rtl=SAMPLE_RTL.as_posix(), standard=standard,
                                        range=rng, image=(tmp / "belt.png").as_posix()))
    return cfg, expand_matrix(load_config(cfg), ["icarus"]), rgb


@pytest.mark.parametrize("standard, rng", [("bt601", "full"), ("bt709", "limited")])
def test_an_rgb_image_enters_a_ycbcr_design_with_the_spec_coding(tmp_path: Path, standard: str, rng: str) -> None:
    from vkit.run.inputs import make_frames

    _, (case,), rgb = _image_cases(tmp_path, standard, rng, tmp_path / "cache")
    (frame,) = make_frames(case)
    assert frame.shape == (24, 32, 2)  # 4:2:2: {Y, C} a pixel
    r, g, b = (rgb[..., k].astype(float) for k in range(3))
    if standard == "bt601":
        # Reference: OpenCV's COLOR_RGB2YCrCb is BT.601 on the full 8-bit range (Y, Cr, Cb order).
        ycrcb = cv2.cvtColor(rgb, cv2.COLOR_RGB2YCrCb).astype(int)
        want_y, want_cb, want_cr = ycrcb[..., 0], ycrcb[..., 2], ycrcb[..., 1]
    else:
        # Reference: ITU-R BT.709-6 item 3.2/3.3 (E'Y = 0.2126 R + 0.7152 G + 0.0722 B; Cb = (B - Y) / 1.8556,
        # Cr = (R - Y) / 1.5748) quantised per item 4.6 on the limited 8-bit range: 16 + 219 Y, 128 + 224 C.
        ey = (0.2126 * r + 0.7152 * g + 0.0722 * b) / 255
        want_y = np.round(16 + 219 * ey).astype(int)
        want_cb = np.round(128 + 224 * ((b / 255 - ey) / 1.8556)).astype(int)
        want_cr = np.round(128 + 224 * ((r / 255 - ey) / 1.5748)).astype(int)
    assert np.abs(frame[..., 0].astype(int) - want_y).max() <= 1
    # ITU-R BT.601-7 4:2:2 co-siting: C of an even column is Cb of that pixel, of the odd one Cr of its even pixel.
    assert np.abs(frame[:, 0::2, 1].astype(int) - want_cb[:, 0::2]).max() <= 1
    assert np.abs(frame[:, 1::2, 1].astype(int) - want_cr[:, 0::2]).max() <= 1


@pytest.mark.sim
def test_an_rgb_image_runs_through_the_422_design(tmp_path: Path, build_cache_dir: Path) -> None:
    from vkit.run.config import load_config
    from vkit.run.runner import run

    simulator_available("icarus")
    cfg, _, _ = _image_cases(tmp_path, "bt709", "limited", build_cache_dir)
    result = run(load_config(cfg), jobs=1, progress=False, out_dir=tmp_path / "out")
    assert [c.status for c in result.cases] == ["pass"], [c.diagnosis for c in result.cases]
