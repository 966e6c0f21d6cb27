"""Alignment between expected and captured frames: pixel offset, latency in clocks, and the border policy a design implements."""

from __future__ import annotations

import functools
import math
from typing import Callable, Sequence

import numpy as np

from vkit.check.results import BorderInference, BorderSpec, ExpectedFrame, Offset
from vkit.core.errors import ConfigError
from vkit.model import exact
from vkit.video.capture import UNKNOWN, Capture, FrameView

__all__ = [
    "BORDER_POLICIES",
    "ModelRunner",
    "measure_offset",
    "shift_back",
    "latency_clocks",
    "infer_border",
    "border_coverage",
]

BORDER_POLICIES: tuple[str, ...] = ("replicate", "zero", "constant", "mirror", "reflect", "passthrough")
"""Border policies a design can implement (``unchecked`` is a checking choice, not a behaviour). A 3x3
window reads the same under ``reflect`` as under ``replicate``, so the inference names it ``replicate``
(the first of two policies that give the same outputs is kept)."""

_MATCH_IF_ALIGNED = 0.99
"""Probability that a pixel matches under the right alignment (allows a few faulty pixels)."""
_SAMPLE_PIXELS = 4096
"""Pixels sampled for the coarse search over all candidate offsets."""
_REFINE = 8
"""Best coarse candidates re-scored on every pixel."""
_CHUNK_ELEMENTS = 4_000_000
"""Upper bound on (pixels x candidates) compared in one vectorised step."""

ModelRunner = Callable[[BorderSpec, np.ndarray], ExpectedFrame]
"""``(spec, image) -> expected frame``: how the border inference runs the model (default
:func:`vkit.model.exact.run_model`)."""


def _chance_match(exp_vals: np.ndarray, act_vals: np.ndarray) -> float:
    """Probability that two unrelated pixels (one from each frame) are equal."""
    if exp_vals.size == 0 or act_vals.size == 0:
        return 0.5
    ev, ec = np.unique(exp_vals, return_counts=True)
    av, ac = np.unique(act_vals, return_counts=True)
    common, ei, ai = np.intersect1d(ev, av, assume_unique=True, return_indices=True)
    p = float(np.sum((ec[ei] / exp_vals.size) * (ac[ai] / act_vals.size)))
    return min(max(p, 1e-6), 0.999)


def _llr(matches: np.ndarray, overlap: np.ndarray, p0: float) -> np.ndarray:
    """Log-likelihood ratio 'aligned' against 'unrelated' for match counts."""
    q = _MATCH_IF_ALIGNED
    if p0 >= q:
        # Flat pictures: matches carry almost no evidence; still rank by matches.
        return matches.astype(float) * 1e-3 - (overlap - matches) * 1e-3
    return matches * math.log(q / p0) + (overlap - matches) * math.log((1 - q) / (1 - p0))


