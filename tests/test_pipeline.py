"""The pipeline spec and the bit-exact model, checked against BT.601, SciPy, OpenCV and math.isqrt."""

from __future__ import annotations

import math
import subprocess
import sys
from dataclasses import replace

import numpy as np
import pytest
from scipy import ndimage

from vkit.core.errors import ConfigError
from vkit.model.pipeline import (
    PRESETS,
    SPECS_DIR,
    FilterSpec,
    ModelResult,
    PipelineSpec,
    WindowSpec,
    preset,
    run_float,
    run_model,
    run_model_frames,
)

H, W = 24, 32

# The Sobel operator as published (Sobel and Feldman, 1968; common practice, no source), in
# correlation orientation: positive where values rise to the right.
SOBEL_X = np.array([[-1, 0, 1], [-2, 0, 2], [-1, 0, 1]])
SOBEL_Y = SOBEL_X.T
# scipy.ndimage modes for our border policies (SciPy documentation of ndimage "mode").
SCIPY_MODE = {"replicate": "nearest", "zero": "constant", "constant": "constant", "mirror": "mirror", "unchecked": "nearest"}


def _rgb(seed: int = 0, height: int = H, width: int = W) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 256, (height, width, 3), dtype=np.uint8)


def _gray(seed: int = 0, height: int = H, width: int = W) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 256, (height, width), dtype=np.uint8)


def _scipy(img: np.ndarray, kernel: np.ndarray, border: str = "replicate", constant: int = 0) -> np.ndarray:
    cval = constant if border == "constant" else 0
    return ndimage.correlate(img.astype(np.int64), np.asarray(kernel, dtype=np.int64), mode=SCIPY_MODE[border], cval=cval)


# ------------------------------------------------------------------------------------------ edge preset


def test_edge_luma_follows_bt601() -> None:
    img = _rgb(1)
    luma = run_model(preset("edge"), img).stages["luma"].array
    r, g, b = (img[..., i].astype(np.float64) for i in range(3))
    # ITU-R BT.601-7: Y = 0.299 R + 0.587 G + 0.114 B. The 12-bit luma is 16 * Y up to the 8-bit
    # weight quantisation (|77-76.544|*255/256 < 0.46 LSB) and the final rounding (1/32 LSB).
    y601 = 0.299 * r + 0.587 * g + 0.114 * b
    assert np.max(np.abs(luma / 16.0 - y601)) < 0.5
    assert luma.min() >= 0 and luma.max() <= 4080
    # The trade's 8-bit BT.601 weights are round(256 * K) (common practice, no source): 77, 150, 29.
    assert preset("edge").luma.resolved().as_tuple() == tuple(round(256 * k) for k in (0.299, 0.587, 0.114))


def test_edge_luma_on_white_and_grey() -> None:
    # BT.601: white (255, 255, 255) is Y = 255, i.e. 4080 on the 12-bit scale; any grey g gives 16 g.
    img = np.zeros((3, 4, 3), dtype=np.uint8)
    img[0] = 255
    img[1] = 128
    luma = run_model(preset("edge"), img).stages["luma"].array
    assert np.all(luma[0] == 4080) and np.all(luma[1] == 16 * 128) and np.all(luma[2] == 0)


def test_opencv_luma_weights_match_cvtcolor() -> None:
    cv2 = pytest.importorskip("cv2")
    spec = PipelineSpec.from_dict(
        {"name": "cvgray", "luma": {"weights": "opencv", "output_bits": 8}, "filter": {"kind": "median"}}
    )
    img = _rgb(20)
    # OpenCV cvtColor(COLOR_RGB2GRAY) on 8-bit input is the reference.
    assert np.array_equal(run_model(spec, img).stages["luma"].array, cv2.cvtColor(img, cv2.COLOR_RGB2GRAY))


