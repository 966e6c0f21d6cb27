"""Spec mutants: cheap variants of a pipeline spec, each one plausible RTL mistake named in the stage's words.

A mutant is the bit-exact model with one departure: a stage word narrowed (wrapping or saturating), a
rounding swapped, a kernel tap, row or column with the wrong sign, gx and gy swapped, luma weights
permuted or off by one, another border policy, a clamp bound one bit short, a table built or addressed
differently, the output inverted or shifted, another order filter, a window row read a column late or
early (a line buffer address off by one). A stimulus "kills" a mutant when
the mutant's output differs from the spec's on some checked pixel; a mutant no stimulus can kill (the
magnitude does not see the sign of gy) is marked equivalent, with the reason.

This is mutation analysis (R. A. DeMillo, R. J. Lipton, F. G. Sayward, "Hints on test data selection",
IEEE Computer 11(4), 1978) applied to the spec rather than to the RTL text.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, is_dataclass, replace
from itertools import permutations
from typing import Any, Iterator

import numpy as np

from vkit.core.errors import ConfigError
from vkit.model import magnitude as magmod
from vkit.model.fixedpoint import ROUNDING
from vkit.model.exact import ModelPlan, Variation, check_image, model_plan, output_levels, run_plan
from vkit.model.spec import GRADIENT_KINDS, ORDER_KINDS, PipelineSpec
from vkit.model.window import BORDERS

__all__ = ["Mutant", "spec_mutants", "mutant_outputs", "mutant_pair", "NARROW_BITS"]

NARROW_BITS = 2
"""Stage words are narrowed by 1 .. this many bits: one bit short is the usual slip, two covers a
miscounted sign bit on top (common practice, no source)."""

_WIDE = np.dtype(np.int64)
_SYMMETRIC = "the magnitude depends on gx^2 + gy^2 (or |gx|, |gy|) only, so no stimulus can tell"


@dataclass(frozen=True)
class Mutant:
    """One spec mutant.

    Attributes:
        name: short id, ``<stage>.<what>`` (``sum_sq.wrap28``, ``gy.negated``).
        stage: the stage the departure is in (a stage name of the spec, or ``window``/``output``).
        description: the departure in the stage's words ("sum_sq wrapping at 28 bits").
        needs: what a stimulus must contain to kill it, in words.
        plan: the model plan that runs it.
        equivalent: why no stimulus can kill it, or "" when some can.
    """

    name: str
    stage: str
    description: str
    needs: str
    plan: ModelPlan
    equivalent: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (without the plan)."""
        return {"name": self.name, "stage": self.stage, "description": self.description, "needs": self.needs,
                "equivalent": self.equivalent}


def _wide(plan: ModelPlan, **changes: Any) -> ModelPlan:
    """``plan`` with ``changes`` and every dtype int64, so no mutated sum overflows its word."""
    dtypes = {name: _WIDE for name in plan.dtypes}
    table = plan.table.astype(np.int64) if plan.table is not None else None
    return replace(plan, dtypes=dtypes, pad_dtype=_WIDE, table=table, **changes)


def _respec(spec: PipelineSpec, section: str, **changes: Any) -> ModelPlan | None:
    """The plan of ``spec`` with fields of one section changed; None when that spec is not valid."""
    try:
        mutated = replace(spec, **{section: replace(getattr(spec, section), **changes)})
        return _wide(model_plan(mutated))
    except ConfigError:
        return None


