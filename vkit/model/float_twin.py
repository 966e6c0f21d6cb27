"""The floating-point twin of the bit-exact model: the same pipeline with real arithmetic, to measure what rounding costs."""

from __future__ import annotations

from collections import OrderedDict
from typing import Any

import numpy as np

from vkit.model.exact import ORDER_FILTERS, check_image, chroma_word, model_plan, new_stage
from vkit.model.kernels import correlate3x3
from vkit.model.luma import luma_float
from vkit.model.result import ModelResult, Stage
from vkit.model.spec import FilterSpec, MagnitudeSpec, OutputSpec, PipelineSpec
from vkit.model.window import interior_mask, ring_mask

__all__ = ["run_float"]


def run_float(spec: PipelineSpec, image: Any) -> ModelResult:
    """The floating-point twin of :func:`vkit.model.exact.run_model`: the same pipeline with real arithmetic.

    Differences from the bit-exact model: luma uses the standard's real coefficients (BT.601
    0.299/0.587/0.114, BT.709 0.2126/0.7152/0.0722; custom weights divided by ``2**fraction_bits``),
    scaled to ``output_bits``; kernels are applied in float64 and divided by ``2**shift`` (by 9 for
    box) with no rounding; the magnitude is the true ``sqrt(gx**2 + gy**2)`` on the scale the fixed
    method approximates (``sqrt(table_scale * sum_sq / 2**shift)`` for the table), with no address
    clamp; the output is ``v * scale / 2**shift``, limited to ``0 .. 2**bits - 1`` (the output word
    itself), then inverted or thresholded like the fixed output. Every array is float64.

    Stage ``lo``/``hi``/``bits`` repeat the bit-exact model's theoretical ranges, for comparison.
    ``clamped`` is set only on ``output`` (where the limit to the output word engaged).
    """
    img = check_image(spec, image)
    plan = model_plan(spec)
    height, width = img.shape[:2]
    arrays: dict[str, np.ndarray] = {}
    src = (img[..., 0] if spec.chroma_bits or img.ndim == 3 and spec.luma is None else img).astype(np.float64)
    if spec.luma is not None:
        rgb = img if img.ndim == 3 else np.repeat(img[..., None], 3, axis=2)
        src = arrays["luma"] = luma_float(rgb, spec.luma.coefficients(), spec.luma.output_bits, spec.input_bits)
    _filter(spec, src, arrays)
    if spec.filter.is_gradient:
        assert spec.magnitude is not None
        value = _magnitude(spec.magnitude, arrays)
    else:
        value = arrays["filtered"]
    arrays["output"], clamped = _output(spec.output, value)
    if spec.window.border == "passthrough":
        ring = ring_mask(height, width)
        sample = src[ring]
        arrays["output"][ring] = sample if spec.window.passthrough == "raw" else _output(spec.output, sample)[0]
    if spec.chroma_bits:
        arrays["output"] = arrays["output"] + chroma_word(img, spec.output.bits, spec.input_bits)
    stages: OrderedDict[str, Stage] = OrderedDict()
    stages["input"] = new_stage(plan, "input", img.astype(np.float64), None)
    for name in spec.stage_names()[1:]:
        stages[name] = new_stage(plan, name, arrays[name], clamped if name == "output" else None)
    return ModelResult(arrays["output"], interior_mask(height, width, spec.window.border), stages)


def _filter(spec: PipelineSpec, src: np.ndarray, arrays: dict[str, np.ndarray]) -> None:
    """The 3x3 filter in float64 into ``arrays``: ``filtered``, or ``gx`` and ``gy``."""
    filt: FilterSpec = spec.filter
    border, constant = spec.window.border, float(spec.window.constant)
    if filt.is_order:
        arrays["filtered"] = ORDER_FILTERS[filt.kind](src, border, constant).astype(np.float64)
        return
    for name, k in filt.kernels().items():
        acc = correlate3x3(src, k.tolist(), border, constant)
        if filt.absolute:
            acc = np.abs(acc)
        arrays[name] = acc / 9.0 if filt.kind == "box" else acc / float(1 << filt.shift)


def _magnitude(m: MagnitudeSpec, arrays: dict[str, np.ndarray]) -> np.ndarray:
    """The true magnitude on the scale the fixed method approximates (no address clamp)."""
    ss = arrays["gx"] ** 2 + arrays["gy"] ** 2
    if m.method in ("exact", "table"):
        arrays["sum_sq"] = ss
    if m.method == "table":
        arrays["address"] = ss / float(1 << m.shift)
        arrays["magnitude"] = np.sqrt(m.table_scale * arrays["address"])
    else:
        arrays["magnitude"] = np.sqrt(ss)
    return arrays["magnitude"]


def _output(o: OutputSpec, value: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``v * scale / 2**shift`` limited to the output word, then inverted or thresholded; and where the limit engaged."""
    top = float(o.max_value)
    v = value * (o.scale / float(1 << o.shift))
    clamped = (v < 0) | (v > top)
    return o.levels(np.clip(v, 0.0, top), top), clamped
