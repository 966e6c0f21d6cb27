"""Each pipeline stage's theoretical value range, sign and bit width, by interval arithmetic on the spec."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from vkit.model import magnitude as mag
from vkit.model.fixedpoint import bits_for_range, shift_round
from vkit.model.kernels import kernel_range
from vkit.model.luma import luma_range
from vkit.model.spec import PipelineSpec

__all__ = ["StageWidth", "stage_ranges", "stage_range_map", "format_width_table", "widths_to_dict", "dtype_for_range"]


@dataclass(frozen=True)
class StageWidth:
    """The range one stage can take for any input image.

    Attributes:
        name: stage name (``input``, ``luma``, ``gx``, ``gy``, ``filtered``, ``sum_sq``, ``address``,
            ``magnitude``, ``output``).
        lo, hi: lowest and highest value the stage can hold (inclusive), after any clamp of the stage.
        signed: True when ``lo < 0`` (the stage needs a two's complement word).
        bits: width of the smallest word holding ``lo .. hi`` (sign bit included when signed).
        note: how the range arises, one short phrase.
        can_clamp: True when the stage clamps or saturates and some input reaches the clamp.
    """

    name: str
    lo: int
    hi: int
    signed: bool
    bits: int
    note: str = ""
    can_clamp: bool = False

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form."""
        return asdict(self)


def _width(name: str, lo: int, hi: int, note: str, can_clamp: bool = False) -> StageWidth:
    bits, signed = bits_for_range(lo, hi)
    return StageWidth(name, int(lo), int(hi), signed, bits, note, can_clamp)


def dtype_for_range(lo: int, hi: int) -> np.dtype:
    """The narrowest signed NumPy integer dtype (int16, int32 or int64) that holds ``lo .. hi``.

    Signed even for unsigned stages, so a difference of two stage arrays never wraps around.
    """
    for dt in (np.int16, np.int32, np.int64):
        info = np.iinfo(dt)
        if info.min <= lo and hi <= info.max:
            return np.dtype(dt)
    raise OverflowError(f"range {lo}..{hi} does not fit 64 bits")


def _square_range(lo: int, hi: int) -> tuple[int, int]:
    top = max(lo * lo, hi * hi)
    bottom = 0 if lo <= 0 <= hi else min(lo * lo, hi * hi)
    return bottom, top


def _div9(value: int, rounding: str) -> int:
    return (value + 4) // 9 if rounding != "truncate" else value // 9  # n / 9 is never a tie: half_even == half_up


def stage_ranges(spec: PipelineSpec) -> list[StageWidth]:
    """Theoretical range, sign and width of every stage :func:`vkit.model.exact.run_model` produces, in order.

    Ranges come from interval arithmetic: each stage's bounds follow from the previous stage's bounds
    and the spec (kernel weights via :func:`vkit.model.kernels.kernel_range`, rounding shifts applied to the
    bounds, clamps applied last). They are guaranteed bounds; for kernels whose extreme taps cannot
    all be reached at once they may be loose.

    Example (the ``edge`` preset): luma 0..4080 (12 bits), gx/gy -16320..16320 (15 bits signed),
    sum_sq 0..532684800 (29 bits), address 0..8191 (13 bits), magnitude 0..255 (8 bits).
    """
    out: list[StageWidth] = [_width("input", 0, 255, "8 bits per component" if spec.input == "rgb888" else "8-bit grey")]
    lo, hi = 0, 255
    if spec.luma is not None:
        weights = spec.luma.resolved()
        lo, hi = luma_range(weights, spec.luma.output_bits, spec.luma.rounding)
        r, g, b = weights.as_tuple()
        shift = weights.fraction_bits - (spec.luma.output_bits - 8)
        half = f" + {1 << (shift - 1)}" if spec.luma.rounding != "truncate" and shift > 0 else ""
        formula = f"({r}R + {g}G + {b}B{half}) >> {shift}" if shift >= 0 else f"({r}R + {g}G + {b}B) << {-shift}"
        out.append(_width("luma", lo, hi, formula))
    filt = spec.filter
    kernels = filt.kernels()
    if filt.is_gradient:
        assert spec.magnitude is not None
        grads: dict[str, tuple[int, int]] = {}
        for name, k in kernels.items():
            klo, khi = kernel_range(k.tolist(), lo, hi)
            glo, ghi = shift_round(klo, filt.shift, filt.rounding), shift_round(khi, filt.shift, filt.rounding)
            grads[name] = (glo, ghi)
            note = f"{filt.kind} on {lo}..{hi}" + (f", {filt.rounding} >> {filt.shift}" if filt.shift else "")
            out.append(_width(name, glo, ghi, note))
        out.extend(_magnitude_ranges(spec, grads["gx"], grads["gy"]))
        lo, hi = out[-1].lo, out[-1].hi
    elif filt.is_order:
        out.append(_width("filtered", lo, hi, f"{filt.kind} of the 3x3 window"))
    else:
        k = kernels["filtered"]
        klo, khi = kernel_range(k.tolist(), lo, hi)
        note = f"{filt.kind} on {lo}..{hi}"
        if filt.absolute:
            klo, khi = (0 if klo <= 0 <= khi else min(abs(klo), abs(khi))), max(abs(klo), abs(khi))
            note += ", absolute"
        if filt.kind == "box":
            flo, fhi = _div9(klo, filt.rounding), _div9(khi, filt.rounding)
            note += f", / 9 {filt.rounding}"
        else:
            flo, fhi = shift_round(klo, filt.shift, filt.rounding), shift_round(khi, filt.shift, filt.rounding)
            if filt.shift:
                note += f", {filt.rounding} >> {filt.shift}"
        out.append(_width("filtered", flo, fhi, note))
        lo, hi = flo, fhi
    out.append(_output_range(spec, lo, hi))
    return out


def _magnitude_ranges(spec: PipelineSpec, gx: tuple[int, int], gy: tuple[int, int]) -> list[StageWidth]:
    m = spec.magnitude
    assert m is not None
    out: list[StageWidth] = []
    ax = max(abs(gx[0]), abs(gx[1]))
    ay = max(abs(gy[0]), abs(gy[1]))
    if m.method in ("exact", "table"):
        sx, sy = _square_range(*gx), _square_range(*gy)
        slo, shi = sx[0] + sy[0], sx[1] + sy[1]
        out.append(_width("sum_sq", slo, shi, "gx^2 + gy^2"))
        if m.method == "exact":
            out.append(_width("magnitude", math.isqrt(slo), math.isqrt(shi), "isqrt(sum_sq)"))
            return out
        top = (1 << m.address_bits) - 1
        raw_lo, raw_hi = slo >> m.shift, shi >> m.shift
        clamps = raw_hi > top
        out.append(
            _width(
                "address", min(raw_lo, top), min(raw_hi, top),
                f"sum_sq >> {m.shift}" + (f", clamped to {top}" if clamps else ""), clamps,
            )
        )
        table = np.asarray(mag.root_table(m.address_bits, m.data_bits, m.table_scale, m.rounding))
        part = table[min(raw_lo, top) : min(raw_hi, top) + 1]
        out.append(
            _width("magnitude", int(part.min()), int(part.max()), f"root table: sqrt({m.table_scale} * address), {m.rounding}")
        )
        return out
    corner_x = np.array([ax], dtype=np.int64)
    corner_y = np.array([ay], dtype=np.int64)
    zero = np.zeros(1, dtype=np.int64)
    func = mag.magnitude_abs_sum if m.method == "abs_sum" else mag.magnitude_max_min_half
    hi = int(np.asarray(func(corner_x, corner_y))[0])
    lo = int(np.asarray(func(zero, zero))[0])
    note = "|gx| + |gy|" if m.method == "abs_sum" else "max(|gx|,|gy|) + min(|gx|,|gy|)/2"
    out.append(_width("magnitude", lo, hi, note))
    return out


def _output_range(spec: PipelineSpec, lo: int, hi: int) -> StageWidth:
    o = spec.output
    top = o.max_value
    vlo, vhi = (lo * o.scale) >> o.shift, (hi * o.scale) >> o.shift
    parts = []
    if o.scale != 1:
        parts.append(f"* {o.scale}")
    if o.shift:
        parts.append(f">> {o.shift}")
    clamps = vlo < 0 or vhi > top
    parts.append(f"saturated to 0..{top}" if clamps else f"fits 0..{top}")
    slo, shi = min(max(vlo, 0), top), min(max(vhi, 0), top)
    if o.invert:
        slo, shi = top - shi, top - slo
        parts.append("inverted")
    if o.threshold is not None:
        slo, shi = (0 if slo < o.threshold else top), (top if shi >= o.threshold else 0)
        parts.append(f"threshold {o.threshold}")
    return _width("output", slo, shi, ", ".join(parts), clamps)


def stage_range_map(spec: PipelineSpec) -> dict[str, StageWidth]:
    """:func:`stage_ranges` keyed by stage name."""
    return {w.name: w for w in stage_ranges(spec)}


def widths_to_dict(spec: PipelineSpec) -> dict[str, Any]:
    """``{"pipeline": name, "stages": [StageWidth.to_dict(), ...]}``."""
    return {"pipeline": spec.name, "stages": [w.to_dict() for w in stage_ranges(spec)]}


def format_width_table(spec: PipelineSpec) -> str:
    """An aligned text table of :func:`stage_ranges`: stage, lo, hi, signed, bits, note."""
    rows = [("stage", "lo", "hi", "sign", "bits", "note")]
    for w in stage_ranges(spec):
        rows.append((w.name, f"{w.lo:,}", f"{w.hi:,}", "signed" if w.signed else "unsigned", str(w.bits), w.note))
    widths = [max(len(r[i]) for r in rows) for i in range(5)]
    lines = [f"pipeline {spec.name!r}: stage widths"]
    for r in rows:
        cells = [r[0].ljust(widths[0]), r[1].rjust(widths[1]), r[2].rjust(widths[2]), r[3].ljust(widths[3]), r[4].rjust(widths[4])]
        lines.append("  ".join(cells + [r[5]]).rstrip())
    return "\n".join(lines)
