"""What a case and a run came to: the result types, the exit code, and the entry of a case nothing judged."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from vkit.core.errors import EXIT_CONFIG, EXIT_DUT, EXIT_PASS
from vkit.report.writers import case_entry
from vkit.run.config import Case

__all__ = ["CaseResult", "RunResult", "exit_code_for", "met_expectation", "case_meta", "error_result", "stopped_result"]


@dataclass
class CaseResult:
    """What one case came to.

    Attributes:
        id: case id.
        status: ``pass``, ``fail``, ``no_output``, ``timeout`` (the design's verdicts; ``timeout``: the
            simulation or the case ran past ``timeout_s``), ``error`` (nothing judged, or the simulator
            crashed) or ``interrupted`` (the run was stopped by Ctrl-C or SIGTERM before the case ended).
        simulator: simulator name.
        seconds: wall time of the case (frames, model, simulation, scoring, report), s.
        expect: what the config expected (``pass`` or ``fail``; reported only).
        expect_kind: the failure class a seeded bug should show, or None.
        diagnosis: ``kind: message`` of the scoreboard's most confident finding, or None.
        diagnosis_kind: the kind of that finding, or None.
        warnings: coverage warnings and other remarks.
        tool_error: True when the error came from the tool side (build failed, simulator crashed).
        entry: the case's report entry (:func:`vkit.report.writers.case_entry` shape).
        rerun: the one command that reruns exactly this case (same seeds), or None.
        waves: path of the case's waveform file (a clock window around the first mismatch), or None.
    """

    id: str
    status: str
    simulator: str
    seconds: float
    expect: str = "pass"
    expect_kind: str | None = None
    diagnosis: str | None = None
    diagnosis_kind: str | None = None
    warnings: list[str] = field(default_factory=list)
    tool_error: bool = False
    entry: dict[str, Any] = field(default_factory=dict)
    rerun: str | None = None
    waves: str | None = None

    @property
    def passed(self) -> bool:
        """True when the design passed."""
        return self.status == "pass"


@dataclass
class RunResult:
    """A whole run: its cases in matrix order, the report files, the builds and the exit code."""

    out_dir: Path
    cases: list[CaseResult]
    report_files: dict[str, str]
    builds: list[dict[str, Any]]
    wall_s: float
    stopped_by: int | None = None
    """The signal (SIGINT, SIGTERM) that stopped the run before every case ended, or None."""
    notes: list[str] = field(default_factory=list)
    """Lines the run said besides the cases (``-j`` cut, output folder moved, ...)."""
    exit_from: str = "verdicts"
    """``"verdicts"`` or ``"expectations"`` (``[run] exit_code``)."""

    @property
    def exit_code(self) -> int:
        """0 all passed, 1 a design failed, 2 a case could not be judged (config or tool); 128 + N when
        signal N stopped the run (130 Ctrl-C, 143 SIGTERM), as a shell reports it.

        Judged by expectations (``exit_from == "expectations"``), a case marked to fail that failed counts as
        passed and one that passed as failed (an ``unexpected pass``); errors stay errors.
        """
        if self.stopped_by is not None:
            return 128 + self.stopped_by
        if self.exit_from == "expectations":
            return exit_code_for([met_expectation(c) for c in self.cases])
        return exit_code_for([c.status for c in self.cases])

    def counts(self) -> dict[str, int]:
        """Cases per status."""
        out: dict[str, int] = {}
        for c in self.cases:
            out[c.status] = out.get(c.status, 0) + 1
        return out


def met_expectation(case: CaseResult) -> str:
    """The case's status judged against what the config expected: ``pass`` when it came out as expected."""
    if case.expect != "fail" or case.status == "error":
        return case.status
    return "fail" if case.status == "pass" else "pass"


def exit_code_for(statuses: list[str]) -> int:
    """Exit code for a list of case statuses: any ``error`` -> 2, else any failure -> 1, else 0."""
    if any(s == "error" for s in statuses):
        return EXIT_CONFIG
    if any(s != "pass" for s in statuses):
        return EXIT_DUT
    return EXIT_PASS


def case_meta(case: Case, seconds: float) -> dict[str, Any]:
    """The facts of a case its report entry keeps under ``meta`` (design, stimulus, flows, seconds)."""
    d = case.design
    meta: dict[str, Any] = {
        "design": d.name, "top": d.top, "simulator": case.simulator, "stimulus": case.stimulus_label,
        "stimulus_kind": case.stimulus, "frames": case.frames, "width": case.width, "height": case.height,
        "timing": case.timing_label, "stalls": case.stalls.as_pattern(case.seed),
        "stream_gaps": case.gaps.as_pattern(case.seed), "backpressure": case.backpressure.as_pattern(case.seed),
        "expect": d.expect, "seconds": round(seconds, 3),
    }
    if d.bug:
        meta.update({"bug": d.bug, "expect_kind": d.expect_kind, "description": d.description, "needs": d.needs})
    bus = d.bus_layout()
    if bus.lanes > 1 or bus.component_order != "RGB" or bus.sample_bits != 8:
        meta["bus"] = bus.to_dict()
    return meta


def error_result(case: Case, message: str, seconds: float, tool_error: bool,
                 files: dict[str, Any] | None = None) -> CaseResult:
    """The result of a case that could not be judged: status ``error``, ``message`` as its one finding."""
    return _unjudged(case, "error", "error", message, seconds, tool_error, files)


def stopped_result(case: Case, status: str, message: str, seconds: float,
                   files: dict[str, Any] | None = None) -> CaseResult:
    """The result of a case the run stopped: ``timeout`` (past its time limit; the design's fault) or
    ``interrupted`` (Ctrl-C or SIGTERM of the run), ``message`` as its one finding."""
    return _unjudged(case, status, status, message, seconds, False, files)


def _unjudged(case: Case, status: str, kind: str, message: str, seconds: float, tool_error: bool,
              files: dict[str, Any] | None) -> CaseResult:
    finding = {"kind": kind, "message": message, "confidence": 1.0, "evidence": {}}
    verdict = {"passed": False, "status": status, "timing_errors": [message], "findings": [finding],
               "diagnosis": dict(finding)}
    entry = case_entry(case.id, verdict, simulator=case.simulator, seeds=case.seeds(), files=files or {},
                       meta=case_meta(case, seconds))
    return CaseResult(case.id, status, case.simulator, seconds, case.design.expect, case.design.expect_kind,
                      f"{kind}: {message}", kind, [], tool_error, entry)
