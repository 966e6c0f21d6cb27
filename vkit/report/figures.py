"""What the HTML pages draw, as plain data: range-coverage bars, count charts and embedded pictures.

The templates in ``templates/_figures.html.j2`` turn these into inline SVG and ``<img>`` elements;
everything here is geometry in fractions (0..1) so the drawing stays in the template.
"""

from __future__ import annotations

import base64
import io
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
from PIL import Image, UnidentifiedImageError

from vkit.report.writers import UNCHECKED_COLOUR

__all__ = [
    "RangeBar",
    "Bar",
    "BarChart",
    "Picture",
    "range_bars",
    "bar_chart",
    "mismatches_per_line",
    "picture",
    "first_frame_picture",
]

_BLACK = (0, 0, 0)
"""The diff picture's colour for a checked pixel that matched (see write_case_report)."""


@dataclass(frozen=True)
class RangeBar:
    """One stage's seen values against its theoretical range.

    Attributes:
        stage: stage name.
        lo, hi: theoretical range (stage value units).
        seen_min, seen_max: lowest and highest value seen.
        share: ``(seen_max - seen_min) / (hi - lo)``, 0..1.
        x0, x1: where the seen range starts and ends, as fractions 0..1 of the theoretical range.
        below_floor: True when ``share`` is under the run's coverage floor.
    """

    stage: str
    lo: int
    hi: int
    seen_min: int
    seen_max: int
    share: float
    x0: float
    x1: float
    below_floor: bool


def _fraction(value: float, lo: float, hi: float) -> float:
    if hi <= lo:
        return 1.0
    return min(1.0, max(0.0, (value - lo) / (hi - lo)))


def range_bars(stages: Sequence[Mapping[str, Any]], floor: float | None = None) -> list[RangeBar]:
    """Bars for per-stage range coverage (``coverage.stages`` of report.json, or the model report's).

    Args:
        stages: dicts with ``stage``, ``lo``, ``hi``, ``seen_min``, ``seen_max`` and ``share``.
        floor: coverage share (0..1) under which a stage is flagged; None flags nothing.
    """
    bars = []
    for s in stages:
        lo, hi = int(s["lo"]), int(s["hi"])
        smin, smax = int(s["seen_min"]), int(s["seen_max"])
        share = s.get("share")
        share = float(share) if share is not None else (1.0 if hi == lo else (smax - smin) / (hi - lo))
        bars.append(RangeBar(
            stage=str(s["stage"]), lo=lo, hi=hi, seen_min=smin, seen_max=smax, share=share,
            x0=_fraction(smin, lo, hi), x1=_fraction(smax, lo, hi),
            below_floor=floor is not None and share < floor,
        ))
    return bars


@dataclass(frozen=True)
class Bar:
    """One bar of a :class:`BarChart`: its label, its count and its height as a fraction of the top."""

    label: str
    value: int
    height: float


@dataclass(frozen=True)
class BarChart:
    """A vertical bar chart of counts.

    Attributes:
        title: what is counted (shown above the chart).
        x_label: what the bars are (shown under the chart).
        bars: in axis order.
        top: the count a full-height bar stands for (the largest count, at least 1).
        labelled: True when every bar can carry its label (few bars); else only the ends do.
    """

    title: str
    x_label: str
    bars: list[Bar]
    top: int
    labelled: bool


_MAX_LABELLED_BARS = 32
"""Above this many bars the labels would overlap in a 600-pixel chart; only the first and last show."""


def bar_chart(title: str, x_label: str, counts: Sequence[tuple[Any, int]]) -> BarChart:
    """A :class:`BarChart` of ``(label, count)`` pairs (counts >= 0)."""
    top = max([1, *(int(c) for _, c in counts)])
    bars = [Bar(str(k), int(c), int(c) / top) for k, c in counts]
    return BarChart(title, x_label, bars, top, len(bars) <= _MAX_LABELLED_BARS)


