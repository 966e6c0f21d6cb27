"""Image files in and out: round trips read back by Pillow, explicit conversions, and the bomb guard."""

from __future__ import annotations

import struct
import zlib
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from vkit.core.errors import ConfigError
from vkit.video.formats import pack_rgb, unpack_rgb
from vkit.video.images import load_image, save_image, to_uint8


def _rng_image(shape: tuple[int, ...], seed: int = 1) -> np.ndarray:
    return np.random.default_rng(seed).integers(0, 256, size=shape, dtype=np.uint8)


# ---------------------------------------------------------------- round trips (Pillow is the reader of record)


@pytest.mark.parametrize("name, shape", [("g.png", (7, 11)), ("c.png", (7, 11, 3)), ("g.pgm", (5, 9)),
                                          ("c.ppm", (5, 9, 3))])
def test_round_trip_read_back_by_pillow(tmp_path: Path, name: str, shape: tuple[int, ...]) -> None:
    img = _rng_image(shape)
    path = save_image(img, tmp_path / name)
    # Pillow, the reader of record, sees exactly the pixels we wrote.
    with Image.open(path) as im:
        assert im.mode == ("L" if len(shape) == 2 else "RGB")
        assert np.array_equal(np.asarray(im), img)
    assert np.array_equal(load_image(path), img)
    # Netpbm headers: P5 for PGM, P6 for PPM (Netpbm format definitions).
    if name.endswith(".pgm"):
        assert path.read_bytes()[:2] == b"P5"
    if name.endswith(".ppm"):
        assert path.read_bytes()[:2] == b"P6"


def test_files_written_by_pillow_load_unchanged(tmp_path: Path) -> None:
    img = _rng_image((6, 4, 3), seed=3)
    Image.fromarray(img, "RGB").save(tmp_path / "p.png")
    assert np.array_equal(load_image(tmp_path / "p.png", mode="rgb888"), img)
    # plain (ASCII) PGM, written by hand as the Netpbm format describes
    (tmp_path / "a.pgm").write_text("P2\n3 2\n255\n0 10 20\n30 40 255\n")
    assert load_image(tmp_path / "a.pgm").tolist() == [[0, 10, 20], [30, 40, 255]]


def test_save_rejects_wrong_data(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="to_uint8"):
        save_image(np.array([[0, 300]], dtype=np.int32), tmp_path / "x.png")
    with pytest.raises(ConfigError, match="to_uint8"):
        save_image(np.zeros((2, 2), dtype=np.float32), tmp_path / "x.png")
    with pytest.raises(ConfigError, match="PGM"):
        save_image(np.zeros((2, 2, 3), dtype=np.uint8), tmp_path / "x.pgm")
    with pytest.raises(ConfigError, match="PPM"):
        save_image(np.zeros((2, 2), dtype=np.uint8), tmp_path / "x.ppm")
    with pytest.raises(ConfigError, match=".png, .ppm or .pgm"):
        save_image(np.zeros((2, 2), dtype=np.uint8), tmp_path / "x.bmp")
    with pytest.raises(ConfigError, match="shape"):
        save_image(np.zeros((2, 2, 4), dtype=np.uint8), tmp_path / "x.png")
    # integers already in 0..255 are written as they are
    save_image(np.array([[0, 255]], dtype=np.int64), tmp_path / "ok.png")
    assert load_image(tmp_path / "ok.png").tolist() == [[0, 255]]


def test_to_uint8_scales_explicitly() -> None:
    a = np.array([0, 512, 1023, 2000, -5])
    assert to_uint8(a, 0, 1023).tolist() == [0, 128, 255, 255, 0]  # 512*255/1023 = 127.6 -> 128
    with pytest.raises(ConfigError):
        to_uint8(a, 5, 5)


# ---------------------------------------------------------------- modes that need convert=True


def test_rgba_needs_convert_and_drops_alpha(tmp_path: Path) -> None:
    rgba = _rng_image((4, 5, 4))
    Image.fromarray(rgba, "RGBA").save(tmp_path / "a.png")
    with pytest.raises(ConfigError) as err:
        load_image(tmp_path / "a.png")
    msg = str(err.value)
    assert "a.png" in msg and "RGBA" in msg and "convert" in msg and "\n" not in msg
    assert np.array_equal(load_image(tmp_path / "a.png", convert=True), rgba[..., :3])


def test_la_drops_alpha(tmp_path: Path) -> None:
    la = _rng_image((3, 3, 2))
    Image.fromarray(la, "LA").save(tmp_path / "la.png")
    with pytest.raises(ConfigError, match="LA"):
        load_image(tmp_path / "la.png")
    assert np.array_equal(load_image(tmp_path / "la.png", convert=True), la[..., 0])


def test_16bit_keeps_top_8_bits(tmp_path: Path) -> None:
    wide = np.array([[0, 255, 256, 65535], [4660, 43981, 32768, 511]], dtype=np.uint16)
    Image.fromarray(wide).save(tmp_path / "w.png")
    with pytest.raises(ConfigError, match="16-bit"):
        load_image(tmp_path / "w.png")
    assert np.array_equal(load_image(tmp_path / "w.png", convert=True), (wide >> 8).astype(np.uint8))
    # 16-bit PGM (maxval 65535, big-endian samples, Netpbm format definition)
    (tmp_path / "w.pgm").write_bytes(b"P5\n4 2\n65535\n" + wide.astype(">u2").tobytes())
    with pytest.raises(ConfigError, match="16-bit"):
        load_image(tmp_path / "w.pgm")
    assert np.array_equal(load_image(tmp_path / "w.pgm", convert=True), (wide >> 8).astype(np.uint8))


