"""The passive scoreboard: frames rebuilt from a design's observed input and output, scored as they complete.

Nothing is driven: the input frames are whatever the testbench (a camera model, the previous stage of a
pipeline, an old waveform dump) sent. Each input frame is run through the bit-exact model as soon as it is
closed, paired with the output frame of the same number, scored by :func:`~vkit.check.scoreboard.score`,
and dropped: a run of hundreds of frames holds one or two frames at a time, plus the arrays of the first
few failing frames for the report.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from vkit.check.results import Finding, Verdict
from vkit.check.scoreboard import score
from vkit.core.errors import ConfigError
from vkit.model.pipeline import ModelResult, PipelineSpec, run_model
from vkit.video.bus import BusLayout
from vkit.video.capture import MAX_EVENTS, Capture, RunFacts
from vkit.video.observe import FramePixels, FrameRebuilder, Levels
from vkit.video.timing import VideoTiming
from vkit.video.words import samples_between, sync_counts

__all__ = ["FirstFrame", "DeclaredLatency", "PassiveOptions", "FrameScore", "PassiveScoreboard"]


@dataclass(frozen=True)
class FirstFrame:
    """What the latency a design declares depends on, as observed on the first frame watched.

    Attributes:
        width: pixels a line of the input frame.
        height: lines of the input frame.
        steady: no stall inside the input frame (an idle wait before its first pixel is none) and no
            back-pressure on its output: a run the declared latency holds for.
        every_clock: every input clock from the frame's first pixel to its first output pixel was enabled (no
            clock enable mapped, or one held high): a latency in clocks is then declared as well as in samples.
    """

    width: int
    height: int
    steady: bool
    every_clock: bool


DeclaredLatency = Callable[[FirstFrame], "tuple[int | None, int | None]"]
"""The latency a design declares for the first frame watched: ``(clocks, input samples)``, each None when it
declares none there (the driven run's rule, :meth:`vkit.run.config.DesignConfig.declared_latency_clocks`)."""


@dataclass(frozen=True)
class PassiveOptions:
    """How the passive scoreboard judges.

    Attributes:
        tolerance_lsb: largest accepted ``|actual - expected|``, LSB.
        align: ``"exact"`` or ``"auto"`` (as :func:`~vkit.check.scoreboard.score`).
        max_listed: failing pixels listed in the verdict.
        keep_failing: failing frames whose arrays are kept for the pictures (the rest keep their counts).
        vsync_active_high: polarity of the input and output vsync (video family) when ``active_high`` does not
            name them.
        active_high: side role (``"in_de"``, ``"out_vsync"``, ...) -> True when the design's pin is active high
            (the config's ``port_polarity``); roles left out are active high.
        out_data_bits: width of the output data word, bits (needed to split it into lanes).
        timing: the video timing the run should follow (in pixels), or None: each input frame's active size and
            the hsync pulses of every vsync period on both sides (from the second frame on) are checked against it.
        declared_latency: the latency the design declares, or None: checked on the first frame watched (its
            latency in clocks and in input samples), as a driven run checks its first frame's.
    """

    tolerance_lsb: int = 0
    align: str = "exact"
    max_listed: int = 20
    keep_failing: int = 4
    vsync_active_high: bool = True
    active_high: tuple[tuple[str, bool], ...] = ()
    out_data_bits: int | None = None
    timing: VideoTiming | None = None
    declared_latency: DeclaredLatency | None = None

    def side_polarity(self, side: str) -> dict[str, bool]:
        """Role (without the side prefix) -> active high, for ``side`` ("in" or "out")."""
        given = dict(self.active_high)
        out = {"vsync": self.vsync_active_high, "hsync": self.vsync_active_high}
        out.update({role.split("_", 1)[1]: high for role, high in given.items() if role.startswith(side + "_")})
        return out


@dataclass
class FrameScore:
    """The verdict of one frame, numbered as it arrived."""

    index: int
    shape: tuple[int, int]
    verdict: Verdict
    image: np.ndarray
    expected: ModelResult

    @property
    def passed(self) -> bool:
        """True when the frame matched the model and its timing was clean."""
        return self.verdict.passed


def _renumber(value: Any, index: int) -> Any:
    """A per-frame verdict's text and evidence with frame 0 read as frame ``index``."""
    if isinstance(value, str):
        return re.sub(r"\bframe 0\b", f"frame {index}", value)
    if isinstance(value, dict):
        return {k: (index if k == "frame" and v == 0 else _renumber(v, index)) for k, v in value.items()}
    if isinstance(value, list):
        return [_renumber(v, index) for v in value]
    return value


def _renumbered(v: Verdict, index: int) -> Verdict:
    """Verdict ``v`` of a frame scored alone (as frame 0) with its frame number put back."""
    if index == 0:
        return v
    for fr in v.frames:
        fr.index = index
    return replace(
        v, first_mismatches=_renumber(v.first_mismatches, index), timing_errors=_renumber(v.timing_errors, index),
        findings=[Finding(f.kind, _renumber(f.message, index), _renumber(f.evidence, index), f.confidence)
                  for f in v.findings],
        per_frame=_renumber(v.per_frame, index),
    )


@dataclass
class _Totals:
    """What the run's verdict adds up over every frame scored (bounded lists)."""

    scores: list[FrameScore] = field(default_factory=list)
    """The failing frames kept with their arrays (at most ``keep_failing``)."""
    first: Verdict | None = None
    first_failing: Verdict | None = None
    first_failing_index: int | None = None
    frames: int = 0
    failing: int = 0
    per_frame: list[dict[str, int]] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)
    max_abs_error: int = 0
    first_mismatches: list[dict[str, Any]] = field(default_factory=list)
    timing_errors: list[str] = field(default_factory=list)


