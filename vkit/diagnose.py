"""Failure patterns: names what went wrong in a failing run from its mismatch masks, frames and stage arrays."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

from vkit.align import shift_back
from vkit.capture import UNKNOWN

if TYPE_CHECKING:  # pragma: no cover
    from vkit.align import BorderInference, Offset
    from vkit.scoreboard import FrameResult

__all__ = ["KINDS", "Finding", "TimingIssue", "diagnose"]

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
)
"""The fixed vocabulary of :attr:`Finding.kind`; other modules rely on these exact words."""

_SIGNIFICANT_LOG_P = math.log(1e-4)
"""A region pattern must be this unlikely (log probability) under 'mismatches fall anywhere'."""


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
        return {
            "kind": self.kind,
            "message": self.message,
            "evidence": self.evidence,
            "confidence": round(float(self.confidence), 4),
        }


@dataclass
class TimingIssue:
    """A timing problem the scoreboard saw (one line, plus its numbers).

    Attributes:
        category: ``line_length``, ``line_count``, ``frame_count``, ``de_in_blanking``, ``vsync``,
            ``hsync``, ``xz_control``, ``latency``, ``timeout``, ``extra`` or ``offset``.
        message: one line naming what was seen and what was expected.
        evidence: the numbers (JSON-ready).
    """

    category: str
    message: str
    evidence: dict[str, Any] = field(default_factory=dict)


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
    bad_rows = np.flatnonzero((same < 0.9) & rows_ok)
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
        if up and np.mean(np.array(up) >= 0.9) >= 0.8:
            ev["dropped_line"] = k
            return (
                f"{issue.message}: line {k} was dropped (output lines {k} on carry expected lines {k + 1} on); "
                "a line start is lost, e.g. hsync/data-enable edge missed after a stall or in the line buffer",
                ev,
            )
    elif lines > h and bad_rows.size:
        k = int(bad_rows[0])
        down = [row_match(y, y - 1) for y in range(max(k, 1), h) if rows_ok[y]]
        if down and np.mean(np.array(down) >= 0.9) >= 0.8:
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
    "latency": ("timing", 0.93, "update the declared latency or fix the pipeline depth"),
    "extra": ("timing", 0.8, "the design emits more pixels than the frame holds"),
    "timeout": ("missing", 0.7, "the design stopped emitting before the frame was complete"),
}


def _timing_findings(timing: Sequence[TimingIssue], frames: Sequence[FrameResult]) -> list[Finding]:
    out = []
    for issue in timing:
        if issue.category == "offset":
            continue  # reported as a shift
        kind, conf, action = _TIMING_ACTION.get(issue.category, ("timing", 0.85, ""))
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
    ev = {"count": total, "first": {"frame": fr.index, "x": x, "y": y, "clock": clk}, "rows": rows[:50]}
    return Finding("xz", msg, ev, 0.99)


def _missing_finding(frames: Sequence[FrameResult], failures: int, meta: dict[str, Any]) -> Finding | None:
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
    timed = bool(meta.get("timed_out"))
    ev: dict[str, Any] = {"count": total, "checked": checked, "whole_frames": whole[:50], "timed_out": timed}
    if whole:
        what = f"frame(s) {', '.join(map(str, whole[:5]))} never came out"
        fix = "the design stops emitting; check it re-arms on vsync"
    elif tail_rows and len(tail_rows) == sum(1 for fr in frames if fr.missing.any()):
        n = tail_rows[0][1]
        what = f"the last {_plural(n, 'line')} of {_plural(len(tail_rows), 'frame')} never arrived"
        fix = "flush the last line(s) at the leading edge of vsync (vertical front porch)"
        ev["tail_lines"] = [list(t) for t in tail_rows[:50]]
    else:
        fr = next(fr for fr in frames if fr.missing.any())
        ys, xs = np.nonzero(fr.missing)
        what = f"first gap at frame {fr.index} (x={int(xs[0])}, y={int(ys[0])})"
        fix = "pixels are lost between input and output"
    if timed:
        fix += f"; the run timed out after {meta.get('timeout_clocks', meta.get('clocks_run', '?'))} clocks"
    msg = f"{total} of {checked} checked pixels never arrived: {what}; {fix}"
    share = total / max(1, failures)
    return Finding("missing", msg, ev, 0.96 * share)


# --------------------------------------------------------------------------- shift


def _shift_findings(
    frames: Sequence[FrameResult], offset: Offset | None, applied: Offset | None
) -> Finding | None:
    if applied is not None and not applied.is_zero:
        return Finding(
            "shift",
            _shift_message(applied) + " (undone before comparing)",
            applied.to_dict(),
            0.98 * applied.match_share,
        )
    if offset is None or offset.is_zero or offset.match_share < 0.9:
        return None
    before = after = 0
    for fr in frames:
        if not fr.value_bad.any():
            continue
        before += int(fr.value_bad.sum())
        raw_a, raw_p = fr.actual, fr.present
        a, p = shift_back(raw_a, raw_p, offset)
        ok = p & fr.valid & (a != UNKNOWN)
        after += int(np.count_nonzero(ok & (a != fr.expected)))
    if before == 0:
        return None
    explained = max(0.0, 1.0 - after / before)
    ev = offset.to_dict()
    ev["mismatches_before"] = before
    ev["mismatches_after"] = after
    conf = explained * offset.match_share * offset.confidence
    if conf < 0.5:
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
        return (
            f"output is the expected image shifted {off.describe()}: latency or column offset off by "
            f"{one.get(n, str(n))}"
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


def _region_stats(frames: Sequence[FrameResult], region_of) -> tuple[int, int, int, int]:
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
    if not shapes or min(min(s) for s in shapes) < 3:
        return None

    def ring(fr: FrameResult) -> np.ndarray:
        m = np.zeros(fr.expected.shape, bool)
        m[0, :] = m[-1, :] = m[:, 0] = m[:, -1] = True
        return m

    bin_, btot, cin, ctot = _region_stats(frames, ring)
    if btot < 2 or ctot == 0:
        return None
    recall = bin_ / btot
    base = cin / ctot
    if recall < 0.9 or _log_tail(bin_, btot, base) > _SIGNIFICANT_LOG_P:
        return None
    sides = {"top": 0, "bottom": 0, "left": 0, "right": 0}
    for fr in frames:
        b = fr.value_bad
        sides["top"] += int(b[0, :].sum())
        sides["bottom"] += int(b[-1, :].sum())
        sides["left"] += int(b[:, 0].sum())
        sides["right"] += int(b[:, -1].sum())
    named = [s for s, n in sides.items() if n >= max(1, 0.05 * bin_)]
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
        for name in getattr(fr.model, "stages", {}) or {}:
            if name not in names and name != "input":
                names.append(name)
    return names


def _stage_array(fr: FrameResult, name: str) -> Any:
    st = (getattr(fr.model, "stages", {}) or {}).get(name)
    if st is None:
        return None
    return st


def _overflow_finding(frames: Sequence[FrameResult]) -> Finding | None:
    failing = [fr for fr in frames if fr.value_bad.any()]
    if not failing:
        return None
    best: Finding | None = None
    for name in _stage_items(failing):
        vals, bads, clamps = [], [], []
        st0 = None
        for fr in failing:
            st = _stage_array(fr, name)
            if st is None:
                continue
            arr = np.asarray(getattr(st, "array", st))
            if arr.shape != fr.expected.shape:
                continue
            st0 = st
            checked = fr.valid & fr.present & ~fr.unknown
            v = arr.astype(np.int64)
            if getattr(st, "signed", False) or (v < 0).any():
                v = np.abs(v)
            vals.append(v[checked])
            bads.append(fr.value_bad[checked])
            cm = getattr(st, "clamped", None)
            clamps.append(np.asarray(cm, bool)[checked] if cm is not None else None)
        if not vals:
            continue
        v = np.concatenate(vals)
        b = np.concatenate(bads)
        total_bad, n = int(b.sum()), v.size
        if total_bad < 3 or n == 0:
            continue
        # Clamp/saturation region of the model.
        if all(c is not None for c in clamps):
            c = np.concatenate(clamps)
            cin, bin_ = int(c.sum()), int((c & b).sum())
            recall, base = bin_ / total_bad, cin / n
            if cin and recall >= 0.8 and base <= 0.5 and _log_tail(bin_, total_bad, base) <= _SIGNIFICANT_LOG_P:
                conf = recall * (1 - base)
                f = Finding(
                    "overflow",
                    f"{_pct(recall)} of mismatches sit where the model saturates {name} ({_pct(base)} of pixels): "
                    f"the design wraps or saturates {name} at a different bound; saturate it like the model",
                    {"stage": name, "region": "clamped", "in_region": bin_, "mismatches": total_bad,
                     "region_share": base},
                    conf,
                )
                if best is None or f.confidence > best.confidence:
                    best = f
        # Top of the stage's values: the best "value >= t" rule.
        order = np.argsort(-v, kind="stable")
        vs, bs = v[order], b[order]
        cum = np.cumsum(bs)
        k = np.arange(1, n + 1)
        cut = np.ones(n, bool)
        cut[:-1] = vs[:-1] != vs[1:]  # a region must hold whole value groups
        cut &= k <= n // 2
        if not cut.any():
            continue
        prec = cum / k
        rec = cum / total_bad
        f1 = np.where(cut, 2 * prec * rec / np.maximum(prec + rec, 1e-12), -1.0)
        i = int(np.argmax(f1))
        recall, precision, base = float(rec[i]), float(prec[i]), (i + 1) / n
        if recall < 0.8 or precision < 0.5:
            continue
        if _log_tail(int(cum[i]), total_bad, base) > _SIGNIFICANT_LOG_P:
            continue
        t_in = int(vs[i])
        t_out = int(vs[i + 1]) if i + 1 < n else None
        cond = f"{name} >= {t_in}"
        bits_txt = ""
        ev: dict[str, Any] = {"stage": name, "region": "top", "threshold": t_in, "below": t_out,
                              "in_region": int(cum[i]), "mismatches": total_bad, "region_share": base,
                              "precision": precision}
        if t_out is not None:
            b2 = max(0, int(t_out).bit_length())
            if t_out < (1 << b2) <= t_in:
                need = getattr(st0, "bits", None)
                widen = f"widen it to {need} bits" if need else "widen it"
                cond = f"{name} >= 2^{b2} ({1 << b2})"
                bits_txt = f": {name} wraps at {b2} bits; {widen} or saturate it"
                ev["wrap_bits"] = b2
        hi = getattr(st0, "hi", None)
        if not bits_txt:
            bits_txt = f": {name} overflows near the top of its range" + (f" (model range up to {hi})" if hi is not None else "")
        conf = recall * (1 - base) * min(1.0, precision + 0.2)
        if getattr(st0, "signed", False):
            cond = "|" + name + "|" + cond[len(name):]
        f = Finding(
            "overflow",
            f"{_pct(recall)} of mismatches sit where {cond} ({_pct(base)} of pixels, {_pct(precision)} of "
            f"those wrong){bits_txt}",
            ev,
            conf,
        )
        if best is None or f.confidence > best.confidence:
            best = f
    return best


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
        for how, asl, esl in (("repeated", slice(x0 + 1, None), slice(x0, -1)), ("dropped", slice(x0, -1), slice(x0 + 1, None))):
            kk = k[asl] & fr.valid[y][esl]
            if kk.sum() >= 2 and np.mean(a[asl][kk] == e[esl][kk]) >= 0.9:
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
            conf = 0.98 * explained * (near / len(slips))
        else:
            where = "with no recorded stall there"
            fix = "a pixel is taken twice or skipped; check the valid/ready handshake and the column counter"
            conf = 0.75 * explained
        shift_dir = "right" if how == "repeated" else "left"
        msg = (
            f"frame {f} line {y}: pixel {how} at x={x0}, the rest of the line shifted {shift_dir} by 1, "
            f"{where} ({_plural(len(slips), 'line')} like this, {near} near a stall): {fix}"
        )
        ev = {"slips": [[s[0], s[1], s[2], s[3], s[4]] for s in slips[:50]], "near_stall": near,
              "rows_failing": bad_rows}
        return Finding("stall", msg, ev, conf)
    if not stall and not back:
        return None
    bin_, btot, cin, ctot = _region_stats(failing, lambda fr: _stall_region(fr, stall, back))
    if btot < 2 or ctot == 0 or cin == 0:
        return None
    recall, base = bin_ / btot, cin / ctot
    if recall < 0.7 or base > 0.5 or _log_tail(bin_, btot, base) > _SIGNIFICANT_LOG_P:
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
    if share < 0.9 or density > 0.5:
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
    return Finding("rounding", msg, ev, share * (1 - density) * 0.95)


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
        0.1,
    )


def diagnose(
    frames: Sequence[FrameResult],
    *,
    meta: dict[str, Any] | None = None,
    timing: Sequence[TimingIssue] = (),
    offset: Offset | None = None,
    applied_offset: Offset | None = None,
    stall_pixels: Sequence[Sequence[int]] = (),
    backpressure_pixels: Sequence[Sequence[int]] = (),
    border: BorderInference | None = None,
    tolerance_lsb: int = 0,
) -> list[Finding]:
    """Name the failure patterns of a scored run, most confident first.

    Region patterns (border, overflow, stall) are judged by the share of mismatches inside the region
    against the share of checked pixels inside it, and must be unlikely by chance (Chernoff bound on
    the binomial tail below 1e-4).

    Args:
        frames: per-frame results from the scoreboard (``expected``, ``actual``, masks, ``model``).
        meta: the capture's meta dict.
        timing: timing issues the scoreboard found.
        offset: offset measured on the raw frames (``align="exact"``), if any.
        applied_offset: offset already undone before comparing (``align="auto"``), if any.
        stall_pixels: ``[frame, y, x]`` input pixels right after a stall.
        backpressure_pixels: ``[frame, y, x]`` output pixels right after back-pressure.
        border: border-policy inference, if the scoreboard could run it.
        tolerance_lsb: the tolerance used, LSB.

    Returns:
        Findings sorted by confidence (highest first); empty when nothing failed.
    """
    meta = meta or {}
    stall = [tuple(int(v) for v in s) for s in stall_pixels]
    back = [tuple(int(v) for v in s) for s in backpressure_pixels]
    failures = sum(int(fr.mismatch.sum()) for fr in frames)
    value_failures = sum(int(fr.value_bad.sum()) for fr in frames)
    findings: list[Finding] = _timing_findings(timing, frames)
    for f in (_xz_finding(frames), _missing_finding(frames, failures, meta)):
        if f is not None:
            findings.append(f)
    shift = _shift_findings(frames, offset, applied_offset)
    if shift is not None:
        findings.append(shift)
    line_explained = any("dropped_line" in f.evidence or "repeated_line" in f.evidence for f in findings)
    if line_explained:
        # The lines after a dropped one move up, so the last line is 'missing' only as a consequence.
        findings = [f for f in findings if f.kind != "missing"]
    if value_failures and not line_explained and (shift is None or applied_offset is not None):
        pixel = [
            _border_finding(frames, border),
            _overflow_finding(frames),
            _stall_finding(frames, stall, back),
            _rounding_finding(frames, tolerance_lsb),
        ]
        pixel = [f for f in pixel if f is not None]
        findings.extend(pixel)
        if not pixel or max(f.confidence for f in pixel) < 0.3:
            findings.append(_scattered(frames))
    findings.sort(key=lambda f: -f.confidence)
    return findings
