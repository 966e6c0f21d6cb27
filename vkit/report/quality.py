"""The model quality report on disk: images read from files, output and error PNGs, report.json and report.txt.

The figures come from :mod:`vkit.model.quality` (arrays in, numbers out); this module adds the files.
"""

from __future__ import annotations

import json
from pathlib import Path, PurePath
from typing import Any, Sequence

import numpy as np

from vkit.core.vocab import is_rgb
from vkit.core.errors import ConfigError
from vkit.model.quality import ImageQuality, ImageRun, QualityReport, StageCoverage, compare_runs, psnr_db
from vkit.model.spec import PipelineSpec
from vkit.model.widths import format_width_table, widths_to_dict
from vkit.video.images import DEFAULT_MAX_PIXELS, load_image, save_image, to_uint8

__all__ = [
    "StageCoverage",
    "ImageQuality",
    "QualityReport",
    "psnr_db",
    "read_images",
    "compare",
    "write_model_report",
]

_ERROR_FLOOR = 1e-9
"""Smallest full-scale value of an error picture, LSB: an image with no error stays black instead of dividing by 0."""


def read_images(spec: PipelineSpec, images: Any, max_image_pixels: int = DEFAULT_MAX_PIXELS
                ) -> tuple[list[np.ndarray], list[str]]:
    """The images as arrays in the spec's input format, and a label for each.

    Args:
        spec: the pipeline (its ``input`` sets how files are read).
        images: one image array, a sequence of arrays, a file path (PNG/PPM/PGM), or a sequence mixing
            paths and arrays.
        max_image_pixels: decompression-bomb guard of the files (``vkit model --max-image-pixels``).

    Returns:
        ``(arrays, labels)``: the file stem for a path (``<stem>_<i>`` when two files share a stem, so
        their PNG names stay apart), ``image<i>`` for an array.
    """
    if isinstance(images, np.ndarray):
        single = images.ndim == (3 if is_rgb(spec.input) else 2)
        items: list[Any] = [images] if single else list(images)
    elif isinstance(images, (str, PurePath)):
        items = [images]
    else:
        items = list(images)
    arrays, labels = [], []
    for i, item in enumerate(items):
        if isinstance(item, (str, PurePath)):
            arrays.append(load_image(item, mode=spec.input, max_pixels=max_image_pixels,
                                     setting="--max-image-pixels"))
            label = Path(item).stem
        else:
            arrays.append(np.asarray(item))
            label = f"image{i}"
        labels.append(f"{label}_{i}" if label in labels else label)
    return arrays, labels


def compare(spec: PipelineSpec, images: Any, labels: Sequence[str] | None = None) -> QualityReport:
    """:func:`vkit.model.quality.compare` that also reads image files (see :func:`read_images`)."""
    return _compare_files(spec, images, labels)[0]


def _compare_files(
    spec: PipelineSpec, images: Any, labels: Sequence[str] | None, max_image_pixels: int = DEFAULT_MAX_PIXELS
) -> tuple[QualityReport, list[ImageRun]]:
    arrays, default_labels = read_images(spec, images, max_image_pixels)
    return compare_runs(spec, arrays, default_labels if labels is None else labels)


def write_model_report(spec: PipelineSpec, images: Any, out_dir: str | Path, *,
                       max_image_pixels: int = DEFAULT_MAX_PIXELS) -> list[Path]:
    """Run the model on images and write what it produced and how good it is.

    Writes, into ``out_dir`` (created if needed): ``<label>_output.png`` (the bit-exact output; scaled
    to 0..255 when the output is not 8 bits), ``<label>_error.png`` (``|fixed - float|`` scaled so the
    largest error of that image is white, black where nothing is checked), ``report.json`` (spec,
    stage widths, quality) and ``report.txt`` (the width table and the quality summary).

    Args:
        spec: the pipeline.
        images: as for :func:`read_images`.
        out_dir: folder to write into.
        max_image_pixels: as for :func:`read_images`.

    Returns:
        The paths written, PNGs first, then ``report.json`` and ``report.txt``.
    """
    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"report folder {str(out)!r} cannot be created ({exc.strerror}); pick a writable folder") from None
    report, runs = _compare_files(spec, images, None, max_image_pixels)
    written: list[Path] = []
    for run in runs:
        written.extend(_write_pictures(spec, run, out))
    data = {"spec": spec.to_dict(), "widths": widths_to_dict(spec)["stages"], "quality": report.to_dict()}
    json_path = out / "report.json"
    json_path.write_text(json.dumps(data, indent=2) + "\n", encoding="utf-8")
    text_path = out / "report.txt"
    text_path.write_text(format_width_table(spec) + "\n\n" + report.format_text() + "\n", encoding="utf-8")
    return [*written, json_path, text_path]


def _write_pictures(spec: PipelineSpec, run: ImageRun, out: Path) -> list[Path]:
    """``<label>_output.png`` and ``<label>_error.png`` of one image."""
    top = spec.output.max_value
    fixed, real = run.fixed, run.real
    shown = fixed.output if spec.output.bits == 8 else to_uint8(fixed.output, 0, top)
    err = np.where(fixed.valid_mask, np.abs(fixed.output - real.output), 0.0)
    return [
        save_image(shown, out / f"{run.label}_output.png"),
        save_image(to_uint8(err, 0.0, max(float(err.max()), _ERROR_FLOOR)), out / f"{run.label}_error.png"),
    ]