def test_16bit_rgb_png_keeps_top_8_bits(tmp_path: Path) -> None:
    import cv2  # OpenCV writes 16-bit RGB PNG, which Pillow cannot write

    wide = np.random.default_rng(2).integers(0, 65536, size=(3, 4, 3), dtype=np.uint16)
    cv2.imwrite(str(tmp_path / "w.png"), wide[..., ::-1])  # OpenCV stores BGR
    with pytest.raises(ConfigError, match="16-bit"):
        load_image(tmp_path / "w.png")
    assert np.array_equal(load_image(tmp_path / "w.png", convert=True), (wide >> 8).astype(np.uint8))


def test_palette_expands(tmp_path: Path) -> None:
    rgb = np.zeros((2, 3, 3), dtype=np.uint8)
    rgb[0, 0] = (200, 10, 30)
    rgb[1, 2] = (5, 250, 90)
    Image.fromarray(rgb, "RGB").quantize(colors=4, method=Image.Quantize.MEDIANCUT).save(tmp_path / "p.png")
    with Image.open(tmp_path / "p.png") as im:
        assert im.mode == "P"
    with pytest.raises(ConfigError, match="palette"):
        load_image(tmp_path / "p.png")
    assert np.array_equal(load_image(tmp_path / "p.png", convert=True), rgb)


def test_one_bit_expands(tmp_path: Path) -> None:
    # P4 bitmap: bit 1 is black (Netpbm PBM definition); 0b10100000 -> black, white, black, white x5
    (tmp_path / "b.pbm").write_bytes(b"P4\n8 1\n" + bytes([0b10100000]))
    with pytest.raises(ConfigError, match="1-bit"):
        load_image(tmp_path / "b.pbm")
    assert load_image(tmp_path / "b.pbm", convert=True).tolist() == [[0, 255, 0, 255, 255, 255, 255, 255]]


def test_mode_requests(tmp_path: Path) -> None:
    gray = _rng_image((3, 4))
    rgb = _rng_image((3, 4, 3))
    save_image(gray, tmp_path / "g.png")
    save_image(rgb, tmp_path / "c.png")
    with pytest.raises(ConfigError, match="rgb888"):
        load_image(tmp_path / "g.png", mode="rgb888")
    assert np.array_equal(load_image(tmp_path / "g.png", mode="rgb888", convert=True), np.dstack([gray] * 3))
    with pytest.raises(ConfigError, match="gray8"):
        load_image(tmp_path / "c.png", mode="gray8")
    # Pillow's L conversion is ITU-R 601-2 luma: L = R*299/1000 + G*587/1000 + B*114/1000
    want = (rgb[..., 0] * 299.0 + rgb[..., 1] * 587.0 + rgb[..., 2] * 114.0) / 1000.0
    got = load_image(tmp_path / "c.png", mode="gray8", convert=True)
    assert np.max(np.abs(got - want)) <= 1.0
    with pytest.raises(ConfigError, match="mode"):
        load_image(tmp_path / "c.png", mode="rgb")  # type: ignore[arg-type]


def test_missing_unreadable_and_foreign_files(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="no such file"):
        load_image(tmp_path / "none.png")
    (tmp_path / "junk.png").write_bytes(b"not an image at all")
    with pytest.raises(ConfigError, match="junk.png"):
        load_image(tmp_path / "junk.png")
    Image.fromarray(_rng_image((4, 4))).save(tmp_path / "x.bmp")
    with pytest.raises(ConfigError, match="BMP"):
        load_image(tmp_path / "x.bmp")
    good = save_image(_rng_image((32, 32, 3)), tmp_path / "t.png")
    (tmp_path / "cut.png").write_bytes(good.read_bytes()[:60])
    with pytest.raises(ConfigError, match="cut.png"):
        load_image(tmp_path / "cut.png")


# ---------------------------------------------------------------- decompression-bomb guard


def _png_header_only(path: Path, width: int, height: int) -> None:
    """A PNG whose IHDR claims width x height (PNG specification: signature, IHDR, IEND; CRC-32)."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))

    ihdr = struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0)
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IEND", b""))


def test_bomb_guard_on_claimed_size(tmp_path: Path) -> None:
    _png_header_only(tmp_path / "bomb.png", 100_000, 100_000)
    with pytest.raises(ConfigError) as err:
        load_image(tmp_path / "bomb.png")
    msg = str(err.value)
    assert "10000000000" in msg and "40000000" in msg and "max_pixels" in msg


def test_bomb_guard_with_lower_limit(tmp_path: Path) -> None:
    save_image(_rng_image((50, 40)), tmp_path / "s.png")
    with pytest.raises(ConfigError, match="2000 pixels"):
        load_image(tmp_path / "s.png", max_pixels=1500)
    with pytest.raises(ConfigError, match="over the limit of 1999"):
        load_image(tmp_path / "s.png", max_pixels=1999)
    assert load_image(tmp_path / "s.png", max_pixels=2000).shape == (50, 40)
    # Pillow's own global limit is left as it was
    assert Image.MAX_IMAGE_PIXELS == int(1024 * 1024 * 1024 // 4 // 3)


# ---------------------------------------------------------------- pixel bus packing


def test_pack_unpack_rgb() -> None:
    rgb = np.array([[[0x12, 0x34, 0x56], [255, 0, 1]]], dtype=np.uint8)
    words = pack_rgb(rgb)
    assert words.dtype == np.uint32 and words.shape == (1, 2)
    assert words.tolist() == [[0x123456, 0xFF0001]]
    assert np.array_equal(unpack_rgb(words), rgb)
    cube = _rng_image((9, 7, 3), seed=4)
    assert np.array_equal(unpack_rgb(pack_rgb(cube)), cube)
    with pytest.raises(ConfigError):
        unpack_rgb(np.array([0x1000000]))
    with pytest.raises(ConfigError):
        pack_rgb(np.zeros((2, 2)))