def _candidates(height: int, width: int, max_dy: int, max_dx: int, raster: bool) -> np.ndarray:
    """Rows of (kind, dy, dx, lag) with kind 0 = grid, 1 = raster."""
    dys = np.arange(-max_dy, max_dy + 1)
    dxs = np.arange(-max_dx, max_dx + 1)
    gy, gx = np.meshgrid(dys, dxs, indexing="ij")
    grid = np.stack([np.zeros(gy.size, np.int64), gy.ravel(), gx.ravel(), gy.ravel() * width + gx.ravel()], 1)
    rows = [grid]
    if raster and width > 1:
        span = max_dy * width + width - 1
        lags = np.arange(-span, span + 1)
        lags = lags[(lags % width) != 0]  # whole-line lags are the same as grid (dy, 0)
        if lags.size:
            sgn = np.sign(lags)
            dy = sgn * (np.abs(lags) // width)
            dx = sgn * (np.abs(lags) % width)
            rows.append(np.stack([np.ones(lags.size, np.int64), dy, dx, lags], 1))
    return np.concatenate(rows).astype(np.int64)


def _coarse_scores(
    exp: np.ndarray,
    e_ok: np.ndarray,
    act_vals: np.ndarray,
    ys: np.ndarray,
    xs: np.ndarray,
    cands: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Matches and overlap of sampled actual pixels against every candidate offset."""
    h, w = exp.shape
    flat = exp.ravel()
    flat_ok = e_ok.ravel()
    matches = np.zeros(len(cands), np.int64)
    overlap = np.zeros(len(cands), np.int64)
    step = max(1, _CHUNK_ELEMENTS // max(1, ys.size))
    for start in range(0, len(cands), step):
        c = cands[start : start + step]
        kind = c[:, 0][None, :]
        sy = ys[:, None] - c[:, 1][None, :]
        sx = xs[:, None] - c[:, 2][None, :]
        sr = (ys * w + xs)[:, None] - c[:, 3][None, :]
        in_grid = (sy >= 0) & (sy < h) & (sx >= 0) & (sx < w)
        src = np.where(kind == 1, sr, np.clip(sy, 0, h - 1) * w + np.clip(sx, 0, w - 1))
        inside = np.where(kind == 1, (sr >= 0) & (sr < h * w), in_grid)
        src = np.clip(src, 0, h * w - 1)
        ok = inside & flat_ok[src]
        eq = ok & (flat[src] == act_vals[:, None])
        matches[start : start + step] = eq.sum(0)
        overlap[start : start + step] = ok.sum(0)
    return matches, overlap


def _exact_score(
    exp: np.ndarray, e_ok: np.ndarray, act: np.ndarray, a_ok: np.ndarray, kind: int, dy: int, dx: int
) -> tuple[int, int]:
    """Matches and overlap over every pixel for one candidate offset."""
    h, w = exp.shape
    if kind == 1:
        lag = dy * w + dx
        ef, eo, af, ao = exp.ravel(), e_ok.ravel(), act.ravel(), a_ok.ravel()
        n = h * w
        if lag >= 0:
            e_s, eo_s, a_s, ao_s = ef[: n - lag], eo[: n - lag], af[lag:], ao[lag:]
        else:
            e_s, eo_s, a_s, ao_s = ef[-lag:], eo[-lag:], af[: n + lag], ao[: n + lag]
    else:
        ay0, ay1 = max(0, dy), min(h, h + dy)
        ax0, ax1 = max(0, dx), min(w, w + dx)
        if ay0 >= ay1 or ax0 >= ax1:
            return 0, 0
        a_s = act[ay0:ay1, ax0:ax1]
        ao_s = a_ok[ay0:ay1, ax0:ax1]
        e_s = exp[ay0 - dy : ay1 - dy, ax0 - dx : ax1 - dx]
        eo_s = e_ok[ay0 - dy : ay1 - dy, ax0 - dx : ax1 - dx]
    ok = ao_s & eo_s
    return int(np.count_nonzero(ok & (a_s == e_s))), int(np.count_nonzero(ok))


def measure_offset(
    expected: np.ndarray,
    actual: np.ndarray,
    *,
    present: np.ndarray | None = None,
    valid: np.ndarray | None = None,
    max_dy: int = 3,
    max_dx: int | None = None,
    raster: bool = True,
    seed: int = 0,
) -> Offset:
    """Find the offset that best lines up ``actual`` with ``expected``.

    Every candidate (dy in ``-max_dy..max_dy`` lines, dx in ``-max_dx..max_dx`` pixels, both as a
    grid shift and, when ``raster`` is set, as a lag in raster order) is scored on a sample of the
    present pixels in one vectorised pass; the best few are re-scored on every pixel. Scores are
    log-likelihood ratios of "aligned" against "unrelated" given how often two unrelated pixels are
    equal in these pictures, so a perfect match on a narrow overlap can beat a poor match on a wide
    one.

    Args:
        expected: ``(H, W)`` integer frame from the model.
        actual: ``(H, W)`` integer frame as captured; :data:`~vkit.video.capture.UNKNOWN` pixels are ignored.
        present: ``(H, W)`` bool, True where a pixel arrived; all True when omitted.
        valid: ``(H, W)`` bool, True where the expected pixel is checked; all True when omitted.
        max_dy: largest line offset searched, lines (>= 0).
        max_dx: largest column offset searched, pixels; ``W - 1`` when omitted.
        raster: also search lags in raster order (latency against the frame marks).
        seed: seed of the pixel sample (only used on frames with more than 4096 pixels).

    Returns:
        The best :class:`Offset`; zero offset with ``confidence`` 0 when nothing can be compared.
    """
    exp, act = _same_shape_frames(expected, actual)
    h, w = exp.shape
    if max_dy < 0:
        raise ConfigError(f"measure_offset: max_dy is {max_dy}; give 0 or more lines")
    max_dy = min(max_dy, h - 1)
    max_dx = w - 1 if max_dx is None else min(max(0, max_dx), w - 1)
    a_ok = np.ones_like(act, bool) if present is None else np.asarray(present, bool).copy()
    a_ok &= act != UNKNOWN
    e_ok = np.ones_like(exp, bool) if valid is None else np.asarray(valid, bool)
    ys, xs = np.nonzero(a_ok)
    if ys.size == 0 or not e_ok.any():
        return Offset(width=w)
    if ys.size > _SAMPLE_PIXELS:
        pick = np.random.default_rng(seed).choice(ys.size, _SAMPLE_PIXELS, replace=False)
        ys, xs = ys[pick], xs[pick]
    p0 = _chance_match(exp[e_ok], act[a_ok])
    cands = _candidates(h, w, max_dy, max_dx, raster)
    m, n = _coarse_scores(exp, e_ok, act[ys, xs], ys, xs, cands)
    scored = [_exact_llr(exp, e_ok, act, a_ok, cands[i], p0) for i in _shortlist(cands, _llr(m, n, p0))]
    return _best_offset(scored, w)


def _same_shape_frames(expected: np.ndarray, actual: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    exp = np.asarray(expected)
    act = np.asarray(actual)
    if exp.ndim != 2 or exp.shape != act.shape:
        raise ConfigError(
            f"measure_offset: expected shape {exp.shape} and actual shape {act.shape} must be the same "
            "(H, W); pass one frame at a time"
        )
    return exp, act


def _shortlist(cands: np.ndarray, coarse: np.ndarray) -> list[int]:
    """The best coarse candidates, and always the zero offset so an exact match is never lost to sampling."""
    zero = int(np.flatnonzero((cands[:, 0] == 0) & (cands[:, 1] == 0) & (cands[:, 2] == 0))[0])
    order = [int(i) for i in np.argsort(-coarse, kind="stable")[:_REFINE]]
    if zero not in order:
        order.append(zero)
    return order


def _exact_llr(
    exp: np.ndarray, e_ok: np.ndarray, act: np.ndarray, a_ok: np.ndarray, cand: np.ndarray, p0: float
) -> tuple[float, int, int, int, int, int, int, int]:
    """One candidate scored on every pixel, as a tuple that sorts best first when reversed:
    ``(llr, -|lag|, -kind, kind, dy, dx, matches, overlap)`` (ties: smaller lag, then grid before raster)."""
    kind, dy, dx, lag = (int(v) for v in cand)
    mm, nn = _exact_score(exp, e_ok, act, a_ok, kind, dy, dx)
    llr = float(_llr(np.array(mm), np.array(nn), p0))
    return (llr, -abs(lag), -kind, kind, dy, dx, mm, nn)


def _best_offset(scored: list[tuple[float, int, int, int, int, int, int, int]], width: int) -> Offset:
    """The winner of the re-scored candidates, its confidence its posterior weight among them."""
    scored.sort(reverse=True)
    best = scored[0]
    llrs = np.array([s[0] for s in scored])
    weights = np.exp(np.clip(llrs - best[0], -700, 0))  # -700: exp() stays above the float64 minimum
    _, _, _, kind, dy, dx, mm, nn = best
    # Grid and raster readings of the same (dy, dx) are one answer as far as the offset goes.
    same = np.array([s[4] == dy and s[5] == dx for s in scored])
    conf = float(weights[same].sum() / weights.sum())
    name = "none" if dy == 0 and dx == 0 else ("raster" if kind == 1 else "grid")
    return Offset(dx=dx, dy=dy, kind=name, match_share=mm / nn if nn else 0.0, overlap=nn, confidence=conf, width=width)


def shift_back(frame: np.ndarray, present: np.ndarray, offset: Offset) -> tuple[np.ndarray, np.ndarray]:
    """Undo ``offset`` on a captured frame: returns ``(pixels, present)`` on the expected grid.

    Places with no source pixel after the shift get ``present = False`` (and value 0).
    """
    frame = np.asarray(frame)
    present = np.asarray(present, bool)
    h, w = frame.shape
    out = np.zeros_like(frame)
    out_p = np.zeros_like(present)
    if offset.is_zero:
        return frame.copy(), present.copy()
    if offset.kind == "raster":
        lag = offset.dy * w + offset.dx
        n = h * w
        f, p = frame.ravel(), present.ravel()
        of, op = out.reshape(-1), out_p.reshape(-1)
        if abs(lag) >= n:
            return out, out_p
        if lag >= 0:
            of[: n - lag], op[: n - lag] = f[lag:], p[lag:]
        else:
            of[-lag:], op[-lag:] = f[: n + lag], p[: n + lag]
        return out, out_p
    dy, dx = offset.dy, offset.dx
    ey0, ey1 = max(0, -dy), min(h, h - dy)
    ex0, ex1 = max(0, -dx), min(w, w - dx)
    if ey0 < ey1 and ex0 < ex1:
        out[ey0:ey1, ex0:ex1] = frame[ey0 + dy : ey1 + dy, ex0 + dx : ex1 + dx]
        out_p[ey0:ey1, ex0:ex1] = present[ey0 + dy : ey1 + dy, ex0 + dx : ex1 + dx]
    return out, out_p


def latency_clocks(capture: Capture) -> int | None:
    """Latency of the run in clocks: ``facts.latency_clocks``, else first output minus first input clock.

    Returns None when the capture does not tell (no output, or the input clock was not recorded).
    """
    facts = capture.facts
    if facts.latency_clocks is not None:
        return int(facts.latency_clocks)
    first_in = facts.first_input_clock
    first_out = facts.first_output_clock
    if first_out is None and len(capture):
        first_out = int(capture.clock.min())
    if first_in is None or first_out is None:
        return None
    return int(first_out) - int(first_in)


def _as_views(actual: Capture | Sequence[FrameView], height: int, width: int) -> list[FrameView]:
    if isinstance(actual, Capture):
        return actual.frames(height, width)
    return list(actual)


_DECIDED_SHARE = 0.5
"""A policy is named only when it matches at least half of the border pixels where the policies differ;
below that no policy explains the border better than a coin."""


def infer_border(
    spec: BorderSpec,
    images: Sequence[np.ndarray],
    actual: Capture | Sequence[FrameView],
    *,
    policies: Sequence[str] = BORDER_POLICIES,
    run_model: ModelRunner | None = None,
) -> BorderInference:
    """Tell which border policy the design implements, and at which output offset.

    The model is run once per policy (``spec.with_border(policy)``) on every input image. Pixels where
    all policies agree give the output offset (:func:`measure_offset`); pixels where they differ
    (the border) are compared, after undoing that offset, against each policy's output.

    Args:
        spec: pipeline spec with a ``with_border(name)`` method.
        images: the input images, one per captured frame, in order.
        actual: the capture, or its frames already rebuilt.
        policies: candidate policy names (at least two).
        run_model: ``(spec, image) -> ModelResult``; :func:`vkit.model.exact.run_model` when omitted.

    Returns:
        A :class:`BorderInference`.
    """
    if len(policies) < 2:
        raise ConfigError(f"infer_border: {len(policies)} policies given; give at least two to choose between")
    if not images:
        raise ConfigError("infer_border: no input images given; pass the images the design was fed")
    results = _distinct_policy_outputs(spec, images, policies, run_model or exact.run_model)
    names = list(results)
    if len(names) < 2:
        off = Offset(width=int(np.asarray(results[names[0]][0]).shape[1]))
        return BorderInference("unknown", 0.0, 0.0, off, {names[0]: 0}, 0)
    h, w = np.asarray(results[names[0]][0]).shape
    views = _as_views(actual, h, w)
    n_frames = min(len(images), len(views))
    if n_frames == 0:
        return BorderInference("unknown", 0.0, 0.0, Offset(width=w), {p: 0 for p in names}, 0)
    return _judge_border(names, [np.stack([results[p][i] for p in names]) for i in range(n_frames)], views)


def _distinct_policy_outputs(
    spec: BorderSpec, images: Sequence[np.ndarray], policies: Sequence[str], run_model: ModelRunner
) -> dict[str, list[np.ndarray]]:
    """Policy -> its int64 output per image; a policy giving the same outputs as one kept already
    (constant 0 and zero) adds nothing and is left out."""
    results: dict[str, list[np.ndarray]] = {}
    for p in policies:
        outs = [np.asarray(run_model(spec.with_border(p), np.asarray(img)).output, np.int64) for img in images]
        if not any(all(np.array_equal(a, b) for a, b in zip(outs, kept)) for kept in results.values()):
            results[p] = outs
    return results


def _judge_border(policies: list[str], outputs: list[np.ndarray], views: list[FrameView]) -> BorderInference:
    """Score each policy on the border pixels of each frame (``outputs[i]``: policies x H x W)."""
    scores = {p: 0 for p in policies}
    per_pixel_wins: dict[str, list[np.ndarray]] = {p: [] for p in policies}
    compared = 0
    offset = Offset(width=outputs[0].shape[2])
    for i, outs in enumerate(outputs):
        agree = np.all(outs == outs[0], axis=0)
        view = views[i]
        if i == 0:
            offset = measure_offset(outs[0], view.pixels, present=view.present, valid=agree)
        pix, pres = shift_back(view.pixels, view.present, offset)
        disc = ~agree & pres & (pix != UNKNOWN)
        compared += int(disc.sum())
        for k, p in enumerate(policies):
            win = disc & (outs[k] == pix)
            scores[p] += int(win.sum())
            per_pixel_wins[p].append(win[disc])
    if compared == 0:
        return BorderInference("unknown", 0.0, 0.0, offset, scores, 0)
    best, second = sorted(policies, key=lambda p: -scores[p])[:2]
    share = scores[best] / compared
    wb = np.concatenate(per_pixel_wins[best])
    ws = np.concatenate(per_pixel_wins[second])
    differ = wb != ws
    won = float(np.mean(wb[differ])) if differ.any() else 0.5  # no pixel tells them apart: a coin
    conf = share * won
    return BorderInference(best if share >= _DECIDED_SHARE else "unknown", share, conf, offset, scores, compared)


def border_coverage(
    spec: BorderSpec,
    images: Sequence[np.ndarray],
    *,
    policies: Sequence[str] = BORDER_POLICIES,
    run_model: ModelRunner | None = None,
) -> float:
    """Share of border-ring output pixels where the border policies give different values, 0..1.

    0 means the stimulus cannot tell one border policy from another (e.g. a flat dark edge where
    'zero' and 'replicate' agree): a pass says nothing about the border logic.
    """
    if not images:
        raise ConfigError("border_coverage: no input images given; pass the images the design is fed")
    # the model's stages are not needed here, only each policy's output ring: one frame's output at a time
    run = run_model or functools.partial(exact.run_model, keep_stages=False)
    differ = total = 0
    for img in images:
        rings = np.stack([_ring(np.asarray(run(spec.with_border(p), np.asarray(img)).output)) for p in policies])
        differ += int(np.count_nonzero(~np.all(rings == rings[0], axis=0)))
        total += int(rings.shape[1])
    return differ / max(1, total)


def _ring(out: np.ndarray) -> np.ndarray:
    """The border-ring pixels of a 2-D output (first and last rows and columns, each pixel once)."""
    ring = np.zeros(out.shape, bool)
    ring[0, :] = ring[-1, :] = ring[:, 0] = ring[:, -1] = True
    return out[ring]
