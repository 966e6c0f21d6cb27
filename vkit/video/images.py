"""Load and save gray or RGB images (PNG, PPM, PGM) with explicit mode checks and conversions; wider
samples than 8 bits load at the design's width."""

from __future__ import annotations

import threading
import warnings
from pathlib import Path

import numpy as np
from PIL import Image, UnidentifiedImageError

from vkit.core.errors import ConfigError
from vkit.core.validate import suggest
from vkit.core.vocab import PIXEL_FORMAT_BITS, is_rgb, sample_bits
from vkit.model.luma import sample_dtype
from vkit.video.wideimages import WideImage, read_wide
from vkit.video.formats import pack_rgb, unpack_rgb  # their home is formats; kept importable here

__all__ = ["DEFAULT_MAX_PIXELS", "load_image", "save_image", "to_uint8", "pack_rgb", "unpack_rgb"]

DEFAULT_MAX_PIXELS = 40_000_000
"""Largest image (width * height) :func:`load_image` opens unless told otherwise."""

Mode = str
"""``"auto"`` or a pixel format name (:data:`vkit.core.vocab.PIXEL_FORMAT_BITS`)."""

_READ_FORMATS = {"PNG", "PPM"}  # Pillow's PPM plugin reads PPM, PGM and PBM
_SAVE_FORMATS = {".png": "PNG", ".ppm": "PPM", ".pgm": "PPM"}
_BOMB_LOCK = threading.Lock()

# Pillow mode -> (what it is, what convert=True does)
_CONVERTIBLE = {
    "1": ("1-bit black and white", "expand it to 0/255 gray"),
    "P": ("palette", "expand the palette to RGB"),
    "PA": ("palette with alpha", "expand the palette to RGB and drop the alpha channel"),
    "RGBA": ("RGB with alpha", "drop the alpha channel"),
    "RGBa": ("RGB with premultiplied alpha", "drop the alpha channel"),
    "LA": ("gray with alpha", "drop the alpha channel"),
    "La": ("gray with premultiplied alpha", "drop the alpha channel"),
    "I;16": ("16-bit gray", "keep the top 8 bits"),
    "I;16B": ("16-bit gray", "keep the top 8 bits"),
    "I;16L": ("16-bit gray", "keep the top 8 bits"),
    "I": ("16-bit gray", "keep the top 8 bits"),
}


def _fail(path: Path, problem: str, fix: str) -> ConfigError:
    return ConfigError(f"image {path}: {problem}; {fix}")


def _wide_source(im: Image.Image) -> str | None:
    """Describe samples wider than 8 bits (or a PPM maxval other than 255), read before decoding; None if 8-bit."""
    for tile in im.tile or []:
        args = tile[3]
        raw = args[0] if isinstance(args, tuple) and args else args
        if im.format == "PPM" and isinstance(args, tuple) and len(args) >= 2:
            maxval = args[-1]
            if isinstance(maxval, int) and maxval != 255 and im.mode != "1":
                return f"maxval {maxval} instead of 255"
        if isinstance(raw, str) and ";16" in raw:
            return "16-bit samples"
    return None


