"""Windows, kernels and order filters against SciPy ndimage and OpenCV."""

from __future__ import annotations

import cv2
import numpy as np
import pytest
import scipy.ndimage as ndi
from hypothesis import given, settings
from hypothesis import strategies as st

from vkit.core.errors import ConfigError
from vkit.model.kernels import (
    KERNELS,
    correlate3x3,
    correlate_padded,
    kernel_range,
    maximum3x3,
    median3x3,
    minimum3x3,
)
from vkit.model.window import BORDERS, OPENCV_BORDERS, SCIPY_MODES, interior_mask, pad, taps

SCIPY_BORDERS = ("replicate", "zero", "constant", "mirror")
CONSTANT = 37


def _scipy_kwargs(border: str) -> dict:
    return {"mode": SCIPY_MODES[border], "cval": CONSTANT if border == "constant" else 0}


def _luma12(height: int = 24, width: int = 32, seed: int = 1) -> np.ndarray:
    """Random 12-bit scaled luma (0..4080) with the extremes present."""
    img = np.random.default_rng(seed).integers(0, 4081, (height, width)).astype(np.int32)
    img[0, 0], img[-1, -1], img[3, 5] = 0, 4080, 4080
    return img


def test_pad_matches_numpy_pad_modes() -> None:
    img = np.arange(20, dtype=np.int32).reshape(4, 5)
    # numpy.pad 'edge' = replicate, 'reflect' = d c b|a b c d|c b a, 'constant' (NumPy reference).
    assert np.array_equal(pad(img, "replicate"), np.pad(img, 1, mode="edge"))
    assert np.array_equal(pad(img, "unchecked"), np.pad(img, 1, mode="edge"))
    assert np.array_equal(pad(img, "mirror"), np.pad(img, 1, mode="reflect"))
    assert np.array_equal(pad(img, "zero"), np.pad(img, 1, mode="constant"))
    assert np.array_equal(pad(img, "constant", 9), np.pad(img, 1, mode="constant", constant_values=9))
    assert pad(img.astype(np.uint8), "zero", dtype=np.int32).dtype == np.int32


def test_taps_orientation() -> None:
    img = np.arange(12, dtype=np.int32).reshape(3, 4)
    p = taps(img, "zero")
    assert np.array_equal(p[1][1], img)
    assert p[0][0][1, 1] == img[0, 0] and p[2][2][1, 1] == img[2, 2]
    assert p[0][2][1, 1] == img[0, 2] and p[2][0][1, 1] == img[2, 0]
    assert p[0][0][0, 0] == 0


def test_interior_mask() -> None:
    for border in BORDERS[:-1]:
        assert interior_mask(4, 5, border).all()
    mask = interior_mask(4, 5, "unchecked")
    assert mask.sum() == 2 * 3 and mask[1:-1, 1:-1].all()


def test_bad_border_and_kernel_are_config_errors() -> None:
    img = np.zeros((4, 4), np.uint8)
    with pytest.raises(ConfigError, match="border policy"):
        pad(img, "wrap")
    with pytest.raises(ConfigError, match="kernel"):
        correlate3x3(img, "emboss")
    with pytest.raises(ConfigError, match="3x3"):
        correlate3x3(img, [[1, 2], [3, 4]])
    with pytest.raises(ConfigError, match="constant"):
        pad(img, "constant", 300)
    with pytest.raises(ConfigError, match="shape"):
        median3x3(np.zeros((2, 2, 3), np.uint8))


def test_kernel_table_values() -> None:
    # Sobel / Prewitt / Scharr definitions (R. C. Gonzalez, R. E. Woods, Digital Image Processing;
    # H. Scharr's 3/10/3 kernel as used by OpenCV Scharr) -- from memory.
    assert KERNELS["sobel_x"] == ((-1, 0, 1), (-2, 0, 2), (-1, 0, 1))
    assert KERNELS["sobel_y"] == ((-1, -2, -1), (0, 0, 0), (1, 2, 1))
    assert KERNELS["scharr_y"] == ((-3, -10, -3), (0, 0, 0), (3, 10, 3))
    assert KERNELS["prewitt_y"] == ((-1, -1, -1), (0, 0, 0), (1, 1, 1))


