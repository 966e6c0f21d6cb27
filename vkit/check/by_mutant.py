"""Diagnosis by mutants: which spec mutant reproduces a failing design's output, and where the rest of the
mismatches lie (columns, rows, a stripe, a period)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

from vkit.model.mutants import Mutant, mutant_outputs, mutant_pair, spec_mutants
from vkit.model.spec import PipelineSpec

__all__ = ["MutantMatch", "MutantDiagnosis", "diagnose_by_mutants", "diagnose_with_pairs", "expected_by_mutant", "localise"]

NEARLY_ALL = 0.9
"""A mutant "explains" a failure when it gives the design's value at this share of the mismatching pixels
and predicts wrong values at fewer than (1 - this) of them: one stray region in ten may be another cause."""
_LOCAL_SHARE = 0.25
"""Mismatches confined to at most this share of the columns (or rows) are named as a stripe of them."""
PAIR_CANDIDATES = 5
"""When no single mutant reproduces the output, pairs are tried among this many mutants that reproduce the
most mismatching pixels, and this many that depart from the spec most where the design does (a fault that
only shows through another one reproduces no pixel on its own, yet it departs where the design departs)."""
_PERIODS = range(2, 9)
"""Column and row periods searched (window and pixel-packing faults repeat with small periods)."""


@dataclass(frozen=True)
class MutantMatch:
    """How well one mutant's output reproduces the design's.

    Attributes:
        name, description: the mutant's.
        explained: mismatching pixels where the mutant gives the design's value.
        false: pixels where the mutant departs from the spec but the design does not.
        mismatches: pixels where the design departs from the spec.
    """

    name: str
    description: str
    explained: int
    false: int
    mismatches: int

    @property
    def exact(self) -> bool:
        """True when the mutant gives the design's output on every checked pixel."""
        return self.explained == self.mismatches and self.false == 0

    @property
    def share(self) -> float:
        """Explained share of the mismatches, 0..1."""
        return self.explained / self.mismatches if self.mismatches else 1.0

    @property
    def explains(self) -> bool:
        """True when the mutant explains all or nearly all mismatches (see :data:`NEARLY_ALL`)."""
        return self.share >= NEARLY_ALL and self.false < (1 - NEARLY_ALL) * max(1, self.mismatches)


@dataclass(frozen=True)
class MutantDiagnosis:
    """The best mutant (or None), the runners-up, and where the mismatches lie."""

    best: MutantMatch | None
    ranked: list[MutantMatch]
    where: str

    @property
    def text(self) -> str:
        """One line: the mutant named in the stage's words, else the place."""
        if self.best is not None and self.best.exact:
            return f"the design behaves like the model with {self.best.description}; {self.where}"
        if self.best is not None:
            return (f"the design behaves like the model with {self.best.description} at "
                    f"{100 * self.best.share:.0f}% of the mismatching pixels; {self.where}")
        return f"no mutant explains the mismatches; {self.where}"

    def to_dict(self) -> dict[str, Any]:
        """Plain-data form (for report.json)."""
        def match(m: MutantMatch) -> dict[str, Any]:
            return {"mutant": m.name, "description": m.description, "exact": m.exact,
                    "explained_share": round(m.share, 4), "false_pixels": m.false}
        return {"text": self.text, "mutant": None if self.best is None else match(self.best),
                "runners_up": [match(m) for m in self.ranked[:3]], "where": self.where}


def _span(idx: np.ndarray) -> str:
    lo, hi = int(idx.min()), int(idx.max())
    return f"{lo}" if lo == hi else (f"{lo}..{hi}" if len(idx) == hi - lo + 1 else ", ".join(str(int(i)) for i in idx))


def _period(idx: np.ndarray, size: int) -> tuple[int, int] | None:
    """(period, phase) when every index has the same remainder for the smallest period that is not trivial."""
    for p in reversed(_PERIODS):
        if p * 2 <= size and len(np.unique(idx % p)) == 1 and len(idx) > 1:
            return p, int(idx[0] % p)
    return None


def localise(mismatch: np.ndarray) -> str:
    """Where ``mismatch`` (``(N, H, W)`` or ``(H, W)`` bool) is True, in words: "every line, columns 0..1
    only", "lines 5..7 only", "every 4th column (phase 1)", or "spread over the frame"."""
    m = np.asarray(mismatch, bool).reshape((-1,) + np.shape(mismatch)[-2:]).any(axis=0)
    if not m.any():
        return "no mismatches"
    height, width = m.shape
    rows, cols = np.flatnonzero(m.any(axis=1)), np.flatnonzero(m.any(axis=0))
    parts = []
    for idx, size, word in ((cols, width, "column"), (rows, height, "line")):
        per = _period(idx, size)
        if per is not None and not parts:
            nth = {2: "2nd", 3: "3rd"}.get(per[0], f"{per[0]}th")
            parts.append(f"every {nth} {word} (phase {per[1]})")
    if parts:
        return parts[0]
    if len(cols) <= _LOCAL_SHARE * width:
        lines = "every line" if len(rows) == height else f"lines {_span(rows)}"
        parts.append(f"{lines}, columns {_span(cols)} only")
    elif len(rows) <= _LOCAL_SHARE * height:
        parts.append(f"lines {_span(rows)} only")
    return parts[0] if parts else f"spread over the frame ({len(rows)} lines, {len(cols)} columns)"


