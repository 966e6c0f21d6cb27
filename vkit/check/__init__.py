"""The verdict: alignment, every pixel compared, output timing checked, failures diagnosed."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

_HOME = {
    "BORDER_POLICIES": "vkit.check.align",
    "BorderInference": "vkit.check.results",
    "BorderSpec": "vkit.check.results",
    "ExpectedFrame": "vkit.check.results",
    "Finding": "vkit.check.results",
    "FrameResult": "vkit.check.results",
    "KINDS": "vkit.check.results",
    "Offset": "vkit.check.results",
    "STATUSES": "vkit.check.results",
    "SlipEvent": "vkit.check.diagnose",
    "StageValues": "vkit.check.results",
    "TimingIssue": "vkit.check.results",
    "Verdict": "vkit.check.results",
    "border_coverage": "vkit.check.align",
    "diagnose": "vkit.check.diagnose",
    "infer_border": "vkit.check.align",
    "latency_clocks": "vkit.check.align",
    "measure_offset": "vkit.check.align",
    "score": "vkit.check.scoreboard",
    "shift_back": "vkit.check.align",
    "slip_events": "vkit.check.diagnose",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