def test_kernel_range_of_sobel_on_12_bit_luma() -> None:
    # Sobel gain is 4 per side: 4 * 4080 = 16320 (common practice, no source).
    assert kernel_range("sobel_x", 0, 4080) == (-16320, 16320)
    assert kernel_range("gaussian", 0, 255) == (0, 16 * 255)
    assert kernel_range("sharpen", 0, 255) == (-4 * 255, 5 * 255)
    img = _luma12()
    for name in KERNELS:
        lo, hi = kernel_range(name, 0, 4080)
        out = correlate3x3(img, name)
        assert lo <= out.min() and out.max() <= hi


@pytest.mark.parametrize("border", SCIPY_BORDERS)
@pytest.mark.parametrize("name", ["sobel_x", "sobel_y", "prewitt_x", "prewitt_y", "scharr_x", "scharr_y", "sharpen", "laplacian"])
def test_linear_kernels_vs_scipy_correlate(name: str, border: str) -> None:
    img = _luma12()
    got = correlate3x3(img, name, border, CONSTANT)
    # Reference: scipy.ndimage.correlate (nearest = replicate, constant = zero/constant, mirror = mirror).
    expected = ndi.correlate(img, np.array(KERNELS[name]), **_scipy_kwargs(border))
    assert got.dtype == np.int32
    assert np.array_equal(got, expected)


@pytest.mark.parametrize("border", SCIPY_BORDERS)
@pytest.mark.parametrize("name", ["gaussian", "box"])
def test_symmetric_kernels_vs_scipy_convolve(name: str, border: str) -> None:
    img = _luma12(seed=3)
    # Reference: scipy.ndimage.convolve; the kernels are symmetric, so convolution == correlation.
    expected = ndi.convolve(img, np.array(KERNELS[name]), **_scipy_kwargs(border))
    assert np.array_equal(correlate3x3(img, name, border, CONSTANT), expected)


_CV_BORDERS = ("replicate", "zero", "mirror")


@pytest.mark.parametrize("border", _CV_BORDERS)
def test_sobel_and_scharr_vs_opencv_8_bit(border: str) -> None:
    img = np.random.default_rng(5).integers(0, 256, (24, 32), dtype=np.uint8)
    cv_border = getattr(cv2, OPENCV_BORDERS[border])
    # Reference: OpenCV cv2.Sobel / cv2.Scharr, ksize 3, ddepth CV_16S (CV_32S is not accepted for 8-bit
    # input). OpenCV's dx=1 kernel is [-1 0 1] (positive for values rising to the right) and dy=1 is
    # positive for values rising downwards: the same orientation as our *_x / *_y.
    assert np.array_equal(correlate3x3(img, "sobel_x", border), cv2.Sobel(img, cv2.CV_16S, 1, 0, ksize=3, borderType=cv_border))
    assert np.array_equal(correlate3x3(img, "sobel_y", border), cv2.Sobel(img, cv2.CV_16S, 0, 1, ksize=3, borderType=cv_border))
    assert np.array_equal(correlate3x3(img, "scharr_x", border), cv2.Scharr(img, cv2.CV_16S, 1, 0, borderType=cv_border))
    assert np.array_equal(correlate3x3(img, "scharr_y", border), cv2.Scharr(img, cv2.CV_16S, 0, 1, borderType=cv_border))


@pytest.mark.parametrize("border", _CV_BORDERS)
def test_sobel_vs_opencv_12_bit_float64(border: str) -> None:
    img = _luma12(seed=11)
    cv_border = getattr(cv2, OPENCV_BORDERS[border])
    src = img.astype(np.float64)
    # Reference: OpenCV cv2.Sobel, ksize 3, ddepth CV_64F on integer-valued float input (exact).
    gx = cv2.Sobel(src, cv2.CV_64F, 1, 0, ksize=3, borderType=cv_border)
    gy = cv2.Sobel(src, cv2.CV_64F, 0, 1, ksize=3, borderType=cv_border)
    assert np.array_equal(correlate3x3(img, "sobel_x", border), gx.astype(np.int32))
    assert np.array_equal(correlate3x3(img, "sobel_y", border), gy.astype(np.int32))
    assert np.array_equal(correlate3x3(src, "sobel_x", border), gx)
    # A ramp rising to the right gives a positive gx: 8 per unit step with Sobel's gain.
    ramp = np.tile(np.arange(8, dtype=np.int32), (5, 1))
    assert (correlate3x3(ramp, "sobel_x")[:, 1:-1] == 8).all()
    assert (correlate3x3(ramp, "sobel_y") == 0).all()


