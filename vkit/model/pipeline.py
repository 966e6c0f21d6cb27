"""The filter pipeline in one place: the spec (:mod:`vkit.model.spec`), the presets (:mod:`vkit.model.presets`),
the bit-exact model (:mod:`vkit.model.exact`), the floating-point twin (:mod:`vkit.model.float_twin`) and the
result types (:mod:`vkit.model.result`).

The names live in those modules; this one gathers them because generated user tests and older code import
them from here.
"""

from __future__ import annotations

from vkit.model.exact import run_model, run_model_frames
from vkit.model.float_twin import run_float
from vkit.model.presets import PRESETS, SPECS_DIR, preset
from vkit.model.result import ModelResult, Stage
from vkit.model.spec import (
    BORDERS,
    FILTER_KINDS,
    GRADIENT_KINDS,
    INPUTS,
    MAGNITUDE_METHODS,
    ORDER_KINDS,
    ROUNDINGS,
    FilterSpec,
    LumaSpec,
    MagnitudeSpec,
    OutputSpec,
    PipelineSpec,
    WindowSpec,
)

__all__ = [
    "INPUTS",
    "FILTER_KINDS",
    "GRADIENT_KINDS",
    "ORDER_KINDS",
    "MAGNITUDE_METHODS",
    "BORDERS",
    "ROUNDINGS",
    "LumaSpec",
    "WindowSpec",
    "FilterSpec",
    "MagnitudeSpec",
    "OutputSpec",
    "PipelineSpec",
    "Stage",
    "ModelResult",
    "PRESETS",
    "SPECS_DIR",
    "preset",
    "run_model",
    "run_float",
    "run_model_frames",
]
