"""What the checks hand back, and what they need from the model: frame results, the verdict, findings, offsets.

At the bottom of the check layer: the aligner, the scoreboard and the diagnosis all build or read these;
none of them is imported here.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field, replace
from typing import Any, Mapping, Protocol

import numpy as np

__all__ = [
    "STATUSES",
    "KINDS",
    "EVIDENCE_ITEMS",
    "StageValues",
    "ExpectedFrame",
    "BorderSpec",
    "Offset",
    "BorderInference",
    "Finding",
    "TimingIssue",
    "FrameResult",
    "Verdict",
]

STATUSES: tuple[str, ...] = ("pass", "fail", "no_output", "error")
"""Every value :attr:`Verdict.status` can take."""

EVIDENCE_ITEMS = 50
"""Longest list kept in a finding's or timing issue's evidence (lines, clocks, slips): enough to see the
pattern, short enough for report.json to stay readable."""

KINDS: tuple[str, ...] = (
    "shift",
    "border",
    "overflow",
    "stall",
    "rounding",
    "timing",
    "xz",
    "missing",
    "scattered",
    "variant",
    "lanes",
    "chroma",
)
"""The fixed vocabulary of :attr:`Finding.kind`; other modules rely on these exact words."""


# --------------------------------------------------------------------------- what the checks read of the model


class StageValues(Protocol):
    """One model stage as the checks read it (:class:`vkit.model.result.Stage` is one)."""

    @property
    def array(self) -> np.ndarray:
        """``(H, W)`` values of the stage."""

    @property
    def lo(self) -> int:
        """Lowest value the stage can take (theoretical range)."""

    @property
    def hi(self) -> int:
        """Highest value the stage can take (theoretical range)."""

    @property
    def signed(self) -> bool:
        """True when the range goes below 0."""

    @property
    def bits(self) -> int:
        """Width of the range, bits."""

    @property
    def clamped(self) -> np.ndarray | None:
        """``(H, W)`` bool where the stage clamped, or None when it cannot clamp."""


class ExpectedFrame(Protocol):
    """One expected frame as the scoreboard reads it (:class:`vkit.model.result.ModelResult` is one)."""

    @property
    def output(self) -> np.ndarray:
        """``(H, W)`` expected output pixels."""

    @property
    def valid_mask(self) -> np.ndarray:
        """``(H, W)`` bool, True where the pixel is checked."""

    @property
    def stages(self) -> Mapping[str, StageValues]:
        """Stage name to its values, in pipeline order."""


class BorderSpec(Protocol):
    """A pipeline spec as the border inference uses it (:class:`vkit.model.spec.PipelineSpec` is one)."""

    def with_border(self, border: str) -> BorderSpec:
        """A copy of the spec with another ``window.border`` policy."""


# --------------------------------------------------------------------------- results

@dataclass(frozen=True)
class Offset:
    """Where the captured frame sits relative to the expected one.

    Convention: ``actual[y, x] == expected[y - dy, x - dx]``; positive ``dx`` means the output is
    shifted right, positive ``dy`` down.

    Attributes:
        dx: column offset in pixels.
        dy: row offset in lines.
        kind: ``"none"`` (no offset), ``"grid"`` (every line moved by the same (dx, dy); pixels
            pushed off a line edge are lost) or ``"raster"`` (the stream lags by ``dy * width + dx``
            pixels in raster order, so pixels pushed off a line's end reappear at the start of the
            next: a latency against the frame/line marks).
        match_share: matching pixels over compared pixels at this offset, 0..1.
        overlap: pixels compared at this offset.
        confidence: posterior weight of this offset among the best candidates, 0..1.
        width: frame width in pixels (to turn a raster offset into pixels).
    """

    dx: int = 0
    dy: int = 0
    kind: str = "none"
    match_share: float = 0.0
    overlap: int = 0
    confidence: float = 0.0
    width: int = 0

    @property
    def is_zero(self) -> bool:
        """True when the frames line up as they are."""
        return self.dx == 0 and self.dy == 0

    @property
    def raster_pixels(self) -> int:
        """The offset as a lag in raster order, pixels (``dy * width + dx``)."""
        return self.dy * self.width + self.dx

    def describe(self) -> str:
        """One phrase a designer can read, e.g. ``"right by 1 pixel and down by 0 lines"``."""
        horiz = "right" if self.dx >= 0 else "left"
        vert = "down" if self.dy >= 0 else "up"
        px = abs(self.dx)
        ln = abs(self.dy)
        return (
            f"{horiz} by {px} pixel{'s' if px != 1 else ''} and "
            f"{vert} by {ln} line{'s' if ln != 1 else ''}"
        )

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        d = asdict(self)
        d["raster_pixels"] = self.raster_pixels
        return d


@dataclass
class BorderInference:
    """Which border policy the captured output follows.

    Attributes:
        policy: best-matching policy name, or ``"unknown"`` when none matches at least half of the
            border pixels where the policies differ.
        share: share of discriminating border pixels the best policy matches, 0..1.
        confidence: among pixels where the best and the runner-up policy differ, the share the best
            one wins, times ``share``; 0..1.
        offset: output offset measured on pixels all policies agree on, applied before comparing.
        scores: policy name -> matched discriminating pixels.
        compared: discriminating border pixels compared.
    """

    policy: str
    share: float
    confidence: float
    offset: Offset
    scores: dict[str, int] = field(default_factory=dict)
    compared: int = 0

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        d = asdict(self)
        d["offset"] = self.offset.to_dict()  # with its raster lag
        return d


@dataclass
class Finding:
    """One named failure pattern.

    Attributes:
        kind: one of :data:`KINDS`.
        message: one line a designer can act on.
        evidence: the numbers behind it (JSON-ready).
        confidence: how well the pattern explains the failures, 0..1 (findings are sorted by it).
    """

    kind: str
    message: str
    evidence: dict[str, Any] = field(default_factory=dict)
    confidence: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"kind": self.kind, "message": self.message, "evidence": self.evidence,
                "confidence": round(float(self.confidence), 4)}


@dataclass
class TimingIssue:
    """A timing problem the scoreboard saw (one line, plus its numbers).

    Attributes:
        category: ``stuck_line_delimiter``, ``line_length``, ``line_count``, ``frame_count``,
            ``de_in_blanking``, ``vsync``, ``hsync``, ``xz_control``, ``latency``, ``timeout``, ``extra`` or
            ``offset``.
        message: one line naming what was seen and what was expected.
        evidence: the numbers (JSON-ready).
    """

    category: str
    message: str
    evidence: dict[str, Any] = field(default_factory=dict)


@dataclass
class FrameResult:
    """One frame compared: the arrays the diagnosis and the report work from.

    All arrays are ``(H, W)`` on the expected grid (after undoing the offset when ``align="auto"``).

    Attributes:
        index: frame number, from 0.
        expected: model output, int64.
        actual: captured pixels, int64 (:data:`~vkit.video.capture.UNKNOWN` where X/Z, 0 where none arrived).
        present: True where a pixel arrived.
        valid: True where the model's pixel is checked.
        unknown: True where the pixel arrived as X/Z (and is checked).
        missing: True where a checked pixel never arrived.
        value_bad: True where a known pixel differs by more than the tolerance.
        error: ``actual - expected`` where both are known, else 0 (LSB).
        clocks: arrival clock per pixel, -1 where none arrived.
        line_lengths: pixels per captured line, in order (before any offset is undone).
        model: the expected frame (its ``stages`` give the intermediate values).
        counts: the counts of :meth:`summary` when only they were kept (:meth:`counts_only`), else None.
    """

    index: int
    expected: np.ndarray
    actual: np.ndarray
    present: np.ndarray
    valid: np.ndarray
    unknown: np.ndarray
    missing: np.ndarray
    value_bad: np.ndarray
    error: np.ndarray
    clocks: np.ndarray
    line_lengths: list[int]
    model: ExpectedFrame
    counts: dict[str, int] | None = None

    @property
    def arrays_kept(self) -> bool:
        """False when this passing frame kept only its counts (:meth:`counts_only`)."""
        return self.counts is None

    def counts_only(self) -> FrameResult:
        """This frame with its counts and ``expected``/``valid`` kept and the other arrays let go (read-only
        zeros of no memory): what a passing frame of a passing run needs, so a long run of big frames does not
        hold every frame's arrays. Only for a frame that did not fail."""
        shape = self.expected.shape
        no = np.broadcast_to(np.False_, shape)
        zero = np.broadcast_to(np.int64(0), shape)
        return replace(self, actual=zero, present=no, unknown=no, missing=no, value_bad=no, error=zero,
                       clocks=np.broadcast_to(np.int64(-1), shape), counts=self.summary())

    @property
    def mismatch(self) -> np.ndarray:
        """Every failing pixel: wrong value, X/Z, or missing."""
        return self.value_bad | self.unknown | self.missing

    @property
    def failed(self) -> bool:
        """True when any checked pixel of this frame failed."""
        return bool(self.mismatch.any())

    def summary(self) -> dict[str, int]:
        """Counts for the report."""
        if self.counts is not None:
            return dict(self.counts)
        return {
            "frame": self.index,
            "pixels_checked": int(self.valid.sum()),
            "mismatches": int(self.mismatch.sum()),
            "value_mismatches": int(self.value_bad.sum()),
            "xz_pixels": int(self.unknown.sum()),
            "missing_pixels": int(self.missing.sum()),
            "max_abs_error": int(np.abs(self.error).max()) if self.error.size else 0,
        }


