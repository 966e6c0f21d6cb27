"""The reflect and pass-through border policies: against SciPy ndimage and OpenCV where they have the
policy, against the policy's own definition where they do not."""

from __future__ import annotations

import cv2
import numpy as np
import pytest
import scipy.ndimage as ndi

from conftest import pack_capture
from vkit.check.align import infer_border
from vkit.core.errors import ConfigError
from vkit.model.exact import run_model
from vkit.model.float_twin import run_float
from vkit.model.kernels import KERNELS, correlate3x3, median3x3
from vkit.model.mutants import spec_mutants
from vkit.model.pipeline import preset
from vkit.model.spec import PipelineSpec
from vkit.model.window import OPENCV_BORDERS, SCIPY_MODES, interior_mask, pad, ring_mask


def _frame(seed: int, shape: tuple[int, int] = (12, 16), top: int = 256) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, top, shape).astype(np.uint8 if top <= 256 else np.uint16)


def _blur(border: str, **window) -> PipelineSpec:
    data = preset("blur").to_dict()
    data["window"] = {"border": border, **window}
    return PipelineSpec.from_dict(data)


def test_reflect_pad_is_opencv_border_reflect() -> None:
    img = np.arange(20, dtype=np.uint8).reshape(4, 5)
    # Reference: OpenCV cv2.copyMakeBorder with BORDER_REFLECT (fedcba|abcdefgh|hgfedcb), one pixel a side.
    assert np.array_equal(pad(img, "reflect"), cv2.copyMakeBorder(img, 1, 1, 1, 1, cv2.BORDER_REFLECT))
    # Reference: numpy.pad mode "symmetric" (the edge sample repeated).
    assert np.array_equal(pad(img, "reflect"), np.pad(img, 1, mode="symmetric"))
    assert OPENCV_BORDERS["reflect"] == "BORDER_REFLECT" and SCIPY_MODES["reflect"] == "reflect"


@pytest.mark.parametrize("kernel", ["sobel_x", "gaussian", "laplacian"])
def test_reflect_correlation_vs_scipy_and_opencv(kernel: str) -> None:
    img = _frame(3, (24, 32))
    k = np.array(KERNELS[kernel])
    # Reference: scipy.ndimage.correlate, mode "reflect" (d c b a | a b c d).
    assert np.array_equal(correlate3x3(img, kernel, "reflect"), ndi.correlate(img.astype(np.int32), k, mode="reflect"))
    # Reference: OpenCV cv2.filter2D (a correlation) with borderType BORDER_REFLECT, exact on float64.
    ref = cv2.filter2D(img.astype(np.float64), cv2.CV_64F, k.astype(np.float64), borderType=cv2.BORDER_REFLECT)
    assert np.array_equal(correlate3x3(img, kernel, "reflect"), ref.astype(np.int32))


def test_reflect_median_vs_scipy() -> None:
    img = _frame(4, (24, 32))
    # Reference: scipy.ndimage.median_filter, size 3, mode "reflect".
    assert np.array_equal(median3x3(img, "reflect"), ndi.median_filter(img, size=3, mode="reflect"))


def test_passthrough_frame_is_the_input_and_the_inside_is_the_filter() -> None:
    img = _frame(5)
    out = run_model(_blur("passthrough"), img).output
    ring = ring_mask(*img.shape)
    # The definition: on the one-pixel frame the output is the input sample (blur's mapping is the identity).
    assert np.array_equal(out[ring], img[ring])
    # Reference for the inside: scipy.ndimage.correlate with the 3x3 Gaussian [1 2 1]^T [1 2 1], then the
    # spec's right shift by 4 with half-up rounding.
    acc = ndi.correlate(img.astype(np.int32), np.array(KERNELS["gaussian"]), mode="nearest")
    assert np.array_equal(out[~ring], ((acc + 8) >> 4)[~ring])
    assert interior_mask(*img.shape, "passthrough").all()  # the frame is checked, against the input


