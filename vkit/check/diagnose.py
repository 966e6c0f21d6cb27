"""Failure patterns: names what went wrong in a failing run from its mismatch masks, frames and stage arrays."""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np

from vkit.check.align import shift_back
from vkit.check.results import (
    EVIDENCE_ITEMS,
    KINDS,
    BorderInference,
    Finding,
    FrameResult,
    Offset,
    StageValues,
    TimingIssue,
)
from vkit.video.capture import UNKNOWN, Capture, RunFacts

__all__ = ["KINDS", "Finding", "TimingIssue", "SlipEvent", "diagnose", "slip_events"]

_SIGNIFICANT_LOG_P = math.log(1e-4)
"""A region pattern must be this unlikely (log probability) under 'mismatches fall anywhere'."""
_COINCIDENT_LOG_P = math.log(1e-2)
"""Pixel slips (a rare pattern already) are tied to stalls when their coincidence is this unlikely by chance."""
_ALIGN_MAX_PIXELS = 8192
"""Expected pixels (raster order, from the first frame) the slip aligner looks at; bounds its cost."""
_SLIP_COLUMNS = (-2, 0)
"""A slip at output column x is tied to an input stall at column xs when x - xs lies in this range
(output centre x - 1 leaves when input pixel x is taken; equal neighbour values move the slip by one)."""

_MIN_TELLING_PIXELS = 3
"""Fewest cases (pixels of a shifted line, wrong pixels of a region, wrong-length lines) that can show a
pattern: one or two fit any explanation."""
_MATCH_SHARE = 0.9
"""A line matches another (shifted) line when this share of its known pixels agree: a few wrong values
on top of a slip do not hide it."""
_EXPLAINED_SHARE = 0.8
"""A pattern is named only when it explains at least this share of the failures it is about (lines,
mismatches, slips)."""
_REGION_MAX_SHARE = 0.5
"""A region holding more than half of the checked pixels is the picture, not a place where faults gather."""
_WRAPPED_SHARE = 0.8
"""Share of wrong values that must look wrapped or saturated before an overflow is named."""
_TOP_MIN_PRECISION = 0.5
"""At least half of the pixels above an overflow threshold must be wrong."""
_WRAP_PRECISION = 0.9
"""A wrap is deterministic: nearly every pixel past a register bound comes out wrong."""
_PRECISION_BONUS = 0.2
"""An overflow region at 80% precision still counts with full confidence (some pixels past the bound
wrap onto the right value by chance)."""
_MIN_LEVELS = 3
"""Fewest distinct stage values for a threshold to mean a bound (a two-level picture only has bright and dark)."""
_WRAP_MIN_BITS = 4
"""Narrowest register whose wrap is named (bounds 2, 4, 8 are too common among small values to tell)."""
_HIGH_RANGE = 0.25
"""Without a register bound, an overflow threshold must lie in the top three quarters of the stage's range."""
_FAR_ERROR_DIVISOR = 4
"""An error of a quarter of the output range or more counts as wrapped (far off, not rounding)."""
_DEFAULT_OUTPUT_RANGE = (0, 255)
"""Output range assumed when the model gave no ``output`` stage: 8-bit pixels."""
_MIN_DE_WIDTH = 4
"""Narrowest line on which a data-enable one clock off can be told from a wrong value."""
_DE_CONFIDENCE = 0.99
"""Confidence of a pattern matched line by line or slip by slip (data-enable offset, slips at stalls)
that explains every case: such a match leaves little doubt."""
_SLIPS_TIED_SHARE = 0.5
"""At least half of the slips must start at a stall or back-pressure point to blame the stalls."""
_BACKPRESSURE_REACH = 3.0
"""Arrivals a back-pressure point covers (itself and one either side) when estimating the chance a slip lands there."""
_BLURRED_SPAN = 2
"""A slip whose place spans more than this many extra columns (equal neighbour values) is not named first."""
_LINES_NAMED = 6
"""Lines named in a one-line stall message."""
_OTHER_LINE_OFFSETS = range(-3, 6)
"""Line offsets tried against the true one (+1) when tying line lengths to input stalls."""
_OFFSET_MARGIN = 1.5
"""The true line offset must explain this many times more wrong lines than any other (plus one)."""
_MIN_BORDER_SIDE = 3
"""Smallest frame side with a border ring distinct from the interior, pixels."""
_MIN_REGION_MISMATCHES = 2
"""Fewest wrong pixels for a region (border ring, stall neighbourhood) to be judged."""
_BORDER_RECALL = 0.9
"""Share of mismatches that must sit on the border ring to blame the border handling."""
_SIDE_SHARE = 0.05
"""A frame side is named when it holds at least this share of the border mismatches."""
_STALL_REGION_RECALL = 0.7
"""Share of mismatches that must sit next to a stall or back-pressure point to blame the stalls."""
_ROUNDING_SHARE = 0.9
"""Share of wrong pixels that must be off by exactly one LSB past the tolerance to blame rounding."""
_ROUNDING_MAX_DENSITY = 0.5
"""A rounding fault touches half-way cases only; more than half of the pixels wrong is something else."""
_SHIFT_MIN_CONFIDENCE = 0.5
"""A measured offset is named only when it explains mismatches at least this well."""
_SEEN_CONFIDENCE = 0.99
"""Confidence of a fault seen directly on the output (X/Z pixels): not inferred."""
_MISSING_CONFIDENCE = 0.96
"""Confidence of missing pixels, times their share of the failures."""
_APPLIED_SHIFT_CONFIDENCE = 0.98
"""Confidence of an offset undone before comparing, times its match share."""
_STALL_NEAR_CONFIDENCE = 0.98
"""Confidence of line slips next to stalls, times how much they explain."""
_SLIP_ALONE_CONFIDENCE = 0.75
"""Confidence of line slips with no stall nearby: a handshake or counter fault, less sure."""
_ROUNDING_CONFIDENCE = 0.95
"""Confidence of a rounding fault, times how clean its pattern is."""
_TIMING_OTHER_CONFIDENCE = 0.85
"""Confidence of a timing issue with no entry in the action table."""
_SCATTERED_CONFIDENCE = 0.1
"""'scattered' only names the absence of a pattern: ranked below any pattern found."""


def _log_tail(k: int, n: int, p: float) -> float:
    """Chernoff bound on log P(X >= k) for X ~ Binomial(n, p); 0 when k/n <= p."""
    if n == 0 or k == 0:
        return 0.0
    q = k / n
    if q <= p:
        return 0.0
    if p <= 0.0:
        return -math.inf
    if q >= 1.0:
        return n * math.log(p)
    kl = q * math.log(q / p) + (1 - q) * math.log((1 - q) / (1 - p))
    return -n * kl


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def _pct(x: float) -> str:
    return f"{100.0 * x:.0f}%"


# --------------------------------------------------------------------------- timing, xz, missing


def _line_count_message(issue: TimingIssue, frames: Sequence[FrameResult]) -> tuple[str, dict[str, Any]]:
    """Explain a wrong line count: which line was dropped or repeated."""
    ev = dict(issue.evidence)
    f = int(ev.get("frame", 0))
    if f >= len(frames):
        return issue.message, ev
    fr = frames[f]
    h = fr.expected.shape[0]
    known = fr.present & ~fr.unknown & fr.valid
    rows_ok = known.any(axis=1)

    def row_match(ay: int, ey: int) -> float:
        m = known[ay] & fr.valid[ey]
        return float(np.mean(fr.actual[ay][m] == fr.expected[ey][m])) if m.any() else 0.0

    same = np.array([row_match(y, y) if rows_ok[y] else 0.0 for y in range(h)])
    lines = int(ev.get("lines", 0))
    bad_rows = np.flatnonzero((same < _MATCH_SHARE) & rows_ok)
    if lines < h:
        if bad_rows.size == 0:
            first_missing = int(np.flatnonzero(~rows_ok)[0]) if (~rows_ok).any() else lines
            ev["missing_from_line"] = first_missing
            return (
                f"{issue.message}: lines {first_missing}..{h - 1} never arrived; the last line(s) are not "
                "flushed (flush on the leading edge of vsync)",
                ev,
            )
        k = int(bad_rows[0])
        up = [row_match(y, y + 1) for y in range(k, h - 1) if rows_ok[y]]
        if up and np.mean(np.array(up) >= _MATCH_SHARE) >= _EXPLAINED_SHARE:
            ev["dropped_line"] = k
            return (
                f"{issue.message}: line {k} was dropped (output lines {k} on carry expected lines {k + 1} on); "
                "a line start is lost, e.g. hsync/data-enable edge missed after a stall or in the line buffer",
                ev,
            )
    elif lines > h and bad_rows.size:
        k = int(bad_rows[0])
        down = [row_match(y, y - 1) for y in range(max(k, 1), h) if rows_ok[y]]
        if down and np.mean(np.array(down) >= _MATCH_SHARE) >= _EXPLAINED_SHARE:
            ev["repeated_line"] = k - 1
            return (
                f"{issue.message}: line {k - 1} was emitted twice (output lines {k} on carry expected lines "
                f"{k - 1} on); the line buffer read pointer does not advance on that line",
                ev,
            )
    return issue.message, ev


