"""How much of the design a case's stimulus exercised: stage ranges, clamps, borders, colour weights."""

from __future__ import annotations

import hashlib
import importlib
import json
import os
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.vocab import is_rgb
from vkit.check.align import border_coverage
from vkit.model.pipeline import PipelineSpec
from vkit.model.quality import compare
from vkit.model.strength import stimulus_strength

__all__ = ["stimulus_coverage", "COVERAGE_MAX_FRAME_PIXELS", "STRENGTH_MAX_PIXELS", "COVERAGE_CACHE"]

COVERAGE_CACHE = "coverage"
"""Folder under the build cache that keeps each stimulus's coverage figures: the same frames on another
simulator, drive path or stall setting (or the next run) reuse them instead of rerunning every mutant."""
_CODE = ("vkit.model.fixedpoint", "vkit.model.luma", "vkit.model.window", "vkit.model.kernels", "vkit.model.magnitude",
         "vkit.model.widths", "vkit.model.exact", "vkit.model.float_twin", "vkit.model.quality", "vkit.model.mutants",
         "vkit.model.strength", "vkit.check.align", __name__)
"""Modules whose code the figures depend on: their source is part of the cache key."""

COVERAGE_MAX_FRAME_PIXELS = 1920 * 1080
"""Pixels of one frame the coverage figures are measured on. A bigger frame (3840x2160) is measured on its
first rows that fit (at least 3, the window's height), so measuring a case holds about what one 1920x1080
frame takes (model and float twin with their stages: about 0.3 GB) beside the simulation it overlaps; the
figures give ``rows_used`` (None: whole frames)."""

STRENGTH_MAX_PIXELS = 4_000_000
"""Input pixels of a case the mutant strength is measured on (every mutant is a model run: about 60 runs
per spec). Past it, the first frames that fit are used and the report says how many."""


def _gray_on_rgb(spec: PipelineSpec, frames: np.ndarray) -> bool:
    """True when an RGB design is fed gray frames only (R = G = B everywhere)."""
    return is_rgb(spec.input) and all(
        np.array_equal(f[..., 0], f[..., 1]) and np.array_equal(f[..., 1], f[..., 2]) for f in frames
    )


def stimulus_coverage(spec: PipelineSpec, frames: np.ndarray, floor: float,
                      cache_dir: Path | None = None) -> tuple[dict[str, Any], list[str]]:
    """The coverage figures report.json keeps for a case, and the warnings in words.

    Args:
        spec: the design's pipeline spec.
        frames: the case's input frames.
        floor: a stage whose seen range is below this share of its theoretical range gets a warning, 0..1.
        cache_dir: the build cache; the figures are kept in its :data:`COVERAGE_CACHE` folder, keyed on
            the spec, the frames, the floor and the code that measures them. None measures afresh.

    Returns:
        ``({"mutants", "stages", "clamp_shares", "border_share", "floor", "rows_used"}, warnings)``;
        ``border_share`` is None when the spec leaves borders unchecked; ``rows_used`` is None unless frames
        wider than tall budgets allow were measured on their first rows (:data:`COVERAGE_MAX_FRAME_PIXELS`).
    """
    path = None if cache_dir is None else Path(cache_dir) / COVERAGE_CACHE / f"{_key(spec, frames, floor)}.json"
    if path is not None and path.is_file():
        try:
            kept = json.loads(path.read_text())
            return kept["figures"], kept["warnings"]
        except (OSError, ValueError, KeyError):
            pass  # a damaged entry is measured again and rewritten
    figures, warnings = _measure(spec, frames, floor)
    if path is not None:
        _keep(path, {"figures": figures, "warnings": warnings})
    return figures, warnings


def _key(spec: PipelineSpec, frames: np.ndarray, floor: float) -> str:
    digest = hashlib.sha256(f"{spec!r}|{floor!r}|{frames.shape}|{frames.dtype}".encode())
    for name in _CODE:
        digest.update(Path(importlib.import_module(name).__file__ or "").read_bytes())
    digest.update(np.ascontiguousarray(frames).data)
    return digest.hexdigest()[:32]


def _keep(path: Path, value: dict[str, Any]) -> None:
    """Write ``value`` to ``path`` atomically; a cache that cannot be written only costs time."""
    tmp = path.with_name(f"{path.name}.{os.getpid()}.tmp")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp.write_text(json.dumps(value))
        os.replace(tmp, path)
    except OSError:
        tmp.unlink(missing_ok=True)


def _rows_within(frames: np.ndarray) -> int | None:
    """Rows of each frame the figures are measured on (:data:`COVERAGE_MAX_FRAME_PIXELS`); None: all of them."""
    height, width = int(frames.shape[1]), int(frames.shape[2])
    rows = max(3, COVERAGE_MAX_FRAME_PIXELS // max(1, width))
    return rows if rows < height else None


def _measure(spec: PipelineSpec, frames: np.ndarray, floor: float) -> tuple[dict[str, Any], list[str]]:
    """:func:`stimulus_coverage` without the cache."""
    rows = _rows_within(frames)
    if rows is not None:
        frames = frames[:, :rows]
    report = compare(spec, list(frames))
    warnings = [
        f"stage {c.name} reached {100 * c.share:.0f}% of its range "
        f"({c.seen_min}..{c.seen_max} of {c.lo}..{c.hi}): a pass proves less than it seems"
        for c in report.overall.coverage if c.hi != c.lo and c.share < floor
    ]
    border_share = None
    if spec.window.border != "unchecked":
        border_share = border_coverage(spec, list(frames))
        if border_share == 0.0:
            warnings.append("the stimulus cannot tell border policies apart (they agree on every border pixel): "
                            "a pass says nothing about the border logic")
    if _gray_on_rgb(spec, frames):
        warnings.append("gray input on an RGB design (R = G = B everywhere): the colour weights are untested")
    strength, strength_warning = _strength(spec, frames)
    if strength_warning:
        warnings.append(strength_warning)
    figures = {
        "mutants": strength,
        "stages": [c.to_dict() for c in report.overall.coverage],
        "clamp_shares": {k: round(float(v), 6) for k, v in report.overall.clamp_shares.items()},
        "border_share": border_share,
        "floor": floor,
        "rows_used": rows,
    }
    return figures, warnings


def _strength(spec: PipelineSpec, frames: np.ndarray) -> tuple[dict[str, Any], str | None]:
    """Which spec mutants the case's stimulus kills (:func:`vkit.model.strength.stimulus_strength`), in the
    compact form report.json keeps, and a warning in words when some survive."""
    per_frame = max(1, int(np.prod(frames.shape[1:3])))
    used = max(1, min(len(frames), STRENGTH_MAX_PIXELS // per_frame))
    full = stimulus_strength(spec, frames[:used], first_kill=True).to_dict()
    survivors = [{"mutant": s["name"], "description": s["description"], "reason": s["reason"]}
                 for s in full["survivors"]]
    compact = {"killed": full["killed"], "mutants": full["mutants"], "kill_rate": full["kill_rate"],
               "frames_used": used, "survivors": survivors, "table_address_share": full["table_address_share"]}
    if not survivors:
        return compact, None
    first = survivors[0]
    return compact, (f"{len(survivors)} of {full['mutants']} spec mutants survive this stimulus, e.g. "
                     f"{first['description']} ({first['reason']}): a design with that "
                     "fault would pass; `vkit strength --synthesize` finds frames that kill them")
