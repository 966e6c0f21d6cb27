"""How much of the design a case's stimulus exercised: stage ranges, clamps, borders, colour weights."""

from __future__ import annotations

from typing import Any

import numpy as np

from vkit.check.align import border_coverage
from vkit.model.pipeline import PipelineSpec
from vkit.model.quality import compare

__all__ = ["stimulus_coverage"]


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
    figures = {
        "stages": [c.to_dict() for c in report.overall.coverage],
        "clamp_shares": {k: round(float(v), 6) for k, v in report.overall.clamp_shares.items()},
        "border_share": border_share,
        "floor": floor,
    }
    return figures, warnings