def load_image(
    path: str | Path,
    mode: Mode = "auto",
    convert: bool = False,
    max_pixels: int = DEFAULT_MAX_PIXELS,
    setting: str = "max_pixels",
) -> np.ndarray:
    """Read a PNG, PPM or PGM file into a uint8 array.

    Args:
        path: the file.
        mode: ``"auto"`` keeps gray as ``(H, W)`` and colour as ``(H, W, 3)``; ``"gray8"`` demands
            ``(H, W)``; ``"rgb888"`` demands ``(H, W, 3)``. Another sample width (``"gray10"``,
            ``"rgb121212"``) reads a 16-bit PNG or a PGM/PPM with maxval > 255 at its own width
            (:mod:`vkit.video.wideimages`) and returns uint16 (uint8 up to 8 bits): as stored when
            the file's maxval is ``2**bits - 1`` (for a 16-bit PNG: when every sample fits), scaled
            only with ``convert`` (an 8-bit file too), otherwise a ConfigError naming both fixes.
        convert: allow explicit conversions, each lossy or a guess at intent, so none is silent:
            16-bit samples keep their top 8 bits (PNG as stored; PPM/PGM with a maxval other than
            255 are first rescaled to the full range by Pillow); RGBA/LA/PA drop alpha; palette
            images expand to RGB; 1-bit images become 0/255 gray; for ``"rgb888"`` gray is copied
            to 3 channels; for ``"gray8"`` colour becomes Pillow's ``L`` luma
            (ITU-R 601-2 weights 299/587/114), or one channel when R == G == B everywhere.
        max_pixels: decompression-bomb guard: a file claiming more than this many pixels
            (width * height) is refused before it is decoded.
        setting: where the user sets ``max_pixels`` (``"[stimulus] max_image_pixels"``,
            ``"--max-image-pixels"``), named by the error's fix.

    Returns:
        ``uint8`` array, ``(H, W)`` gray or ``(H, W, 3)`` RGB.

    Raises:
        ConfigError: missing or unreadable file, an unsupported format or mode, a mode that needs
            ``convert=True``, or an image over ``max_pixels``. The message is one line.
    """
    p = Path(path)
    if mode != "auto" and mode not in PIXEL_FORMAT_BITS:
        raise ConfigError(f"load_image: mode = {mode!r}; use 'auto' or a pixel format ({suggest(str(mode), list(PIXEL_FORMAT_BITS))})")
    if not p.is_file():
        raise _fail(p, "no such file", "check the path")
    if mode != "auto" and sample_bits(mode) != 8:
        return _load_at_width(p, mode, convert, max_pixels, setting)
    im = _open_guarded(p, max_pixels, setting)
    try:
        if im.format not in _READ_FORMATS:
            raise _fail(p, f"format {im.format} is not read by vkit", "save it as PNG, PPM or PGM")
        arr = _to_array(p, im, mode, convert)
    finally:
        im.close()
    return arr


