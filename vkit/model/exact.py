"""The bit-exact integer model of a pipeline spec: every stage as the RTL computes it, frame by frame."""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass
from typing import Any, Callable, Iterable

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.validate import want_int
from vkit.model import magnitude as magmod
from vkit.model.fixedpoint import shift_round
from vkit.model.kernels import correlate_padded, maximum3x3, median3x3, minimum3x3
from vkit.model.luma import LumaWeights, luma
from vkit.model.result import ModelResult, Stage
from vkit.model.spec import PipelineSpec
from vkit.model.widths import StageWidth, dtype_for_range, stage_range_map
from vkit.model.window import interior_mask, pad, taps_of_padded

__all__ = [
    "ORDER_FILTERS", "Variation", "ModelPlan", "model_plan", "check_image", "new_stage", "output_levels", "run_model", "run_plan",
    "run_model_frames", "StagesOnDemand",
]

ORDER_FILTERS: dict[str, Callable[..., np.ndarray]] = {"median": median3x3, "min": minimum3x3, "max": maximum3x3}
"""Order-filter kind to its 3x3 function ``(image, border, constant)``."""

_BAND_ROWS = 32
"""Rows per band: a band's temporaries stay in cache at the frame widths in use (measured, no source)."""
_PLAN_CACHE_SIZE = 64
"""Plans kept; specs are few in practice, the bound only stops a long session from growing without end."""


@dataclass(frozen=True)
class Variation:
    """Departures from the spec that no spec field states: the knobs of the spec mutants
    (:mod:`vkit.model.mutants`). The default departs from nothing, and the model then runs as before.

    Attributes:
        limits: ``(stage, bits, "wrap" | "saturate")``: the stage (``luma``, ``gx``, ``gy``,
            ``filtered``, ``sum_sq``, ``magnitude``) kept in a word of ``bits`` bits (two's complement
            when the stage is signed), by wrapping around or by saturating.
        address_overflow: ``"clamp"`` (the spec's) or ``"wrap"`` (the table address keeps its low
            ``address_bits`` bits).
        output_overflow: ``"saturate"`` (the spec's) or ``"wrap"`` (the output keeps its low bits).
        output_top: the output's saturation bound, None for the spec's ``2**bits - 1``.
        right_border: None, or the value the window reads beyond the right edge (linear filters only).
        row_shifts: ``(row, columns)``: window row 0 (top) .. 2 (bottom) read ``columns`` late (> 0, the
            pixel that many columns to the left) or early (< 0), in raster order (the first pixel of a
            line read late is the last of the line before): a line buffer's address off by one.
    """

    limits: tuple[tuple[str, int, str], ...] = ()
    address_overflow: str = "clamp"
    output_overflow: str = "saturate"
    output_top: int | None = None
    right_border: int | None = None
    row_shifts: tuple[tuple[int, int], ...] = ()


NO_VARIATION = Variation()


@dataclass(frozen=True)
class ModelPlan:
    """What :func:`run_model` works out once per spec: stage widths and dtypes, weights, kernels, table.

    Attributes:
        spec: the pipeline.
        widths: stage name to its theoretical range (:func:`vkit.model.widths.stage_range_map`).
        dtypes: stage name to the narrowest signed dtype holding that range.
        weights: the integer luma weights, None without a luma stage.
        kernels: the filter's integer kernels as nested tuples (``gx``/``gy`` or ``filtered``).
        pad_dtype: dtype of the padded window input (wide enough for the weighted sums).
        table: the root table for ``magnitude.method = "table"``, else None.
        variation: departures from the spec (spec mutants only); none by default.
    """

    spec: PipelineSpec
    widths: dict[str, StageWidth]
    dtypes: dict[str, np.dtype]
    weights: LumaWeights | None
    kernels: dict[str, tuple[tuple[int, int, int], ...]]
    pad_dtype: np.dtype
    table: np.ndarray | None
    variation: Variation = NO_VARIATION


_PLANS: dict[PipelineSpec, ModelPlan] = {}