def _width_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    stages = [s for s in ("luma", "gx", "gy", "filtered", "sum_sq", "magnitude") if s in base.widths]
    if spec.magnitude is not None and spec.magnitude.method == "table":
        stages.remove("magnitude")  # the table's own data_bits: see _table_mutants
    groups = [(s,) for s in stages] + ([("gx", "gy")] if "gx" in stages else [])
    for group in groups:
        w = base.widths[group[0]]
        label = " and ".join(group)
        for k in range(1, NARROW_BITS + 1):
            bits = w.bits - k
            if bits < 2:
                continue
            edge = f"±2^{bits - 1}" if w.signed else f"2^{bits}"
            for how, verb in (("wrap", "wrapping"), ("saturate", "saturating")):
                var = Variation(limits=tuple((s, bits, how) for s in group))
                same = how == "saturate" and _saturation_hidden(base, group[0], bits)
                yield Mutant(f"{'+'.join(group)}.{how}{bits}", group[0], f"{label} {verb} at {bits} bits",
                             f"{label} beyond {edge}", _wide(base, variation=var),
                             f"{label} saturating at {bits} bits gives the output a later clamp gives anyway" if same else "")


def _after(base: ModelPlan, stage: str, value: int) -> int:
    """The output when ``stage`` holds ``value`` (and the other gradient is 0); a monotone map of ``|value|``
    for the stages :func:`_saturation_hidden` asks about."""
    m = base.spec.magnitude
    v = np.array([[abs(value)]], dtype=np.int64)
    if stage in ("gx", "gy"):
        v, stage = v * v, "sum_sq"
    if stage == "sum_sq" and m is not None:
        if m.method == "table":
            assert base.table is not None
            v = base.table.astype(np.int64)[magmod.table_address(v, m.shift, m.address_bits)[0]]
        else:
            v = magmod.isqrt(v)
    return int(output_levels(base, v)[0, 0])


def _saturation_hidden(base: ModelPlan, stage: str, bits: int) -> bool:
    """True when saturating ``stage`` at ``bits`` cannot change the output: the downstream map is monotone
    and already gives the stage range's extreme output at the narrower word's bound."""
    w = base.widths[stage]
    mono = stage in ("gx", "gy", "sum_sq") or (stage in ("filtered", "magnitude") and not base.spec.filter.is_order)
    if not mono or base.spec.output.invert or base.spec.output.threshold is not None:
        return False
    if w.signed:
        neg, pos = -(1 << (bits - 1)), (1 << (bits - 1)) - 1
    else:
        neg, pos = 0, (1 << bits) - 1
    if stage in ("gx", "gy", "sum_sq"):
        return _after(base, stage, pos) == _after(base, stage, max(abs(w.lo), w.hi))
    lo = int(output_levels(base, np.array([[w.lo]])).min()) == int(output_levels(base, np.array([[neg]])).min())
    return lo and int(output_levels(base, np.array([[w.hi]])).max()) == int(output_levels(base, np.array([[pos]])).max())


_ROUNDING_WORDS = {"truncate": "truncation", "half_up": "rounding half up", "half_even": "rounding half to even"}


def _rounding_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    sections = []
    if spec.luma is not None:
        sections.append(("luma", "luma", "the luma", True))
    if spec.filter.shift or spec.filter.kind == "box":
        stage = "filtered" if "filtered" in base.widths else "gx"
        sections.append(("filter", stage, f"the {spec.filter.kind}", spec.filter.kind != "box"))
    if spec.magnitude is not None and spec.magnitude.method == "table":
        sections.append(("magnitude", "magnitude", "the root table", False))
    for section, stage, where, has_ties in sections:
        now = getattr(spec, section).rounding
        for other in ROUNDING:
            # n / 9 and the root of an integer are never exact halves: half_even there equals half_up
            if other == now or (not has_ties and (other == "half_even" or "truncate" not in (now, other))):
                continue
            plan = _respec(spec, section, rounding=other)
            if plan is not None:
                words = _ROUNDING_WORDS
                reason = (f"a {stage} value whose dropped bits are exactly one half" if "truncate" not in (now, other)
                          else f"a {stage} value whose dropped bits are one half or more")
                yield Mutant(f"{section}.{other}", stage, f"{words[other]} instead of {words[now]} in {where}", reason, plan)