_TIMING_CONFIDENCE = 0.9
"""Confidence of a finding that the observed syncs or frame size break the given timing (a measured fact, ranked
with the scoreboard's own sync-count findings)."""


def _against_timing(t: VideoTiming, frame: FramePixels, out: FramePixels | None, first: bool) -> list[Finding]:
    """What one frame breaks of timing ``t``: the input's active size; the hsync pulses of its vsync period on
    each side (``v_total`` lines), skipped on the first frame, whose period began before watching did."""
    found: list[Finding] = []
    if frame.shape is not None and frame.shape != (t.v_active, t.h_active):
        found.append(Finding("timing", f"frame 0: input frame is {frame.shape[1]}x{frame.shape[0]}, the timing "
                             f"{t.name or ''} is {t.h_active}x{t.v_active}: check the stimulus or the timing given",
                             {"category": "timing_size", "seen": list(frame.shape[::-1]),
                              "expected": [t.h_active, t.v_active]}, _TIMING_CONFIDENCE))
    for side, fp in (("input", frame), ("output", out)):
        if first or fp is None or fp.hsync_clocks is None or not fp.vsync_clocks:
            continue
        lines = sync_counts(np.asarray(fp.hsync_clocks, np.int64), np.asarray(fp.vsync_clocks, np.int64))[-1]
        if lines != t.v_total:
            found.append(Finding("timing", f"frame 0: {lines} {side} hsync pulses in the vsync period, the timing "
                                 f"{t.name or ''} has {t.v_total} lines: {side} hsync must pulse once a line",
                                 {"category": "timing_lines", "side": side, "seen": lines, "expected": t.v_total},
                                 _TIMING_CONFIDENCE))
    return found


def _with_timing_findings(verdict: Verdict, found: list[Finding]) -> Verdict:
    """``verdict`` failed by the timing findings ``found`` (unchanged when there are none)."""
    if not found:
        return verdict
    findings = sorted([*found, *verdict.findings], key=lambda f: -f.confidence)
    return replace(verdict, passed=False, status="fail" if verdict.passed else verdict.status,
                   timing_errors=[*verdict.timing_errors, *(f.message.rsplit(": ", 1)[0] for f in found)],
                   findings=findings)


def _sync_facts(side: str, frame: FramePixels) -> dict[str, Any]:
    """The sync facts of one side of one frame, named as the driven run names them (``input_vsync_count``,
    ``output_hsync_per_frame``, ...): the leading edges of the frame's span, counted by
    :func:`~vkit.video.words.sync_counts` as the monitors count them."""
    vs, hs = frame.vsync_clocks, frame.hsync_clocks
    if vs is None:  # a side without vsync: nothing counted, as the monitor counts nothing there
        return {}
    out: dict[str, Any] = {f"{side}_vsync_count": len(vs)}
    if hs is not None:
        out[f"{side}_hsync_per_frame"] = sync_counts(np.asarray(hs, np.int64), np.asarray(vs, np.int64))
    if side == "input":
        out["input_first_vsync_clock"] = vs[0] if vs else None
        out["input_first_hsync_clock"] = hs[0] if hs else None
    else:
        out["output_vsync_clocks"], out["output_hsync_clocks"] = list(vs), list(hs or [])
    return out