def test_edge_gradients_match_scipy_and_opencv() -> None:
    cv2 = pytest.importorskip("cv2")
    result = run_model(preset("edge"), _rgb(2))
    luma = result.stages["luma"].array
    gx, gy = result.stages["gx"].array, result.stages["gy"].array
    # scipy.ndimage.correlate with mode "nearest" is the replicate border.
    assert np.array_equal(gx, _scipy(luma, SOBEL_X))
    assert np.array_equal(gy, _scipy(luma, SOBEL_Y))
    # OpenCV Sobel(dx=1) / Sobel(dy=1), ksize 3, BORDER_REPLICATE: same values and signs.
    f = luma.astype(np.float32)
    assert np.array_equal(gx, cv2.Sobel(f, cv2.CV_32F, 1, 0, ksize=3, borderType=cv2.BORDER_REPLICATE).astype(np.int64))
    assert np.array_equal(gy, cv2.Sobel(f, cv2.CV_32F, 0, 1, ksize=3, borderType=cv2.BORDER_REPLICATE).astype(np.int64))


def test_edge_magnitude_is_isqrt_of_the_table_address() -> None:
    result = run_model(preset("edge"), _rgb(3))
    gx = result.stages["gx"].array.astype(np.int64)
    gy = result.stages["gy"].array.astype(np.int64)
    sum_sq = gx * gx + gy * gy
    assert np.array_equal(result.stages["sum_sq"].array, sum_sq)
    address = np.minimum(sum_sq >> 12, 8191)
    assert np.array_equal(result.stages["address"].array, address)
    assert np.array_equal(result.stages["address"].clamped, (sum_sq >> 12) > 8191)
    # math.isqrt is the reference floor square root.
    expected = np.array([[math.isqrt(8 * int(a)) for a in row] for row in address])
    assert np.array_equal(result.stages["magnitude"].array, expected)
    assert np.array_equal(result.output, expected)
    assert result.output.max() <= 255


def test_edge_exact_is_isqrt_shifted_to_8_bits() -> None:
    img = _rgb(4)
    result = run_model(preset("edge_exact"), img)
    luma = run_model(preset("edge"), img).stages["luma"].array
    gx, gy = _scipy(luma, SOBEL_X), _scipy(luma, SOBEL_Y)
    # math.isqrt is the reference floor square root.
    roots = np.array([[math.isqrt(int(v)) for v in row] for row in gx * gx + gy * gy])
    assert np.array_equal(result.stages["magnitude"].array, roots)
    assert np.array_equal(result.output, roots >> 7)
    assert "address" not in result.stages


def test_edge_stage_names_and_ranges() -> None:
    result = run_model(preset("edge"), _rgb(5))
    assert list(result.stages) == ["input", "luma", "gx", "gy", "sum_sq", "address", "magnitude", "output"]
    for stage in result.stages.values():
        assert stage.lo <= int(stage.array.min()) and int(stage.array.max()) <= stage.hi, stage.name
    assert result.stages["gx"].signed and result.stages["gx"].bits == 15
    assert result.stages["luma"].clamped is None and result.stages["output"].clamped is None
    assert result.valid_mask.all()


# ------------------------------------------------------------------------------------------ other presets


def test_blur_is_gaussian_sum_rounded_half_up() -> None:
    img = _gray(6)
    out = run_model(preset("blur"), img).output
    # Binomial 3x3 kernel (1 2 1) x (1 2 1), gain 16 (common practice, no source); SciPy does the sum.
    gauss = np.outer([1, 2, 1], [1, 2, 1])
    assert np.array_equal(out, (_scipy(img, gauss) + 8) >> 4)


def test_sharpen_saturates_to_8_bits() -> None:
    img = _gray(7)
    result = run_model(preset("sharpen"), img)
    kernel = np.array([[0, -1, 0], [-1, 5, -1], [0, -1, 0]])
    raw = _scipy(img, kernel)
    assert np.array_equal(result.stages["filtered"].array, raw)
    assert np.array_equal(result.output, np.clip(raw, 0, 255))
    assert np.array_equal(result.stages["output"].clamped, (raw < 0) | (raw > 255))


