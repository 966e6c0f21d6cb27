"""The verdict: alignment, every pixel compared, output timing checked, failures diagnosed."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.check.align": (
        "border_coverage BORDER_POLICIES infer_border latency_clocks measure_offset "
        "shift_back"
    ),
    "vkit.check.by_mutant": "diagnose_by_mutants diagnose_with_pairs expected_by_mutant localise MutantDiagnosis MutantMatch",
    "vkit.check.diagnose": "diagnose slip_events SlipEvent",
    "vkit.check.results": (
        "BorderInference BorderSpec ExpectedFrame Finding FrameResult KINDS Offset "
        "StageValues STATUSES TimingIssue Verdict"
    ),
    "vkit.check.scoreboard": "score",
    "vkit.check.settle": "ControlSettle settled_facts",
})