@dataclass
class _Opening:
    """The first frames of the run, kept whole (input image, model result, output capture, facts) so the run's
    diagnosis can score them together, as a driven run of those frames scores them."""

    images: list[np.ndarray] = field(default_factory=list)
    expected: list[ModelResult] = field(default_factory=list)
    captures: list[Capture] = field(default_factory=list)
    facts: list[RunFacts] = field(default_factory=list)
    broken: list[Finding] = field(default_factory=list)
    """What those frames break of the given timing (found per frame, added to the joint verdict)."""
    verdict: Verdict | None = None
    released: bool = False
    """True once the opening frames all passed: nothing is kept from then on (memory stays flat)."""


def _joint_facts(parts: list[RunFacts]) -> RunFacts:
    """The facts of several frames scored as one run: the first frame's clocks, frame-numbered stalls, sync
    counts added up, per-frame lists joined (hsync counts only when every frame compares them)."""
    first = parts[0]
    facts = replace(first, frames_sent=len(parts), notes=list(first.notes))
    facts.stall_pixels = [[k, y, x] for k, f in enumerate(parts) for _, y, x in f.stall_pixels]
    facts.backpressure_pixels = [[k, y, x] for k, f in enumerate(parts) for _, y, x in f.backpressure_pixels]
    facts.xz_control = [e for f in parts for e in f.xz_control][:MAX_EVENTS]
    facts.de_in_blanking = [c for f in parts for c in f.de_in_blanking][:MAX_EVENTS]
    for side in ("input", "output"):
        counts = [getattr(f, f"{side}_vsync_count") for f in parts]
        setattr(facts, f"{side}_vsync_count", None if None in counts else sum(counts))
        per_frame = [getattr(f, f"{side}_hsync_per_frame") for f in parts]
        setattr(facts, f"{side}_hsync_per_frame", None if None in per_frame else [n for p in per_frame for n in p])
    for key in ("output_vsync_clocks", "output_hsync_clocks"):
        lists = [getattr(f, key) for f in parts]
        setattr(facts, key, None if None in lists else [c for p in lists for c in p])
    return facts


def _joint_capture(parts: list[Capture], facts: RunFacts) -> Capture:
    """One-frame captures joined into one run's capture, part ``k`` as frame ``k``."""
    def joined(key: str) -> np.ndarray:
        return np.concatenate([getattr(c, key) for c in parts])

    frames = np.concatenate([np.full(len(c), k, np.int64) for k, c in enumerate(parts)])
    return Capture(joined("values"), joined("clock"), frames, joined("line"), joined("column"), facts)


_MAX_PENDING = 4
"""Closed input frames held while no output frame has come out at all; past that a dead design's frames are
scored as missing rather than held (memory stays flat)."""

_SUMMED = ("pixels_checked", "mismatches", "value_mismatches", "xz_pixels", "missing_pixels", "extra_pixels",
           "pixels_arrived", "pixels_expected", "frames_out")


