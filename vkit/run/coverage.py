"""How much of the design a case's stimulus exercised: stage ranges, clamps, borders, colour weights."""

from __future__ import annotations

from typing import Any

import numpy as np

from vkit.check.align import border_coverage
from vkit.model.pipeline import PipelineSpec
from vkit.model.quality import compare
from vkit.model.strength import stimulus_strength

__all__ = ["stimulus_coverage", "STRENGTH_MAX_PIXELS"]

STRENGTH_MAX_PIXELS = 4_000_000
"""Input pixels of a case the mutant strength is measured on (every mutant is a model run: about 60 runs
per spec). Past it, the first frames that fit are used and the report says how many."""


def _gray_on_rgb(spec: PipelineSpec, frames: np.ndarray) -> bool:
    """True when an RGB design is fed gray frames only (R = G = B everywhere)."""
    return spec.input == "rgb888" and all(
        np.array_equal(f[..., 0], f[..., 1]) and np.array_equal(f[..., 1], f[..., 2]) for f in frames
    )


def stimulus_coverage(spec: PipelineSpec, frames: np.ndarray, floor: float) -> tuple[dict[str, Any], list[str]]:
    """The coverage figures report.json keeps for a case, and the warnings in words.

    Args:
        spec: the design's pipeline spec.
        frames: the case's input frames.
        floor: a stage whose seen range is below this share of its theoretical range gets a warning, 0..1.

    Returns:
        ``({"stages", "clamp_shares", "border_share", "floor"}, warnings)``; ``border_share`` is None
        when the spec leaves borders unchecked.
    """
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
