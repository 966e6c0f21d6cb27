"""The built-in pipelines by name (the formulas the sample RTL implements) and their TOML copies."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from vkit.core.validate import fail, suggest
from vkit.model.spec import FilterSpec, LumaSpec, MagnitudeSpec, OutputSpec, PipelineSpec, WindowSpec

__all__ = ["PRESETS", "SPECS_DIR", "preset"]

_EDGE = PipelineSpec(
    name="edge",
    input="rgb888",
    # BT.601 weights 77/150/29 (8 fraction bits), 12-bit luma: (77R + 150G + 29B + 8) >> 4, 0..4080.
    luma=LumaSpec(weights="bt601", fraction_bits=8, output_bits=12, rounding="half_up"),
    window=WindowSpec(border="replicate"),
    filter=FilterSpec(kind="sobel"),
    # address = min((gx^2 + gy^2) >> 12, 8191); magnitude = isqrt(8 * address), 0..255.
    magnitude=MagnitudeSpec(method="table", shift=12, address_bits=13, table_scale=8, data_bits=8, rounding="truncate"),
    output=OutputSpec(bits=8),
)

PRESETS: dict[str, PipelineSpec] = {
    "edge": _EDGE,
    # (sum of [1 2 1; 2 4 2; 1 2 1] * p + 8) >> 4
    "blur": PipelineSpec(
        name="blur", input="gray8", filter=FilterSpec(kind="gaussian", shift=4, rounding="half_up"), output=OutputSpec(bits=8)
    ),
    "median": PipelineSpec(name="median", input="gray8", filter=FilterSpec(kind="median"), output=OutputSpec(bits=8)),
    # 5p - up - down - left - right, saturated to 0..255
    "sharpen": PipelineSpec(name="sharpen", input="gray8", filter=FilterSpec(kind="sharpen"), output=OutputSpec(bits=8)),
    "erode": PipelineSpec(name="erode", input="gray8", filter=FilterSpec(kind="min"), output=OutputSpec(bits=8)),
    "dilate": PipelineSpec(name="dilate", input="gray8", filter=FilterSpec(kind="max"), output=OutputSpec(bits=8)),
    # isqrt(gx^2 + gy^2) is 0..23080 (15 bits); >> 7 brings it to 8 bits (0..180).
    "edge_exact": replace(
        _EDGE, name="edge_exact", magnitude=MagnitudeSpec(method="exact"), output=OutputSpec(bits=8, shift=7)
    ),
}
"""The built-in pipelines by name. Their formulas are the ones the sample RTL implements."""


SPECS_DIR = Path(__file__).parent / "specs"
"""Folder of the presets as TOML files (``<name>.toml``), starting points for your own specs."""


def preset(name: str) -> PipelineSpec:
    """The built-in pipeline ``name`` (one of :data:`PRESETS`)."""
    if name not in PRESETS:
        raise fail("pipeline presets", "preset", name, "not known", suggest(name, PRESETS))
    return PRESETS[name]