@pytest.mark.parametrize(
    ("name", "reference"),
    [
        ("median", lambda img: ndimage.median_filter(img, size=3, mode="nearest")),
        ("erode", lambda img: ndimage.minimum_filter(img, size=3, mode="nearest")),
        ("dilate", lambda img: ndimage.maximum_filter(img, size=3, mode="nearest")),
    ],
)
def test_order_filters_match_scipy(name: str, reference) -> None:
    img = _gray(8)
    assert np.array_equal(run_model(preset(name), img).output, reference(img))


@pytest.mark.parametrize("border", ["replicate", "zero", "constant", "mirror", "unchecked"])
def test_border_policies_match_scipy_modes(border: str) -> None:
    spec = replace(preset("edge"), window=WindowSpec(border=border, constant=1000))
    result = run_model(spec, _rgb(9))
    luma = result.stages["luma"].array
    assert np.array_equal(result.stages["gx"].array, _scipy(luma, SOBEL_X, border, 1000))
    assert np.array_equal(result.stages["gy"].array, _scipy(luma, SOBEL_Y, border, 1000))
    ring_checked = result.valid_mask[0].any() or result.valid_mask[:, 0].any()
    assert ring_checked == (border != "unchecked")
    assert result.valid_mask[1:-1, 1:-1].all()


# Textbook 3x3 kernels, correlation orientation (common practice, no source; Scharr's 3-10-3 from memory).
TEXTBOOK = {
    "prewitt": (np.array([[-1, 0, 1]] * 3), np.array([[-1, 0, 1]] * 3).T),
    "scharr": (np.array([[-3, 0, 3], [-10, 0, 10], [-3, 0, 3]]), np.array([[-3, 0, 3], [-10, 0, 10], [-3, 0, 3]]).T),
    "laplacian": (np.array([[0, 1, 0], [1, -4, 1], [0, 1, 0]]),),
    "gaussian": (np.outer([1, 2, 1], [1, 2, 1]),),
}


@pytest.mark.parametrize("kind", sorted(TEXTBOOK))
@pytest.mark.parametrize("border", ["replicate", "zero", "mirror"])
def test_linear_kinds_match_scipy(kind: str, border: str) -> None:
    img = _gray(22)
    spec = PipelineSpec.from_dict(
        {"name": kind, "input": "gray8", "window": {"border": border}, "filter": {"kind": kind, "shift": 1, "rounding": "truncate"}}
    )
    result = run_model(spec, img)
    kernels = TEXTBOOK[kind]
    if len(kernels) == 2:
        assert np.array_equal(result.stages["gx"].array, _scipy(img, kernels[0], border) >> 1)
        assert np.array_equal(result.stages["gy"].array, _scipy(img, kernels[1], border) >> 1)
    else:
        expected = np.clip(_scipy(img, kernels[0], border) >> 1, 0, 255)
        assert np.array_equal(result.output, expected)


def test_custom_taps_shift_and_absolute_value() -> None:
    spec = PipelineSpec.from_dict(
        {
            "name": "ridge",
            "input": "gray8",
            "filter": {"kind": "custom", "taps": [[1, -2, 1], [2, -4, 2], [1, -2, 1]], "shift": 2, "absolute": True},
            "output": {"bits": 8},
        }
    )
    img = _gray(10)
    raw = _scipy(img, np.array(spec.filter.taps))
    assert np.array_equal(run_model(spec, img).output, np.clip((np.abs(raw) + 2) >> 2, 0, 255))


def test_box_divides_by_nine_half_up() -> None:
    spec = PipelineSpec(name="box", input="gray8", filter=FilterSpec(kind="box"))
    img = _gray(11)
    total = _scipy(img, np.ones((3, 3), dtype=np.int64))
    expected = np.floor(total / 9.0 + 0.5).astype(np.int64)  # round half up of the true mean
    assert np.array_equal(run_model(spec, img).output, expected)