_TIMING_ACTION = {
    "line_length": ("timing", 0.9, "line length wrong: count pixels per data-enable run; check the column counter and the stall handshake"),
    "line_count": ("timing", 0.97, ""),
    "frame_count": ("timing", 0.95, "frame count wrong: check vsync generation and the end-of-frame flush"),
    "de_in_blanking": ("timing", 0.95, "gate output data-enable with the active region; hold it low while vsync is active"),
    "vsync": ("timing", 0.9, "output vsync must follow input vsync one pulse per frame"),
    "hsync": ("timing", 0.88, "output hsync must follow input hsync one pulse per line"),
    "xz_control": ("xz", 0.99, "reset every output control register (data-enable, valid, syncs)"),
    "stuck_line_delimiter": ("timing", 0.985, ""),
    "latency": ("timing", 0.93, "update the declared latency or fix the pipeline depth"),
    "extra": ("timing", 0.8, "the design emits more pixels than the frame holds"),
    "timeout": ("missing", 0.7, "the design stopped emitting before the frame was complete"),
}


def _timing_findings(timing: Sequence[TimingIssue], frames: Sequence[FrameResult]) -> list[Finding]:
    out = []
    for issue in timing:
        if issue.category == "offset":
            continue  # reported as a shift
        kind, conf, action = _TIMING_ACTION.get(issue.category, ("timing", _TIMING_OTHER_CONFIDENCE, ""))
        msg, ev = issue.message, dict(issue.evidence)
        if issue.category == "line_count":
            msg, ev = _line_count_message(issue, frames)
        elif action:
            msg = f"{msg}: {action}"
        ev["category"] = issue.category
        out.append(Finding(kind, msg, ev, conf))
    return out


def _xz_finding(frames: Sequence[FrameResult]) -> Finding | None:
    total = sum(int(fr.unknown.sum()) for fr in frames)
    if total == 0:
        return None
    fr = next(fr for fr in frames if fr.unknown.any())
    ys, xs = np.nonzero(fr.unknown)
    y, x = int(ys[0]), int(xs[0])
    clk = int(fr.clocks[y, x])
    rows = sorted({int(v) for v in ys})
    where = ""
    if rows and rows[-1] <= 1:
        where = "; all in the first line(s): line-buffer memory read before it was written"
    elif np.all(xs <= 1):
        where = "; all in the first column(s): the window registers are not cleared at line start"
    msg = (
        f"{_plural(total, 'output pixel')} carried X/Z, first at frame {fr.index} (x={x}, y={y}) "
        f"clock {clk}{where}; reset or initialise the registers on the output data path"
    )
    ev = {"count": total, "first": {"frame": fr.index, "x": x, "y": y, "clock": clk}, "rows": rows[:EVIDENCE_ITEMS]}
    return Finding("xz", msg, ev, _SEEN_CONFIDENCE)


def _missing_finding(frames: Sequence[FrameResult], failures: int, facts: RunFacts) -> Finding | None:
    total = sum(int(fr.missing.sum()) for fr in frames)
    if total == 0:
        return None
    checked = sum(int(fr.valid.sum()) for fr in frames)
    whole = [fr.index for fr in frames if fr.valid.any() and not fr.present.any()]
    tail_rows = []
    for fr in frames:
        if fr.index in whole or not fr.missing.any():
            continue
        rows = np.flatnonzero(fr.missing.any(axis=1))
        h = fr.expected.shape[0]
        if rows.size and np.array_equal(rows, np.arange(h - rows.size, h)) and fr.missing[rows][fr.valid[rows]].all():
            tail_rows.append((fr.index, int(rows.size)))
    timed = bool(facts.timed_out)
    ev: dict[str, Any] = {"count": total, "checked": checked, "whole_frames": whole[:EVIDENCE_ITEMS], "timed_out": timed}
    if whole:
        what = f"frame(s) {', '.join(map(str, whole[:5]))} never came out"
        fix = "the design stops emitting; check it re-arms on vsync"
    elif tail_rows and len(tail_rows) == sum(1 for fr in frames if fr.missing.any()):
        n = tail_rows[0][1]
        what = f"the last {_plural(n, 'line')} of {_plural(len(tail_rows), 'frame')} never arrived"
        fix = "flush the last line(s) at the leading edge of vsync (vertical front porch)"
        ev["tail_lines"] = [list(t) for t in tail_rows[:EVIDENCE_ITEMS]]
    else:
        fr = next(fr for fr in frames if fr.missing.any())
        ys, xs = np.nonzero(fr.missing)
        what = f"first gap at frame {fr.index} (x={int(xs[0])}, y={int(ys[0])})"
        fix = "pixels are lost between input and output"
    if timed:
        stop = facts.stop_clocks
        fix += f"; the run timed out after {stop if stop is not None else '?'} clocks"
    msg = f"{total} of {checked} checked pixels never arrived: {what}; {fix}"
    share = total / max(1, failures)
    return Finding("missing", msg, ev, _MISSING_CONFIDENCE * share)


def _same_shifted(a: np.ndarray, e: np.ndarray, k: np.ndarray, asl: slice, esl: slice) -> bool:
    """``a[asl]`` matches ``e[esl]`` on the known pixels ``k[asl]``."""
    kk = k[asl]
    return bool(kk.sum() >= _MIN_TELLING_PIXELS and np.mean(a[asl][kk] == e[esl][kk]) >= _MATCH_SHARE)


def _de_vote(a: np.ndarray, e: np.ndarray, k: np.ndarray, w: int, n: int) -> str | None:
    """``"lead"``, ``"lag"`` or None: what a line of ``n = w - 1`` or ``w + 1`` pixels says about data-enable."""
    whole, head, tail = slice(0, w), slice(0, w - 1), slice(1, w)
    if n == w - 1:
        # The pixel outside data-enable is lost: the first one (late) or the last one (early).
        if _same_shifted(a, e, k, head, tail) and not _same_shifted(a, e, k, head, head):
            return "lag"
        if _same_shifted(a, e, k, head, head) and not _same_shifted(a, e, k, head, tail):
            return "lead"
        return None
    # One garbage pixel inside data-enable: before the data (early) or after it (late).
    if _same_shifted(a, e, k, tail, head) and not _same_shifted(a, e, k, whole, whole):
        return "lead"
    if _same_shifted(a, e, k, whole, whole):
        return "lag"
    return None


def _de_offset_finding(frames: Sequence[FrameResult]) -> Finding | None:
    """Data-enable one clock early or late: most lines one pixel short (or long) at the same end."""
    votes = {"lead": 0, "lag": 0}
    lines = short = long_ = 0
    for fr in frames:
        h, w = fr.expected.shape
        if w < _MIN_DE_WIDTH:
            continue
        known = fr.present & ~fr.unknown
        for y, n in enumerate(fr.line_lengths[:h]):
            e, k = fr.expected[y], known[y]
            off_by_one = n in (w - 1, w + 1)
            if off_by_one and not np.any(e[1:][k[: w - 1]] != e[:-1][k[: w - 1]]):
                continue  # a flat line cannot tell a one-pixel slip
            lines += 1
            if not off_by_one:
                continue
            short, long_ = (short + 1, long_) if n == w - 1 else (short, long_ + 1)
            side = _de_vote(fr.actual[y], e, k, w, n)
            if side is not None:
                votes[side] += 1
    if lines < 2:
        return None
    side = max(votes, key=lambda s_: votes[s_])
    if votes[side] < _EXPLAINED_SHARE * lines:
        return None
    msg = _de_offset_message(side, votes[side], lines, short >= long_, frames[0].expected.shape[1])
    ev = {"direction": side, "lines": lines, "lines_matching": votes[side], "short_lines": short, "long_lines": long_}
    return Finding("timing", msg, ev, _DE_CONFIDENCE * votes[side] / lines)


