"""The scoreboard: compares captured frames with the model's expected frames and judges the output timing."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from vkit.check.align import BorderInference, Offset, infer_border, latency_clocks, measure_offset, shift_back
from vkit.video.capture import UNKNOWN, Capture, FrameView
from vkit.check.diagnose import Finding, TimingIssue, diagnose
from vkit.core.errors import ConfigError

__all__ = ["FrameResult", "Verdict", "score", "STATUSES"]

STATUSES: tuple[str, ...] = ("pass", "fail", "no_output", "error")
"""Every value :attr:`Verdict.status` can take."""

_ALIGN_MODES = ("exact", "auto")


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
        model: the expected ``ModelResult`` (its ``stages`` give the intermediate values).
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
    model: Any

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
        offset_detail: the full :class:`~vkit.check.align.Offset`, or None if not measured.
        timing_errors: one line per timing problem.
        findings: the diagnosis, most confident first.
        pixels_arrived / pixels_expected: output pixels seen / expected over all frames.
        frames_expected / frames_out: frames in the expected list / frames that carried output.
        tolerance_lsb: the tolerance used.
        align: ``"exact"`` or ``"auto"``.
        per_frame: per-frame counts.
        implemented: on a failing run, what the design really does: ``latency_clocks`` (measured) and,
            when ``spec`` and ``images`` were given, ``border`` (the inferred policy with its share and
            confidence, :meth:`~vkit.check.align.BorderInference.to_dict`).
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


def _py(value: Any) -> Any:
    """A numpy scalar or array as plain Python (int, float, bool or nested lists)."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    return value


