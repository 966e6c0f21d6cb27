"""How far the bit-exact model is from its floating-point twin: errors, PSNR, range coverage, clamp shares."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

from vkit.core.errors import ConfigError

if TYPE_CHECKING:  # pragma: no cover
    from vkit.model.pipeline import ModelResult, PipelineSpec

__all__ = ["StageCoverage", "ImageQuality", "QualityReport", "compare", "psnr_db", "write_model_report"]


@dataclass
class StageCoverage:
    """How much of a stage's theoretical range the images reached.

    Attributes:
        name: stage name.
        lo, hi: theoretical range (from :mod:`vkit.model.widths`).
        seen_min, seen_max: lowest and highest value the bit-exact model produced.
        share: ``(seen_max - seen_min) / (hi - lo)``, 0..1 (1 when ``hi == lo``).
    """

    name: str
    lo: int
    hi: int
    seen_min: int
    seen_max: int
    share: float

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form."""
        return {
            "stage": self.name, "lo": self.lo, "hi": self.hi, "seen_min": self.seen_min,
            "seen_max": self.seen_max, "share": round(self.share, 6),
        }


@dataclass
class ImageQuality:
    """Fixed output against float output for one image (or pooled over all of them).

    Errors are ``fixed - float`` on the output scale (output LSBs), over the pixels the border policy
    checks (``valid_mask``).

    Attributes:
        label: image name (file stem, ``image<i>``, or ``overall``).
        pixels: pixels compared.
        max_abs_error: largest ``|fixed - float|``, LSB.
        mean_abs_error: mean ``|fixed - float|``, LSB.
        psnr_db: ``10 log10(peak^2 / MSE)`` with ``peak = 2**bits - 1``, dB; ``inf`` when identical.
        histogram: error rounded to the nearest integer LSB -> pixel count, sorted by error.
        coverage: per-stage range coverage, in pipeline order.
        clamp_shares: stage -> share of the frame's pixels (0..1) where that stage's clamp or
            saturation engaged, for each stage that can clamp.
    """

    label: str
    pixels: int
    max_abs_error: float
    mean_abs_error: float
    psnr_db: float
    histogram: dict[int, int]
    coverage: list[StageCoverage] = field(default_factory=list)
    clamp_shares: dict[str, float] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (JSON-safe: an infinite PSNR is written as null)."""
        return {
            "label": self.label,
            "pixels": self.pixels,
            "max_abs_error_lsb": round(self.max_abs_error, 6),
            "mean_abs_error_lsb": round(self.mean_abs_error, 6),
            "psnr_db": None if math.isinf(self.psnr_db) else round(self.psnr_db, 4),
            "error_histogram": [[k, v] for k, v in self.histogram.items()],
            "coverage": [c.to_dict() for c in self.coverage],
            "clamp_shares": {k: round(v, 6) for k, v in self.clamp_shares.items()},
        }


@dataclass
class QualityReport:
    """:func:`compare`'s result: one :class:`ImageQuality` per image and one pooled over all."""

    pipeline: str
    output_bits: int
    images: list[ImageQuality]
    overall: ImageQuality

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form."""
        return {
            "pipeline": self.pipeline,
            "output_bits": self.output_bits,
            "overall": self.overall.to_dict(),
            "images": [q.to_dict() for q in self.images],
        }

    def format_text(self) -> str:
        """A short human-readable summary: one line per image, then coverage and clamp shares pooled."""
        peak = (1 << self.output_bits) - 1
        lines = [f"pipeline {self.pipeline!r}: fixed point vs float twin, output {self.output_bits} bits (peak {peak})"]
        head = ("image", "pixels", "max |err| LSB", "mean |err| LSB", "PSNR dB")
        rows = [head]
        for q in [*self.images, self.overall]:
            psnr = "inf" if math.isinf(q.psnr_db) else f"{q.psnr_db:.2f}"
            rows.append((q.label, str(q.pixels), f"{q.max_abs_error:.3f}", f"{q.mean_abs_error:.4f}", psnr))
        widths = [max(len(r[i]) for r in rows) for i in range(len(head))]
        for r in rows:
            lines.append("  " + "  ".join(r[0].ljust(widths[0]) if i == 0 else r[i].rjust(widths[i]) for i in range(len(r))))
        hist = self.overall.histogram
        if hist:
            lines.append("  error histogram (LSB: pixels): " + ", ".join(f"{k:+d}: {v}" for k, v in hist.items()))
        lines.append("  range coverage (all images):")
        name_w = max((len(c.name) for c in self.overall.coverage), default=5)
        for c in self.overall.coverage:
            lines.append(
                f"    {c.name.ljust(name_w)}  seen {c.seen_min:>12,} .. {c.seen_max:<12,} of {c.lo:>12,} .. {c.hi:<12,} "
                f"({100.0 * c.share:5.1f}% of the range)"
            )
        if self.overall.clamp_shares:
            lines.append("  clamps engaged: " + ", ".join(
                f"{k} {100.0 * v:.3f}% of pixels" for k, v in self.overall.clamp_shares.items()
            ))
        else:
            lines.append("  clamps engaged: none of the stages can clamp")
        return "\n".join(lines)


def psnr_db(fixed: np.ndarray, reference: np.ndarray, peak: float) -> float:
    """Peak signal-to-noise ratio ``10 log10(peak^2 / mean((fixed - reference)^2))`` in dB (``inf`` if equal)."""
    diff = np.asarray(fixed, dtype=np.float64) - np.asarray(reference, dtype=np.float64)
    mse = float(np.mean(diff * diff)) if diff.size else 0.0
    return _psnr_from_mse(mse, peak)


def _psnr_from_mse(mse: float, peak: float) -> float:
    if mse <= 0.0:
        return math.inf
    return 10.0 * math.log10(peak * peak / mse)


@dataclass
class _Pool:
    pixels: int = 0
    abs_sum: float = 0.0
    sq_sum: float = 0.0
    max_abs: float = 0.0
    hist: dict[int, int] = field(default_factory=dict)
    seen: dict[str, list[int]] = field(default_factory=dict)
    clamp_hits: dict[str, int] = field(default_factory=dict)
    frame_pixels: int = 0


def _as_image_list(spec: PipelineSpec, images: Any) -> list[np.ndarray]:
    if isinstance(images, np.ndarray):
        single = images.ndim == (3 if spec.input == "rgb888" else 2)
        return [images] if single else list(images)
    if isinstance(images, (str, Path)):
        return [_load(spec, images)]
    return [_load(spec, x) if isinstance(x, (str, Path)) else np.asarray(x) for x in images]


def _load(spec: PipelineSpec, path: str | Path) -> np.ndarray:
    from vkit.video.images import load_image

    return load_image(path, mode=spec.input)


def _quality_of(
    label: str, spec: PipelineSpec, fixed: ModelResult, real: ModelResult, pool: _Pool
) -> ImageQuality:
    peak = float(spec.output.max_value)
    mask = fixed.valid_mask
    err = fixed.output[mask].astype(np.float64) - real.output[mask]
    abs_err = np.abs(err)
    n = int(err.size)
    values, counts = np.unique(np.rint(err).astype(np.int64), return_counts=True)
    hist = {int(v): int(c) for v, c in zip(values, counts)}
    sq = float(np.sum(err * err))
    coverage, shares = [], {}
    frame_pixels = int(mask.size)
    for name, stage in fixed.stages.items():
        arr = stage.array
        smin, smax = (int(arr.min()), int(arr.max())) if arr.size else (stage.lo, stage.lo)
        coverage.append(_coverage(name, stage.lo, stage.hi, smin, smax))
        seen = pool.seen.setdefault(name, [smin, smax])
        seen[0], seen[1] = min(seen[0], smin), max(seen[1], smax)
        if stage.clamped is not None:
            hits = int(np.count_nonzero(stage.clamped))
            shares[name] = hits / frame_pixels
            pool.clamp_hits[name] = pool.clamp_hits.get(name, 0) + hits
    pool.pixels += n
    pool.frame_pixels += frame_pixels
    pool.abs_sum += float(abs_err.sum())
    pool.sq_sum += sq
    pool.max_abs = max(pool.max_abs, float(abs_err.max()) if n else 0.0)
    for k, v in hist.items():
        pool.hist[k] = pool.hist.get(k, 0) + v
    return ImageQuality(
        label=label,
        pixels=n,
        max_abs_error=float(abs_err.max()) if n else 0.0,
        mean_abs_error=float(abs_err.mean()) if n else 0.0,
        psnr_db=_psnr_from_mse(sq / n if n else 0.0, peak),
        histogram=hist,
        coverage=coverage,
        clamp_shares=shares,
    )


def _coverage(name: str, lo: int, hi: int, smin: int, smax: int) -> StageCoverage:
    share = 1.0 if hi == lo else max(0.0, min(1.0, (smax - smin) / float(hi - lo)))
    return StageCoverage(name, int(lo), int(hi), smin, smax, share)


def compare(spec: PipelineSpec, images: Any, labels: Sequence[str] | None = None) -> QualityReport:
    """Run the bit-exact model and the floating-point twin on each image and measure the difference.

    Args:
        spec: the pipeline.
        images: one image array, a sequence of arrays, or file paths (PNG/PPM/PGM, read in the
            spec's input format).
        labels: a name per image; default: the file stem for paths, ``image<i>`` for arrays.

    Returns:
        A :class:`QualityReport` with per-image and pooled figures.
    """
    return _compare(spec, images, labels, None)


def _labels(images: Any, count: int) -> list[str]:
    items = list(images) if isinstance(images, (list, tuple)) else None
    out = []
    for i in range(count):
        if items is not None and isinstance(items[i], (str, Path)):
            out.append(Path(items[i]).stem)
        elif isinstance(images, (str, Path)):
            out.append(Path(images).stem)
        else:
            out.append(f"image{i}")
        if out[-1] in out[:-1]:  # two files with one stem: keep the PNG names apart
            out[-1] = f"{out[-1]}_{i}"
    return out


def _compare(
    spec: PipelineSpec, images: Any, labels: Sequence[str] | None, keep: list[tuple[str, ModelResult, ModelResult]] | None
) -> QualityReport:
    from vkit.model.pipeline import run_float, run_model

    arrays = _as_image_list(spec, images)
    if not arrays:
        raise ConfigError("compare: no images given; pass at least one image array or path")
    if labels is None:
        labels = _labels(images, len(arrays))
    elif len(labels) != len(arrays):
        raise ConfigError(f"compare: {len(labels)} labels for {len(arrays)} images; give one label per image")
    pool = _Pool()
    per_image = []
    order: list[tuple[str, int, int]] = []
    for label, img in zip(labels, arrays):
        fixed = run_model(spec, img)
        real = run_float(spec, img)
        per_image.append(_quality_of(str(label), spec, fixed, real, pool))
        if keep is not None:
            keep.append((str(label), fixed, real))
        if not order:
            order = [(n, s.lo, s.hi) for n, s in fixed.stages.items()]
    peak = float(spec.output.max_value)
    overall = ImageQuality(
        label="overall",
        pixels=pool.pixels,
        max_abs_error=pool.max_abs,
        mean_abs_error=pool.abs_sum / pool.pixels if pool.pixels else 0.0,
        psnr_db=_psnr_from_mse(pool.sq_sum / pool.pixels if pool.pixels else 0.0, peak),
        histogram=dict(sorted(pool.hist.items())),
        coverage=[_coverage(n, lo, hi, *pool.seen[n]) for n, lo, hi in order],
        clamp_shares={k: v / pool.frame_pixels for k, v in pool.clamp_hits.items()},
    )
    return QualityReport(spec.name, spec.output.bits, per_image, overall)


def write_model_report(spec: PipelineSpec, images: Any, out_dir: str | Path) -> list[Path]:
    """Run the model on images and write what it produced and how good it is.

    Writes, into ``out_dir`` (created if needed): ``<label>_output.png`` (the bit-exact output; scaled
    to 0..255 when the output is not 8 bits), ``<label>_error.png`` (``|fixed - float|`` scaled so the
    largest error of that image is white, black where nothing is checked), ``report.json`` (spec,
    stage widths, quality) and ``report.txt`` (the width table and the quality summary).

    Args:
        spec: the pipeline.
        images: as for :func:`compare`.
        out_dir: folder to write into.

    Returns:
        The paths written, PNGs first, then ``report.json`` and ``report.txt``.
    """
    from vkit.video.images import save_image, to_uint8
    from vkit.model.widths import format_width_table, widths_to_dict

    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"report folder {str(out)!r} cannot be created ({exc.strerror}); pick a writable folder") from None
    results: list[tuple[str, ModelResult, ModelResult]] = []
    report = _compare(spec, images, None, results)
    written: list[Path] = []
    top = spec.output.max_value
    for label, fixed, real in results:
        shown = fixed.output if spec.output.bits == 8 else to_uint8(fixed.output, 0, top)
        written.append(save_image(shown, out / f"{label}_output.png"))
        err = np.where(fixed.valid_mask, np.abs(fixed.output - real.output), 0.0)
        written.append(save_image(to_uint8(err, 0.0, max(float(err.max()), 1e-9)), out / f"{label}_error.png"))
    data = {"spec": spec.to_dict(), "widths": widths_to_dict(spec)["stages"], "quality": report.to_dict()}
    json_path = out / "report.json"
    json_path.write_text(json.dumps(data, indent=2) + "\n", encoding="utf-8")
    text_path = out / "report.txt"
    text_path.write_text(format_width_table(spec) + "\n\n" + report.format_text() + "\n", encoding="utf-8")
    return [*written, json_path, text_path]