def _de_offset_message(side: str, n_side: int, lines: int, mostly_short: bool, w: int) -> str:
    if mostly_short:
        n_px, what = w - 1, (
            "the first pixel of each line falls outside data-enable" if side == "lag"
            else "the last pixel of each line falls outside data-enable"
        )
    else:
        n_px, what = w + 1, (
            "one pixel before the data is inside data-enable" if side == "lead"
            else "one pixel after the data is inside data-enable"
        )
    verb = "leads" if side == "lead" else "lags"
    return (
        f"data-enable {verb} the pixel data by 1 clock: {n_side} of {_plural(lines, 'line')} carry {n_px} "
        f"pixels, each the expected line shifted by one with one pixel lost or added at the "
        f"{'end' if (side == 'lead') == mostly_short else 'start'} ({what}); delay the data-enable "
        f"{'by one more' if side == 'lead' else 'by one less'} clock so it matches the data path"
    )


# --------------------------------------------------------------------------- shift


def _shift_findings(
    frames: Sequence[FrameResult], offset: Offset | None, applied: Offset | None
) -> Finding | None:
    if applied is not None and not applied.is_zero:
        return Finding(
            "shift",
            _shift_message(applied) + " (undone before comparing)",
            applied.to_dict(),
            _APPLIED_SHIFT_CONFIDENCE * applied.match_share,
        )
    if offset is None or offset.is_zero or offset.match_share < _MATCH_SHARE:
        return None
    before = after = telling = agree = 0
    for fr in frames:
        if not fr.value_bad.any():
            continue
        before += int(fr.value_bad.sum())
        raw_a, raw_p = fr.actual, fr.present
        a, p = shift_back(raw_a, raw_p, offset)
        ok = p & fr.valid & (a != UNKNOWN)
        after += int(np.count_nonzero(ok & (a != fr.expected)))
        # the value check: where the expected image differs from itself moved by the offset, the shifted
        # output must give the expected value, not the unshifted one (flat or periodic frames match any shift)
        moved, _ = shift_back(fr.expected, np.ones_like(raw_p), offset)
        tells = ok & (moved != fr.expected)
        telling += int(np.count_nonzero(tells))
        agree += int(np.count_nonzero(tells & (a == fr.expected)))
    if before == 0 or telling < _MIN_TELLING_PIXELS or agree < _MATCH_SHARE * telling:
        return None
    explained = max(0.0, 1.0 - after / before)
    ev = offset.to_dict()
    ev["mismatches_before"] = before
    ev["mismatches_after"] = after
    ev["telling_pixels"], ev["telling_agree"] = telling, agree
    conf = explained * offset.match_share * offset.confidence
    if conf < _SHIFT_MIN_CONFIDENCE:
        return None
    return Finding("shift", _shift_message(offset), ev, conf)


def _shift_message(off: Offset) -> str:
    if off.kind == "raster":
        return (
            f"output is the expected image shifted {off.describe()} in raster order (pixels pushed off a line "
            f"end reappear on the next): the data lags its frame/line marks by {off.raster_pixels} pixels; "
            "latency off by that many clocks between data and data-enable/start-of-frame"
        )
    one = {1: "one", 2: "two", 3: "three"}
    if off.dy == 0:
        n = abs(off.dx)
        hint = ""
        if n == 1:
            hint = f" (or data-enable {'leads' if off.dx > 0 else 'lags'} the pixel data by 1 clock)"
        return (
            f"output is the expected image shifted {off.describe()}: latency or column offset off by "
            f"{one.get(n, str(n))}{hint}"
        )
    if off.dx == 0:
        n = abs(off.dy)
        return (
            f"output is the expected image shifted {off.describe()}: line offset off by {one.get(n, str(n))} "
            "(line-buffer tap or the line that is emitted first)"
        )
    return (
        f"output is the expected image shifted {off.describe()}: both the column offset (latency) and the "
        "line offset are wrong"
    )


# --------------------------------------------------------------------------- region patterns


def _region_stats(
    frames: Sequence[FrameResult], region_of: Callable[[FrameResult], np.ndarray]
) -> tuple[int, int, int, int]:
    """(bad in region, bad total, checked in region, checked total) over value mismatches."""
    bin_ = btot = cin = ctot = 0
    for fr in frames:
        checked = fr.valid & fr.present & ~fr.unknown
        reg = region_of(fr) & checked
        bad = fr.value_bad
        bin_ += int(np.count_nonzero(bad & reg))
        btot += int(np.count_nonzero(bad))
        cin += int(np.count_nonzero(reg))
        ctot += int(np.count_nonzero(checked))
    return bin_, btot, cin, ctot


def _border_finding(frames: Sequence[FrameResult], border: BorderInference | None) -> Finding | None:
    shapes = [fr.expected.shape for fr in frames if fr.value_bad.any()]
    if not shapes or min(min(s) for s in shapes) < _MIN_BORDER_SIDE:
        return None

    def ring(fr: FrameResult) -> np.ndarray:
        m = np.zeros(fr.expected.shape, bool)
        m[0, :] = m[-1, :] = m[:, 0] = m[:, -1] = True
        return m

    bin_, btot, cin, ctot = _region_stats(frames, ring)
    if btot < _MIN_REGION_MISMATCHES or ctot == 0:
        return None
    recall = bin_ / btot
    base = cin / ctot
    if recall < _BORDER_RECALL or _log_tail(bin_, btot, base) > _SIGNIFICANT_LOG_P:
        return None
    sides = {"top": 0, "bottom": 0, "left": 0, "right": 0}
    for fr in frames:
        b = fr.value_bad
        sides["top"] += int(b[0, :].sum())
        sides["bottom"] += int(b[-1, :].sum())
        sides["left"] += int(b[:, 0].sum())
        sides["right"] += int(b[:, -1].sum())
    named = [s for s, n in sides.items() if n >= max(1, _SIDE_SHARE * bin_)]
    side_txt = ", ".join(named[:-1]) + (" and " if len(named) > 1 else "") + named[-1]
    unit = (
        "row" if set(named) <= {"top", "bottom"} else "column" if set(named) <= {"left", "right"} else "rows/columns"
    )
    if len(named) > 1 and unit != "rows/columns":
        unit += "s"
    msg = (
        f"{_pct(recall)} of mismatches sit on the {side_txt} border {unit} (the border ring is "
        f"{_pct(base)} of checked pixels): the design handles the frame edge differently from the model"
    )
    ev: dict[str, Any] = {"sides": sides, "in_border": bin_, "mismatches": btot, "border_share": base}
    if border is not None and border.policy != "unknown":
        msg += (
            f"; it behaves like '{border.policy}' borders ({_pct(border.share)} of border pixels where "
            f"policies differ, confidence {border.confidence:.2f})"
        )
        ev["inferred"] = border.to_dict()
    else:
        msg += "; compare its border policy with the spec's"
    return Finding("border", msg, ev, recall * (1 - base))


def _stage_items(frames: Sequence[FrameResult]) -> list[str]:
    names: list[str] = []
    for fr in frames:
        for name in fr.model.stages:
            if name not in names and name != "input":
                names.append(name)
    return names


def _stage(fr: FrameResult, name: str) -> StageValues | None:
    return fr.model.stages.get(name)


def _output_bounds(fr: FrameResult) -> tuple[int, int]:
    """The output stage's theoretical range (8 bits when the model gave no output stage)."""
    out = _stage(fr, "output")
    return (int(out.lo), int(out.hi)) if out is not None else _DEFAULT_OUTPUT_RANGE


