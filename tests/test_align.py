"""Aligner: recovers injected latency and offsets, latency from capture meta, border policy inference."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import ndimage

from vkit.check.align import Offset, infer_border, latency_clocks, measure_offset, shift_back
from vkit.video.capture import UNKNOWN, CaptureBuilder, RunFacts
from vkit.core.errors import ConfigError
from vkit.model.pipeline import preset, run_model


def _random_frame(seed: int, h: int, w: int) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 256, (h, w)).astype(np.int64)


@settings(max_examples=60, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    h=st.integers(5, 24),
    w=st.integers(2, 32),
    lines=st.integers(0, 3),
    data=st.data(),
)
def test_recovers_injected_latency_in_raster_order(seed: int, h: int, w: int, lines: int, data) -> None:
    pixels = data.draw(st.integers(0, w - 1))
    lag = lines * w + pixels
    expected = _random_frame(seed, h, w)
    flat = expected.ravel()
    actual = np.random.default_rng(seed + 1).integers(0, 256, h * w)  # blanking garbage first
    actual[lag:] = flat[: flat.size - lag]
    off = measure_offset(expected, actual.reshape(h, w))
    # A whole-line lag is the same as a row offset; any other lag must come back as a raster lag.
    assert off.raster_pixels == lag
    assert (off.dy, off.dx) == (lines, pixels)
    assert off.kind in (("none",) if lag == 0 else ("raster", "grid") if pixels == 0 else ("raster",))
    assert off.match_share == 1.0


@settings(max_examples=60, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    h=st.integers(4, 24),
    w=st.integers(4, 32),
    dy=st.integers(-3, 3),
    data=st.data(),
)
def test_recovers_row_and_column_offsets(seed: int, h: int, w: int, dy: int, data) -> None:
    dx = data.draw(st.integers(-(w - 1), w - 1))
    # Keep at least 4 overlapping pixels, otherwise the offset is not determined by the data.
    assume((h - abs(dy)) * (w - abs(dx)) >= 4)
    expected = _random_frame(seed, h, w)
    # scipy.ndimage.shift with order=0 is an outside reference for a grid shift (SciPy docs).
    actual = ndimage.shift(expected, (dy, dx), order=0, mode="constant", cval=-7).astype(np.int64)
    present = actual != -7
    off = measure_offset(expected, actual, present=present)
    assert (off.dy, off.dx) == (dy, dx)
    assert off.match_share == 1.0
    pix, pres = shift_back(actual, present, off)
    assert np.array_equal(pix[pres], expected[pres])


def test_offset_ignores_unknown_and_invalid_pixels() -> None:
    expected = _random_frame(3, 12, 16)
    actual = np.roll(expected, 2, axis=1)  # np.roll: outside reference for a cyclic column shift
    actual[:, :2] = UNKNOWN
    valid = np.ones_like(expected, bool)
    valid[0, :] = False
    off = measure_offset(expected, actual, valid=valid)
    assert (off.dx, off.dy, off.kind) == (2, 0, "grid")
    assert off.confidence > 0.99


def test_zero_offset_on_identical_frames_and_on_empty_capture() -> None:
    e = _random_frame(1, 6, 9)
    assert measure_offset(e, e.copy()).is_zero
    none = measure_offset(e, e, present=np.zeros_like(e, bool))
    assert none.is_zero and none.confidence == 0.0


def test_shape_mismatch_is_a_config_error() -> None:
    with pytest.raises(ConfigError, match="same"):
        measure_offset(np.zeros((3, 4)), np.zeros((4, 3)))


def test_latency_from_meta_or_first_clocks() -> None:
    b = CaptureBuilder(RunFacts(first_input_clock=10))
    b.add(5, 47)
    assert latency_clocks(b.build()) == 37
    b.facts.latency_clocks = 12
    assert latency_clocks(b.build()) == 12
    assert latency_clocks(CaptureBuilder().build()) is None


def _capture(frames: list[np.ndarray]):
    b = CaptureBuilder(RunFacts(frames_sent=len(frames)))
    clk = 0
    for f in frames:
        b.new_frame()
        for row in f:
            b.new_line()
            for v in row:
                b.add(int(v), clk)
                clk += 1
            clk += 4
    return b.build()


@pytest.mark.parametrize("policy", ["replicate", "zero", "mirror"])
def test_border_inference_names_the_policy_and_the_offset(policy: str) -> None:
    spec = preset("blur")
    img = np.random.default_rng(7).integers(0, 256, (12, 16)).astype(np.uint8)
    dut = run_model(spec.with_border(policy), img).output
    shifted = np.zeros_like(dut)
    shifted[:, 1:] = dut[:, :-1]  # design's output one column late
    inf = infer_border(spec, [img], _capture([shifted]))
    assert inf.policy == policy
    assert (inf.offset.dx, inf.offset.dy) == (1, 0)
    assert inf.share > 0.9 and inf.confidence > 0.8
    assert inf.compared > 0


def test_border_inference_needs_two_policies() -> None:
    with pytest.raises(ConfigError, match="two"):
        infer_border(preset("blur"), [np.zeros((4, 4), np.uint8)], [], policies=["zero"])


def test_offset_describe_reads_as_a_direction() -> None:
    assert Offset(dx=1, dy=0, kind="grid", width=8).describe() == "right by 1 pixel and down by 0 lines"
    assert Offset(dx=-3, dy=-2, kind="grid", width=8).describe() == "left by 3 pixels and up by 2 lines"