def _stage_values(model: Any, y: int, x: int, shape: tuple[int, int]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, stage in getattr(model, "stages", {}).items():
        arr = np.asarray(getattr(stage, "array", stage))
        if arr.ndim >= 2 and arr.shape[:2] == shape:
            out[name] = _py(arr[y, x])
    return out


def _frames_by_shape(capture: Capture, shapes: Sequence[tuple[int, int]]) -> dict[tuple[int, int], list[FrameView]]:
    return {s: capture.frames(*s) for s in set(shapes)}


def _check_expected(expected: Sequence[Any]) -> list[tuple[int, int]]:
    if len(expected) == 0:
        raise ConfigError("score: the expected list is empty; pass one ModelResult per frame sent")
    shapes = []
    for i, e in enumerate(expected):
        out = np.asarray(getattr(e, "output", None))
        vm = np.asarray(getattr(e, "valid_mask", None))
        if out.ndim != 2 or vm.shape != out.shape:
            raise ConfigError(
                f"score: expected[{i}] has output shape {out.shape} and valid_mask shape {vm.shape}; "
                "both must be the same (H, W); pass vkit.model.pipeline.run_model results"
            )
        shapes.append((int(out.shape[0]), int(out.shape[1])))
    return shapes


def _timing_checks(
    capture: Capture,
    views: list[FrameView | None],
    shapes: list[tuple[int, int]],
    issues: list[TimingIssue],
) -> int:
    """Append timing issues; returns pixels that fell outside the grid."""
    meta = capture.meta
    extra = 0
    for i, (view, (h, w)) in enumerate(zip(views, shapes)):
        if view is None:
            continue
        lengths = view.line_lengths
        bad = [(y, n) for y, n in enumerate(lengths) if n != w]
        extra += sum(max(0, n - w) for y, n in enumerate(lengths) if y < h)
        extra += sum(lengths[h:])
        if bad:
            listed = ", ".join(f"line {y}: {n}" for y, n in bad[:5])
            more = f" (+{len(bad) - 5} more)" if len(bad) > 5 else ""
            issues.append(
                TimingIssue(
                    "line_length",
                    f"frame {i}: {len(bad)} line(s) do not carry {w} pixels ({listed}{more})",
                    {"frame": i, "width": w, "lines": [[y, n] for y, n in bad[:50]]},
                )
            )
        if len(lengths) != h:
            issues.append(
                TimingIssue(
                    "line_count",
                    f"frame {i}: {len(lengths)} lines arrived, expected {h}",
                    {"frame": i, "lines": len(lengths), "height": h},
                )
            )
    frames_out = capture.frame_count
    extra += int(np.count_nonzero(capture.frame >= len(shapes))) if len(capture) else 0
    sent = meta.get("frames_sent")
    if sent is not None and frames_out != int(sent):
        issues.append(
            TimingIssue(
                "frame_count",
                f"{frames_out} frame(s) came out, {int(sent)} were sent",
                {"frames_out": frames_out, "frames_sent": int(sent)},
            )
        )
    elif sent is None and frames_out != len(shapes):
        issues.append(
            TimingIssue(
                "frame_count",
                f"{frames_out} frame(s) came out, {len(shapes)} expected",
                {"frames_out": frames_out, "frames_sent": len(shapes)},
            )
        )
    dib = list(meta.get("de_in_blanking") or [])
    if dib:
        issues.append(
            TimingIssue(
                "de_in_blanking",
                f"output data-enable high during vertical blanking on {len(dib)} clock(s), first at clock {dib[0]}",
                {"clocks": dib[:50], "count": len(dib)},
            )
        )
    vin, vout = meta.get("input_vsync_count"), meta.get("output_vsync_count")
    if vin is not None and vout is not None and int(vin) != int(vout):
        issues.append(
            TimingIssue(
                "vsync",
                f"output vsync pulses: {int(vout)}, input vsync pulses: {int(vin)}",
                {"input_vsync_count": int(vin), "output_vsync_count": int(vout)},
            )
        )
    hin, hout = meta.get("input_hsync_per_frame"), meta.get("output_hsync_per_frame")
    if hin is not None and hout is not None:
        n = min(len(hin), len(hout))
        diff = [k for k in range(n) if int(hin[k]) != int(hout[k])]
        if diff:
            k = diff[0]
            issues.append(
                TimingIssue(
                    "hsync",
                    f"frame {k}: {int(hout[k])} output hsync pulses, {int(hin[k])} input hsync pulses",
                    {"frames": diff[:50], "input": list(hin), "output": list(hout)},
                )
            )
    xzc = list(meta.get("xz_control") or [])
    if xzc:
        first = xzc[0]
        issues.append(
            TimingIssue(
                "xz_control",
                f"control output {first[1]} held X/Z on {len(xzc)} clock(s), first at clock {first[0]}",
                {"events": [list(e) for e in xzc[:50]], "count": len(xzc)},
            )
        )
    return extra


def _compare(index: int, model: Any, view: FrameView | None, shape: tuple[int, int], tol: int, offset: Offset | None) -> FrameResult:
    h, w = shape
    exp = np.asarray(model.output, np.int64)
    valid = np.asarray(model.valid_mask, bool)
    if view is None:
        act = np.zeros(shape, np.int64)
        pres = np.zeros(shape, bool)
        clocks = np.full(shape, -1, np.int64)
        lengths: list[int] = []
    else:
        act, pres, clocks, lengths = view.pixels, view.present, view.clocks, view.line_lengths
        if offset is not None and not offset.is_zero:
            # Places the offset leaves without a source pixel are not checked (not "missing").
            _, covered = shift_back(act, np.ones(shape, bool), offset)
            valid = valid & covered
            act, pres = shift_back(act, pres, offset)
            clocks, _ = shift_back(clocks, view.present, offset)
    unknown = valid & pres & (act == UNKNOWN)
    missing = valid & ~pres
    known = valid & pres & ~unknown
    error = np.where(known, act - exp, 0)
    value_bad = known & (np.abs(error) > tol)
    return FrameResult(index, exp, act, pres, valid, unknown, missing, value_bad, error, clocks, lengths, model)


def score(
    expected: Sequence[Any],
    capture: Capture,
    *,
    tolerance_lsb: int = 0,
    declared_latency_clocks: int | None = None,
    latency_tolerance_clocks: int = 0,
    align: str = "exact",
    accept_offset: bool = False,
    max_listed: int = 20,
    stall_pixels: Sequence[Sequence[int]] | None = None,
    spec: Any = None,
    images: Sequence[np.ndarray] | None = None,
    run_model: Any = None,
) -> Verdict:
    """Score one run: every checked pixel of every frame, the output timing, the latency.

    Args:
        expected: one ``ModelResult`` per frame sent (``output``, ``valid_mask``, ``stages``).
        capture: what the design emitted.
        tolerance_lsb: largest accepted ``|actual - expected|``, LSB (0 = bit exact).
        declared_latency_clocks: latency the design claims, clocks; checked against the measured one.
        latency_tolerance_clocks: accepted difference between declared and measured latency, clocks.
        align: ``"exact"`` compares pixels where they arrived; ``"auto"`` first undoes the offset the
            aligner finds on the first frame with output (the offset is still a failure unless
            ``accept_offset``).
        accept_offset: with ``align="auto"``, do not fail on a non-zero offset.
        max_listed: mismatching pixels listed in ``first_mismatches``.
        stall_pixels: ``[frame, y, x]`` input pixels that came right after a stall; taken from
            ``capture.meta["stall_pixels"]`` when omitted.
        spec: the pipeline spec; with ``images`` it lets the diagnosis name the border policy the
            design implements (optional).
        images: the input images, one per frame (optional, see ``spec``).
        run_model: model runner for the border inference; :func:`vkit.model.pipeline.run_model` by default.

    Returns:
        A :class:`Verdict`.
    """
    if align not in _ALIGN_MODES:
        raise ConfigError(f"score: align is {align!r}; use one of {', '.join(_ALIGN_MODES)}")
    if tolerance_lsb < 0 or latency_tolerance_clocks < 0:
        raise ConfigError(
            f"score: tolerance_lsb={tolerance_lsb} and latency_tolerance_clocks={latency_tolerance_clocks}; both must be >= 0"
        )
    shapes = _check_expected(expected)
    meta = capture.meta
    if stall_pixels is None:
        stall_pixels = meta.get("stall_pixels") or []
    pixels_expected = int(sum(h * w for h, w in shapes))
    arrived = len(capture)
    measured_latency = latency_clocks(capture)
    base = dict(
        frames_expected=len(shapes),
        frames_out=capture.frame_count,
        pixels_arrived=arrived,
        pixels_expected=pixels_expected,
        latency_clocks=measured_latency,
        declared_latency_clocks=declared_latency_clocks,
        tolerance_lsb=tolerance_lsb,
        align=align,
    )
    if meta.get("error"):
        msg = f"the run failed before it could be scored: {meta['error']}"
        return Verdict(
            passed=False,
            status="error",
            timing_errors=[msg],
            findings=[Finding("timing", msg, {"error": str(meta["error"])}, 1.0)],
            **base,
        )
    if arrived == 0:
        timed = meta.get("timed_out")
        clocks = meta.get("timeout_clocks", meta.get("clocks_run"))
        why = f"the run timed out after {clocks} clocks" if timed else "the run ended"
        msg = f"no output: 0 of {pixels_expected} pixels arrived ({why}); check output data-enable/valid and reset"
        return Verdict(
            passed=False,
            status="no_output",
            timing_errors=[msg],
            findings=[Finding("missing", msg, {"pixels_arrived": 0, "pixels_expected": pixels_expected}, 1.0)],
            missing_pixels=pixels_expected,
            mismatches=pixels_expected,
            frames_checked=len(shapes),
            pixels_checked=int(sum(np.asarray(e.valid_mask, bool).sum() for e in expected)),
            **base,
        )

    by_shape = _frames_by_shape(capture, shapes)
    views: list[FrameView | None] = [
        by_shape[s][i] if i < len(by_shape[s]) else None for i, s in enumerate(shapes)
    ]
    issues: list[TimingIssue] = []
    extra = _timing_checks(capture, views, shapes, issues)
    if meta.get("timed_out"):
        issues.append(
            TimingIssue(
                "timeout",
                f"the run timed out after {meta.get('timeout_clocks', meta.get('clocks_run', '?'))} clocks "
                f"with {arrived} of {pixels_expected} pixels out",
                {"pixels_arrived": arrived, "pixels_expected": pixels_expected},
            )
        )
    if extra:
        issues.append(TimingIssue("extra", f"{extra} pixel(s) arrived outside the {shapes[0][1]}x{shapes[0][0]} grid", {"count": extra}))
    if declared_latency_clocks is not None:
        if measured_latency is None:
            issues.append(
                TimingIssue(
                    "latency",
                    f"latency declared as {declared_latency_clocks} clocks but could not be measured "
                    "(the capture has no first input/output clock)",
                    {"declared": declared_latency_clocks, "measured": None},
                )
            )
        elif abs(measured_latency - declared_latency_clocks) > latency_tolerance_clocks:
            issues.append(
                TimingIssue(
                    "latency",
                    f"latency: declared {declared_latency_clocks} clocks, measured {measured_latency} clocks "
                    f"(tolerance +-{latency_tolerance_clocks})",
                    {"declared": declared_latency_clocks, "measured": measured_latency,
                     "tolerance": latency_tolerance_clocks},
                )
            )

    # Offset: measured on the first frame with output; applied only with align="auto".
    offset: Offset | None = None
    if align == "auto":
        for i, v in enumerate(views):
            if v is not None and v.present.any():
                offset = measure_offset(expected[i].output, v.pixels, present=v.present, valid=expected[i].valid_mask)
                break
    frames = [
        _compare(i, expected[i], views[i], shapes[i], tolerance_lsb, offset) for i in range(len(shapes))
    ]
    if align == "exact":
        for fr in frames:
            if fr.value_bad.sum() >= 2:
                v = views[fr.index]
                assert v is not None
                offset = measure_offset(fr.expected, v.pixels, present=v.present, valid=fr.valid)
                break
    if offset is not None and not offset.is_zero and align == "auto" and not accept_offset:
        issues.append(
            TimingIssue(
                "offset",
                f"output is offset from the expected frame ({offset.describe()}); "
                "undone before comparing (align='auto')",
                offset.to_dict(),
            )
        )

    border: BorderInference | None = None
    failing = bool(issues) or any(fr.mismatch.any() for fr in frames)
    if spec is not None and images is not None and failing and hasattr(spec, "with_border"):
        border = infer_border(spec, images, capture, run_model=run_model)
    implemented: dict[str, Any] = {}
    if failing:
        implemented["latency_clocks"] = measured_latency
        if border is not None:
            implemented["border"] = border.to_dict()

    findings = diagnose(
        frames,
        meta=meta,
        timing=issues,
        offset=offset if align == "exact" else None,
        applied_offset=offset if align == "auto" else None,
        stall_pixels=stall_pixels,
        backpressure_pixels=meta.get("backpressure_pixels") or [],
        border=border,
        tolerance_lsb=tolerance_lsb,
        capture=capture,
    )

    listed: list[dict[str, Any]] = []
    for fr in frames:
        if len(listed) >= max_listed:
            break
        ys, xs = np.nonzero(fr.mismatch)
        for y, x in zip(ys[: max_listed - len(listed)], xs[: max_listed - len(listed)]):
            y, x = int(y), int(x)
            if fr.missing[y, x]:
                kind, actual, err = "missing", None, None
            elif fr.unknown[y, x]:
                kind, actual, err = "xz", "X", None
            else:
                kind, actual, err = "value", int(fr.actual[y, x]), int(fr.error[y, x])
            listed.append(
                {
                    "frame": fr.index,
                    "x": x,
                    "y": y,
                    "kind": kind,
                    "expected": int(fr.expected[y, x]),
                    "actual": actual,
                    "error": err,
                    "clock": int(fr.clocks[y, x]) if fr.clocks[y, x] >= 0 else None,
                    "stages": _stage_values(fr.model, y, x, fr.expected.shape),
                }
            )

    mism = int(sum(fr.mismatch.sum() for fr in frames))
    failed_timing = bool(issues)
    passed = mism == 0 and not failed_timing
    return Verdict(
        passed=passed,
        status="pass" if passed else "fail",
        frames_checked=len(frames),
        pixels_checked=int(sum(fr.valid.sum() for fr in frames)),
        mismatches=mism,
        value_mismatches=int(sum(fr.value_bad.sum() for fr in frames)),
        xz_pixels=int(sum(fr.unknown.sum() for fr in frames)),
        missing_pixels=int(sum(fr.missing.sum() for fr in frames)),
        extra_pixels=extra,
        max_abs_error=int(max((np.abs(fr.error).max() for fr in frames), default=0)),
        first_mismatches=listed,
        offset=(offset.dx, offset.dy) if offset is not None else (0, 0),
        offset_detail=offset,
        timing_errors=[i.message for i in issues],
        findings=findings if not passed else [],
        per_frame=[fr.summary() for fr in frames],
        implemented=implemented if not passed else {},
        frames=frames,
        **base,
    )