def mismatches_per_line(diff_png: str | Path) -> list[int] | None:
    """Failing pixels per video line, counted from a case's ``frameNNN_diff.png``.

    The diff picture (see :func:`vkit.report.writers.write_case_report`) is black where a checked pixel
    matched and dark blue where nothing is checked; every other colour (red to white, cyan, magenta) is
    a failing pixel. Returns None when the file is missing or not a picture.
    """
    try:
        with Image.open(diff_png) as im:
            rgb = np.asarray(im.convert("RGB"))
    except (OSError, UnidentifiedImageError):
        return None
    matched = np.all(rgb == np.array(_BLACK, np.uint8), axis=2)
    unchecked = np.all(rgb == np.array(UNCHECKED_COLOUR, np.uint8), axis=2)
    return [int(n) for n in np.count_nonzero(~(matched | unchecked), axis=1)]


@dataclass(frozen=True)
class Picture:
    """A picture for a page: ``src`` (a ``data:`` URI, or a path relative to the page), its displayed
    size in pixels, and ``full``, the relative path of the full-size file."""

    src: str
    width: int
    height: int
    full: str

    @property
    def embedded(self) -> bool:
        """True when the picture travels inside the page."""
        return self.src.startswith("data:")


def _encode(im: Image.Image, max_width: int) -> tuple[str, int, int]:
    """``im`` downscaled to at most ``max_width`` pixels wide (box filter), as a PNG ``data:`` URI."""
    im = im.convert("RGB")
    w, h = im.size
    if w > max_width:
        w, h = max_width, max(1, round(h * max_width / w))
        im = im.resize((w, h), Image.BOX)
    buf = io.BytesIO()
    im.save(buf, format="PNG", optimize=True)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii"), w, h


def _relative(path: str | Path, page_dir: str | Path) -> str:
    return Path(os.path.relpath(Path(path).resolve(), Path(page_dir).resolve())).as_posix()


def picture(path: str | Path, page_dir: str | Path, max_width: int, embed: bool = True) -> Picture | None:
    """The picture at ``path`` downscaled to at most ``max_width`` pixels wide (aspect kept).

    Args:
        path: a PNG file.
        page_dir: the folder of the page that shows it (links are relative to it).
        max_width: largest width, pixels; wider pictures are downscaled (box filter).
        embed: True: ``src`` is the (downscaled) PNG as a ``data:`` URI; False: ``src`` links the file
            and the size is the size the page shows it at.

    Returns:
        None when the file is missing or not a picture.
    """
    rel = _relative(path, page_dir)
    try:
        with Image.open(path) as im:
            w, h = im.size
            if not embed:
                return Picture(rel, min(w, max_width), max(1, round(h * min(w, max_width) / w)), rel)
            if w <= max_width and im.format == "PNG":  # small enough: the file's own bytes, no re-encoding
                data = Path(path).read_bytes()
                return Picture("data:image/png;base64," + base64.b64encode(data).decode("ascii"), w, h, rel)
            src, w, h = _encode(im, max_width)
    except (OSError, UnidentifiedImageError):
        return None
    return Picture(src, w, h, rel)


def first_frame_picture(frames_npy: str | Path, page_dir: str | Path, max_width: int) -> Picture | None:
    """The first frame of a case's ``frames.npy`` (what the design was fed) as an embedded picture.

    Args:
        frames_npy: array ``(frames, height, width)`` or ``(frames, height, width, 3)``, uint8 (or
            uint16 for samples wider than 8 bits, shown by their top 8 bits).
        page_dir: the folder of the page (``full`` links the .npy file).
        max_width: largest width, pixels.

    Returns:
        None when the file is missing, unreadable or not frames of 8- or 16-bit samples.
    """
    try:
        frames = np.load(frames_npy, allow_pickle=False)
    except (OSError, ValueError):
        return None
    if frames.dtype not in (np.uint8, np.uint16) or frames.ndim not in (3, 4) or not len(frames):
        return None
    first = frames[0]
    if first.dtype == np.uint16:
        first = (first >> max(0, int(first.max(initial=0)).bit_length() - 8)).astype(np.uint8)
    src, w, h = _encode(Image.fromarray(np.ascontiguousarray(first)), max_width)
    return Picture(src, w, h, _relative(frames_npy, page_dir))