class PassiveScoreboard:
    """Pairs observed input and output frames, runs the model on each input frame and scores the pair.

    Args:
        spec: the pipeline spec the design implements.
        family: "video" or "stream".
        bus: the input bus's layout (:class:`~vkit.video.bus.BusLayout`: pixel format, component order,
            pixels a clock, lane order), or a pixel format name for one pixel a clock.
        options: :class:`PassiveOptions`.
    """

    def __init__(self, spec: PipelineSpec, family: str, bus: BusLayout | str, options: PassiveOptions | None = None) -> None:
        self.spec = spec
        self.family = family
        self.bus = BusLayout.of(bus)
        self.pixel_format = self.bus.pixel_format
        self.options = options or PassiveOptions()
        self._polarity = {side: self.options.side_polarity(side) for side in ("in", "out")}
        self.inputs = FrameRebuilder(family, output=False)
        self._heights: dict[int, int] = {}
        """Lines of each input frame not yet paired: where an output without vsync ends its frames."""
        self.outputs = FrameRebuilder(family, output=True, lines_per_frame=self._heights.get)
        self._in: list[FramePixels] = []
        self._out: list[FramePixels] = []
        self._t = _Totals()
        self._last_shape: tuple[int, int] | None = None
        self._opening = _Opening()
        self._enables: list[tuple[int, np.ndarray]] | None = []
        """The input clock enable of every clock until the first frame is scored (its latency in samples)."""
        self._declared: tuple[int | None, int | None] = (None, None)
        """The declared latency checked on the first frame: (clocks, samples)."""
        self.problems: list[str] = []
        """One line per frame that could not be scored (an input frame with ragged lines, a run that ended
        mid-frame)."""

    # -- feeding --------------------------------------------------------------------------------------

    def feed(self, inputs: Levels, outputs: Levels) -> list[FrameScore]:
        """Take the next chunk of input and output levels (the same clocks); the frames it completed, scored."""
        inputs = inputs.asserted(self._polarity["in"])
        if self._enables is not None and "enable" in inputs.roles:
            self._enables.append((inputs.first_clock, inputs.roles["enable"] == 1))
        closed = self.inputs.feed(inputs)
        self._in.extend(closed)
        for frame in closed:
            self._heights[frame.index] = len(frame.line_lengths)
        for old in [k for k in self._heights if k < self.outputs.frames_out - 1]:
            del self._heights[old]
        self._out.extend(self.outputs.feed(outputs.asserted(self._polarity["out"])))
        return self._pair()

    def finish(self) -> list[FrameScore]:
        """The run ended: score what is complete of the frames still open; name the rest in :attr:`problems`."""
        for rebuilder, queue in ((self.inputs, self._in), (self.outputs, self._out)):
            last = rebuilder.finish()
            if last is not None:
                queue.append(last)
        done = self._pair(final=True)
        if self._in:
            frame = self._in[0]
            self.problems.append(f"input frame {frame.index}: the run ended before it was complete "
                                 f"({len(frame.line_lengths)} line(s) in, {len(self._in)} frame(s) not scored)")
        elif self._t.frames == 0 and not self.problems:
            self.problems.append("no complete input frame was seen; check the input signal paths, the clock and "
                                 "the reset polarity")
        return done

    @staticmethod
    def _ended_whole(frame: FramePixels, height: int | None) -> bool:
        """A frame still open when the run ended is whole when its last line ended and it has ``height`` lines."""
        return bool(frame.closed or (height and frame.line_ended and len(frame.line_lengths) >= height))

    def _pair(self, final: bool = False) -> list[FrameScore]:
        """Score every input frame whose output frame is complete (at the end: whatever is whole)."""
        done: list[FrameScore] = []
        while self._in:
            frame = self._in[0]
            out = self._out[0] if self._out else None
            height = frame.shape[0] if frame.shape else None
            if not final:
                dead = out is None and self.outputs.frames_out == 0 and len(self._in) > _MAX_PENDING
                if not (frame.closed and ((out is not None and out.closed) or dead)):
                    break
            else:
                # a last input frame nothing closed: whole when its output came out with as many lines
                lines_out = len(out.line_lengths) if out is not None and self._ended_whole(out, height) else None
                if not frame.closed and not (frame.line_ended and (lines_out == len(frame.line_lengths) or
                                                                   (out is None and self.outputs.frames_out == 0))):
                    break
                if out is None and self.outputs.frames_out > 0:
                    break  # the run ended before this frame's output: named by finish()
                if out is not None and not self._ended_whole(out, height):
                    self.problems.append(f"output frame {out.index}: the run ended mid-frame "
                                         f"({len(out.line_lengths)} line(s) out); it is not scored")
                    del self._in[0], self._out[0]
                    continue
            del self._in[0]
            if out is not None:
                del self._out[0]
            scored = self._score(frame, out)
            if scored is not None:
                done.append(scored)
        return done

    # -- scoring --------------------------------------------------------------------------------------

    def _facts(self, frame: FramePixels, out: FramePixels | None) -> RunFacts:
        """The run facts of one frame, as a driven run records them for its frames: first clocks, stalls,
        sync leading edges and counts, X/Z controls, data-enable in blanking."""
        lanes = self.bus.lanes
        facts = RunFacts(family=self.family, frames_sent=1, first_input_clock=int(frame.clocks[0]),
                         pixels_per_clock=lanes if lanes > 1 else None, out_data_bits=self.options.out_data_bits)
        facts.stall_pixels = [[0, y, x * lanes] for y, x in frame.held]
        if self.family == "video":
            facts.update(_sync_facts("input", frame))
        if out is not None:
            facts.first_output_clock = int(out.clocks[0])
            facts.latency_clocks = facts.first_output_clock - facts.first_input_clock
            facts.latency_samples = self._samples_between(facts.first_input_clock, facts.first_output_clock)
            facts.backpressure_pixels = [[0, y, x] for y, x in out.held]
            facts.xz_control = [list(e) for e in out.events.get("xz_control", [])]
            facts.de_in_blanking = list(out.events.get("de_in_blanking", []))
            if self.family == "video":
                facts.update(_sync_facts("output", out))
            if frame.shape != self._last_shape:
                # hsync counts per vsync period are compared from the second frame of one size on: after a size
                # change (or at the start of a run watched from any point, maybe inside vertical blanking) a
                # design's sync delays settle, and an hsync pulse near the vsync edge may fall on either side
                facts.input_hsync_per_frame = facts.output_hsync_per_frame = None
            facts.notes.append("passive: input frames rebuilt from the observed input interface")
        return facts

    def _score(self, frame: FramePixels, out: FramePixels | None) -> FrameScore | None:
        """Score one input frame against its output frame (None: nothing came out)."""
        try:
            image = frame.image(self.bus)
        except ConfigError as exc:
            self.problems.append(str(exc))
            self._enables = None  # no first frame to measure: the enable is not kept on
            return None
        expected = run_model(self.spec, image)
        facts = self._facts(frame, out)
        self._last_shape = frame.shape
        empty = FramePixels(0, *(np.zeros(0, np.int64) for _ in range(4)), closed=True, line_ended=True)
        bits = self.options.out_data_bits
        capture = (out or empty).pixels(self.bus, bits, facts) if bits else (out or empty).capture(facts)
        o = self.options
        if frame.index == 0:
            self._declared = self._declared_latency(frame, out, image.shape[:2])
            self._enables = None  # the first frame's latency is measured: the enable is no longer kept
        clocks, samples = self._declared if frame.index == 0 else (None, None)
        verdict = score([expected], capture, tolerance_lsb=o.tolerance_lsb, align=o.align, max_listed=o.max_listed,
                        spec=self.spec, images=[image], declared_latency_clocks=clocks, declared_latency_samples=samples)
        broken: list[Finding] = []
        if o.timing is not None and self.family == "video":
            broken = _against_timing(o.timing, frame, out, frame.index == 0)
            verdict = _with_timing_findings(verdict, broken)
        result = FrameScore(frame.index, image.shape[:2], _renumbered(verdict, frame.index), image, expected)
        self._keep_opening(frame.index, image, expected, capture, facts, out is not None)
        if frame.index < len(self._opening.images):
            self._opening.broken.extend(Finding(f.kind, _renumber(f.message, frame.index), f.evidence, f.confidence)
                                        for f in broken)
        self._add(result)
        if self._t.first_failing is None and frame.index + 1 >= self.options.keep_failing:
            self._opening = _Opening(released=True)  # no failure among the first frames: their arrays go
        return result

    def _samples_between(self, first: int, last: int) -> int | None:
        """Enabled input clocks in ``[first, last)`` (:func:`~vkit.video.words.samples_between`): every clock
        without a clock enable; None with one once the first frame is scored (its enable is no longer kept)."""
        if self._enables is None:
            return None
        if not self._enables:
            return samples_between(None, first, last)
        base = self._enables[0][0]
        enable = np.concatenate([e for _, e in self._enables])
        return samples_between(enable, first - base, last - base)

    def _declared_latency(self, frame: FramePixels, out: FramePixels | None,
                          shape: tuple[int, ...]) -> tuple[int | None, int | None]:
        """The latency the design declares for the first frame, ``(clocks, samples)``, as the driven run takes it
        for its case: only on a steady frame, in clocks only where every input clock was enabled."""
        declared = self.options.declared_latency
        if declared is None or out is None:
            return None, None
        # a stream source idles before a frame's first beat; that wait is no stall (common practice, no source)
        stalls = [h for h in frame.held if not (self.family == "stream" and h == [0, 0])]
        first, last = int(frame.clocks[0]), int(out.clocks[0])
        every = self._samples_between(first, last) == last - first
        seen = FirstFrame(width=int(shape[1]), height=int(shape[0]), steady=not stalls and not out.held,
                          every_clock=every)
        clocks, samples = declared(seen)
        return (clocks if every else None), samples

    def _keep_opening(self, index: int, image: np.ndarray, expected: ModelResult, capture: Capture, facts: RunFacts,
                      has_output: bool) -> None:
        """Keep the run's first frames whole (``keep_failing`` at most, numbered from 0 without a gap)."""
        o = self._opening
        if o.released or index != len(o.images) or len(o.images) >= self.options.keep_failing or not has_output:
            return
        o.images.append(image)
        o.expected.append(expected)
        o.captures.append(capture)
        o.facts.append(facts)

    def _opening_verdict(self) -> Verdict | None:
        """The first frames scored together as one run, when they hold the first failing frame (else None)."""
        o, at = self._opening, self._t.first_failing_index
        if at is None or at >= len(o.images):
            return None
        if o.verdict is None:
            capture = _joint_capture(o.captures, _joint_facts(o.facts))
            opt = self.options
            o.verdict = _with_timing_findings(
                score(o.expected, capture, tolerance_lsb=opt.tolerance_lsb, align=opt.align, max_listed=opt.max_listed,
                      spec=self.spec, images=o.images, declared_latency_clocks=self._declared[0],
                      declared_latency_samples=self._declared[1]), o.broken)
        return o.verdict

    def _add(self, fs: FrameScore) -> None:
        t, v = self._t, fs.verdict
        t.frames += 1
        t.first = t.first or v
        for key in _SUMMED:
            t.counts[key] = t.counts.get(key, 0) + int(getattr(v, key))
        t.max_abs_error = max(t.max_abs_error, v.max_abs_error)
        t.per_frame.extend(v.per_frame)
        if v.passed:
            return
        t.failing += 1
        if t.first_failing is None:
            t.first_failing, t.first_failing_index = v, fs.index
        room = self.options.max_listed - len(t.first_mismatches)
        t.first_mismatches.extend(v.first_mismatches[:max(0, room)])
        t.timing_errors.extend(v.timing_errors[:max(0, self.options.max_listed - len(t.timing_errors))])
        if len(t.scores) < self.options.keep_failing:
            t.scores.append(fs)

    # -- the run ----------------------------------------------------------------------------------------

    @property
    def frames_scored(self) -> int:
        """Frames scored so far."""
        return self._t.frames

    @property
    def frames_failing(self) -> int:
        """Frames that failed so far."""
        return self._t.failing

    @property
    def kept(self) -> list[FrameScore]:
        """The failing frames kept with their arrays (the first ``keep_failing``)."""
        return list(self._t.scores)

    def summary(self) -> str:
        """One line: frames scored, failing, and the first failure's diagnosis."""
        t = self._t
        text = f"{t.frames} frame(s) scored, {t.failing} failing"
        if t.first_failing is not None and t.first_failing.diagnosis is not None:
            d = t.first_failing.diagnosis
            text += f"; first failure: {d.kind}: {d.message}"
        return text

    def verdict(self) -> Verdict:
        """The run's verdict over every frame scored: counts added up, the first failing frame's diagnosis."""
        t = self._t
        if t.frames == 0:
            reason = "; ".join(self.problems) or "no frame was complete on both sides"
            return Verdict(passed=False, status="error", timing_errors=[f"nothing was scored: {reason}"],
                           findings=[Finding("timing", f"nothing was scored: {reason}", {}, 1.0)])
        head = self._opening_verdict() or t.first_failing or t.first
        assert head is not None and t.first is not None
        failing = t.first_failing is not None
        return replace(
            head, passed=not failing, status=head.status if failing else "pass", frames_checked=t.frames,
            frames_expected=t.frames, max_abs_error=t.max_abs_error, first_mismatches=list(t.first_mismatches),
            timing_errors=list(t.timing_errors), per_frame=list(t.per_frame),
            frames=[fr for s in t.scores for fr in s.verdict.frames], latency_clocks=t.first.latency_clocks,
            **t.counts,
        )
