"""Stage widths by interval arithmetic: the edge preset's known widths, and bounds the model really reaches."""

from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
import pytest

from vkit.video import patterns
from vkit.model.pipeline import FilterSpec, PipelineSpec, preset, run_model
from vkit.model.widths import format_width_table, stage_range_map, stage_ranges, widths_to_dict


def test_edge_widths() -> None:
    w = stage_range_map(preset("edge"))
    # Check values (common practice, no source): 12-bit luma, 15-bit signed Sobel of it,
    # 29-bit sum of squares 2 * 16320^2, 13-bit table address, 8-bit magnitude.
    assert (w["luma"].lo, w["luma"].hi, w["luma"].signed, w["luma"].bits) == (0, 4080, False, 12)
    for g in ("gx", "gy"):
        assert (w[g].lo, w[g].hi, w[g].signed, w[g].bits) == (-16320, 16320, True, 15)
    assert (w["sum_sq"].lo, w["sum_sq"].hi, w["sum_sq"].signed, w["sum_sq"].bits) == (0, 532_684_800, False, 29)
    assert (w["address"].hi, w["address"].bits, w["address"].can_clamp) == (8191, 13, True)
    assert (w["magnitude"].hi, w["magnitude"].bits) == (255, 8)
    assert (w["output"].hi, w["output"].bits, w["output"].can_clamp) == (255, 8, False)
    assert [s.name for s in stage_ranges(preset("edge"))] == preset("edge").stage_names()


def test_edge_extremes_are_reached() -> None:
    # Columns two pixels wide put 0 and 255 left and right of every interior column, so the
    # horizontal Sobel reaches +-4 * 4080 and the interval bound is tight.
    gray = patterns.columns(8, 16, stripe=2)
    result = run_model(preset("edge"), patterns.to_rgb(gray))
    gx = result.stages["gx"].array
    assert int(gx.min()) == -16320 and int(gx.max()) == 16320
    assert int(result.stages["address"].array.max()) == 8191


def test_sharpen_widths_and_saturation() -> None:
    w = stage_range_map(preset("sharpen"))
    # 5 * 255 at most, -4 * 255 at least.
    assert (w["filtered"].lo, w["filtered"].hi, w["filtered"].bits) == (-1020, 1275, 12)
    assert w["output"].can_clamp and (w["output"].lo, w["output"].hi) == (0, 255)
    # A one-pixel-wide column pattern drives the sharpen kernel to both extremes.
    filtered = run_model(preset("sharpen"), patterns.columns(6, 8, stripe=1)).stages["filtered"].array
    assert int(filtered[1:-1, 1:-1].min()) == -510 and int(filtered[1:-1, 1:-1].max()) == 765


@pytest.mark.parametrize("name", ["blur", "median", "erode", "dilate"])
def test_smoothing_presets_stay_8_bit(name: str) -> None:
    for s in stage_ranges(preset(name)):
        assert (s.lo, s.hi, s.signed, s.bits) == (0, 255, False, 8), s


def test_other_kernels() -> None:
    scharr = replace(preset("edge"), filter=FilterSpec(kind="scharr"))
    w = stage_range_map(scharr)
    # Scharr weights 3, 10, 3 on each side: 16 * 4080 = 65280, 17 bits signed.
    assert (w["gx"].lo, w["gx"].hi, w["gx"].bits) == (-65280, 65280, 17)
    abs_sum = PipelineSpec.from_dict({"name": "l1", "magnitude": {"method": "abs_sum"}})
    w = stage_range_map(abs_sum)
    assert "sum_sq" not in w and "address" not in w and w["magnitude"].hi == 32640
    assert w["output"].can_clamp


def test_ranges_bound_random_frames() -> None:
    rng = np.random.default_rng(3)
    for name in ("edge", "edge_exact", "blur", "sharpen"):
        spec = preset(name)
        shape = (16, 20, 3) if spec.input == "rgb888" else (16, 20)
        result = run_model(spec, rng.integers(0, 256, shape, dtype=np.uint8))
        widths = stage_range_map(spec)
        for stage in result.stages.values():
            w = widths[stage.name]
            assert w.lo <= int(stage.array.min()) and int(stage.array.max()) <= w.hi, (name, stage.name)


def test_table_text_and_dict() -> None:
    text = format_width_table(preset("edge"))
    lines = text.splitlines()
    assert lines[1].split()[:5] == ["stage", "lo", "hi", "sign", "bits"]
    sum_sq_line = next(line for line in lines if line.startswith("sum_sq"))
    assert "532,684,800" in sum_sq_line and " 29 " in sum_sq_line
    data = json.loads(json.dumps(widths_to_dict(preset("edge"))))
    assert data["pipeline"] == "edge" and data["stages"][1]["name"] == "luma" and data["stages"][1]["bits"] == 12