def expected_by_mutant(spec: PipelineSpec, frames: Any, mutants: Sequence[Mutant] | None = None
                       ) -> dict[str, tuple[str, np.ndarray]]:
    """Each non-equivalent mutant's name -> (description, ``(N, H, W)`` output) on the input ``frames``."""
    mutants = [m for m in (spec_mutants(spec) if mutants is None else mutants) if not m.equivalent]
    return {m.name: (m.description, mutant_outputs(m, frames, spec)) for m in mutants}


def diagnose_by_mutants(expected: np.ndarray, actual: np.ndarray, by_mutant: Mapping[str, tuple[str, np.ndarray]],
                        checked: np.ndarray | None = None) -> MutantDiagnosis:
    """Score ``actual`` against every mutant's output and name the one that reproduces it.

    Args:
        expected: the spec's output, ``(N, H, W)`` integers.
        actual: the design's output on the same grid (N frames of the capture).
        by_mutant: name -> (description, output ``(N, H, W)``), e.g. :func:`expected_by_mutant`.
        checked: bool, ``(H, W)`` or ``(N, H, W)``: the pixels compared (the border policy's and where a
            pixel arrived); all when None.
    """
    exp, act = np.asarray(expected, np.int64), np.asarray(actual, np.int64)
    mask = np.ones(exp.shape, bool) if checked is None else np.broadcast_to(np.asarray(checked, bool), exp.shape)
    bad = (exp != act) & mask
    n_bad = int(np.count_nonzero(bad))
    ranked = []
    for name, (description, out) in by_mutant.items():
        out = np.asarray(out)
        explained = int(np.count_nonzero(bad & (out == act)))
        false = int(np.count_nonzero(mask & ~bad & (out != exp)))
        ranked.append(MutantMatch(name, description, explained, false, n_bad))
    ranked.sort(key=lambda m: (m.explained - m.false, -m.false), reverse=True)
    best = ranked[0] if ranked and n_bad and ranked[0].explains else None
    return MutantDiagnosis(best, ranked, localise(bad))


def diagnose_with_pairs(spec: PipelineSpec, frames: Any, expected: np.ndarray, actual: np.ndarray,
                        checked: np.ndarray | None = None, mutants: Sequence[Mutant] | None = None) -> MutantDiagnosis:
    """:func:`diagnose_by_mutants` over every single mutant of ``spec``; when none reproduces the design's
    output exactly, again with the likeliest pairs (:func:`_pair_candidates`; a design may hold two faults). At an equal score a single mutant ranks before a pair: the simpler explanation first."""
    pool = [m for m in (spec_mutants(spec) if mutants is None else mutants) if not m.equivalent]
    singles = expected_by_mutant(spec, frames, pool)
    first = diagnose_by_mutants(expected, actual, singles, checked)
    if (first.best is not None and first.best.exact) or not first.ranked or not first.ranked[0].mismatches:
        return first
    by_name = {m.name: m for m in pool}
    pairs: dict[str, tuple[str, np.ndarray]] = {}
    for a, b in _pair_candidates(first, singles, expected, actual, checked):
        both = mutant_pair(spec, by_name[a], by_name[b])
        if both is not None:
            pairs[both.name] = (both.description, mutant_outputs(both, frames, spec))
    if not pairs:
        return first
    return diagnose_by_mutants(expected, actual, {**singles, **pairs}, checked)


def _pair_candidates(first: MutantDiagnosis, singles: Mapping[str, tuple[str, np.ndarray]], expected: np.ndarray,
                     actual: np.ndarray, checked: np.ndarray | None) -> list[tuple[str, str]]:
    """The pairs of single mutants worth trying: any two of the likeliest by value (see :data:`PAIR_CANDIDATES`), and
    those that depart from the spec where the likeliest leaves mismatches unexplained and nowhere the design
    is right (a fault seen only through another one reproduces few pixels on its own)."""
    exp, act = np.asarray(expected, np.int64), np.asarray(actual, np.int64)
    mask = np.ones(exp.shape, bool) if checked is None else np.broadcast_to(np.asarray(checked, bool), exp.shape)
    bad = (exp != act) & mask
    by_value = [m.name for m in first.ranked if m.explained > 0][:PAIR_CANDIDATES]
    departs = {name: (np.asarray(out) != exp) & mask for name, (_, out) in singles.items()}
    wrong_where_right = {name: int(np.count_nonzero(d & ~bad)) for name, d in departs.items()}
    pairs = [(a, b) for i, a in enumerate(by_value) for b in by_value[i + 1:]]
    for lead in by_value:
        rest = bad & (np.asarray(singles[lead][1]) != act)
        seen = {n: int(np.count_nonzero(d & rest)) for n, d in departs.items() if n != lead}
        # consistent first (departs nowhere the design is right), then by the unexplained pixels it touches
        order = sorted((n for n in seen if seen[n] > wrong_where_right[n]), key=lambda n: (wrong_where_right[n], -seen[n]))
        pairs += [(lead, n) for n in order[:2 * PAIR_CANDIDATES] if n not in by_value]
    return pairs