def _pad_dtype(spec: PipelineSpec, src: StageWidth, kernels: dict[str, tuple[tuple[int, int, int], ...]]) -> np.dtype:
    """A dtype for the padded filter input that no weighted sum (plus its rounding constant) overflows."""
    if spec.filter.is_order:
        return dtype_for_range(min(src.lo, spec.window.constant), max(src.hi, spec.window.constant))
    bound = max(abs(src.lo), abs(src.hi))
    reach = max(abs(src.lo), abs(src.hi), abs(spec.window.constant))
    for k in kernels.values():
        bound = max(bound, sum(abs(v) for row in k for v in row) * reach)
    if spec.filter.shift:
        bound += 1 << spec.filter.shift
    return dtype_for_range(-bound - 1, bound + 4)


def model_plan(spec: PipelineSpec) -> ModelPlan:
    """The :class:`ModelPlan` of ``spec`` (cached)."""
    plan = _PLANS.get(spec)
    if plan is not None:
        return plan
    widths = stage_range_map(spec)
    dtypes = {name: dtype_for_range(w.lo, w.hi) for name, w in widths.items()}
    weights = spec.luma.resolved() if spec.luma is not None else None
    kernels = {name: tuple(tuple(int(v) for v in row) for row in k.tolist()) for name, k in spec.filter.kernels().items()}
    src = widths["luma"] if "luma" in widths else widths["input"]
    table = None
    if spec.magnitude is not None and spec.magnitude.method == "table":
        m = spec.magnitude
        table = np.asarray(magmod.root_table(m.address_bits, m.data_bits, m.table_scale, m.rounding)).astype(dtypes["magnitude"])
    plan = ModelPlan(spec, widths, dtypes, weights, kernels, _pad_dtype(spec, src, kernels), table)
    if len(_PLANS) >= _PLAN_CACHE_SIZE:
        _PLANS.clear()
    _PLANS[spec] = plan
    return plan


def check_image(spec: PipelineSpec, image: Any) -> np.ndarray:
    """``image`` as an array of the shape and dtype ``spec.input`` takes; ConfigError naming the fix otherwise."""
    arr = np.asarray(image)
    if spec.input == "rgb888":
        if arr.ndim != 3 or arr.shape[2] != 3 or arr.shape[0] < 1 or arr.shape[1] < 1:
            raise ConfigError(
                f"pipeline {spec.name!r} takes rgb888 input: expected a (height, width, 3) uint8 array, got shape "
                f"{arr.shape}; convert a grey frame with np.repeat(img[..., None], 3, axis=2) or use a gray8 spec"
            )
    elif arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 1:
        raise ConfigError(
            f"pipeline {spec.name!r} takes gray8 input: expected a (height, width) uint8 array, got shape "
            f"{arr.shape}; convert RGB first (e.g. vkit.model.luma.luma(rgb, vkit.model.luma.BT601)) or use an rgb888 spec"
        )
    if arr.dtype != np.uint8:
        raise ConfigError(
            f"pipeline {spec.name!r} takes uint8 pixels, got dtype {arr.dtype}; "
            "check the range is 0..255 and convert with image.astype(np.uint8)"
        )
    return arr


def new_stage(plan: ModelPlan, name: str, array: np.ndarray, clamped: np.ndarray | None) -> Stage:
    """A :class:`Stage` with the theoretical range of stage ``name``."""
    w = plan.widths[name]
    return Stage(name, array, w.lo, w.hi, w.signed, w.bits, clamped)


def run_model(spec: PipelineSpec, image: Any, *, keep_stages: bool = True, band_rows: int = _BAND_ROWS) -> ModelResult:
    """Bit-exact integer model of the pipeline on one frame.

    The frame is processed in horizontal bands of ``band_rows`` rows (each read with a one-row halo)
    so temporaries stay in cache; the result does not depend on ``band_rows``.

    Args:
        spec: the pipeline.
        image: ``(H, W, 3)`` uint8 RGB for ``rgb888`` input, ``(H, W)`` uint8 for ``gray8``.
        keep_stages: False keeps only the ``output`` stage (faster; ``stages`` then holds ``input`` and
            ``output`` only).
        band_rows: rows per band, >= 1.

    Returns:
        :class:`ModelResult`; ``output`` is a signed integer array with values in ``0 .. 2**bits - 1``.

    Raises:
        ConfigError: wrong image shape or dtype for the spec's input format.
    """
    return run_plan(model_plan(spec), check_image(spec, image), keep_stages=keep_stages, band_rows=band_rows)


