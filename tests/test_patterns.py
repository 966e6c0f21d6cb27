"""Verification patterns: shapes, dtypes, determinism, reaching the extremes, and the conveyor scene."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage

from vkit.core.errors import ConfigError
from vkit.video.patterns import PATTERNS, conveyor, make_pattern

H, W = 24, 32


@pytest.mark.parametrize("name", sorted(PATTERNS))
@pytest.mark.parametrize("rgb", [False, True])
def test_shape_and_dtype(name: str, rgb: bool) -> None:
    img = make_pattern(name, H, W, seed=3, rgb=rgb)
    assert img.dtype == np.uint8
    assert img.shape == ((H, W, 3) if rgb else (H, W))


def test_default_colour_modes() -> None:
    assert make_pattern("conveyor", H, W).shape == (H, W, 3)  # the demo scene is RGB by default
    assert make_pattern("ramp_h", H, W).shape == (H, W)


@pytest.mark.parametrize("name", ["noise", "conveyor"])
def test_seeded_patterns_are_deterministic(name: str) -> None:
    a = make_pattern(name, H, W, seed=11)
    b = make_pattern(name, H, W, seed=11)
    c = make_pattern(name, H, W, seed=12)
    assert np.array_equal(a, b)
    assert not np.array_equal(a, c)


def test_geometric_patterns_ignore_seed_and_rgb_copies_gray() -> None:
    g = make_pattern("checkerboard", H, W, seed=1)
    assert np.array_equal(g, make_pattern("checkerboard", H, W, seed=2))
    c = make_pattern("checkerboard", H, W, rgb=True)
    assert all(np.array_equal(c[..., k], g) for k in range(3))


@pytest.mark.parametrize(
    "name", ["step_left", "step_right", "step_up", "step_down", "checkerboard", "ramp_h", "ramp_v", "columns",
             "rows", "noise"]
)
def test_extremes_reach_0_and_255(name: str) -> None:
    img = make_pattern(name, H, W)
    assert img.min() == 0 and img.max() == 255


def test_impulse_and_steps_geometry() -> None:
    imp = make_pattern("impulse", H, W)
    assert np.count_nonzero(imp) == 1 and imp[H // 2, W // 2] == 255
    assert make_pattern("step_right", H, W)[0, -1] == 255 and make_pattern("step_right", H, W)[0, 0] == 0
    assert make_pattern("step_left", H, W)[0, 0] == 255 and make_pattern("step_left", H, W)[0, -1] == 0
    assert make_pattern("step_down", H, W)[-1, 0] == 255 and make_pattern("step_down", H, W)[0, 0] == 0
    assert make_pattern("step_up", H, W)[0, 0] == 255 and make_pattern("step_up", H, W)[-1, 0] == 0
    cb = make_pattern("checkerboard", H, W, cell=3)
    assert cb[0, 0] == 0 and cb[0, 3] == 255 and cb[3, 3] == 0 and cb[2, 2] == 0


def test_ramps_are_monotonic_and_full_range() -> None:
    r = make_pattern("ramp_h", 2, 256)
    assert np.array_equal(r[0], np.arange(256))  # 256 columns: one level per column
    v = make_pattern("ramp_v", 10, 3)
    assert np.all(np.diff(v[:, 0].astype(int)) > 0) and v[0, 0] == 0 and v[-1, 0] == 255


def test_stripes_drive_gradients_to_their_extremes() -> None:
    # SciPy ndimage.sobel (weights 1,2,1 across, -1,0,1 along): a full 0-to-255 step gives 4 * 255.
    gx = ndimage.sobel(make_pattern("step_right", H, W).astype(float), axis=1, mode="nearest")
    assert np.abs(gx).max() == 4 * 255
    gx = ndimage.sobel(make_pattern("columns", H, W, stripe=2).astype(float), axis=1, mode="nearest")
    assert np.all(np.abs(gx[:, 1:-1]) == 4 * 255)  # period 4: the pixels at x-1 and x+1 always differ
    gy = ndimage.sobel(make_pattern("rows", H, W, stripe=2).astype(float), axis=0, mode="nearest")
    assert np.abs(gy).max() == 4 * 255
    # SciPy ndimage.laplace (second difference -2,1,1 per axis): alternating lines reach 2 * 255.
    lap_c = ndimage.laplace(make_pattern("columns", H, W).astype(float), mode="nearest")
    lap_r = ndimage.laplace(make_pattern("rows", H, W).astype(float), mode="nearest")
    assert np.abs(lap_c[:, 1:-1]).min() == 2 * 255 and np.abs(lap_r[1:-1]).min() == 2 * 255


def test_flat_and_options() -> None:
    assert np.all(make_pattern("flat", H, W, value=77) == 77)
    col = make_pattern("flat", 2, 2, value=(1, 2, 3))
    assert col.shape == (2, 2, 3) and col[1, 1].tolist() == [1, 2, 3]
    with pytest.raises(ConfigError, match="cell"):
        make_pattern("ramp_h", H, W, cell=3)
    with pytest.raises(ConfigError, match="known patterns"):
        make_pattern("zebra", H, W)
    with pytest.raises(ConfigError, match="0..255"):
        make_pattern("flat", H, W, value=300)
    with pytest.raises(ConfigError, match="height"):
        make_pattern("noise", 0, W)


def test_noise_is_roughly_uniform() -> None:
    n = make_pattern("noise", 256, 256, seed=1)
    hist = np.bincount(n.ravel(), minlength=256)
    # uniform over 256 levels: 256 per level expected; chi-square with 255 dof stays below ~330 (p ~ 0.001)
    chi2 = float(((hist - 256.0) ** 2 / 256.0).sum())
    assert chi2 < 330


# ---------------------------------------------------------------- the conveyor scene


def test_conveyor_has_parcels_and_edges() -> None:
    rgb = conveyor(240, 320, seed=0)
    r, g, b = (rgb[..., k].astype(int) for k in range(3))
    # cardboard is warm (red well above blue); belt, rails and floor are neutral grey
    cardboard = (r - b > 35) & (r > 100)
    assert 0.10 < cardboard.mean() < 0.60
    # labels: near-white paper on the parcels
    assert np.count_nonzero((r > 215) & (g > 215) & (b > 205)) > 100
    gray = conveyor(240, 320, seed=0, rgb=False).astype(float)
    # SciPy ndimage.sobel gradient magnitude: edge density well above a flat image (which has none)
    mag = np.hypot(ndimage.sobel(gray, axis=1), ndimage.sobel(gray, axis=0))
    flat = make_pattern("flat", 240, 320).astype(float)
    flat_mag = np.hypot(ndimage.sobel(flat, axis=1), ndimage.sobel(flat, axis=0))
    assert flat_mag.max() == 0
    assert (mag > 100).mean() > 0.03


def test_conveyor_gray_uses_bt601_weights() -> None:
    rgb = conveyor(48, 64, seed=4).astype(float)
    gray = conveyor(48, 64, seed=4, rgb=False).astype(float)
    # ITU-R BT.601 luma: Y = 0.299 R + 0.587 G + 0.114 B (integer weights /256 stay within 1 level)
    want = 0.299 * rgb[..., 0] + 0.587 * rgb[..., 1] + 0.114 * rgb[..., 2]
    assert np.abs(gray - want).max() <= 1.0


@pytest.mark.parametrize("size", [(1, 1), (3, 5), (24, 32), (48, 16)])
def test_conveyor_any_size(size: tuple[int, int]) -> None:
    img = conveyor(*size, seed=2)
    assert img.shape == (*size, 3) and img.dtype == np.uint8


def test_box_corners_drive_both_gradients_at_once():
    # Source: scipy.ndimage.correlate (mode 'nearest') as the outside Sobel; at a box corner both gx and gy
    # are large together, so gx^2 + gy^2 exceeds what any straight step reaches (16320^2 on 12-bit luma).
    from scipy import ndimage

    img = make_pattern("box", 24, 32).astype(np.int64) * 16  # 12-bit scaled luma
    kx = np.array([[-1, 0, 1], [-2, 0, 2], [-1, 0, 1]])
    gx = ndimage.correlate(img, kx, mode="nearest")
    gy = ndimage.correlate(img, kx.T, mode="nearest")
    assert (gx * gx + gy * gy).max() > 16320**2
    assert make_pattern("box", 24, 32)[12, 16] == 255 and make_pattern("box", 24, 32)[0, 0] == 0