def _flips(k: tuple[tuple[int, ...], ...]) -> Iterator[tuple[str, str, np.ndarray]]:
    """(id, words, kernel) for each single tap, row and column with its sign flipped."""
    arr = np.array(k, dtype=np.int64)
    for r in range(3):
        for c in range(3):
            if arr[r, c]:
                m = arr.copy()
                m[r, c] = -m[r, c]
                yield f"tap{r}{c}", f"tap [{r}][{c}] with the wrong sign ({m[r, c]:+d} instead of {arr[r, c]:+d})", m
    for axis, word in ((0, "row"), (1, "column")):
        for i in range(3):
            m = arr.copy()
            idx = (i, slice(None)) if axis == 0 else (slice(None), i)
            m[idx] = -m[idx]
            if np.count_nonzero(arr[idx]) > 1:
                yield f"{word}{i}", f"kernel {word} {i} with the wrong sign", m
    yield "negated", "negated", -arr


def _kernel_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    seen = {tuple(sorted(base.kernels.items()))}
    gradient = spec.filter.is_gradient
    for name, k in base.kernels.items():
        for tag, words, m in _flips(k):
            kernels = dict(base.kernels, **{name: tuple(tuple(int(v) for v in row) for row in m)})
            key = tuple(sorted(kernels.items()))
            if key in seen:
                continue
            seen.add(key)
            equivalent = _SYMMETRIC if gradient and tag == "negated" else ""
            yield Mutant(f"{name}.{tag}", name, f"{name} {words}", f"a {name} value that the change alters",
                         _wide(base, kernels=kernels), equivalent)
    if gradient:
        swapped = {"gx": base.kernels["gy"], "gy": base.kernels["gx"]}
        yield Mutant("gx_gy.swapped", "gx", "gx and gy swapped", "any gradient", _wide(base, kernels=swapped), _SYMMETRIC)
        for kind in GRADIENT_KINDS:
            if kind != spec.filter.kind:
                plan = _respec(spec, "filter", kind=kind)
                if plan is not None:
                    yield Mutant(f"filter.{kind}", "gx", f"{kind} kernels instead of {spec.filter.kind}",
                                 "an edge the two kernels weigh differently", plan)


def _luma_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    if base.weights is None or spec.luma is None:
        return
    w = base.weights
    rgb = w.as_tuple()
    seen = {rgb}
    names = "RGB"
    variants: list[tuple[str, str, tuple[int, int, int]]] = []
    for perm in permutations(range(3)):
        new = tuple(rgb[i] for i in perm)
        moved = "".join(names[i] for i in range(3) if perm[i] != i)
        variants.append((f"perm_{''.join(names[i] for i in perm)}", f"luma weights of {moved} exchanged {new}", new))
    for i in range(3):
        for d in (-1, 1):
            new = tuple(v + d if j == i else v for j, v in enumerate(rgb))
            variants.append((f"{names[i]}{d:+d}", f"luma weight of {names[i]} off by {d:+d} ({new[i]})", new))
    for tag, words, new in variants:
        if new in seen or min(new) < 0:
            continue
        seen.add(new)
        weights = replace(w, r=new[0], g=new[1], b=new[2], name="mutant")
        yield Mutant(f"luma.{tag}", "luma", words, "colour pixels where the changed weights give another luma",
                     _wide(base, weights=weights))


def _border_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    now = spec.window.border
    for border in BORDERS:
        if border in (now, "unchecked") or (now == "unchecked" and border == "replicate"):
            continue
        # a constant of 0 would repeat the zero policy: read the top of the filter's input instead
        top = base.widths["luma" if "luma" in base.widths else "input"].hi
        extra = {"constant": top} if border == "constant" and spec.window.constant == 0 else {}
        plan = _respec(spec, "window", border=border, **extra)
        if plan is not None:
            same = _pads_hidden(spec, now, spec.window.constant, top) and _pads_hidden(
                spec, border, extra.get("constant", spec.window.constant), top)
            why = f"a {spec.filter.kind} filter never picks either pad value over a pixel inside the window" if same else ""
            yield Mutant(f"window.{border}", "window", f"border policy {border} instead of {now}",
                         "edge pixels where the two policies read different values", plan, why)
    if not spec.filter.is_order and now != "unchecked":
        yield Mutant("window.right_zero", "window", f"the right border reading 0 instead of {now}",
                     "a right edge that is not black", _wide(base, variation=Variation(right_border=0)))