def run_plan(plan: ModelPlan, img: np.ndarray, *, keep_stages: bool = True, band_rows: int = _BAND_ROWS) -> ModelResult:
    """:func:`run_model` on a worked-out plan (possibly a mutant's) and a checked image."""
    spec = plan.spec
    band_rows = want_int("run_model", "band_rows", band_rows, 1)
    height, width = img.shape[:2]
    if plan.variation.row_shifts:  # a line read late needs the line before it: one band
        band_rows = height
    names = [n for n in spec.stage_names() if n != "input"]
    kept = names if keep_stages else ["output"]
    clamp_names = [n for n in kept if plan.widths[n].can_clamp]
    arrays, clamps = _allocate(
        (height, width), [(n, plan.dtypes[n]) for n in kept], [(n, np.dtype(bool)) for n in clamp_names]
    )
    for r0 in range(0, height, band_rows):
        r1 = min(height, r0 + band_rows)
        views = {name: arrays[name][r0:r1] for name in kept}
        band = _run_band(plan, img, r0, r1, views)
        for name in kept:
            if band[name] is not views[name]:
                views[name][...] = band[name]
        for name in clamp_names:
            clamps[name][r0:r1] = band[f"{name}_clamped"]
    stages: OrderedDict[str, Stage] = OrderedDict()
    stages["input"] = new_stage(plan, "input", img, None)
    for name in kept:
        stages[name] = new_stage(plan, name, arrays[name], clamps.get(name))
    return ModelResult(arrays["output"], interior_mask(height, width, spec.window.border), stages)


