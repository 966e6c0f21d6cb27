"""The scoreboard: compares captured frames with the model's expected frames and judges the output timing."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from vkit.check.settle import ControlSettle, settled_facts
from vkit.check.align import ModelRunner, infer_border, latency_clocks, measure_offset, shift_back
from vkit.check.diagnose import diagnose
from vkit.check.results import (
    EVIDENCE_ITEMS,
    STATUSES,
    BorderInference,
    BorderSpec,
    ExpectedFrame,
    Finding,
    FrameResult,
    Offset,
    TimingIssue,
    Verdict,
)
from vkit.core.errors import ConfigError
from vkit.video.capture import MAX_EVENTS, UNKNOWN, Capture, FrameView, RunFacts

__all__ = ["FrameResult", "Verdict", "score", "STATUSES"]

_ALIGN_MODES = ("exact", "auto")

_LINES_LISTED = 5
"""Wrong-length lines named in the one-line message (the evidence keeps up to :data:`EVIDENCE_ITEMS`)."""
_OFFSET_SEARCH_MISMATCHES = 2
"""With ``align="exact"``, the offset is measured on the first frame with at least this many wrong
values: one wrong pixel is a value fault, not a displaced picture."""


def _py(value: Any) -> Any:
    """A numpy scalar or array as plain Python (int, float, bool or nested lists)."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    return value