def _line_buffer_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    names = ("top", "middle", "bottom")
    for row in range(3):
        for columns, word in ((1, "late"), (-1, "early")):
            yield Mutant(f"window.row{row}_{word}", "window",
                         f"window row {row} ({names[row]}) read one column {word} (a line buffer address off by one)",
                         "neighbouring pixels of one line that differ", _wide(base, variation=Variation(row_shifts=((row, columns),))))


def _pads_hidden(spec: PipelineSpec, border: str, constant: int, top: int) -> bool:
    """True when a min or max filter's output cannot depend on what ``border`` pads with: the pad copies a
    pixel already in the window (replicate, mirror), or never wins the comparison (0 for max, the top for min)."""
    kind = spec.filter.kind
    if kind not in ("min", "max"):
        return False
    if border in ("replicate", "mirror", "unchecked"):
        return True
    value = 0 if border == "zero" else constant
    return value <= 0 if kind == "max" else value >= top


def _magnitude_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    m = spec.magnitude
    if m is None or m.method != "table":
        return
    changes = [
        ("scale_up", f"table scale {m.table_scale + 1} instead of {m.table_scale}", {"table_scale": m.table_scale + 1}),
        ("shift_up", f"address shift {m.shift + 1} instead of {m.shift}", {"shift": m.shift + 1}),
        ("data_narrow", f"table entries cut to {m.data_bits - 1} bits", {"data_bits": m.data_bits - 1}),
    ]
    if m.table_scale > 1:
        changes.append(("scale_down", f"table scale {m.table_scale - 1} instead of {m.table_scale}",
                        {"table_scale": m.table_scale - 1}))
    if m.shift:
        changes.append(("shift_down", f"address shift {m.shift - 1} instead of {m.shift}", {"shift": m.shift - 1}))
    for tag, words, change in changes:
        plan = _respec(spec, "magnitude", **change)
        if plan is not None:
            yield Mutant(f"magnitude.{tag}", "magnitude", words, "table addresses where the two tables differ", plan)
    yield Mutant("address.wrap", "address", f"table address wrapping at {m.address_bits} bits instead of clamping",
                 f"sum_sq >> {m.shift} beyond {(1 << m.address_bits) - 1}",
                 _wide(base, variation=Variation(address_overflow="wrap")))


def _output_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    out = spec.output
    top = out.max_value
    short = (1 << (out.bits - 1)) - 1
    yield Mutant("output.bound_short", "output", f"output saturating at {short} instead of {top}",
                 f"outputs above {short}", _wide(base, variation=Variation(output_top=short)))
    if base.widths["output"].can_clamp:
        yield Mutant("output.wrap", "output", f"output wrapping at {out.bits} bits instead of saturating",
                     f"values beyond 0..{top} before the output", _wide(base, variation=Variation(output_overflow="wrap")))
    plan = _respec(spec, "output", invert=not out.invert)
    if plan is not None:
        yield Mutant("output.invert", "output", "output inverted" if not out.invert else "output not inverted",
                     "any output other than mid-grey", plan)
    for d in (1, -1):
        plan = _respec(spec, "output", shift=out.shift + d) if out.shift + d >= 0 else None
        if plan is not None:
            yield Mutant(f"output.shift{d:+d}", "output", f"output shift {out.shift + d} instead of {out.shift}",
                         "outputs the shift changes", plan)