def _load_at_width(p: Path, mode: str, convert: bool, max_pixels: int, setting: str) -> np.ndarray:
    """:func:`load_image` for a pixel format whose samples are not 8 bits wide."""
    bits, rgb = sample_bits(mode), is_rgb(mode)
    top = (1 << bits) - 1
    wide = read_wide(p, max_pixels)
    if wide is None:
        arr = load_image(p, "rgb888" if rgb else "gray8", convert, max_pixels, setting)
        if not convert:
            raise _fail(p, f"has 8-bit samples but {mode} was asked",
                        f"pass --convert / convert=True to scale 0..255 to 0..{top}, or re-save it with {bits}-bit samples")
        arr = ((arr.astype(np.int64) * (2 * top) + 255) // 510)
    else:
        arr = _fit_width(p, wide, bits, convert).astype(np.int64)
    if rgb and arr.ndim == 2:
        if not convert:
            raise _fail(p, f"is gray but {mode} was asked",
                        "pass --convert / convert=True to copy gray into R, G and B, or use mode 'auto'")
        arr = np.repeat(arr[:, :, None], 3, axis=2)
    elif not rgb and arr.ndim == 3:
        if not (np.array_equal(arr[..., 0], arr[..., 1]) and np.array_equal(arr[..., 0], arr[..., 2])):
            raise _fail(p, f"is RGB but {mode} was asked", "load it as RGB and use vkit.model.luma, or re-save it as gray")
        arr = arr[..., 0]
    return np.ascontiguousarray(arr, dtype=sample_dtype(bits))


def _fit_width(p: Path, wide: WideImage, bits: int, convert: bool) -> np.ndarray:
    """Wide samples on a ``bits``-bit scale: as they are when the file's maxval is that scale (or, for a
    16-bit PNG, when every sample fits it); scaled only with ``convert``."""
    top = (1 << bits) - 1
    peak = int(wide.pixels.max(initial=0))
    if wide.maxval == top or (wide.container == "png" and peak <= top):
        return wide.pixels
    if convert:
        return (wide.pixels.astype(np.int64) * (2 * top) + wide.maxval) // (2 * wide.maxval)
    raise _fail(p, f"has samples up to {peak} on a scale of 0..{wide.maxval}, not the {bits}-bit 0..{top} asked",
                f"pass --convert / convert=True to scale 0..{wide.maxval} to 0..{top}, or re-save it with maxval {top}")


def _open_guarded(p: Path, max_pixels: int, setting: str = "max_pixels") -> Image.Image:
    if isinstance(max_pixels, bool) or not isinstance(max_pixels, int) or max_pixels < 1:
        raise ConfigError(f"load_image: max_pixels = {max_pixels!r}; give a positive integer pixel count")
    fix = f"raise {setting} (now {max_pixels}) if you trust the file"
    try:
        with _BOMB_LOCK, warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            saved = Image.MAX_IMAGE_PIXELS
            # Pillow warns above its limit and refuses above twice it; warnings are errors here.
            Image.MAX_IMAGE_PIXELS = max_pixels
            try:
                im = Image.open(p)
            finally:
                Image.MAX_IMAGE_PIXELS = saved
    except (Image.DecompressionBombError, Image.DecompressionBombWarning) as err:
        claimed = _claimed_pixels(str(err))
        raise _fail(p, f"claims {claimed} pixels, over the limit of {max_pixels} (decompression-bomb guard)", fix)
    except UnidentifiedImageError:
        raise _fail(p, "is not an image Pillow can identify", "give a PNG, PPM or PGM file") from None
    except (OSError, ValueError, SyntaxError) as err:
        raise _fail(p, f"cannot be read ({str(err).splitlines()[0] if str(err) else type(err).__name__})",
                    "check the file is a complete PNG, PPM or PGM") from None
    w, h = im.size
    if w * h > max_pixels:  # belt and braces: Pillow's own check may be switched off globally
        im.close()
        raise _fail(p, f"claims {w * h} pixels ({w}x{h}), over the limit of {max_pixels} (decompression-bomb guard)",
                    fix)
    return im


def _claimed_pixels(message: str) -> str:
    # Pillow's message reads "Image size (N pixels) exceeds limit of M pixels..."
    for part in message.replace("(", " ").split():
        if part.isdigit():
            return part
    return "too many"


def _to_array(p: Path, im: Image.Image, mode: Mode, convert: bool) -> np.ndarray:
    src_mode = im.mode
    wide = _wide_source(im)
    try:
        im.load()
    except (OSError, ValueError, SyntaxError) as err:
        raise _fail(p, f"cannot be decoded ({str(err).splitlines()[0] if str(err) else type(err).__name__})",
                    "check the file is complete") from None

    if src_mode in ("L", "RGB") and wide is None:
        arr = np.asarray(im, dtype=np.uint8)
    elif src_mode in _CONVERTIBLE or src_mode in ("L", "RGB"):
        kind = "gray" if src_mode == "L" else "RGB"
        what, how = _CONVERTIBLE.get(src_mode, (f"{kind} with {wide}", "rescale the samples to 0..255 (Pillow)"))
        if wide and src_mode in ("L", "RGB") and "16-bit" in wide:
            how = "keep the top 8 bits"
        if wide and src_mode.startswith("I") and "maxval" in wide:
            what = f"gray with {wide}"
            how = "rescale to 0..65535 (Pillow) and keep the top 8 bits"
        if not convert:
            raise _fail(p, f"mode is {src_mode} ({what}), vkit reads 8-bit gray or RGB",
                        f"pass --convert / convert=True to {how}, or re-save it as 8-bit gray or RGB")
        arr = _convert(im)
    else:
        raise _fail(p, f"mode {src_mode} is not supported", "re-save it as 8-bit gray or RGB PNG")

    if mode == "gray8" and arr.ndim == 3:
        if np.array_equal(arr[..., 0], arr[..., 1]) and np.array_equal(arr[..., 0], arr[..., 2]):
            if not convert and src_mode == "RGB":
                raise _fail(p, "is RGB (with equal channels) but gray8 was asked",
                            "pass --convert / convert=True to take one channel, or use mode 'auto'")
            arr = np.ascontiguousarray(arr[..., 0])
        elif convert:
            arr = np.asarray(Image.fromarray(arr, "RGB").convert("L"), dtype=np.uint8)
        else:
            raise _fail(p, "is RGB but gray8 was asked",
                        "pass --convert / convert=True for ITU-R 601-2 luma, or load rgb888 and use vkit.model.luma")
    elif mode == "rgb888" and arr.ndim == 2:
        if not convert:
            raise _fail(p, "is gray but rgb888 was asked",
                        "pass --convert / convert=True to copy gray into R, G and B, or use mode 'auto'")
        arr = np.repeat(arr[:, :, None], 3, axis=2)
    return np.ascontiguousarray(arr, dtype=np.uint8)


def _convert(im: Image.Image) -> np.ndarray:
    m = im.mode
    if m == "1":
        return np.asarray(im.convert("L"), dtype=np.uint8)
    if m in ("P", "PA"):
        return np.asarray(im.convert("RGBA").convert("RGB"), dtype=np.uint8)
    if m in ("RGBA", "RGBa"):
        return np.asarray(im, dtype=np.uint8)[..., :3].copy()
    if m in ("LA", "La"):
        return np.asarray(im, dtype=np.uint8)[..., 0].copy()
    if m.startswith("I"):
        wide = np.asarray(im).astype(np.int64)
        return np.clip(wide >> 8, 0, 255).astype(np.uint8)
    # L or RGB decoded from 16-bit samples: Pillow already kept 8 bits
    return np.asarray(im, dtype=np.uint8)


def save_image(array: np.ndarray, path: str | Path) -> Path:
    """Write an 8-bit gray ``(H, W)`` or RGB ``(H, W, 3)`` array as PNG, PPM or PGM (by extension).

    ``.pgm`` takes gray only, ``.ppm`` RGB only, ``.png`` either. Integer arrays of any dtype are
    accepted when every value is in 0..255; anything else (floats, bools, values out of range) is an
    error: scale it first with :func:`to_uint8`.

    Returns:
        The path written.

    Raises:
        ConfigError: unknown extension, wrong shape or dtype, values out of range, or a write error.
    """
    p = Path(path)
    ext = p.suffix.lower()
    if ext not in _SAVE_FORMATS:
        raise _fail(p, f"extension {ext or '(none)'} is not written by vkit", "use .png, .ppm or .pgm")
    a = np.asarray(array)
    if a.ndim == 3 and a.shape[2] == 3:
        kind = "RGB"
    elif a.ndim == 2:
        kind = "L"
    else:
        raise _fail(p, f"array shape {a.shape} is neither (H, W) gray nor (H, W, 3) RGB", "pass one of those")
    if a.size == 0:
        raise _fail(p, f"array shape {a.shape} is empty", "pass an image with at least one pixel")
    if ext == ".pgm" and kind != "L":
        raise _fail(p, "PGM holds gray only, the array is RGB", "save as .ppm or .png")
    if ext == ".ppm" and kind != "RGB":
        raise _fail(p, "PPM here holds RGB only, the array is gray", "save as .pgm or .png")
    if a.dtype != np.uint8:
        if a.dtype == np.bool_ or not np.issubdtype(a.dtype, np.integer):
            raise _fail(p, f"array dtype is {a.dtype}, not an integer type",
                        "scale it with vkit.video.images.to_uint8(array, lo, hi)")
        lo, hi = int(a.min()), int(a.max())
        if lo < 0 or hi > 255:
            raise _fail(p, f"values span {lo}..{hi}, outside 0..255",
                        "scale it with vkit.video.images.to_uint8(array, lo, hi)")
        a = a.astype(np.uint8)
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
        Image.fromarray(np.ascontiguousarray(a), kind).save(p, format=_SAVE_FORMATS[ext])
    except OSError as err:
        raise _fail(p, f"cannot be written ({err.strerror or err})", "check the folder is writable") from None
    return p


def to_uint8(array: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """Scale ``array`` linearly so ``lo`` maps to 0 and ``hi`` to 255, rounding half up and clipping.

    Args:
        array: any real array.
        lo: input value shown as 0.
        hi: input value shown as 255, > ``lo``.

    Returns:
        ``uint8`` array of the same shape: ``clip(floor((v - lo) * 255 / (hi - lo) + 0.5), 0, 255)``.
    """
    if not hi > lo:
        raise ConfigError(f"to_uint8: hi = {hi!r} must be greater than lo = {lo!r}")
    a = np.asarray(array, dtype=np.float64)
    scaled = np.floor((a - lo) * (255.0 / (float(hi) - float(lo))) + 0.5)
    return np.clip(scaled, 0, 255).astype(np.uint8)
