"""How far the bit-exact model is from its floating-point twin: errors, PSNR, range coverage, clamp shares."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import PurePath
from typing import Any, Sequence

import numpy as np

from vkit.core.vocab import is_rgb
from vkit.core.errors import ConfigError
from vkit.model.exact import run_model
from vkit.model.float_twin import run_float
from vkit.model.result import ModelResult
from vkit.model.spec import PipelineSpec

__all__ = ["StageCoverage", "ImageQuality", "QualityReport", "ImageRun", "compare", "compare_runs", "psnr_db"]


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


@dataclass
class ImageRun:
    """One image through both models: its label, the bit-exact result and the float twin's."""

    label: str
    fixed: ModelResult
    real: ModelResult


def _as_image_list(spec: PipelineSpec, images: Any) -> list[np.ndarray]:
    if isinstance(images, np.ndarray):
        single = images.ndim == (3 if is_rgb(spec.input) else 2)
        return [images] if single else list(images)
    if isinstance(images, (str, PurePath)):
        images = [images]
    for x in images:
        if isinstance(x, (str, PurePath)):
            raise ConfigError(
                f"compare: {str(x)!r} is a file name; the model takes arrays: load it first with "
                "vkit.video.images.load_image, or use vkit.report.quality.compare, which reads files"
            )
    return [np.asarray(x) for x in images]


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
        images: one image array or a sequence of them, in the spec's input format (file paths:
            :func:`vkit.report.quality.compare`).
        labels: a name per image; default ``image<i>``.

    Returns:
        A :class:`QualityReport` with per-image and pooled figures. Each image's model runs are dropped
        once measured, so memory does not grow with the number of images.
    """
    return compare_runs(spec, images, labels, keep_runs=False)[0]


def compare_runs(
    spec: PipelineSpec, images: Any, labels: Sequence[str] | None = None, *, keep_runs: bool = True
) -> tuple[QualityReport, list[ImageRun]]:
    """:func:`compare`, also handing back both models' results per image (for pictures of the error);
    ``keep_runs=False`` hands back the last image's only."""
    arrays = _as_image_list(spec, images)
    if not arrays:
        raise ConfigError("compare: no images given; pass at least one image array")
    if labels is None:
        labels = [f"image{i}" for i in range(len(arrays))]
    elif len(labels) != len(arrays):
        raise ConfigError(f"compare: {len(labels)} labels for {len(arrays)} images; give one label per image")
    pool = _Pool()
    per_image = []
    runs: list[ImageRun] = []
    for label, img in zip(labels, arrays):
        if not keep_runs:
            runs = []  # the last image's runs go before this one's are made: one image's runs in memory at a time
        run = ImageRun(str(label), run_model(spec, img), run_float(spec, img))
        per_image.append(_quality_of(run.label, spec, run.fixed, run.real, pool))
        runs = [*runs, run] if keep_runs else [run]
    order = [(n, s.lo, s.hi) for n, s in runs[0].fixed.stages.items()]
    return QualityReport(spec.name, spec.output.bits, per_image, _pooled(spec, pool, order)), runs


def _pooled(spec: PipelineSpec, pool: _Pool, order: list[tuple[str, int, int]]) -> ImageQuality:
    """The figures over every image at once."""
    peak = float(spec.output.max_value)
    return ImageQuality(
        label="overall",
        pixels=pool.pixels,
        max_abs_error=pool.max_abs,
        mean_abs_error=pool.abs_sum / pool.pixels if pool.pixels else 0.0,
        psnr_db=_psnr_from_mse(pool.sq_sum / pool.pixels if pool.pixels else 0.0, peak),
        histogram=dict(sorted(pool.hist.items())),
        coverage=[_coverage(n, lo, hi, *pool.seen[n]) for n, lo, hi in order],
        clamp_shares={k: v / pool.frame_pixels for k, v in pool.clamp_hits.items()},
    )
