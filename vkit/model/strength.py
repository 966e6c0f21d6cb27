"""Stimulus strength: which spec mutants a set of frames tells apart from the spec, and why the rest survive."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from vkit.model.exact import check_image, run_model, run_plan
from vkit.model.mutants import Mutant, spec_mutants
from vkit.model.quality import StageCoverage
from vkit.model.result import ModelResult
from vkit.model.spec import PipelineSpec

__all__ = ["MutantVerdict", "StrengthReport", "stimulus_strength", "kill_sets"]


@dataclass(frozen=True)
class MutantVerdict:
    """What one stimulus does to one mutant.

    Attributes:
        mutant: the mutant.
        killed: True when its output differs from the spec's on some checked pixel.
        pixels: checked pixels (over all frames) where the outputs differ.
        reason: for a survivor, why it survives, in words; "" when killed.
    """

    mutant: Mutant
    killed: bool
    pixels: int
    reason: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form."""
        return {**self.mutant.to_dict(), "killed": self.killed, "pixels": self.pixels, "reason": self.reason}


@dataclass
class StrengthReport:
    """The mutants of one spec against one stimulus (a set of frames).

    Attributes:
        spec: the pipeline spec's name.
        frames: frames in the stimulus.
        verdicts: one per mutant, in the order of :func:`vkit.model.mutants.spec_mutants`.
        coverage: each stage's range coverage on the stimulus.
        table_share: share of root-table addresses read, 0..1 (None without a table).
    """

    spec: str
    frames: int
    verdicts: list[MutantVerdict]
    coverage: list[StageCoverage] = field(default_factory=list)
    table_share: float | None = None

    @property
    def counted(self) -> list[MutantVerdict]:
        """Verdicts of the mutants some stimulus can kill (equivalent ones left out)."""
        return [v for v in self.verdicts if not v.mutant.equivalent]

    @property
    def kill_rate(self) -> float:
        """Killed share of the mutants that can be killed, 0..1 (1 when there are none)."""
        counted = self.counted
        return sum(v.killed for v in counted) / len(counted) if counted else 1.0

    @property
    def survivors(self) -> list[MutantVerdict]:
        """Mutants that can be killed but were not."""
        return [v for v in self.counted if not v.killed]

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (JSON-able)."""
        counted = self.counted
        return {
            "spec": self.spec, "frames": self.frames, "mutants": len(counted),
            "killed": sum(v.killed for v in counted), "kill_rate": round(self.kill_rate, 4),
            "equivalent": [v.to_dict() for v in self.verdicts if v.mutant.equivalent],
            "survivors": [v.to_dict() for v in self.survivors],
            "killed_mutants": [v.mutant.name for v in counted if v.killed],
            "coverage": [c.to_dict() for c in self.coverage],
            "table_address_share": None if self.table_share is None else round(self.table_share, 4),
        }

    def text(self) -> str:
        """The report as a few lines of text."""
        counted = self.counted
        killed = sum(v.killed for v in counted)
        lines = [f"{self.spec}: {self.frames} frame(s) kill {killed} of {len(counted)} mutants "
                 f"({100 * self.kill_rate:.1f}%), {len(self.verdicts) - len(counted)} equivalent"]
        if self.table_share is not None:
            lines.append(f"  root table: {100 * self.table_share:.1f}% of the addresses read")
        lines += [f"  survives: {v.mutant.description}: {v.reason}" for v in self.survivors]
        lines += [f"  equivalent: {v.mutant.description}: {v.mutant.equivalent}"
                  for v in self.verdicts if v.mutant.equivalent]
        return "\n".join(lines)


def _frames(spec: PipelineSpec, frames: Any) -> list[np.ndarray]:
    arr = np.asarray(frames)
    one = arr.ndim == (3 if spec.input == "rgb888" else 2)
    return [check_image(spec, f) for f in ([arr] if one else arr)]


def kill_sets(spec: PipelineSpec, frames: Any, mutants: Sequence[Mutant]) -> list[np.ndarray]:
    """Per frame, a bool array over ``mutants``: True where that frame alone kills the mutant."""
    out = []
    for img in _frames(spec, frames):
        base = run_model(spec, img, keep_stages=False)
        mask = base.valid_mask
        out.append(np.array([bool((run_plan(m.plan, img, keep_stages=False).output != base.output)[mask].any())
                             for m in mutants]))
    return out


def _limit_reason(mutant: Mutant, runs: list[ModelResult]) -> str | None:
    """Why a narrowed-word mutant survives: the stage never left the narrower word, or the output hid it."""
    limits = mutant.plan.variation.limits
    if not limits:
        return None
    parts = []
    for stage, bits, _how in limits:
        st = runs[0].stages[stage]
        lo, hi = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if st.signed else (0, (1 << bits) - 1)
        seen_lo = min(int(r.stages[stage].array.min()) for r in runs)
        seen_hi = max(int(r.stages[stage].array.max()) for r in runs)
        if lo <= seen_lo and seen_hi <= hi:
            edge = f"±2^{bits - 1}" if st.signed else f"2^{bits}"
            parts.append(f"{stage} never reaches {edge} on this stimulus (seen {seen_lo}..{seen_hi})")
        else:
            parts.append(f"{stage} leaves {lo}..{hi} (seen {seen_lo}..{seen_hi}) but the output is the same there")
    return "; ".join(parts)


def _reason(mutant: Mutant, spec: PipelineSpec, imgs: list[np.ndarray], runs: list[ModelResult]) -> str:
    """Why ``mutant`` survives ``imgs``, in words."""
    why = _limit_reason(mutant, runs)
    if why is not None:
        return why
    stage = mutant.stage
    if stage in runs[0].stages and stage not in ("output",):
        differ = sum(int(np.count_nonzero(run_plan(mutant.plan, img).stages[stage].array != r.stages[stage].array))
                     for img, r in zip(imgs, runs))
        if differ:
            return f"{stage} differs at {differ} pixel(s) but the difference never reaches a checked output"
        return f"{stage} is the same on every pixel of this stimulus: it needs {mutant.needs}"
    return f"the output is the same on every checked pixel: it needs {mutant.needs}"


def _coverage(runs: list[ModelResult]) -> list[StageCoverage]:
    out = []
    for name, st in runs[0].stages.items():
        if name == "input":
            continue
        smin = min(int(r.stages[name].array.min()) for r in runs)
        smax = max(int(r.stages[name].array.max()) for r in runs)
        share = 1.0 if st.hi == st.lo else (smax - smin) / (st.hi - st.lo)
        out.append(StageCoverage(name, st.lo, st.hi, smin, smax, share))
    return out


def _table_share(spec: PipelineSpec, runs: list[ModelResult]) -> float | None:
    if spec.magnitude is None or spec.magnitude.method != "table":
        return None
    seen = np.unique(np.concatenate([r.stages["address"].array.ravel() for r in runs]))
    return len(seen) / (1 << spec.magnitude.address_bits)


def _killed_pixels(m: Mutant, spec: PipelineSpec, imgs: list[np.ndarray], runs: list[ModelResult],
                   first_kill: bool) -> int:
    """Checked pixels where mutant ``m`` differs from the spec; with ``first_kill``, counted up to the first
    frame where it differs (the frames after it are not run)."""
    pixels = 0
    for img, run in zip(imgs, runs):
        out = run_plan(m.plan, img, keep_stages=False).output
        pixels += int(np.count_nonzero((out != run.output) & run.valid_mask))
        if pixels and first_kill:
            break
    return pixels


def stimulus_strength(spec: PipelineSpec, frames: Any, mutants: Sequence[Mutant] | None = None,
                      outputs: Mapping[str, tuple[str, np.ndarray]] | None = None, *,
                      first_kill: bool = False) -> StrengthReport:
    """Run every mutant of ``spec`` on ``frames`` (``(N, H, W[, 3])`` or one frame, uint8) and say which
    the frames kill, why the others survive, the stages' range coverage and the table-address share.

    ``outputs`` (mutant name -> (description, ``(N, H, W)`` output), as the diagnosis by mutants makes
    them) saves running the mutants a second time. ``first_kill=True`` runs a mutant frame by frame and
    stops at the first frame that kills it: the same killed/survived verdicts, with ``pixels`` counting
    the frames run only (a regression case needs the verdicts, not the counts)."""
    mutants = list(spec_mutants(spec) if mutants is None else mutants)
    imgs = _frames(spec, frames)
    runs = [run_model(spec, img) for img in imgs]
    verdicts = []
    for m in mutants:
        if m.equivalent:
            verdicts.append(MutantVerdict(m, False, 0, m.equivalent))
            continue
        if outputs is not None and m.name in outputs:
            out = outputs[m.name][1]
            pixels = sum(int(np.count_nonzero((o != r.output) & r.valid_mask)) for o, r in zip(out, runs))
        else:
            pixels = _killed_pixels(m, spec, imgs, runs, first_kill)
        verdicts.append(MutantVerdict(m, pixels > 0, pixels, "" if pixels else _reason(m, spec, imgs, runs)))
    return StrengthReport(spec.name, len(imgs), verdicts, _coverage(runs), _table_share(spec, runs))
