"""Diagnosis: each injected fault is named by the right finding, first."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import ndimage

from vkit.video.capture import UNKNOWN, CaptureBuilder, RunFacts
from vkit.check.diagnose import KINDS
from vkit.model.pipeline import preset, run_model
from vkit.check.scoreboard import score

H, W = 24, 32


def pack(frames, meta=None, *, skip_lines=(), rows=None):
    """A capture as a video monitor builds it; ``rows`` may replace whole output lines (any length)."""
    m = {"frames_sent": len(frames), "first_input_clock": 0}
    m.update(meta or {})
    b = CaptureBuilder(RunFacts(**m))
    clk = 30
    for f in frames:
        b.new_frame()
        for y, row in enumerate(np.asarray(f)):
            if y in skip_lines:
                continue
            b.new_line()
            for v in (rows or {}).get(y, row):
                b.add(int(v), clk)
                clk += 1
            clk += 8
    return b.build()


def smooth_rgb(seed: int) -> np.ndarray:
    n = ndimage.gaussian_filter(np.random.default_rng(seed).normal(size=(H, W, 3)), (1.5, 1.5, 0))
    return np.clip(128 + n / n.std() * 60, 0, 255).astype(np.uint8)


@pytest.fixture(scope="module")
def edge():
    spec = preset("edge")
    img = smooth_rgb(5)
    return spec, img, run_model(spec, img)


def first(v):
    assert not v.passed and v.findings, v.to_dict()
    assert all(f.kind in KINDS for f in v.findings)
    assert [f.confidence for f in v.findings] == sorted((f.confidence for f in v.findings), reverse=True)
    return v.findings[0]


def test_shift_right_by_one_pixel(edge) -> None:
    _, _, r = edge
    out = np.zeros_like(r.output)
    out[:, 1:] = r.output[:, :-1]
    f = first(score([r], pack([out])))
    assert f.kind == "shift"
    assert f.message.startswith("output is the expected image shifted right by 1 pixel and down by 0 lines")
    assert "off by one" in f.message


def test_shift_down_one_line_and_raster_latency(edge) -> None:
    _, _, r = edge
    out = np.zeros_like(r.output)
    out[1:] = r.output[:-1]
    f = first(score([r], pack([out])))
    assert f.kind == "shift" and "down by 1 line" in f.message and "line offset" in f.message
    flat = np.zeros(H * W, np.int64)
    flat[3:] = r.output.ravel()[:-3]  # data three clocks late against its line marks
    f = first(score([r], pack([flat.reshape(H, W)])))
    assert f.kind == "shift" and "raster order" in f.message and "3 pixels" in f.message


def test_wrong_border_column_names_the_side(edge) -> None:
    spec, img, r = edge
    zero = run_model(spec.with_border("zero"), img).output
    out = r.output.copy()
    out[:, 0] = zero[:, 0]
    assert np.count_nonzero(out != r.output) > 10
    f = first(score([r], pack([out])))
    assert f.kind == "border"
    assert "left border" in f.message and "column" in f.message
    assert f.evidence["sides"]["left"] > 0 and f.evidence["sides"]["right"] == 0


def test_border_policy_is_inferred_when_spec_and_images_are_given() -> None:
    spec = preset("blur")
    img = np.random.default_rng(4).integers(0, 256, (H, W)).astype(np.uint8)
    r = run_model(spec, img)  # replicate
    dut = run_model(spec.with_border("mirror"), img).output
    f = first(score([r], pack([dut]), spec=spec, images=[img]))
    assert f.kind == "border"
    assert "'mirror' borders" in f.message
    assert f.evidence["inferred"]["policy"] == "mirror"


def test_single_border_mismatch_is_not_called_a_border_pattern(edge) -> None:
    _, _, r = edge
    out = r.output.copy()
    out[0, 5] = (out[0, 5] + 40) % 256
    out[10, 10] = (out[10, 10] + 40) % 256
    kinds = [f.kind for f in score([r], pack([out])).findings]
    assert "border" not in kinds and kinds[0] == "scattered"


def test_sum_sq_wrap_is_overflow_at_the_right_width(edge) -> None:
    _, _, r = edge
    gx = r.stages["gx"].array.astype(np.int64)
    gy = r.stages["gy"].array.astype(np.int64)
    bits = 23
    wrapped = (gx * gx + gy * gy) % (1 << bits)  # a 23-bit sum_sq register
    # magnitude = isqrt(8 * min(sum_sq >> 12, 8191)) (math.isqrt as the reference root)
    out = np.vectorize(lambda s: math.isqrt(8 * min(int(s) >> 12, 8191)))(wrapped)
    share = np.mean(out != r.output)
    assert 0.1 < share < 0.5
    f = first(score([r], pack([out])))
    assert f.kind == "overflow"
    assert f.evidence["stage"] == "sum_sq" and f.evidence["wrap_bits"] == bits
    assert "sum_sq wraps at 23 bits" in f.message


def test_repeated_pixel_after_a_stall(edge) -> None:
    _, _, r = edge
    y, x = 9, 13
    row = list(r.output[y, :x]) + [r.output[y, x - 1]] + list(r.output[y, x:])  # 33 pixels
    cap = pack([r.output], {"stall_pixels": [[0, y + 1, x], [0, 3, 20]]}, rows={y: row})
    v = score([r], cap)
    f = first(v)
    assert f.kind == "stall"
    assert f"line {y}: pixel repeated at x={x}" in f.message and "after a stall" in f.message
    assert any("line 9: 33" in t for t in v.timing_errors)


def test_mismatches_around_stalls_without_a_line_slip(edge) -> None:
    _, _, r = edge
    out = r.output.copy()
    stalls = [[0, 5, 6], [0, 12, 20], [0, 18, 9], [0, 21, 28]]
    for _, y, x in stalls:
        out[y - 1, x - 1 : x + 2] = (out[y - 1, x - 1 : x + 2] + 90) % 256  # corrupted window
    f = first(score([r], pack([out], {"stall_pixels": stalls})))
    assert f.kind == "stall" and "next to a stall" in f.message


def test_sparse_plus_minus_one_is_rounding(edge) -> None:
    _, _, r = edge
    out = r.output.copy()
    rng = np.random.default_rng(3)
    ys, xs = np.nonzero((out > 0) & (out < 255))
    pick = rng.choice(ys.size, 15, replace=False)
    out[ys[pick], xs[pick]] += 1
    f = first(score([r], pack([out])))
    assert f.kind == "rounding"
    assert "exactly 1 LSB" in f.message and "+1: 15, -1: 0" in f.message and "rounds up" in f.message


def test_dropped_line_is_timing_and_names_the_line(edge) -> None:
    _, _, r = edge
    f = first(score([r], pack([r.output], skip_lines={7})))
    assert f.kind == "timing"
    assert "23 lines arrived, expected 24" in f.message and "line 7 was dropped" in f.message


def test_last_line_not_flushed(edge) -> None:
    _, _, r = edge
    f = first(score([r], pack([r.output], skip_lines={23})))
    assert f.kind in ("timing", "missing") and "flush" in f.message


def test_x_pixels(edge) -> None:
    _, _, r = edge
    out = r.output.copy()
    out[0, 3:8] = UNKNOWN
    f = first(score([r], pack([out])))
    assert f.kind == "xz" and "5 output pixels carried X/Z" in f.message and "(x=3, y=0)" in f.message


def test_de_in_blanking(edge) -> None:
    _, _, r = edge
    f = first(score([r], pack([r.output], {"de_in_blanking": [4000, 4001, 4002]})))
    assert f.kind == "timing" and "data-enable" in f.message and "vsync" in f.message


def test_missing_pixels_mid_frame(edge) -> None:
    _, _, r = edge
    row = list(r.output[4, :20])
    f = first(score([r], pack([r.output], rows={4: row})))
    assert f.kind in ("missing", "timing")
    kinds = [g.kind for g in score([r], pack([r.output], rows={4: row})).findings]
    assert "missing" in kinds and "timing" in kinds


def test_scattered_errors_have_no_pattern(edge) -> None:
    _, _, r = edge
    out = r.output.copy()
    rng = np.random.default_rng(9)
    ys = rng.integers(1, H - 1, 6)
    xs = rng.integers(1, W - 1, 6)
    out[ys, xs] = (out[ys, xs] + 100) % 256
    assert first(score([r], pack([out]))).kind == "scattered"
