"""What a model run gives back for one frame: the output, the checked-pixel mask and every stage's values."""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

__all__ = ["Stage", "ModelResult"]


@dataclass
class Stage:
    """One stage's values for a whole frame.

    Attributes:
        name: stage name (see :meth:`vkit.model.spec.PipelineSpec.stage_names`).
        array: ``(H, W)`` values (``(H, W, 3)`` for an RGB input stage); a signed integer dtype wide
            enough for the range in the bit-exact model, float64 in the floating-point twin.
        lo, hi: the stage's theoretical range (from :func:`vkit.model.widths.stage_ranges`), not the values seen.
        signed: True when the theoretical range goes below 0.
        bits: width of the theoretical range.
        clamped: ``(H, W)`` bool, True where this stage clamped or saturated; None when the stage
            cannot clamp for any input.
    """

    name: str
    array: np.ndarray
    lo: int
    hi: int
    signed: bool
    bits: int
    clamped: np.ndarray | None = None


@dataclass
class ModelResult:
    """What :func:`vkit.model.exact.run_model` or :func:`vkit.model.float_twin.run_float` returns for one frame.

    Attributes:
        output: ``(H, W)`` output pixels (integers in ``0 .. 2**bits - 1``; float64 for the twin).
        valid_mask: ``(H, W)`` bool, False where the border policy leaves the pixel unchecked.
        stages: stage name to :class:`Stage`, in pipeline order.
    """

    output: np.ndarray
    valid_mask: np.ndarray
    stages: "OrderedDict[str, Stage]"