def test_output_scale_shift_invert_threshold() -> None:
    img = _gray(12)
    base = replace(preset("blur"), output=replace(preset("blur").output, scale=3, shift=1))
    blurred = run_model(preset("blur"), img).output.astype(np.int64)
    scaled = np.clip((blurred * 3) >> 1, 0, 255)
    assert np.array_equal(run_model(base, img).output, scaled)
    inverted = replace(base, output=replace(base.output, invert=True))
    assert np.array_equal(run_model(inverted, img).output, 255 - scaled)
    binary = replace(base, output=replace(base.output, threshold=200))
    assert np.array_equal(run_model(binary, img).output, np.where(scaled >= 200, 255, 0))


def test_wide_inverted_output_of_an_order_filter() -> None:
    spec = PipelineSpec.from_dict(
        {"name": "m10", "input": "gray8", "filter": {"kind": "median"}, "output": {"bits": 10, "scale": 4, "invert": True}}
    )
    img = _gray(21)
    # scipy.ndimage.median_filter is the reference median.
    expected = 1023 - 4 * ndimage.median_filter(img, size=3, mode="nearest").astype(np.int64)
    assert np.array_equal(run_model(spec, img).output, expected)


def test_gray8_with_luma_treats_grey_as_rgb() -> None:
    spec = PipelineSpec.from_dict({"name": "g", "input": "gray8", "luma": {"weights": "bt709"}, "filter": {"kind": "median"}})
    img = _gray(13)
    # BT.709 weights sum to 1, so a grey pixel keeps its value (times 16 on the 12-bit scale).
    assert np.array_equal(run_model(spec, img).stages["luma"].array, img.astype(np.int64) * 16)


# ------------------------------------------------------------------------------------------ engine


@pytest.mark.parametrize("name", ["edge", "blur", "median", "sharpen", "edge_exact"])
def test_bands_do_not_change_the_result(name: str) -> None:
    spec = preset(name)
    img = _rgb(14) if spec.input == "rgb888" else _gray(14)
    whole = run_model(spec, img, band_rows=H)
    for rows in (1, 3, 7):
        banded = run_model(spec, img, band_rows=rows)
        for stage in whole.stages:
            assert np.array_equal(whole.stages[stage].array, banded.stages[stage].array), (rows, stage)


def test_lean_path_and_frames() -> None:
    spec = preset("edge")
    frames = [_rgb(15), _rgb(16)]
    lean = run_model(spec, frames[0], keep_stages=False)
    assert list(lean.stages) == ["input", "output"]
    results = run_model_frames(spec, frames)
    assert len(results) == 2 and all(isinstance(r, ModelResult) for r in results)
    assert np.array_equal(results[0].output, lean.output)
    assert not np.array_equal(results[0].output, results[1].output)


def test_float_twin_is_close_and_real() -> None:
    img = _rgb(17)
    real = run_float(preset("edge"), img)
    r, g, b = (img[..., i].astype(np.float64) for i in range(3))
    # ITU-R BT.601 coefficients on the 12-bit scale, with no rounding.
    assert np.allclose(real.stages["luma"].array, 16.0 * (0.299 * r + 0.587 * g + 0.114 * b))
    assert real.output.dtype == np.float64 and list(real.stages) == list(preset("edge").stage_names())
    fixed = run_model(preset("edge"), img)
    assert np.max(np.abs(fixed.output - real.output)) < 4.0


def test_one_pixel_and_one_line_frames() -> None:
    for shape in [(1, 1, 3), (1, 5, 3), (5, 1, 3)]:
        img = np.full(shape, 200, dtype=np.uint8)
        out = run_model(preset("edge"), img).output
        assert out.shape == shape[:2] and not out.any()


# ------------------------------------------------------------------------------------------ spec and errors


@pytest.mark.parametrize("name", sorted(PRESETS))
def test_toml_round_trip(name: str, tmp_path) -> None:
    spec = preset(name)
    path = tmp_path / f"{name}.toml"
    path.write_text(spec.to_toml(), encoding="utf-8")
    assert PipelineSpec.from_toml(path) == spec
    assert PipelineSpec.from_dict(spec.to_dict()) == spec