def _stage_values(model: ExpectedFrame, y: int, x: int, shape: tuple[int, int]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, stage in model.stages.items():
        arr = np.asarray(stage.array)
        if arr.ndim >= 2 and arr.shape[:2] == shape:
            out[name] = _py(arr[y, x])
    return out


def _check_expected(expected: Sequence[ExpectedFrame]) -> list[tuple[int, int]]:
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


def _check_options(align: str, tolerance_lsb: int, latency_tolerance_clocks: int) -> None:
    if align not in _ALIGN_MODES:
        raise ConfigError(f"score: align is {align!r}; use one of {', '.join(_ALIGN_MODES)}")
    if tolerance_lsb < 0 or latency_tolerance_clocks < 0:
        raise ConfigError(
            f"score: tolerance_lsb={tolerance_lsb} and latency_tolerance_clocks={latency_tolerance_clocks}; both must be >= 0"
        )


# --------------------------------------------------------------------------- timing


STUCK_LINE_FACTOR = 2
"""An output line at least this many frame widths long means the line delimiter never dropped: two
lines ran into one (a data-enable held high, an end-of-line never sent)."""


def _stuck_delimiter_issue(i: int, lengths: Sequence[int], w: int, family: str | None) -> TimingIssue | None:
    """The line delimiter that never ends a line, named before the line counts it upsets."""
    long = [(y, n) for y, n in enumerate(lengths) if n >= STUCK_LINE_FACTOR * w]
    if not long:
        return None
    y, n = long[0]
    what = ("end-of-line never comes" if family == "stream" else "data-enable never goes low")
    fix = ("send end-of-line on the last pixel of every line" if family == "stream" else
           "drive data-enable low in horizontal blanking, between the lines")
    return TimingIssue(
        "stuck_line_delimiter",
        f"frame {i}: {what} between lines: line {y} is {n} pixels long, expected {w}; {fix}",
        {"frame": i, "line": y, "length": n, "width": w, "long_lines": len(long)},
    )


def _whole_beats_note(bad: list[tuple[int, int]], width: int, lanes: int | None) -> str:
    """A note when every wrong line is the line rounded up to whole beats (a lane mask that marks empty lanes)."""
    if not lanes or lanes < 2 or width % lanes == 0:
        return ""
    beats = -(-width // lanes) * lanes
    if any(n != beats for _, n in bad):
        return ""
    return (f"; every one is {beats} pixels, the line rounded up to whole beats of {lanes}: the last beat's "
            f"per-lane valid mask (out_keep) marks {beats - width} lane(s) that hold no pixel")


def _line_issues(line_lengths: Sequence[list[int] | None], shapes: list[tuple[int, int]],
                 family: str | None = None, lanes: int | None = None) -> tuple[list[TimingIssue], int]:
    """Lines of the wrong length and frames with the wrong line count; pixels past the grid."""
    issues: list[TimingIssue] = []
    extra = 0
    for i, (lengths, (h, w)) in enumerate(zip(line_lengths, shapes)):
        if lengths is None:
            continue
        stuck = _stuck_delimiter_issue(i, lengths, w, family)
        if stuck is not None:
            issues.append(stuck)
        bad = [(y, n) for y, n in enumerate(lengths) if n != w]
        extra += sum(max(0, n - w) for y, n in enumerate(lengths) if y < h)
        extra += sum(lengths[h:])
        if bad:
            listed = ", ".join(f"line {y}: {n}" for y, n in bad[:_LINES_LISTED])
            more = f" (+{len(bad) - _LINES_LISTED} more)" if len(bad) > _LINES_LISTED else ""
            issues.append(TimingIssue(
                "line_length",
                f"frame {i}: {len(bad)} line(s) do not carry {w} pixels ({listed}{more})"
                + _whole_beats_note(bad, w, lanes),
                {"frame": i, "width": w, "lines": [[y, n] for y, n in bad[:EVIDENCE_ITEMS]]},
            ))
        if len(lengths) != h:
            issues.append(TimingIssue(
                "line_count",
                f"frame {i}: {len(lengths)} lines arrived, expected {h}",
                {"frame": i, "lines": len(lengths), "height": h},
            ))
    return issues, extra


def _frame_count_issue(capture: Capture, expected_frames: int) -> TimingIssue | None:
    """Frames out against frames sent (``facts.frames_sent``, else the expected list)."""
    frames_out = capture.frame_count
    sent = capture.facts.frames_sent
    if sent is not None and frames_out != int(sent):
        return TimingIssue(
            "frame_count",
            f"{frames_out} frame(s) came out, {int(sent)} were sent",
            {"frames_out": frames_out, "frames_sent": int(sent)},
        )
    if sent is None and frames_out != expected_frames:
        return TimingIssue(
            "frame_count",
            f"{frames_out} frame(s) came out, {expected_frames} expected",
            {"frames_out": frames_out, "frames_sent": expected_frames},
        )
    return None


def _sync_issues(facts: RunFacts) -> list[TimingIssue]:
    """Data-enable in vertical blanking, vsync and hsync pulse counts, X/Z on control outputs."""
    issues: list[TimingIssue] = []
    dib = list(facts.de_in_blanking or [])
    if dib:
        issues.append(TimingIssue(
            "de_in_blanking",
            f"output data-enable high during vertical blanking on {len(dib)} clock(s), first at clock {dib[0]}",
            {"clocks": dib[:EVIDENCE_ITEMS], "count": len(dib)},
        ))
    vin, vout = facts.input_vsync_count, facts.output_vsync_count
    if vin is not None and vout is not None and int(vin) != int(vout):
        issues.append(TimingIssue(
            "vsync",
            f"output vsync pulses: {int(vout)}, input vsync pulses: {int(vin)}",
            {"input_vsync_count": int(vin), "output_vsync_count": int(vout)},
        ))
    hin, hout = facts.input_hsync_per_frame, facts.output_hsync_per_frame
    if hin is not None and hout is not None:
        diff = [k for k in range(min(len(hin), len(hout))) if int(hin[k]) != int(hout[k])]
        if diff:
            k = diff[0]
            issues.append(TimingIssue(
                "hsync",
                f"frame {k}: {int(hout[k])} output hsync pulses, {int(hin[k])} input hsync pulses",
                {"frames": diff[:EVIDENCE_ITEMS], "input": list(hin), "output": list(hout)},
            ))
    xzc = list(facts.xz_control or [])
    if xzc:
        first = xzc[0]
        issues.append(TimingIssue(
            "xz_control",
            f"control output {first[1]} held X/Z on {len(xzc)} clock(s), first at clock {first[0]}",
            {"events": [list(e) for e in xzc[:EVIDENCE_ITEMS]], "count": len(xzc)},
        ))
    return issues


def _latency_issue(declared: int | None, measured: int | None, tolerance: int) -> TimingIssue | None:
    """The declared latency against the measured one."""
    if declared is None:
        return None
    if measured is None:
        return TimingIssue(
            "latency",
            f"latency declared as {declared} clocks but could not be measured "
            "(the capture has no first input/output clock)",
            {"declared": declared, "measured": None},
        )
    if abs(measured - declared) > tolerance:
        return TimingIssue(
            "latency",
            f"latency: declared {declared} clocks, measured {measured} clocks (tolerance +-{tolerance})",
            {"declared": declared, "measured": measured, "tolerance": tolerance},
        )
    return None


def _sample_latency_issue(declared: int | None, measured: int | None) -> TimingIssue | None:
    """The latency declared in input samples against the measured one (exact: samples are counted, not timed)."""
    if declared is None or measured == declared:
        return None
    return TimingIssue(
        "latency",
        f"latency: declared {declared} samples, measured {measured if measured is not None else '?'} samples "
        "(input samples = enabled input clocks)",
        {"declared_samples": declared, "measured_samples": measured},
    )


def _timing_issues(
    capture: Capture,
    shapes: list[tuple[int, int]],
    latency: tuple[int | None, int | None, int],
) -> tuple[list[TimingIssue], int]:
    """Every timing problem of the run, in report order; and the pixels that fell outside the grid.

    ``latency`` is ``(declared, measured, tolerance)`` in clocks.
    """
    facts = capture.facts
    out = capture.frame_count
    issues, extra = _line_issues([capture.line_lengths(i) if i < out else None for i in range(len(shapes))],
                                 shapes, facts.family, facts.pixels_per_clock)
    extra += capture.samples_from_frame(len(shapes))
    issues.append(_frame_count_issue(capture, len(shapes)))
    issues.extend(_sync_issues(facts))
    if facts.timed_out:
        issues.append(TimingIssue(
            "timeout",
            f"the run timed out after {facts.stop_clocks if facts.stop_clocks is not None else '?'} clocks "
            f"with {len(capture)} of {sum(h * w for h, w in shapes)} pixels out",
            {"pixels_arrived": len(capture), "pixels_expected": int(sum(h * w for h, w in shapes))},
        ))
    if extra:
        issues.append(TimingIssue("extra", f"{extra} pixel(s) arrived outside the {shapes[0][1]}x{shapes[0][0]} grid", {"count": extra}))
    issues.append(_latency_issue(*latency))
    return [i for i in issues if i is not None], extra


# --------------------------------------------------------------------------- pixels


def _compare(
    index: int, model: ExpectedFrame, view: FrameView | None, shape: tuple[int, int], tol: int, offset: Offset | None
) -> FrameResult:
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


class _Views(Sequence[FrameView | None]):
    """The captured frame of each expected frame, rebuilt each time it is asked for (never all at once, so a
    long run of big frames holds one frame's arrays at a time); None past the captured frames."""

    def __init__(self, capture: Capture, shapes: list[tuple[int, int]]) -> None:
        self._capture, self._shapes, self._count = capture, shapes, capture.frame_count

    def __len__(self) -> int:
        return len(self._shapes)

    def __getitem__(self, i: int) -> FrameView | None:  # type: ignore[override]
        return self._capture.frame_view(i, *self._shapes[i]) if i < self._count else None


def _compare_all(expected: Sequence[ExpectedFrame], views: _Views, shapes: list[tuple[int, int]], options: _Options,
                 offset: Offset | None, failing: bool) -> list[FrameResult]:
    """Every frame compared, one at a time; with ``options.keep_passing`` False a passing frame keeps its counts
    only (:meth:`FrameResult.counts_only`) unless the run fails, when every frame keeps its arrays for the
    diagnosis and the pictures (those frames are compared again)."""
    frames: list[FrameResult] = []
    for i, shape in enumerate(shapes):
        fr = _compare(i, expected[i], views[i], shape, options.tolerance_lsb, offset)
        failing = failing or fr.failed
        frames.append(fr if options.keep_passing or fr.failed else fr.counts_only())
    if failing:
        frames = [fr if fr.arrays_kept else _compare(fr.index, expected[fr.index], views[fr.index], shapes[fr.index],
                                                     options.tolerance_lsb, offset) for fr in frames]
    return frames


def _auto_offset(expected: Sequence[ExpectedFrame], views: Sequence[FrameView | None]) -> Offset | None:
    """The offset to undo with ``align="auto"``: measured on the first frame with output."""
    for i, v in enumerate(views):
        if v is not None and v.present.any():
            return measure_offset(expected[i].output, v.pixels, present=v.present, valid=expected[i].valid_mask)
    return None


def _exact_offset(frames: list[FrameResult], views: Sequence[FrameView | None]) -> Offset | None:
    """With ``align="exact"``, the offset the wrong values suggest (for the diagnosis only)."""
    for fr in frames:
        if fr.value_bad.sum() >= _OFFSET_SEARCH_MISMATCHES:
            v = views[fr.index]
            assert v is not None
            return measure_offset(fr.expected, v.pixels, present=v.present, valid=fr.valid)
    return None


def _mismatch_entry(fr: FrameResult, y: int, x: int) -> dict[str, Any]:
    """One ``first_mismatches`` entry: where, what kind, both values and the model's stage values."""
    if fr.missing[y, x]:
        kind, actual, err = "missing", None, None
    elif fr.unknown[y, x]:
        kind, actual, err = "xz", "X", None
    else:
        kind, actual, err = "value", int(fr.actual[y, x]), int(fr.error[y, x])
    return {
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


def _first_mismatches(frames: list[FrameResult], max_listed: int) -> list[dict[str, Any]]:
    """Up to ``max_listed`` failing pixels in frame, then raster order."""
    listed: list[dict[str, Any]] = []
    for fr in frames:
        if len(listed) >= max_listed:
            break
        ys, xs = np.nonzero(fr.mismatch)
        room = max_listed - len(listed)
        listed.extend(_mismatch_entry(fr, int(y), int(x)) for y, x in zip(ys[:room], xs[:room]))
    return listed


# --------------------------------------------------------------------------- verdict


def _early_verdict(
    expected: Sequence[ExpectedFrame], capture: Capture, pixels_expected: int, base: dict[str, Any]
) -> Verdict | None:
    """The verdict of a run that cannot be scored pixel by pixel: it failed, or nothing came out."""
    facts = capture.facts
    if facts.error:
        msg = f"the run failed before it could be scored: {facts.error}"
        return Verdict(
            passed=False,
            status="error",
            timing_errors=[msg],
            findings=[Finding("timing", msg, {"error": str(facts.error)}, 1.0)],
            **base,
        )
    if len(capture) == 0:
        timed = facts.timed_out
        clocks = facts.stop_clocks
        why = f"the run timed out after {clocks} clocks" if timed else "the run ended"
        msg = f"no output: 0 of {pixels_expected} pixels arrived ({why}); check output data-enable/valid and reset"
        evidence = {"pixels_arrived": 0, "pixels_expected": pixels_expected}
        finding = Finding("missing", msg, evidence, 1.0)
        xzc = list(facts.xz_control or [])
        if xzc:  # an X/Z control is read as low: it is why nothing came out
            clock, role = xzc[0][0], xzc[0][1]
            many = "+" if len(xzc) >= MAX_EVENTS else ""
            msg = (f"no output: 0 of {pixels_expected} pixels arrived: control output {role} held X/Z on "
                   f"{len(xzc)}{many} clock(s) (read as low), first at clock {clock}; reset every output control "
                   "register (data-enable, valid, syncs)")
            events = [list(e) for e in xzc[:EVIDENCE_ITEMS]]
            finding = Finding("xz", msg, {**evidence, "category": "xz_control", "events": events, "count": len(xzc)}, 1.0)
        return Verdict(
            passed=False,
            status="no_output",
            timing_errors=[msg],
            findings=[finding],
            missing_pixels=pixels_expected,
            mismatches=pixels_expected,
            frames_checked=len(expected),
            pixels_checked=int(sum(np.asarray(e.valid_mask, bool).sum() for e in expected)),
            **base,
        )
    return None


def _implemented(
    failing: bool, measured_latency: int | None, border: BorderInference | None
) -> dict[str, Any]:
    """What the design really does, on a failing run: the measured latency and the inferred border."""
    implemented: dict[str, Any] = {}
    if failing:
        implemented["latency_clocks"] = measured_latency
        if border is not None:
            implemented["border"] = border.to_dict()
    return implemented


def _final_verdict(
    frames: list[FrameResult],
    issues: list[TimingIssue],
    extra: int,
    offset: Offset | None,
    details: dict[str, Any],
    base: dict[str, Any],
) -> Verdict:
    """The verdict over every compared frame; ``details`` holds ``first_mismatches``, ``findings`` and
    ``implemented`` (the last two are kept only when the run failed)."""
    per_frame = [fr.summary() for fr in frames]
    mism = sum(c["mismatches"] for c in per_frame)
    passed = mism == 0 and not issues
    return Verdict(
        passed=passed,
        status="pass" if passed else "fail",
        frames_checked=len(frames),
        pixels_checked=sum(c["pixels_checked"] for c in per_frame),
        mismatches=mism,
        value_mismatches=sum(c["value_mismatches"] for c in per_frame),
        xz_pixels=sum(c["xz_pixels"] for c in per_frame),
        missing_pixels=sum(c["missing_pixels"] for c in per_frame),
        extra_pixels=extra,
        max_abs_error=max((c["max_abs_error"] for c in per_frame), default=0),
        first_mismatches=details["first_mismatches"],
        offset=(offset.dx, offset.dy) if offset is not None else (0, 0),
        offset_detail=offset,
        timing_errors=[i.message for i in issues],
        findings=details["findings"] if not passed else [],
        per_frame=per_frame,
        implemented=details["implemented"] if not passed else {},
        frames=frames,
        **base,
    )


def score(
    expected: Sequence[ExpectedFrame],
    capture: Capture,
    *,
    tolerance_lsb: int = 0,
    declared_latency_clocks: int | None = None,
    latency_tolerance_clocks: int = 0,
    align: str = "exact",
    accept_offset: bool = False,
    max_listed: int = 20,
    stall_pixels: Sequence[Sequence[int]] | None = None,
    spec: BorderSpec | None = None,
    images: Sequence[np.ndarray] | None = None,
    run_model: ModelRunner | None = None,
    settle: ControlSettle | None = None,
    declared_latency_samples: int | None = None,
    keep_passing: bool = True,
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
            ``capture.facts.stall_pixels`` when omitted.
        spec: the pipeline spec; with ``images`` it lets the diagnosis name the border policy the
            design implements (optional).
        images: the input images, one per frame (optional, see ``spec``).
        run_model: model runner for the border inference; :func:`vkit.model.exact.run_model` by default.
        settle: from when output controls are judged (:class:`~vkit.check.settle.ControlSettle`); None: from
            the first output pixel, output sync activity the input cannot have caused before it is reset fill
            (left out of the pulse counts, with a warning).
        declared_latency_samples: latency the design claims in input samples (enabled input clocks); checked
            exactly against ``capture.facts.latency_samples``.
        keep_passing: keep every frame's arrays in ``Verdict.frames``; False: on a passing run each frame keeps
            its counts only (:meth:`FrameResult.counts_only`; frames are compared one at a time, so memory holds
            one frame's arrays whatever the frame count). A failing run keeps every frame's arrays either way.

    Returns:
        A :class:`Verdict`.
    """
    _check_options(align, tolerance_lsb, latency_tolerance_clocks)
    shapes = _check_expected(expected)
    judged, warning = settled_facts(capture.facts, settle)
    if judged is not capture.facts:
        capture = capture.with_facts(judged)
    measured_latency = latency_clocks(capture)
    base = dict(
        frames_expected=len(shapes), frames_out=capture.frame_count, pixels_arrived=len(capture),
        pixels_expected=int(sum(h * w for h, w in shapes)), latency_clocks=measured_latency,
        declared_latency_clocks=declared_latency_clocks, tolerance_lsb=tolerance_lsb, align=align,
        latency_samples=capture.facts.latency_samples, declared_latency_samples=declared_latency_samples,
        warnings=[warning] if warning else [],
    )
    early = _early_verdict(expected, capture, base["pixels_expected"], base)
    if early is not None:
        return early
    options = _Options(
        tolerance_lsb=tolerance_lsb, latency=(declared_latency_clocks, measured_latency, latency_tolerance_clocks),
        align=align, accept_offset=accept_offset, max_listed=max_listed,
        stall_pixels=stall_pixels, spec=spec, images=images, run_model=run_model, keep_passing=keep_passing,
    )
    return _score_frames(expected, capture, shapes, options, base)


@dataclass(frozen=True)
class _Options:
    """The keyword arguments of :func:`score` that the steps after the early verdict read."""

    tolerance_lsb: int
    latency: tuple[int | None, int | None, int]
    """``(declared, measured, tolerance)``, clocks."""
    align: str
    accept_offset: bool
    max_listed: int
    stall_pixels: Sequence[Sequence[int]] | None
    spec: BorderSpec | None
    images: Sequence[np.ndarray] | None
    run_model: ModelRunner | None
    keep_passing: bool = True


def _score_frames(
    expected: Sequence[ExpectedFrame],
    capture: Capture,
    shapes: list[tuple[int, int]],
    options: _Options,
    base: dict[str, Any],
) -> Verdict:
    """Timing issues, offset, every frame compared, the diagnosis and the verdict of a run with output."""
    views = _Views(capture, shapes)
    issues, extra = _timing_issues(capture, shapes, options.latency)
    sample_issue = _sample_latency_issue(base["declared_latency_samples"], base["latency_samples"])
    if sample_issue is not None:
        issues.append(sample_issue)
    offset = _auto_offset(expected, views) if options.align == "auto" else None
    frames = _compare_all(expected, views, shapes, options, offset, bool(issues))
    if options.align == "exact":
        offset = _exact_offset(frames, views)
    elif offset is not None and not offset.is_zero and not options.accept_offset:
        issues.append(TimingIssue(
            "offset",
            f"output is offset from the expected frame ({offset.describe()}); undone before comparing (align='auto')",
            offset.to_dict(),
        ))
    failing = bool(issues) or any(fr.failed for fr in frames)
    border = None
    if failing and options.spec is not None and options.images is not None:
        border = infer_border(options.spec, options.images, capture, run_model=options.run_model)
    details = {
        "first_mismatches": _first_mismatches(frames, options.max_listed),
        "findings": _diagnosis(frames, capture, issues, offset, border, options) if failing else [],  # kept only then
        "implemented": _implemented(failing, options.latency[1], border),
    }
    return _final_verdict(frames, issues, extra, offset, details, base)


def _diagnosis(
    frames: list[FrameResult],
    capture: Capture,
    issues: list[TimingIssue],
    offset: Offset | None,
    border: BorderInference | None,
    options: _Options,
) -> list[Finding]:
    """:func:`vkit.check.diagnose.diagnose` with what the scoreboard found."""
    facts = capture.facts
    stall_pixels = options.stall_pixels
    return diagnose(
        frames,
        facts=facts,
        timing=issues,
        offset=offset if options.align == "exact" else None,
        applied_offset=offset if options.align == "auto" else None,
        stall_pixels=(facts.stall_pixels or []) if stall_pixels is None else stall_pixels,
        backpressure_pixels=facts.backpressure_pixels or [],
        border=border,
        tolerance_lsb=options.tolerance_lsb,
        capture=capture,
    )