def _run_band(plan: ModelPlan, img: np.ndarray, r0: int, r1: int, views: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Every stage of rows ``r0 .. r1 - 1``; a stage that can clamp also gives ``<stage>_clamped``."""
    height = img.shape[0]
    a0, a1 = max(0, r0 - 1), min(height, r1 + 1)  # one row of halo above and below
    band = _filter_band(plan, img[a0:a1], r0 - a0, r1 - r0)
    if plan.spec.filter.is_gradient:
        value = band["magnitude"] = _magnitude_band(plan, band, views)
    else:
        value = band["filtered"]
    band["output"], band["output_clamped"] = _output_band(plan, value)
    return band


def _filter_band(plan: ModelPlan, src: np.ndarray, top: int, rows: int) -> dict[str, np.ndarray]:
    """Luma (if any) and the 3x3 filter of a block of input rows read with its halo; ``top`` halo rows
    lie above the ``rows`` rows kept."""
    spec, filt = plan.spec, plan.spec.filter
    border, constant = spec.window.border, spec.window.constant
    band: dict[str, np.ndarray] = {}
    if spec.luma is not None:
        src = _limit(plan, "luma", _luma_rows(plan, src))
        band["luma"] = src[top : top + rows]
    if plan.variation.row_shifts:
        return _moved_window_band(plan, src, top, rows, band)
    if filt.is_order:
        band["filtered"] = _limit(plan, "filtered", ORDER_FILTERS[filt.kind](src, border, constant)[top : top + rows])
        return band
    padded = pad(src, border, constant, dtype=plan.pad_dtype)[top : top + rows + 2]
    if plan.variation.right_border is not None:
        padded[:, -1] = plan.variation.right_border
    for name, k in plan.kernels.items():
        acc = correlate_padded(padded, k)
        if filt.absolute:
            acc = np.abs(acc, out=acc)
        band[name] = _limit(plan, name, _scaled(filt, acc))
    return band


def _scaled(filt: Any, acc: np.ndarray) -> np.ndarray:
    """The filter's sum scaled back: box divides by 9, the others shift right, each with its rounding."""
    if filt.kind == "box":  # n / 9 is never a tie, so half_even is half_up here
        return np.floor_divide(acc + 4, 9) if filt.rounding != "truncate" else np.floor_divide(acc, 9)
    return shift_round(acc, filt.shift, filt.rounding)


def _moved_raster(src: np.ndarray, columns: int) -> np.ndarray:
    """``src`` with every pixel replaced by the one ``columns`` earlier (> 0) or later in raster order: a
    line read late takes its first pixel from the end of the line before (0, a register's reset value,
    at the frame's first), as a stored line read one address off does."""
    flat = src.reshape(-1)
    out = np.zeros_like(flat)
    if columns > 0:
        out[columns:] = flat[:-columns]
    else:
        out[:columns] = flat[-columns:]
    return out.reshape(src.shape)


def _moved_window_band(plan: ModelPlan, src: np.ndarray, top: int, rows: int, band: dict[str, np.ndarray]
                       ) -> dict[str, np.ndarray]:
    """:func:`_filter_band`'s filter for a plan whose window rows are read late or early (``row_shifts``):
    the nine taps summed (or sorted) one by one, in int64."""
    spec, filt = plan.spec, plan.spec.filter
    border, constant = spec.window.border, spec.window.constant
    padded = pad(src, border, constant, dtype=np.int64)[top : top + rows + 2]
    if plan.variation.right_border is not None:
        padded[:, -1] = plan.variation.right_border
    grid = taps_of_padded(padded)
    for row, columns in plan.variation.row_shifts:
        moved = pad(_moved_raster(src, columns), border, constant, dtype=np.int64)[top : top + rows + 2]
        moved[[0, -1]] = padded[[0, -1]]  # the lines above and below the frame come from the border, not a buffer
        grid[row] = taps_of_padded(moved)[row]
    if filt.is_order:
        stack = np.sort(np.stack([t for line in grid for t in line]), axis=0)
        band["filtered"] = _limit(plan, "filtered", stack[{"min": 0, "median": 4, "max": 8}[filt.kind]])
        return band
    for name, k in plan.kernels.items():
        acc = sum((int(k[r][c]) * grid[r][c] for r in range(3) for c in range(3) if k[r][c]), np.zeros_like(grid[0][0]))
        if filt.absolute:
            acc = np.abs(acc)
        band[name] = _limit(plan, name, _scaled(filt, acc))
    return band


def _limit(plan: ModelPlan, name: str, value: np.ndarray) -> np.ndarray:
    """``value`` kept in the word :attr:`Variation.limits` gives stage ``name``; unchanged without one."""
    for stage, bits, how in plan.variation.limits:
        if stage != name:
            continue
        signed = plan.widths[name].signed
        lo, hi = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if signed else (0, (1 << bits) - 1)
        if how == "saturate":
            value = np.clip(value, lo, hi)
        else:
            value = ((value.astype(np.int64) - lo) & ((1 << bits) - 1)) + lo
    return value


def _output_band(plan: ModelPlan, value: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """The output mapping ``(v * scale) >> shift``, saturate, invert, threshold; and where it saturated."""
    out_spec = plan.spec.output
    top_value = out_spec.max_value
    # Order filters on gray8 hand back uint8: widen so max - v cannot wrap.
    v = value if value.dtype.kind != "u" else value.astype(np.int32)
    if out_spec.scale != 1:
        v = np.multiply(v, out_spec.scale, dtype=np.int64)
    if out_spec.shift:
        v = np.right_shift(v, out_spec.shift)
    clamped = None
    var = plan.variation
    if var is not NO_VARIATION:
        v = v & top_value if var.output_overflow == "wrap" else np.clip(v, 0, top_value if var.output_top is None else var.output_top)
    elif plan.widths["output"].can_clamp:
        clamped = (v < 0) | (v > top_value)
        v = np.clip(v, 0, top_value)
    return out_spec.levels(v, top_value), clamped


def output_levels(plan: ModelPlan, value: np.ndarray) -> np.ndarray:
    """The output pixels the last stage's ``value`` maps to (scale, shift, saturate, invert, threshold)."""
    return _output_band(plan, value)[0]


def _luma_rows(plan: ModelPlan, img: np.ndarray) -> np.ndarray:
    """Luma of a block of rows, ``(rows, W)`` int32 (a grey block stands for R = G = B)."""
    spec = plan.spec
    assert spec.luma is not None and plan.weights is not None
    rgb = img if img.ndim == 3 else np.repeat(img[..., None], 3, axis=2)
    return luma(rgb, plan.weights, spec.luma.output_bits, spec.luma.rounding)


def _allocate(
    shape: tuple[int, int], *groups: list[tuple[str, np.dtype]]
) -> tuple[dict[str, np.ndarray], ...]:
    """Arrays of ``shape`` carved from one allocation (one large block is much cheaper for the
    allocator and the page-fault path than several frame-sized ones)."""
    count = shape[0] * shape[1]
    sizes = [[(name, dt, -(-count * dt.itemsize // 64) * 64) for name, dt in group] for group in groups]
    block = np.empty(sum(size for group in sizes for _, _, size in group), dtype=np.uint8)
    offset = 0
    out: list[dict[str, np.ndarray]] = []
    for group in sizes:
        arrays = {}
        for name, dt, size in group:
            arrays[name] = block[offset : offset + count * dt.itemsize].view(dt).reshape(shape)
            offset += size
        out.append(arrays)
    return tuple(out)


def _magnitude_band(plan: ModelPlan, band: dict[str, np.ndarray], views: dict[str, np.ndarray]) -> np.ndarray:
    """Magnitude of one band from ``band["gx"]``, ``band["gy"]``; writes ``sum_sq`` (and ``magnitude``)
    straight into the frame arrays in ``views`` when they are kept."""
    m = plan.spec.magnitude
    assert m is not None
    gx, gy = band["gx"], band["gy"]
    if m.method in ("exact", "table"):
        sq_type = plan.dtypes["sum_sq"]
        ss = views.get("sum_sq")
        ss = np.multiply(gx, gx, dtype=sq_type, out=ss)
        ss += np.multiply(gy, gy, dtype=sq_type)
        ss = band["sum_sq"] = _limit(plan, "sum_sq", ss)
        if m.method == "exact":
            return _limit(plan, "magnitude", magmod.isqrt(ss).astype(plan.dtypes["magnitude"], copy=False))
        if plan.variation.address_overflow == "wrap":
            ss = np.right_shift(ss, m.shift) & ((1 << m.address_bits) - 1)
            addr, clamped = magmod.table_address(ss, 0, m.address_bits)
        else:
            addr, clamped = magmod.table_address(ss, m.shift, m.address_bits)
        band["address_clamped"] = clamped
        band["address"] = addr
        assert plan.table is not None
        out = views.get("magnitude")
        return plan.table.take(addr) if out is None else plan.table.take(addr, out=out)
    func = magmod.magnitude_abs_sum if m.method == "abs_sum" else magmod.magnitude_max_min_half
    return _limit(plan, "magnitude", np.asarray(func(gx, gy)).astype(plan.dtypes["magnitude"], copy=False))


def run_model_frames(spec: PipelineSpec, frames: Iterable[Any], *, keep_stages: bool = True) -> list[ModelResult]:
    """:func:`run_model` on each frame of a sequence, in order."""
    return [run_model(spec, frame, keep_stages=keep_stages) for frame in frames]


class StagesOnDemand:
    """A frame's model result that keeps only the output and the checked-pixel mask; the stage arrays are
    computed on first use of :attr:`stages` and kept from then on.

    For long runs of big frames: a scoreboard reads the stages of failing frames only (the stage values
    of a mismatch), so passing frames never hold their ~8 stage arrays. Same attributes as
    :class:`~vkit.model.result.ModelResult` (``output``, ``valid_mask``, ``stages``).
    """

    def __init__(self, spec: PipelineSpec, image: Any) -> None:
        lean = run_model(spec, image, keep_stages=False)
        self.output: np.ndarray = lean.output
        self.valid_mask: np.ndarray = lean.valid_mask
        self._spec, self._image = spec, image
        self._stages: OrderedDict[str, Stage] | None = None

    @property
    def stages(self) -> OrderedDict[str, Stage]:
        """Every stage of the frame (run on first use)."""
        if self._stages is None:
            self._stages = run_model(self._spec, self._image).stages
        return self._stages
