"""Luma weights and the integer luma against ITU-R BT.601/BT.709 and OpenCV."""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from vkit.core.errors import ConfigError
from vkit.model.luma import BT601, BT709, OPENCV, PRESETS, LumaWeights, luma, luma_float, luma_range


def _all_colours() -> np.ndarray:
    """Every 24-bit colour once, as a 4096x4096 RGB image."""
    v = np.arange(1 << 24, dtype=np.uint32)
    rgb = np.empty((1 << 24, 3), dtype=np.uint8)
    rgb[:, 0] = v >> 16
    rgb[:, 1] = (v >> 8) & 255
    rgb[:, 2] = v & 255
    return rgb.reshape(4096, 4096, 3)


@pytest.fixture(scope="module")
def all_colours() -> np.ndarray:
    return _all_colours()


def test_preset_weights() -> None:
    # ITU-R BT.601: Kr=0.299, Kg=0.587, Kb=0.114 -> x256 rounded = 77, 150, 29.
    assert BT601.as_tuple() == (77, 150, 29) and BT601.fraction_bits == 8
    # ITU-R BT.709: Kr=0.2126, Kg=0.7152, Kb=0.0722 -> x256 = 54.43, 183.09, 18.48, sum kept at 256.
    assert BT709.total == 256 and BT709.as_tuple() == (54, 183, 19)
    assert set(PRESETS) == {"bt601", "bt709", "opencv"}
    assert PRESETS["opencv"] is OPENCV


def test_opencv_preset_is_bit_exact_over_every_colour(all_colours: np.ndarray) -> None:
    # Reference: OpenCV cv2.cvtColor(..., cv2.COLOR_RGB2GRAY) on all 2**24 colours.
    expected = cv2.cvtColor(all_colours, cv2.COLOR_RGB2GRAY)
    got = luma(all_colours, OPENCV, output_bits=8, rounding="half_up")
    assert got.dtype == np.int32
    assert np.array_equal(got, expected.astype(np.int32)), f"OpenCV {cv2.__version__} RGB2GRAY differs"


def test_bt601_within_one_lsb_of_float_formula(all_colours: np.ndarray) -> None:
    # Reference: ITU-R BT.601-7 luma E'Y = 0.299 R + 0.587 G + 0.114 B.
    exact = luma_float(all_colours, (0.299, 0.587, 0.114))
    got = luma(all_colours, BT601)
    # 8-bit code values: compare with the float luma rounded to the nearest code.
    assert np.abs(got - np.floor(exact + 0.5)).max() <= 1
    assert np.abs(got - exact).max() < 1.0
    assert got.min() == 0 and got.max() == 255


def test_bt709_within_one_lsb_of_float_formula(all_colours: np.ndarray) -> None:
    # Reference: ITU-R BT.709-6 item 3.2, E'Y = 0.2126 R + 0.7152 G + 0.0722 B.
    exact = luma_float(all_colours, (0.2126, 0.7152, 0.0722))
    got = luma(all_colours, BT709)
    # 8-bit code values: compare with the float luma rounded to the nearest code. No 8-fraction-bit
    # triple summing to 256 stays within 1.0 of the unrounded float everywhere (54/183/19 peaks at 1.013).
    assert np.abs(got - np.floor(exact + 0.5)).max() <= 1
    assert np.abs(got - exact).max() < 1.02
    assert got.min() == 0 and got.max() == 255


def test_scaled_12_bit_luma_spans_0_to_4080(all_colours: np.ndarray) -> None:
    # 12-bit "scaled luma" = 8-bit luma x 16, so white is 255*16 = 4080 (common practice, no source).
    got = luma(all_colours, BT601, output_bits=12)
    assert got.min() == 0 and got.max() == 4080
    assert luma_range(BT601, 12) == (0, 4080)
    # The 12-bit value keeps 4 more fraction bits: it is within half an 8-bit LSB * 16 of the float.
    exact = luma_float(all_colours, (77 / 256, 150 / 256, 29 / 256), output_bits=12)
    assert np.abs(got - exact).max() <= 0.5


def test_rounding_modes_against_python_ints() -> None:
    rng = np.random.default_rng(7)
    rgb = rng.integers(0, 256, (24, 32, 3), dtype=np.uint8)
    r, g, b = (rgb[..., i].astype(np.int64) for i in range(3))
    total = 77 * r + 150 * g + 29 * b
    # Python/NumPy integer floor division is the reference for both rounding modes.
    assert np.array_equal(luma(rgb, BT601, rounding="truncate"), total // 256)
    assert np.array_equal(luma(rgb, BT601, rounding="half_up"), (total + 128) // 256)
    # np.round is half-to-even (NumPy reference, numpy.around); total / 256 is exact in a double
    assert np.array_equal(luma(rgb, BT601, rounding="half_even"), np.round(total / 256).astype(np.int64))
    assert np.array_equal(luma(rgb, BT601, output_bits=10), (total + 32) // 64)
    # More output bits than weight fraction bits: an exact left shift.
    assert np.array_equal(luma(rgb, LumaWeights(1, 2, 1, 2), output_bits=12), (r + 2 * g + b) << 2)


def test_bad_input_is_a_config_error() -> None:
    with pytest.raises(ConfigError, match="shape"):
        luma(np.zeros((4, 4), np.uint8), BT601)
    with pytest.raises(ConfigError, match="uint8"):
        luma(np.zeros((4, 4, 3), np.uint16), BT601)
    with pytest.raises(ConfigError, match="weight"):
        LumaWeights(-1, 2, 3, 8)
    with pytest.raises(ConfigError, match="output_bits"):
        luma(np.zeros((4, 4, 3), np.uint8), BT601, output_bits=0)
