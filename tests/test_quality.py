"""Fixed point against the float twin: errors, PSNR (against OpenCV's), histogram, coverage, clamps, report files."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import ndimage

from vkit.video import patterns
from vkit.video.images import load_image, save_image
from vkit.model.pipeline import preset, run_float, run_model
from vkit.model.quality import compare, psnr_db
from vkit.report.quality import write_model_report


def test_smooth_ramp_edge_error_is_small() -> None:
    # What is checked: on a smooth ramp (gradient ~ 1 grey level per pixel, far from any clamp) the
    # bit-exact edge model differs from its float twin only by the 8-bit luma weights, the luma
    # rounding, the address truncation (>> 12) and the floor of the table root. Each costs at most
    # about one output LSB, so the error must stay within 3 LSB and the PSNR above 30 dB
    # (30 dB at peak 255 would mean an RMS error of about 8 LSB: a broken stage, not rounding).
    ramp = patterns.to_rgb(patterns.ramp_h(24, 32))
    report = compare(preset("edge"), ramp)
    q = report.overall
    assert q.pixels == 24 * 32
    assert q.max_abs_error < 3.0
    assert q.psnr_db > 30.0
    assert sum(q.histogram.values()) == q.pixels


def test_blur_error_is_at_most_half_an_lsb() -> None:
    # Half-up rounding of an exact sum / 16 is never more than 0.5 LSB from the real quotient.
    img = np.random.default_rng(1).integers(0, 256, (24, 32), dtype=np.uint8)
    q = compare(preset("blur"), img).overall
    assert q.max_abs_error <= 0.5
    assert set(q.histogram) <= {-1, 0, 1}  # 0.5 rounds to an even integer in the histogram bins


def test_psnr_matches_opencv() -> None:
    cv2 = pytest.importorskip("cv2")
    rng = np.random.default_rng(2)
    a = rng.integers(0, 256, (24, 32), dtype=np.uint8)
    b = np.clip(a.astype(np.int16) + rng.integers(-3, 4, a.shape), 0, 255).astype(np.uint8)
    # cv2.PSNR is the reference: 20 log10(R / RMSE).
    assert psnr_db(a, b, 255) == pytest.approx(cv2.PSNR(a, b, 255.0), rel=1e-9)
    # Off by one everywhere: 20 log10(255) = 48.13 dB (definition of PSNR, common practice, no source).
    assert psnr_db(a.astype(np.int16) + 1, a, 255) == pytest.approx(20 * math.log10(255), rel=1e-12)
    assert math.isinf(psnr_db(a, a, 255))


def test_per_image_and_pooled_figures() -> None:
    imgs = [patterns.to_rgb(patterns.ramp_h(16, 20)), patterns.conveyor(16, 20, seed=3)]
    report = compare(preset("edge"), imgs, labels=["ramp", "belt"])
    assert [q.label for q in report.images] == ["ramp", "belt"]
    assert report.overall.pixels == sum(q.pixels for q in report.images)
    assert report.overall.max_abs_error == max(q.max_abs_error for q in report.images)
    pooled_mean = sum(q.mean_abs_error * q.pixels for q in report.images) / report.overall.pixels
    assert report.overall.mean_abs_error == pytest.approx(pooled_mean)
    for q, img in zip(report.images, imgs):
        fixed, real = run_model(preset("edge"), img), run_float(preset("edge"), img)
        assert q.max_abs_error == pytest.approx(float(np.max(np.abs(fixed.output - real.output))))


def test_clamp_share_counts_saturated_pixels() -> None:
    img = patterns.checkerboard(12, 16, cell=2)
    report = compare(preset("sharpen"), img)
    raw = ndimage.correlate(img.astype(np.int64), np.array([[0, -1, 0], [-1, 5, -1], [0, -1, 0]]), mode="nearest")
    expected = float(np.mean((raw < 0) | (raw > 255)))
    assert expected > 0 and report.overall.clamp_shares == {"output": pytest.approx(expected)}


def test_coverage_of_an_extreme_pattern() -> None:
    img = patterns.to_rgb(patterns.columns(8, 16, stripe=2))
    cov = {c.name: c for c in compare(preset("edge"), img).overall.coverage}
    assert cov["gx"].share == 1.0 and (cov["gx"].seen_min, cov["gx"].seen_max) == (-16320, 16320)
    assert cov["gy"].seen_min == cov["gy"].seen_max == 0 and cov["gy"].share == 0.0
    assert cov["address"].seen_max == 8191


def test_unchecked_border_is_left_out() -> None:
    spec = preset("edge").with_border("unchecked")
    q = compare(spec, patterns.conveyor(12, 16, seed=1)).overall
    assert q.pixels == 10 * 14


def test_text_and_dict() -> None:
    report = compare(preset("sharpen"), patterns.ramp_v(12, 16))
    text = report.format_text()
    assert "pipeline 'sharpen'" in text and "PSNR dB" in text and "range coverage" in text
    data = json.loads(json.dumps(report.to_dict()))
    assert data["overall"]["psnr_db"] is None  # identical on a ramp: infinite PSNR is written as null
    assert data["overall"]["coverage"][0]["stage"] == "input"


def test_write_model_report(tmp_path) -> None:
    src = tmp_path / "belt.png"
    save_image(patterns.conveyor(12, 16, seed=2), src)
    paths = write_model_report(preset("edge"), [src], tmp_path / "out")
    names = [p.name for p in paths]
    assert names == ["belt_output.png", "belt_error.png", "report.json", "report.txt"]
    out = load_image(paths[0], mode="gray8")
    assert np.array_equal(out, run_model(preset("edge"), load_image(src, mode="rgb888")).output)
    data = json.loads(paths[2].read_text(encoding="utf-8"))
    assert data["spec"]["name"] == "edge" and data["quality"]["images"][0]["label"] == "belt"
    assert any(w["name"] == "sum_sq" and w["bits"] == 29 for w in data["widths"])
    assert "stage widths" in paths[3].read_text(encoding="utf-8")