def test_passthrough_mapped_goes_through_the_output_mapping_and_raw_does_not() -> None:
    img = _frame(6)
    ring = ring_mask(*img.shape)
    data = _blur("passthrough").to_dict()
    data["output"] = {"bits": 8, "invert": True}
    mapped = run_model(PipelineSpec.from_dict(data), img).output
    assert np.array_equal(mapped[ring], 255 - img[ring].astype(np.int64))
    data["window"]["passthrough"] = "raw"
    raw = run_model(PipelineSpec.from_dict(data), img).output
    assert np.array_equal(raw[ring], img[ring])
    assert np.array_equal(raw[~ring], mapped[~ring])


def test_passthrough_on_rgb_is_the_luma_sample() -> None:
    rgb = np.random.default_rng(8).integers(0, 256, (10, 14, 3)).astype(np.uint8)
    spec = preset("edge").with_border("passthrough")
    res = run_model(spec, rgb)
    ring = ring_mask(10, 14)
    luma = res.stages["luma"].array
    # The frame is the luma sample through the output mapping ((v * scale) >> shift, saturate).
    o = spec.output
    assert np.array_equal(res.output[ring], np.clip((luma[ring].astype(np.int64) * o.scale) >> o.shift, 0, o.max_value))
    fast = run_model(spec, rgb, keep_stages=False).output
    assert np.array_equal(fast, res.output)


def test_raw_passthrough_that_does_not_fit_is_a_config_error() -> None:
    data = _blur("passthrough", passthrough="raw").to_dict()
    data["output"] = {"bits": 6}
    with pytest.raises(ConfigError, match=r"window\.passthrough = 'raw' .*output\.bits >= 8"):
        PipelineSpec.from_dict(data)


def test_float_twin_passthrough_frame() -> None:
    img = _frame(9)
    twin = run_float(_blur("passthrough"), img).output
    ring = ring_mask(*img.shape)
    assert np.array_equal(twin[ring], img[ring].astype(np.float64))


def test_spec_round_trips_with_the_new_policies() -> None:
    for spec in (_blur("reflect"), _blur("passthrough", passthrough="raw")):
        assert PipelineSpec.from_toml_text(spec.to_toml()) == spec
    with pytest.raises(ConfigError, match="window.passthrough"):
        _blur("passthrough", passthrough="filtered")


def _late_by_one(frame: np.ndarray) -> np.ndarray:
    shifted = np.zeros_like(frame)
    shifted[:, 1:] = frame[:, :-1]
    return shifted


def test_inference_names_passthrough() -> None:
    spec = preset("blur")
    img = _frame(10, (16, 20))
    dut = run_model(spec.with_border("passthrough"), img).output
    inf = infer_border(spec, [img], pack_capture([_late_by_one(dut)]))
    assert inf.policy == "passthrough" and (inf.offset.dx, inf.offset.dy) == (1, 0)
    assert inf.share > 0.9


def test_inference_calls_reflect_replicate_since_a_3x3_window_reads_the_same() -> None:
    spec = preset("blur")
    img = _frame(11, (16, 20))
    dut = run_model(spec.with_border("reflect"), img).output
    assert np.array_equal(dut, run_model(spec.with_border("replicate"), img).output)
    assert infer_border(spec, [img], pack_capture([dut])).policy == "replicate"


def test_mutants_cover_every_other_border_policy() -> None:
    names = {m.name: m for m in spec_mutants(_blur("passthrough"))}
    for other in ("replicate", "zero", "constant", "mirror", "reflect"):
        assert f"window.{other}" in names
        assert names[f"window.{other}"].equivalent == ""
    assert "window.right_zero" not in names  # the right column is the input under pass-through
    reflect = {m.name: m for m in spec_mutants(_blur("replicate"))}["window.reflect"]
    assert "replicate" in reflect.equivalent
    assert {m.name for m in spec_mutants(_blur("reflect"))} >= {"window.passthrough", "window.replicate"}