@pytest.mark.parametrize("border", SCIPY_BORDERS)
def test_order_filters_vs_scipy(border: str) -> None:
    img = np.random.default_rng(9).integers(0, 256, (24, 32), dtype=np.uint8)
    kwargs = _scipy_kwargs(border)
    # Reference: scipy.ndimage.median_filter / minimum_filter / maximum_filter, size=3.
    assert np.array_equal(median3x3(img, border, CONSTANT), ndi.median_filter(img, size=3, **kwargs))
    assert np.array_equal(minimum3x3(img, border, CONSTANT), ndi.minimum_filter(img, size=3, **kwargs))
    assert np.array_equal(maximum3x3(img, border, CONSTANT), ndi.maximum_filter(img, size=3, **kwargs))
    assert median3x3(img, border, CONSTANT).dtype == np.uint8


def test_median_vs_opencv_median_blur() -> None:
    img = np.random.default_rng(4).integers(0, 256, (24, 32), dtype=np.uint8)
    # Reference: OpenCV cv2.medianBlur(ksize=3), which replicates the border.
    assert np.array_equal(median3x3(img, "replicate"), cv2.medianBlur(img, 3))


def test_one_pixel_wide_images_vs_scipy() -> None:
    for shape in ((1, 1), (1, 6), (5, 1), (2, 2)):
        img = np.random.default_rng(2).integers(0, 100, shape).astype(np.int32)
        for border in SCIPY_BORDERS:
            kwargs = _scipy_kwargs(border)
            # Reference: scipy.ndimage.correlate / median_filter on degenerate sizes.
            kernel = np.arange(9).reshape(3, 3) - 4
            assert np.array_equal(correlate3x3(img, kernel, border, CONSTANT), ndi.correlate(img, kernel, **kwargs)), (shape, border)
            assert np.array_equal(median3x3(img, border, CONSTANT), ndi.median_filter(img, size=3, **kwargs)), (shape, border)


def test_correlate_padded_shares_one_pad() -> None:
    img = _luma12()
    padded = pad(img, "replicate", dtype=np.int32)
    assert np.array_equal(correlate_padded(padded, "sobel_x"), correlate3x3(img, "sobel_x"))
    assert np.array_equal(correlate_padded(padded, "sobel_y"), correlate3x3(img, "sobel_y"))


def test_large_values_widen_to_int64() -> None:
    img = np.array([[2_000_000_000, 0, 2_000_000_000]] * 3, dtype=np.int64)
    out = correlate3x3(img, "box", "zero")
    # Python integers as the reference: the centre sums six 2e9 values.
    assert int(out[1, 1]) == 6 * 2_000_000_000 and out.dtype == np.int64


_kernels = st.lists(st.integers(-12, 12), min_size=9, max_size=9).map(lambda v: np.array(v).reshape(3, 3))
_images = st.tuples(st.integers(3, 48), st.integers(3, 64), st.integers(0, 2**31 - 1)).map(
    lambda hws: np.random.default_rng(hws[2]).integers(0, 4081, (hws[0], hws[1])).astype(np.int32)
)


@settings(max_examples=60, deadline=None)
@given(_images, _kernels, st.sampled_from(BORDERS), st.integers(0, 4080))
def test_property_correlate_vs_scipy(img: np.ndarray, kernel: np.ndarray, border: str, constant: int) -> None:
    got = correlate3x3(img, kernel, border, constant)
    # Reference: scipy.ndimage.correlate with the mapped mode.
    expected = ndi.correlate(img, kernel, mode=SCIPY_MODES[border], cval=constant if border == "constant" else 0)
    mask = interior_mask(*img.shape, border)
    assert np.array_equal(got[mask], expected[mask])
    low, high = kernel_range(kernel, 0, 4080)
    assert low <= got.min() and got.max() <= high


@settings(max_examples=60, deadline=None)
@given(_images, st.sampled_from(BORDERS), st.integers(0, 4080))
def test_property_order_filters_vs_scipy(img: np.ndarray, border: str, constant: int) -> None:
    kwargs = {"mode": SCIPY_MODES[border], "cval": constant if border == "constant" else 0}
    mask = interior_mask(*img.shape, border)
    # Reference: scipy.ndimage.median_filter / minimum_filter / maximum_filter, size=3.
    assert np.array_equal(median3x3(img, border, constant)[mask], ndi.median_filter(img, size=3, **kwargs)[mask])
    assert np.array_equal(minimum3x3(img, border, constant)[mask], ndi.minimum_filter(img, size=3, **kwargs)[mask])
    assert np.array_equal(maximum3x3(img, border, constant)[mask], ndi.maximum_filter(img, size=3, **kwargs)[mask])