def _filter_mutants(base: ModelPlan, spec: PipelineSpec) -> Iterator[Mutant]:
    f = spec.filter
    if f.is_order:
        for kind in ORDER_KINDS:
            if kind != f.kind:
                plan = _respec(spec, "filter", kind=kind)
                if plan is not None:
                    yield Mutant(f"filter.{kind}", "filtered", f"{kind} instead of {f.kind}",
                                 "a window whose values are not all equal", plan)
    elif f.shift:
        for d in (1, -1):
            plan = _respec(spec, "filter", shift=f.shift + d)
            if plan is not None:
                stage = "gx" if f.is_gradient else "filtered"
                yield Mutant(f"filter.shift{d:+d}", stage, f"filter shift {f.shift + d} instead of {f.shift}",
                             "any non-zero filter sum", plan)


_FAMILIES = (_width_mutants, _rounding_mutants, _kernel_mutants, _luma_mutants, _border_mutants, _line_buffer_mutants,
             _magnitude_mutants, _output_mutants, _filter_mutants)


def spec_mutants(spec: PipelineSpec) -> list[Mutant]:
    """Every mutant of ``spec``, in pipeline order of the families, names unique."""
    base = model_plan(spec)
    out: dict[str, Mutant] = {}
    for family in _FAMILIES:
        for mutant in family(base, spec):
            out.setdefault(mutant.name, mutant)
    return list(out.values())


def mutant_outputs(mutant: Mutant, frames: Any, spec: PipelineSpec) -> np.ndarray:
    """The mutant's output for each frame: ``(N, H, W)`` int64. ``frames`` is ``(N, H, W[, 3])`` uint8
    in ``spec``'s input format."""
    return np.stack([run_plan(mutant.plan, check_image(spec, f), keep_stages=False).output.astype(np.int64)
                     for f in frames])


def _merged(base: Any, a: Any, b: Any) -> tuple[bool, Any]:
    """(ok, value) for one field that two mutants may each have changed from ``base``: the changed one,
    or for two changed dataclasses their fields merged; not ok when both changed the same thing."""
    if a == base:
        return True, b
    if b == base:
        return True, a
    if a is None or b is None or base is None or not is_dataclass(a) or isinstance(a, type):
        return False, None
    out = {}
    for f in fields(a):
        ok, value = _merged(getattr(base, f.name), getattr(a, f.name), getattr(b, f.name))
        if not ok:
            return False, None
        out[f.name] = value
    return True, replace(a, **out)


def _overrides(mutant: Mutant) -> dict[str, Any]:
    """What the mutant's plan sets beyond what its own spec gives: weights, kernels, table, variation."""
    own = model_plan(mutant.plan.spec)
    out: dict[str, Any] = {}
    for name in ("weights", "kernels"):
        if getattr(mutant.plan, name) != getattr(own, name):
            out[name] = getattr(mutant.plan, name)
    if mutant.plan.table is not None and not np.array_equal(mutant.plan.table, own.table):
        out["table"] = mutant.plan.table
    if mutant.plan.variation != Variation():
        out["variation"] = mutant.plan.variation
    return out


def mutant_pair(spec: PipelineSpec, a: Mutant, b: Mutant) -> Mutant | None:
    """Both departures of ``a`` and ``b`` at once (a design can hold two faults); None when they change the
    same field, or the two together make no valid spec."""
    if a.name == b.name:
        return None
    try:
        ok, merged = _merged(spec, a.plan.spec, b.plan.spec)
    except ConfigError:  # the two changes together break a rule of the spec
        return None
    if not ok:
        return None
    over_a, over_b = _overrides(a), _overrides(b)
    if (set(over_a) & set(over_b)) - {"variation"}:
        return None
    if "variation" in over_a and "variation" in over_b:
        va, vb = over_a["variation"], over_b["variation"]
        limits = (*va.limits, *vb.limits)
        ok, both = _merged(Variation(), replace(va, limits=()), replace(vb, limits=()))
        if not ok:
            return None
        over_a["variation"] = replace(both, limits=limits)
        del over_b["variation"]
    try:
        plan = _wide(replace(model_plan(merged), **{**over_b, **over_a}))
    except ConfigError:
        return None
    return Mutant(f"{a.name}+{b.name}", a.stage, f"{a.description} and {b.description}",
                  f"{a.needs}, and {b.needs}", plan)