@dataclass
class Verdict:
    """The scoreboard's judgement of one run.

    Attributes:
        passed: True only when every pixel matched, the timing was clean and no offset was left.
        status: one of :data:`STATUSES`.
        frames_checked: expected frames compared.
        pixels_checked: checked (valid) pixels over those frames.
        mismatches: failing pixels (wrong value + X/Z + missing).
        value_mismatches / xz_pixels / missing_pixels: the three parts of ``mismatches``.
        extra_pixels: pixels that arrived outside the expected grid (long lines, extra lines).
        max_abs_error: largest ``|actual - expected|`` over known pixels, LSB.
        first_mismatches: up to ``max_listed`` dicts ``frame, x, y, kind, expected, actual, error,
            stages`` (``stages`` maps stage name to the model's value at that pixel).
        latency_clocks: measured latency in clocks, or None.
        declared_latency_clocks: latency the design claims, or None.
        offset: ``(dx, dy)`` found by the aligner (pixels, lines); (0, 0) if none.
        offset_detail: the full :class:`Offset`, or None if not measured.
        timing_errors: one line per timing problem.
        findings: the diagnosis, most confident first.
        pixels_arrived / pixels_expected: output pixels seen / expected over all frames.
        frames_expected / frames_out: frames in the expected list / frames that carried output.
        tolerance_lsb: the tolerance used.
        align: ``"exact"`` or ``"auto"``.
        per_frame: per-frame counts.
        latency_samples: measured latency in input samples (enabled input clocks), or None.
        declared_latency_samples: latency in samples the design claims, or None.
        warnings: remarks that do not fail the run (e.g. output sync activity left out as reset fill).
        implemented: on a failing run, what the design really does: ``latency_clocks`` (measured) and,
            when ``spec`` and ``images`` were given, ``border`` (the inferred policy with its share and
            confidence, :meth:`BorderInference.to_dict`).
        frames: per-frame arrays for the report (not part of :meth:`to_dict`).
    """

    passed: bool
    status: str
    frames_checked: int = 0
    pixels_checked: int = 0
    mismatches: int = 0
    value_mismatches: int = 0
    xz_pixels: int = 0
    missing_pixels: int = 0
    extra_pixels: int = 0
    max_abs_error: int = 0
    first_mismatches: list[dict[str, Any]] = field(default_factory=list)
    latency_clocks: int | None = None
    declared_latency_clocks: int | None = None
    offset: tuple[int, int] = (0, 0)
    offset_detail: Offset | None = None
    timing_errors: list[str] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    pixels_arrived: int = 0
    pixels_expected: int = 0
    frames_expected: int = 0
    frames_out: int = 0
    tolerance_lsb: int = 0
    align: str = "exact"
    per_frame: list[dict[str, int]] = field(default_factory=list)
    implemented: dict[str, Any] = field(default_factory=dict)
    latency_samples: int | None = None
    declared_latency_samples: int | None = None
    warnings: list[str] = field(default_factory=list)
    frames: list[FrameResult] = field(default_factory=list, repr=False)

    @property
    def diagnosis(self) -> Finding | None:
        """The most confident finding, or None when the run passed."""
        return self.findings[0] if self.findings else None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (without the per-frame arrays)."""
        return {
            "passed": self.passed,
            "status": self.status,
            "frames_checked": self.frames_checked,
            "pixels_checked": self.pixels_checked,
            "mismatches": self.mismatches,
            "value_mismatches": self.value_mismatches,
            "xz_pixels": self.xz_pixels,
            "missing_pixels": self.missing_pixels,
            "extra_pixels": self.extra_pixels,
            "max_abs_error": self.max_abs_error,
            "first_mismatches": [dict(m) for m in self.first_mismatches],
            "latency_clocks": self.latency_clocks,
            "declared_latency_clocks": self.declared_latency_clocks,
            "latency_samples": self.latency_samples,
            "declared_latency_samples": self.declared_latency_samples,
            "warnings": list(self.warnings),
            "offset": list(self.offset),
            "offset_detail": self.offset_detail.to_dict() if self.offset_detail else None,
            "timing_errors": list(self.timing_errors),
            "findings": [f.to_dict() for f in self.findings],
            "diagnosis": self.findings[0].to_dict() if self.findings else None,
            "pixels_arrived": self.pixels_arrived,
            "pixels_expected": self.pixels_expected,
            "frames_expected": self.frames_expected,
            "frames_out": self.frames_out,
            "tolerance_lsb": self.tolerance_lsb,
            "align": self.align,
            "per_frame": [dict(p) for p in self.per_frame],
            "implemented": dict(self.implemented),
        }