def test_shipped_toml_files_are_the_presets() -> None:
    files = sorted(SPECS_DIR.glob("*.toml"))
    assert sorted(p.stem for p in files) == sorted(PRESETS)
    for path in files:
        assert PipelineSpec.from_toml(path) == preset(path.stem), path.name


def test_hand_written_toml(tmp_path) -> None:
    path = tmp_path / "ridge.toml"
    path.write_text(
        'input = "gray8"\n[window]\nborder = "mirror"\n[filter]\nkind = "custom"\n'
        "taps = [[0, 1, 0], [1, -4, 1], [0, 1, 0]]\nabsolute = true\n[output]\nbits = 8\nthreshold = 20\n",
        encoding="utf-8",
    )
    spec = PipelineSpec.from_toml(path)
    assert spec.name == "ridge" and spec.window.border == "mirror" and spec.filter.taps[1] == (1, -4, 1)
    assert spec.output.threshold == 20 and spec.luma is None and spec.magnitude is None


def test_unknown_key_names_the_closest() -> None:
    with pytest.raises(ConfigError, match=r"unknown key 'fliter'.*did you mean 'filter'"):
        PipelineSpec.from_dict({"name": "x", "fliter": {"kind": "sobel"}})
    with pytest.raises(ConfigError, match=r"pipeline spec \[magnitude\]: unknown key 'adress_bits'; did you mean 'address_bits'"):
        PipelineSpec.from_dict({"magnitude": {"adress_bits": 12}})
    with pytest.raises(ConfigError, match=r"filter.kind = 'medain' is not known; did you mean 'median'"):
        PipelineSpec.from_dict({"input": "gray8", "filter": {"kind": "medain"}})


def test_bad_values_are_config_errors() -> None:
    with pytest.raises(ConfigError, match="magnitude"):
        PipelineSpec.from_dict({"input": "gray8", "filter": {"kind": "box"}, "magnitude": {}})
    with pytest.raises(ConfigError, match="integer"):
        PipelineSpec.from_dict({"output": {"bits": "8"}})
    with pytest.raises(ConfigError, match="taps"):
        PipelineSpec.from_dict({"filter": {"kind": "custom", "taps": [[1, 2], [3, 4]]}})
    with pytest.raises(ConfigError, match="not valid TOML"):
        PipelineSpec.from_toml_text("name = ")
    with pytest.raises(ConfigError, match="preset = 'edgy' is not known; did you mean 'edge'"):
        preset("edgy")


def test_wrong_image_shape_or_dtype_names_the_fix() -> None:
    with pytest.raises(ConfigError, match=r"rgb888.*\(height, width, 3\).*np.repeat"):
        run_model(preset("edge"), _gray(0))
    with pytest.raises(ConfigError, match=r"gray8.*\(height, width\).*luma"):
        run_model(preset("blur"), _rgb(0))
    with pytest.raises(ConfigError, match=r"uint8.*astype"):
        run_model(preset("blur"), _gray(0).astype(np.float32))


def test_with_border_copies() -> None:
    spec = preset("edge")
    other = spec.with_border("zero")
    assert other.window.border == "zero" and spec.window.border == "replicate"
    assert replace(other, window=spec.window) == spec
    with pytest.raises(ConfigError, match="window.border"):
        spec.with_border("wrap")


def test_model_imports_no_cocotb() -> None:
    code = (
        "import sys, numpy as np\n"
        "import vkit.model.pipeline, vkit.model.widths, vkit.model.quality\n"
        "img = np.zeros((4, 5, 3), dtype=np.uint8)\n"
        "vkit.model.quality.compare(vkit.model.pipeline.preset('edge'), img)\n"
        "print(sorted(m for m in sys.modules if m.split('.')[0] in ('cocotb', 'cocotb_bus', 'cocotb_tools')))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True)
    assert done.stdout.strip() == "[]", done.stdout