def _wrapped_share(frames: Sequence[FrameResult]) -> float:
    """Share of wrong pixels whose value looks wrapped or saturated: below the expected value (a wrapped
    or saturated large value comes out small) or off by a quarter of the output range or more."""
    errs = [fr.error[fr.value_bad] for fr in frames if fr.value_bad.any()]
    if not errs:
        return 0.0
    e = np.concatenate(errs)
    lo, hi = _output_bounds(frames[0])
    far = max(2, (hi - lo + 1) // _FAR_ERROR_DIVISOR)
    return float(np.mean((e < 0) | (np.abs(e) >= far)))


@dataclass
class _StageSample:
    """One stage over the checked pixels of the failing frames: magnitudes, which pixels failed, and
    where the model clamped (None when some frame's stage cannot clamp)."""

    name: str
    stage: StageValues
    values: np.ndarray
    bad: np.ndarray
    clamped: np.ndarray | None


def _stage_sample(failing: Sequence[FrameResult], name: str) -> _StageSample | None:
    vals, bads, clamps = [], [], []
    last = None
    for fr in failing:
        st = _stage(fr, name)
        if st is None or np.asarray(st.array).shape != fr.expected.shape:
            continue
        last = st
        checked = fr.valid & fr.present & ~fr.unknown
        v = np.asarray(st.array).astype(np.int64)
        if st.signed or (v < 0).any():
            v = np.abs(v)
        vals.append(v[checked])
        bads.append(fr.value_bad[checked])
        clamps.append(np.asarray(st.clamped, bool)[checked] if st.clamped is not None else None)
    if last is None:
        return None
    clamped = np.concatenate(clamps) if all(c is not None for c in clamps) else None
    return _StageSample(name, last, np.concatenate(vals), np.concatenate(bads), clamped)


def _overflow_finding(frames: Sequence[FrameResult]) -> Finding | None:
    """A stage that wraps or saturates differently: the mismatches sit where the model clamps it, or
    above one value of it (a register bound)."""
    failing = [fr for fr in frames if fr.value_bad.any()]
    if not failing:
        return None
    # The values must look wrapped or saturated: small where large was expected (or far off) for a
    # register that wraps; for the clamp region, the model's value at a bound the design missed.
    wrapped = _wrapped_share(failing)
    bounds = _output_bounds(failing[0])
    at_bound = float(np.mean(np.concatenate([np.isin(fr.expected[fr.value_bad], bounds) for fr in failing])))
    found: list[Finding] = []
    for name in _stage_items(failing):
        sample = _stage_sample(failing, name)
        if sample is None or int(sample.bad.sum()) < _MIN_TELLING_PIXELS or sample.values.size == 0:
            continue
        for f in (_clamp_region_finding(sample, max(wrapped, at_bound)), _top_region_finding(sample, wrapped)):
            if f is not None:
                found.append(f)
    best: Finding | None = None
    for f in found:  # the first of equals wins, as the stages come in pipeline order
        if best is None or f.confidence > best.confidence:
            best = f
    return best


def _clamp_region_finding(s: _StageSample, wrapped: float) -> Finding | None:
    """Mismatches where the model saturates the stage: the design saturates it at another bound, or wraps."""
    if s.clamped is None:
        return None
    total_bad, n = int(s.bad.sum()), s.values.size
    cin, bin_ = int(s.clamped.sum()), int((s.clamped & s.bad).sum())
    recall, base = bin_ / total_bad, cin / n
    if not (cin and recall >= _EXPLAINED_SHARE and base <= _REGION_MAX_SHARE and wrapped >= _WRAPPED_SHARE
            and _log_tail(bin_, total_bad, base) <= _SIGNIFICANT_LOG_P):
        return None
    return Finding(
        "overflow",
        f"{_pct(recall)} of mismatches sit where the model saturates {s.name} ({_pct(base)} of pixels): "
        f"the design wraps or saturates {s.name} at a different bound; saturate it like the model",
        {"stage": s.name, "region": "clamped", "in_region": bin_, "mismatches": total_bad, "region_share": base},
        recall * (1 - base),
    )


def _best_top_cut(values: np.ndarray, bad: np.ndarray) -> tuple[int, np.ndarray, np.ndarray] | None:
    """The rule "value >= t" that best separates wrong from right pixels (F1 score), over whole value
    groups and at most half the pixels: ``(index in the sorted order, sorted values, running bad count)``."""
    n = values.size
    order = np.argsort(-values, kind="stable")
    vs, cum = values[order], np.cumsum(bad[order])
    k = np.arange(1, n + 1)
    cut = np.ones(n, bool)
    cut[:-1] = vs[:-1] != vs[1:]  # a region must hold whole value groups
    cut &= k <= n // 2
    if not cut.any():
        return None
    prec = cum / k
    rec = cum / int(bad.sum())
    f1 = np.where(cut, 2 * prec * rec / np.maximum(prec + rec, 1e-12), -1.0)
    return int(np.argmax(f1)), vs, cum


def _wrap_bits(t_in: int, t_out: int | None) -> int | None:
    """``b`` when the cut between ``t_out`` (highest right value) and ``t_in`` (lowest wrong one) is the
    register bound ``2**b`` (b >= :data:`_WRAP_MIN_BITS`), else None."""
    if t_out is None:
        return None
    b = int(t_out).bit_length()
    return b if b >= _WRAP_MIN_BITS and t_out < (1 << b) <= t_in else None


def _top_region_finding(s: _StageSample, wrapped: float) -> Finding | None:
    """Mismatches above one value of the stage: a register that wraps at ``2**b``, or the top of its range."""
    top = _best_top_cut(s.values, s.bad)
    if top is None:
        return None
    i, vs, cum = top
    total_bad, n = int(s.bad.sum()), s.values.size
    recall, precision, base = float(cum[i] / total_bad), float(cum[i] / (i + 1)), (i + 1) / n
    if recall < _EXPLAINED_SHARE or precision < _TOP_MIN_PRECISION:
        return None
    if _log_tail(int(cum[i]), total_bad, base) > _SIGNIFICANT_LOG_P:
        return None
    if wrapped < _WRAPPED_SHARE or precision < _WRAP_PRECISION or np.unique(vs).size < _MIN_LEVELS:
        # A wrap is deterministic: nearly every pixel past the bound is wrong. A region where only
        # some are (the bright part of a two-level picture) is where the signal is, not a bound.
        return None
    t_in, t_out = int(vs[i]), (int(vs[i + 1]) if i + 1 < n else None)
    bits = _wrap_bits(t_in, t_out)
    if bits is None and int(s.stage.hi) > 0 and t_in < _HIGH_RANGE * int(s.stage.hi):
        return None  # neither a register bound nor the high range of the stage
    ev: dict[str, Any] = {"stage": s.name, "region": "top", "threshold": t_in, "below": t_out,
                          "in_region": int(cum[i]), "mismatches": total_bad, "region_share": base,
                          "precision": precision}
    if bits is not None:
        widen = f"widen it to {s.stage.bits} bits" if s.stage.bits else "widen it"
        cond = f"{s.name} >= 2^{bits} ({1 << bits})"
        why = f": {s.name} wraps at {bits} bits; {widen} or saturate it"
        ev["wrap_bits"] = bits
    else:
        cond = f"{s.name} >= {t_in}"
        why = f": {s.name} overflows near the top of its range (model range up to {s.stage.hi})"
    if s.stage.signed:
        cond = "|" + s.name + "|" + cond[len(s.name):]
    return Finding(
        "overflow",
        f"{_pct(recall)} of mismatches sit where {cond} ({_pct(base)} of pixels, {_pct(precision)} of those wrong){why}",
        ev,
        recall * (1 - base) * min(1.0, precision + _PRECISION_BONUS),
    )


@dataclass
class SlipEvent:
    """A run of pixels too many or too few in the output stream, against the expected raster order.

    Attributes:
        kind: ``"repeated"`` (extra pixels equal to the one before), ``"extra"`` (other extra pixels)
            or ``"dropped"`` (expected pixels that never came).
        frame, y, x: expected position where the slip starts (pixels, lines).
        count: pixels in the run (>= 1).
        index: arrival index in the capture of the first pixel after the slip starts.
        x_lo, x_hi: columns of line ``y`` where the same slip gives the same stream (equal neighbours).
    """

    kind: str
    frame: int
    y: int
    x: int
    count: int
    index: int
    x_lo: int
    x_hi: int

    def to_list(self) -> list[Any]:
        """JSON-ready form ``[kind, frame, y, x, count]``."""
        return [self.kind, self.frame, self.y, self.x, self.count]


def _edit_ops(e: np.ndarray, a: np.ndarray) -> list[tuple[str, int, int]]:
    """Edit script turning expected ``e`` into actual ``a`` (unit costs, free end gaps).

    Returns ``(op, i, j)`` in stream order: ``"m"`` a[i] stands for e[j]; ``"i"`` a[i] is extra before
    e[j]; ``"d"`` e[j] is missing before a[i].
    """
    n, m = e.size, a.size
    d = np.zeros((m + 1, n + 1), np.int32)
    d[0] = np.arange(n + 1)
    ramp = np.arange(n + 1, dtype=np.int32)
    for i in range(1, m + 1):
        row = np.empty(n + 1, np.int32)
        row[0] = i
        row[1:] = np.minimum(d[i - 1, :-1] + (e != a[i - 1]), d[i - 1, 1:] + 1)
        d[i] = np.minimum.accumulate(row - ramp) + ramp
    # Free end gaps: the capture may stop early or run past the expected span.
    i_end, j_end = m, int(np.argmin(d[m]))
    col = int(np.argmin(d[:, n]))
    if d[col, n] < d[m, j_end]:
        i_end, j_end = col, n
    ops: list[tuple[str, int, int]] = []
    i, j = i_end, j_end
    while i > 0 and j > 0:
        if d[i, j] == d[i - 1, j - 1] + (e[j - 1] != a[i - 1]):
            ops.append(("m", i - 1, j - 1))
            i, j = i - 1, j - 1
        elif d[i, j] == d[i - 1, j] + 1:
            ops.append(("i", i - 1, j))
            i -= 1
        else:
            ops.append(("d", i, j - 1))
            j -= 1
    ops.extend(("d", 0, jj) for jj in range(j - 1, -1, -1))
    ops.extend(("i", ii, 0) for ii in range(i - 1, -1, -1))
    ops.reverse()
    return ops


def slip_events(frames: Sequence[FrameResult], capture: Capture) -> tuple[list[SlipEvent], int]:
    """Pixels repeated or dropped in the output stream, found by aligning it with the expected raster.

    The captured pixels are taken in arrival order, whatever frame/line marks the design gave them, so
    a slip is found even when it broke the line or frame structure. At most the first
    ``_ALIGN_MAX_PIXELS`` expected pixels are aligned (frames of the first shape only).

    Returns:
        ``(events, substitutions)``: the slips in stream order and the pixels that stayed aligned but
        differ in value.
    """
    if not frames or capture is None or len(capture) == 0:
        return [], 0
    h, w = frames[0].expected.shape
    same = [fr for fr in frames if fr.expected.shape == (h, w)]
    e = np.concatenate([fr.expected.ravel() for fr in same])[:_ALIGN_MAX_PIXELS]
    a = np.asarray(capture.values, np.int64)
    a = a[: e.size + max(64, e.size // 2)]
    if e.size == 0 or a.size == 0:
        return [], 0
    ops = _edit_ops(e, a)
    events: list[SlipEvent] = []
    subs = 0
    prev: tuple[str, int, int] | None = None
    for op, i, j in ops:
        if op == "m":
            subs += int(e[j] != a[i])
            prev = None
            continue
        if prev is not None and prev[0] == op and events:
            events[-1].count += 1
            prev = (op, i, j)
            continue
        jj = min(j, e.size - 1)
        if op == "i":
            v = a[i]
            kind = "repeated" if (i > 0 and a[i - 1] == v) or (j > 0 and e[j - 1] == v) else "extra"
        else:
            v = e[jj]
            kind = "dropped"
        lo = hi = jj
        while lo > 0 and e[lo - 1] == v:
            lo -= 1
        if op == "i":
            # Inserting v before e[j] or just after any equal neighbour gives the same stream.
            while hi < e.size - 1 and e[hi] == v:
                hi += 1
        else:
            while hi + 1 < e.size and e[hi + 1] == v:
                hi += 1
        f, rest = divmod(jj, h * w)
        y, x = divmod(rest, w)
        base = f * h * w + y * w
        events.append(SlipEvent(kind, f, y, x, 1, int(i), max(0, lo - base), min(w - 1, hi - base)))
        prev = (op, i, j)
    return events, subs


def _stall_targets(
    frames: Sequence[FrameResult], stall: Sequence[Sequence[int]]
) -> dict[int, np.ndarray]:
    """Per frame, the output positions where a slip caused by an input stall would start."""
    out: dict[int, np.ndarray] = {}
    if not frames:
        return out
    h, w = frames[0].expected.shape
    for f, ys, xs in stall:
        y = ys - 1  # output line y is emitted while input line y + 1 arrives
        if not 0 <= y < h:
            continue
        m = out.setdefault(int(f), np.zeros((h, w), bool))
        m[y, max(0, xs + _SLIP_COLUMNS[0]) : max(0, min(w, xs + _SLIP_COLUMNS[1] + 1))] = True
    return out


def _backpressure_targets(capture: Capture, back: Sequence[Sequence[int]]) -> np.ndarray:
    """Arrival indices of the output pixels that came right after back-pressure."""
    if capture is None or len(capture) == 0 or not back:
        return np.zeros(0, np.int64)
    key = (np.asarray(capture.frame, np.int64) * 1_000_003 + np.asarray(capture.line, np.int64)) * 100_003 + np.asarray(
        capture.column, np.int64
    )
    order = np.argsort(key, kind="stable")
    want = np.array([(int(f) * 1_000_003 + int(y)) * 100_003 + int(x) for f, y, x in back], np.int64)
    pos = np.searchsorted(key[order], want)
    pos = np.clip(pos, 0, key.size - 1)
    hit = key[order][pos] == want
    return np.sort(order[pos[hit]])


def _line_stall_finding(frames: Sequence[FrameResult], stall: Sequence[Sequence[int]]) -> Finding | None:
    """Line lengths that follow the input stalls: output line y loses (or gains) pixels exactly when
    input line y + 1, which arrives while it is emitted, stalls.

    The stall counts are matched against the length errors at the true line offset (+1) and at other
    offsets; the true one must explain at least 80% of the wrong lines and clearly beat every other.
    """
    if not stall or not frames:
        return None
    h, w = frames[0].expected.shape
    counts: dict[tuple[int, int], int] = {}
    first_x: dict[tuple[int, int], int] = {}
    for f, ys, xs in stall:
        key = (int(f), int(ys))
        counts[key] = counts.get(key, 0) + 1
        first_x[key] = min(first_x.get(key, w), int(xs))
    rows = []  # (frame, y, length error)
    for fr in frames:
        if fr.expected.shape != (h, w):
            continue
        for y, n in enumerate(fr.line_lengths[:h]):
            rows.append((fr.index, y, n - w))
    bad = [r for r in rows if r[2] != 0]
    if len(bad) < _MIN_TELLING_PIXELS:
        return None

    def explained(k: int) -> tuple[int, str]:
        drop = sum(1 for f, y, d in bad if d < 0 and -d == counts.get((f, y + k), 0))
        rep = sum(1 for f, y, d in bad if d > 0 and counts.get((f, y + k), 0) > 0 and d >= counts[(f, y + k)])
        return (drop, "dropped") if drop >= rep else (rep, "repeated")

    hit, how = explained(1)
    others = [explained(k)[0] for k in _OTHER_LINE_OFFSETS if k != 1]
    if hit < _EXPLAINED_SHARE * len(bad) or hit <= _OFFSET_MARGIN * max(others + [0]) + 1:
        return None
    lines = [(f, y) for f, y, d in bad if counts.get((f, y + 1), 0)]
    f0, y0 = lines[0]
    xs = first_x[(f0, y0 + 1)]
    line_txt = ", ".join(str(y) for _, y in lines[:_LINES_NAMED]) + (
        f" (+{len(lines) - _LINES_NAMED} more)" if len(lines) > _LINES_NAMED else ""
    )
    direction = "left" if how == "dropped" else "right"
    per = "exactly one pixel per input stall" if how == "dropped" else "one pixel per stall clock"
    msg = (
        f"frame {f0} line {y0}: pixel {how} at x={max(0, xs - 1)}, the rest of the line shifted {direction}: "
        f"pixel {how} after an input stall at ({xs}, {y0 + 1}); {hit} of {_plural(len(bad), 'line')} of the "
        f"wrong length ({line_txt}) are {'short' if how == 'dropped' else 'long'} by {per} on the input "
        f"line arriving meanwhile (best other line offset: {max(others + [0])}): hold every pipeline stage "
        "while in_valid is low (take a pixel and emit one only on valid)"
    )
    ev = {"how": how, "lines_wrong": len(bad), "lines_explained": hit, "other_offsets_best": max(others + [0]),
          "lines": [[f, y, d] for f, y, d in bad[:EVIDENCE_ITEMS]]}
    return Finding("stall", msg, ev, _DE_CONFIDENCE * hit / len(bad))


_Hit = tuple[str, tuple[int, int]]
"""What a slip is tied to: ``("input stall", (x, y))`` at the input or ``("back-pressure", (x, y))`` at the output."""


def _stall_hit(ev: SlipEvent, tm: np.ndarray, stall: Sequence[Sequence[int]]) -> tuple[float, _Hit | None]:
    """The chance that a slip of this span, placed anywhere on the frame, touches a stall target; and the
    input stall it touches, if any (the input pixel whose slip column is nearest the event)."""
    h, w = tm.shape
    span = ev.x_hi - ev.x_lo + 1
    c = np.concatenate([np.zeros((h, 1), np.int64), np.cumsum(tm.astype(np.int64), 1)], 1)
    starts = np.arange(w)
    ends = np.minimum(w, starts + span)
    chance = float(np.mean((c[:, ends] - c[:, starts]) > 0))
    if not tm[ev.y, ev.x_lo : ev.x_hi + 1].any():
        return chance, None
    cands = [(abs((xs - 1) - ev.x), xs, ys) for f, ys, xs in stall if int(f) == ev.frame and ys - 1 == ev.y]
    if not cands:
        return chance, None
    _, xs, ys = min(cands)
    return chance, ("input stall", (int(xs), int(ys)))


def _backpressure_hit(ev: SlipEvent, bp_idx: np.ndarray, capture: Capture, n_arrived: int) -> tuple[float, _Hit | None]:
    """The chance that a slip lands within one pixel of a back-pressure point; and the point it lands at."""
    chance = min(1.0, _BACKPRESSURE_REACH * bp_idx.size / n_arrived)
    near = np.flatnonzero(np.abs(bp_idx - ev.index) <= 1)
    if not near.size:
        return chance, None
    k = int(bp_idx[near[0]])
    return chance, ("back-pressure", (int(capture.column[k]), int(capture.line[k])))


def _slip_stall_finding(
    frames: Sequence[FrameResult],
    capture: Capture | None,
    stall: Sequence[Sequence[int]],
    back: Sequence[Sequence[int]],
) -> Finding | None:
    """Slips (pixels repeated or dropped) that start where the input stalled or the output was held."""
    if capture is None or (not stall and not back):
        return None
    events, subs = slip_events(frames, capture)
    if not events:
        return None
    targets = _stall_targets(frames, stall)
    bp_idx = _backpressure_targets(capture, back)
    n_arrived = max(1, min(len(capture), _ALIGN_MAX_PIXELS + _ALIGN_MAX_PIXELS // 2))
    matched: list[tuple[SlipEvent, str, tuple[int, int]]] = []
    p_sum = 0.0
    for ev in events:
        hit: _Hit | None = None
        p_ev = 0.0
        if ev.frame in targets:
            p_ev, hit = _stall_hit(ev, targets[ev.frame], stall)
        if bp_idx.size:
            chance, bp_hit = _backpressure_hit(ev, bp_idx, capture, n_arrived)
            p_ev += chance
            hit = hit or bp_hit
        p_sum += min(1.0, p_ev)
        if hit is not None:
            matched.append((ev, hit[0], hit[1]))
    n, k = len(events), len(matched)
    log_p = _log_tail(k, n, p_sum / n)
    if k == 0 or log_p > _COINCIDENT_LOG_P or k / n < _SLIPS_TIED_SHARE:
        return None
    lines = sorted({(e.frame, e.y) for e, _, _ in matched})
    evidence = {
        "slips": [e.to_list() for e in events[:EVIDENCE_ITEMS]],
        "matched": [[e.kind, e.frame, e.y, e.x, t, list(pos)] for e, t, pos in matched[:EVIDENCE_ITEMS]],
        "chance_share": round(p_sum / n, 4),
        "log10_chance": round(log_p / math.log(10), 2),
        "substitutions": subs,
        "lines": [list(x) for x in lines[:EVIDENCE_ITEMS]],
    }
    return Finding("stall", _slip_stall_message(matched, n, lines), evidence, _DE_CONFIDENCE * (k / n))


def _slip_stall_message(
    matched: list[tuple[SlipEvent, str, tuple[int, int]]], n: int, lines: list[tuple[int, int]]
) -> str:
    # Name the clearest slip: the first one whose place is not blurred by equal neighbour values.
    ev0, what, (sx, sy) = min(
        matched, key=lambda m_: (m_[0].x_hi - m_[0].x_lo > _BLURRED_SPAN, m_[0].frame, m_[0].y, m_[0].x)
    )
    # After a stall at input column xs the repeat takes output column xs; a drop loses centre xs - 1.
    x_want = sx if ev0.kind != "dropped" else sx - 1
    x_at = min(max(x_want, ev0.x_lo), ev0.x_hi) if what == "input stall" else ev0.x
    line_txt = ", ".join(str(y) for _, y in lines[:_LINES_NAMED]) + (
        f" (+{len(lines) - _LINES_NAMED} more)" if len(lines) > _LINES_NAMED else ""
    )
    how = "dropped" if ev0.kind == "dropped" else "repeated"
    direction = "left" if how == "dropped" else "right"
    if what == "input stall":
        fix = "hold every pipeline stage while in_valid is low (take a pixel and emit one only on valid)"
        where = f"after an input stall at ({sx}, {sy})"
    else:
        fix = "advance the pipe only when out_ready is high on this clock (not a registered copy of it)"
        where = f"after back-pressure at output ({sx}, {sy})"
    return (
        f"frame {ev0.frame} line {ev0.y}: pixel {how} at x={x_at}, the rest of the line shifted {direction} "
        f"by {ev0.count if ev0.count <= 3 else 'several'}: pixel {how} {where}; {len(matched)} of "
        f"{_plural(n, 'slip')} on {_plural(len(lines), 'line')} ({line_txt}) start right after a stall: {fix}"
    )


def _stall_region(fr: FrameResult, stall: Sequence[Sequence[int]], back: Sequence[Sequence[int]]) -> np.ndarray:
    h, w = fr.expected.shape
    m = np.zeros((h, w), bool)
    for f, y, x in stall:
        if int(f) == fr.index:
            # Output line y-1 is emitted while input line y arrives; the 3x3 window spans x-1..x+1.
            m[max(0, y - 1) : min(h, y + 1), max(0, x - 2) : min(w, x + 3)] = True
    for f, y, x in back:
        if int(f) == fr.index:
            m[max(0, y) : min(h, y + 1), max(0, x - 1) : min(w, x + 2)] = True
    return m


def _row_slips(fr: FrameResult) -> list[tuple[int, int, str]]:
    """Rows where, from some column on, the line is the expected line shifted by one pixel."""
    out = []
    known = fr.present & ~fr.unknown & fr.valid
    for y in np.flatnonzero(fr.value_bad.any(axis=1)):
        y = int(y)
        x0 = int(np.flatnonzero(fr.value_bad[y])[0])
        a, e, k = fr.actual[y], fr.expected[y], known[y]
        if int(fr.value_bad[y, x0:].sum()) < _MIN_TELLING_PIXELS:
            continue  # a slip moves the rest of the line: more than one or two pixels go wrong
        for how, asl, esl in (("repeated", slice(x0 + 1, None), slice(x0, -1)), ("dropped", slice(x0, -1), slice(x0 + 1, None))):
            kk = k[asl] & fr.valid[y][esl] & (a[asl] != e[asl])  # only pixels the slip changed tell
            if kk.sum() >= _MIN_TELLING_PIXELS and np.mean(a[asl][kk] == e[esl][kk]) >= _MATCH_SHARE:
                out.append((y, x0, how))
                break
    return out


def _stall_finding(
    frames: Sequence[FrameResult], stall: Sequence[Sequence[int]], back: Sequence[Sequence[int]]
) -> Finding | None:
    failing = [fr for fr in frames if fr.value_bad.any()]
    if not failing:
        return None
    slips = []
    bad_rows = 0
    for fr in failing:
        bad_rows += int(fr.value_bad.any(axis=1).sum())
        reg = _stall_region(fr, stall, back)
        for y, x0, how in _row_slips(fr):
            slips.append((fr.index, y, x0, how, bool(reg[y, x0])))
    if slips and bad_rows:
        explained = len(slips) / bad_rows
        near = sum(1 for s in slips if s[4])
        f, y, x0, how, is_near = slips[0]
        if near:
            where = "right after a stall or back-pressure"
            fix = "the design does not hold its pipeline while in_valid or out_ready is low"
            conf = _STALL_NEAR_CONFIDENCE * explained * (near / len(slips))
        else:
            where = "with no recorded stall there"
            fix = "a pixel is taken twice or skipped; check the valid/ready handshake and the column counter"
            conf = _SLIP_ALONE_CONFIDENCE * explained
        shift_dir = "right" if how == "repeated" else "left"
        msg = (
            f"frame {f} line {y}: pixel {how} at x={x0}, the rest of the line shifted {shift_dir} by 1, "
            f"{where} ({_plural(len(slips), 'line')} like this, {near} near a stall): {fix}"
        )
        ev = {"slips": [[s[0], s[1], s[2], s[3], s[4]] for s in slips[:EVIDENCE_ITEMS]], "near_stall": near,
              "rows_failing": bad_rows}
        return Finding("stall", msg, ev, conf)
    if not stall and not back:
        return None
    bin_, btot, cin, ctot = _region_stats(failing, lambda fr: _stall_region(fr, stall, back))
    if btot < _MIN_REGION_MISMATCHES or ctot == 0 or cin == 0:
        return None
    recall, base = bin_ / btot, cin / ctot
    if recall < _STALL_REGION_RECALL or base > _REGION_MAX_SHARE or _log_tail(bin_, btot, base) > _SIGNIFICANT_LOG_P:
        return None
    msg = (
        f"{_pct(recall)} of mismatches sit next to a stall or back-pressure point ({_pct(base)} of pixels): "
        "data is lost or taken twice around stalls; hold every pipeline register while the input is not valid"
    )
    ev = {"in_region": bin_, "mismatches": btot, "region_share": base,
          "stalls": len(stall), "backpressure": len(back)}
    return Finding("stall", msg, ev, recall * (1 - base))


def _rounding_finding(frames: Sequence[FrameResult], tol: int) -> Finding | None:
    errs = np.concatenate([fr.error[fr.value_bad] for fr in frames]) if frames else np.zeros(0, np.int64)
    if errs.size == 0:
        return None
    checked = sum(int((fr.valid & fr.present & ~fr.unknown).sum()) for fr in frames)
    one = np.abs(errs) == tol + 1
    share = float(one.mean())
    density = errs.size / max(1, checked)
    if share < _ROUNDING_SHARE or density > _ROUNDING_MAX_DENSITY:
        return None
    up, down = int((errs[one] > 0).sum()), int((errs[one] < 0).sum())
    if down == 0:
        hint = "the design rounds up where the model truncates (or adds a rounding constant the model lacks)"
    elif up == 0:
        hint = "the design truncates where the model rounds (missing rounding constant before a shift)"
    else:
        hint = "rounding differs in a shift or divide (half-way cases, or signed truncation towards zero)"
    msg = (
        f"{errs.size} pixels ({_pct(density)} of checked) differ by exactly {tol + 1} LSB "
        f"(+{tol + 1}: {up}, -{tol + 1}: {down}): {hint}"
    )
    ev = {"count": int(errs.size), "plus": up, "minus": down, "density": density, "share_exact": share}
    return Finding("rounding", msg, ev, share * (1 - density) * _ROUNDING_CONFIDENCE)


_LANE_ORDERS_TRIED = 24
"""Lane orders tried at most (every order of up to 4 lanes; with 8, the first 24 in lexical order)."""


def _lane_finding(frames: Sequence[FrameResult], lanes: int) -> Finding | None:
    """The pixels of each clock's group come out in another lane order: the wrong values are the right
    ones of another pixel of the same group (lanes swapped or reversed in the output word)."""
    if lanes < 2:
        return None
    usable = [fr for fr in frames if fr.expected.shape[1] % lanes == 0 and fr.value_bad.any()]
    total = sum(int(fr.value_bad.sum()) for fr in usable)
    if total < _MIN_TELLING_PIXELS:
        return None
    best: tuple[int, tuple[int, ...]] = (0, tuple(range(lanes)))
    for order in itertools.islice(itertools.permutations(range(lanes)), 1, _LANE_ORDERS_TRIED + 1):
        explained = 0
        for fr in usable:
            h, w = fr.expected.shape
            moved = fr.expected.reshape(h, w // lanes, lanes)[:, :, list(order)].reshape(h, w)
            explained += int((fr.value_bad & (fr.actual == moved)).sum())
        best = max(best, (explained, order))
    share = best[0] / max(1, total)
    if share < _EXPLAINED_SHARE:
        return None
    order = best[1]
    wrong = ", ".join(f"lane {k} carries pixel {p}" for k, p in enumerate(order) if k != p)
    msg = (f"{_pct(share)} of the wrong pixels are the right value of another pixel of the same {lanes}-pixel "
           f"clock: {wrong} of its group; the output lanes are in another order than the input's "
           "(lane 0 = the first pixel of a clock; check lane_order and the output word's packing)")
    return Finding("lanes", msg, {"lanes": lanes, "order": list(order), "explained": best[0], "mismatches": total},
                   share)


_MAX_WORD_SHIFT = 48
"""Largest Y' width looked for when the expected word carries passed-through chroma above it, bits."""


def _chroma_shift(fr: FrameResult) -> int | None:
    """Where a passed-through 4:2:2 colour difference sits in the expected word: the shift at which the
    word's upper part is the input's C plane; None when the frame has no such chroma."""
    st = (getattr(fr.model, "stages", {}) or {}).get("input")
    arr = getattr(st, "array", None)
    if arr is None or np.ndim(arr) != 3 or np.shape(arr)[2] != 2 or np.shape(arr)[:2] != fr.expected.shape:
        return None
    c = np.asarray(arr)[..., 1].astype(np.int64)
    return next((k for k in range(1, _MAX_WORD_SHIFT) if np.array_equal(fr.expected >> k, c)), None)


def _chroma_finding(frames: Sequence[FrameResult]) -> Finding | None:
    """The colour differences passed through are wrong where Y' is right; named a phase slip when the
    wrong C is a horizontal neighbour's (Cb and Cr change places), with the share on odd lines."""
    total = wrong = slipped = odd = 0
    for fr in frames:
        shift = _chroma_shift(fr)
        if shift is None:
            continue
        bad = fr.value_bad
        total += int(bad.sum())
        y_ok = (fr.actual & ((1 << shift) - 1)) == (fr.expected & ((1 << shift) - 1))
        here = bad & y_ok
        c_exp, c_act = fr.expected >> shift, fr.actual >> shift
        near = np.zeros_like(here)
        near[:, :-1] |= c_act[:, :-1] == c_exp[:, 1:]
        near[:, 1:] |= c_act[:, 1:] == c_exp[:, :-1]
        wrong += int(here.sum())
        slipped += int((here & near).sum())
        odd += int(here[1::2].sum())
    if total < _MIN_TELLING_PIXELS or wrong / total < _EXPLAINED_SHARE:
        return None
    share, odd_share = wrong / total, odd / max(1, wrong)
    lines = "odd lines" if odd_share >= _EXPLAINED_SHARE else ("even lines" if odd_share <= 1 - _EXPLAINED_SHARE else "all lines")
    msg = f"{_pct(share)} of the wrong pixels have the right Y' and wrong chroma, on {lines} ({_pct(odd_share)} on odd lines)"
    if slipped / max(1, wrong) >= _EXPLAINED_SHARE:
        msg += ("; there the colour difference is a horizontal neighbour's, so Cb and Cr change places: the "
                "4:2:2 chroma phase slipped (check which pixel the C of each pair is taken from)")
    ev = {"mismatches": total, "chroma_only": wrong, "neighbour_chroma": slipped, "odd_line_share": odd_share}
    return Finding("chroma", msg, ev, share)


def _scattered(frames: Sequence[FrameResult]) -> Finding:
    total = sum(int(fr.value_bad.sum()) for fr in frames)
    checked = sum(int(fr.valid.sum()) for fr in frames)
    fr = next((fr for fr in frames if fr.value_bad.any()), None)
    first = ""
    ev: dict[str, Any] = {"count": total, "checked": checked}
    if fr is not None:
        ys, xs = np.nonzero(fr.value_bad)
        first = f", first at frame {fr.index} (x={int(xs[0])}, y={int(ys[0])})"
        ev["max_abs_error"] = int(np.abs(fr.error).max())
    return Finding(
        "scattered",
        f"{total} mismatching pixels ({_pct(total / max(1, checked))} of checked) with no pattern found{first}; "
        "inspect the first mismatches' stage values",
        ev,
        _SCATTERED_CONFIDENCE,
    )


def diagnose(
    frames: Sequence[FrameResult],
    *,
    facts: RunFacts | None = None,
    timing: Sequence[TimingIssue] = (),
    offset: Offset | None = None,
    applied_offset: Offset | None = None,
    stall_pixels: Sequence[Sequence[int]] = (),
    backpressure_pixels: Sequence[Sequence[int]] = (),
    border: BorderInference | None = None,
    tolerance_lsb: int = 0,
    capture: Capture | None = None,
) -> list[Finding]:
    """Name the failure patterns of a scored run, most confident first.

    Region patterns (border, overflow, stall) are judged by the share of mismatches inside the region
    against the share of checked pixels inside it, and must be unlikely by chance (Chernoff bound on
    the binomial tail below 1e-4).

    Args:
        frames: per-frame results from the scoreboard (``expected``, ``actual``, masks, ``model``).
        facts: the capture's run facts.
        timing: timing issues the scoreboard found.
        offset: offset measured on the raw frames (``align="exact"``), if any.
        applied_offset: offset already undone before comparing (``align="auto"``), if any.
        stall_pixels: ``[frame, y, x]`` input pixels right after a stall.
        backpressure_pixels: ``[frame, y, x]`` output pixels right after back-pressure.
        border: border-policy inference, if the scoreboard could run it.
        tolerance_lsb: the tolerance used, LSB.
        capture: the raw capture; lets the diagnosis align the output stream in arrival order and tie
            repeated or dropped pixels to stalls and back-pressure even when line/frame marks broke.

    Returns:
        Findings sorted by confidence (highest first); empty when nothing failed.
    """
    facts = facts if facts is not None else RunFacts()
    stall = [tuple(int(v) for v in s) for s in stall_pixels]
    back = [tuple(int(v) for v in s) for s in backpressure_pixels]
    failures = sum(int(fr.mismatch.sum()) for fr in frames)
    findings: list[Finding] = _timing_findings(timing, frames)
    findings += [f for f in (_xz_finding(frames), _missing_finding(frames, failures, facts)) if f is not None]
    shift = _shift_findings(frames, offset, applied_offset)
    if shift is not None:
        _demote_slipped_frame_shift(shift, timing)
        findings.append(shift)
    cause = _stream_cause(frames, capture, stall, back)
    if cause is not None:
        _demote_symptoms(findings)
        findings.append(cause)
    line_explained = any("dropped_line" in f.evidence or "repeated_line" in f.evidence for f in findings)
    if line_explained:
        # The lines after a dropped one move up, so the last line is 'missing' only as a consequence.
        findings = [f for f in findings if f.kind != "missing"]
    value_failures = sum(int(fr.value_bad.sum()) for fr in frames)
    if value_failures and not line_explained and (shift is None or applied_offset is not None):
        stall_named = cause is not None and cause.kind == "stall"
        findings += _pixel_findings(frames, border, (stall, back), tolerance_lsb, stall_named,
                                    facts.pixels_per_clock or 1)
    findings.sort(key=lambda f: -f.confidence)
    return findings


def _stream_cause(
    frames: Sequence[FrameResult], capture: Capture | None, stall: Sequence[Sequence[int]], back: Sequence[Sequence[int]]
) -> Finding | None:
    """A cause found in the output stream itself: data-enable one clock off, slips at stalls, or line
    lengths that follow the stalls (the first of these that fits)."""
    cause = _de_offset_finding(frames)
    if cause is None:
        cause = _slip_stall_finding(frames, capture, stall, back)
    if cause is None:
        cause = _line_stall_finding(frames, stall)
    return cause


_PRIMARY_CATEGORIES = ("xz_control", "stuck_line_delimiter", "de_in_blanking", "vsync", "hsync")
"""Timing issues that stay first-hand even when a stream cause is found (no slip produces them)."""
_SYMPTOM_WEIGHT = 0.85
"""Confidence kept by line, frame and shift findings once a stream cause explains them: ranked below it."""
_PATTERN_FLOOR = 0.3
"""Below this confidence no pixel pattern explains the mismatches well; 'scattered' is added."""


def _demote_slipped_frame_shift(shift: Finding, timing: Sequence[TimingIssue]) -> None:
    """A frame shifted down while output data-enable ran into vertical blanking is a symptom, not a cause.

    Lines emitted inside the output vsync pulse are counted in the next frame (a frame starts at the leading
    edge of vsync), so every later frame reads as shifted down by those lines: the vsync/data-enable fault
    that moved them is the cause, and the shift is ranked below it. A run scored one frame at a time (the
    passive scoreboard) sees the same fault without the shift; both reach the same diagnosis this way.
    """
    if shift.evidence.get("dx") == 0 and int(shift.evidence.get("dy", 0)) > 0 and any(
            issue.category == "de_in_blanking" for issue in timing):
        shift.confidence *= _SYMPTOM_WEIGHT
        shift.evidence["symptom_of"] = "de_in_blanking"


def _demote_symptoms(findings: list[Finding]) -> None:
    """A cause found in the stream makes the line/frame/shift symptoms secondary."""
    for f in findings:
        if f.kind in ("timing", "missing", "shift") and f.evidence.get("category") not in _PRIMARY_CATEGORIES:
            f.confidence *= _SYMPTOM_WEIGHT


def _pixel_findings(
    frames: Sequence[FrameResult],
    border: BorderInference | None,
    stalls: tuple[Sequence[Sequence[int]], Sequence[Sequence[int]]],
    tolerance_lsb: int,
    stall_named: bool,
    lanes: int = 1,
) -> list[Finding]:
    """Patterns of the wrong values: border, overflow, stall region (unless a stall was named from the
    stream), rounding; 'scattered' when none fits well. ``stalls`` is ``(input stalls, back-pressure)``."""
    pixel = [
        _lane_finding(frames, lanes),
        _chroma_finding(frames),
        _border_finding(frames, border),
        _overflow_finding(frames),
        None if stall_named else _stall_finding(frames, *stalls),
        _rounding_finding(frames, tolerance_lsb),
    ]
    found = [f for f in pixel if f is not None]
    if not found or max(f.confidence for f in found) < _PATTERN_FLOOR:
        found.append(_scattered(frames))
    return found
