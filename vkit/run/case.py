"""One case end to end, in four steps: prepare (frames, model, port check), simulate, judge, report.

A case never raises for a case-level problem: a bad stimulus, a failed build or a simulator crash
comes back as a :class:`~vkit.run.results.CaseResult` of status ``error`` with the one-line reason,
and whatever the simulation left behind is kept in the report.
"""

from __future__ import annotations

import os
import re
import shlex
import time
import traceback
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from vkit.check.by_mutant import MutantDiagnosis, diagnose_with_pairs
from vkit.check.results import Finding
from vkit.check.scoreboard import Verdict, score
from vkit.core.errors import ToolError, VkitError
from vkit.model.exact import StagesOnDemand
from vkit.model.pipeline import ModelResult, PipelineSpec
from vkit.report.writers import case_entry, case_folder, write_case_report
from vkit.run.builds import build_for_drive, pick_drive
from vkit.run.config import Case
from vkit.run.coverage import stimulus_coverage
from vkit.run.heap import bound_heap, trim_heap
from vkit.run.inputs import check_ports, make_frames
from vkit.run.options import RunOptions
from vkit.run.results import CaseResult, case_meta, error_result, stopped_result
from vkit.run.simulate import simulate_capture
from vkit.run.waves import wave_rerun
from vkit.sim.buildcache import BuildCache, BuildOutcome
from vkit.sim.guard import GuardOutcome
from vkit.video.capture import Capture, RunFacts

__all__ = ["run_one_case", "rerun_command", "mutant_diagnosis", "named_by_mutant", "DIAGNOSIS_MAX_PIXELS"]

_KEPT_FILES = (("case_json", "case.json"), ("frames_npy", "frames.npy"), ("capture", "capture.npz"),
               ("capture_error", "capture.error.txt"), ("sim_log", "sim.log"))
"""Report key and file name of what a simulation leaves in the case's run folder."""


def rerun_command(config_path: str | Path, case_id: str, simulator: str, out_dir: str | Path | None = None,
                  waves: bool = False) -> str:
    """The shell command that reruns exactly one case of a config (same seeds), quoted for a POSIX shell."""
    words = ["vkit", "run", str(Path(config_path).resolve()), "--only", case_id, "--sim", simulator]
    if out_dir is not None:
        words += ["--out", str(out_dir)]
    if waves:
        words.append("--waves")
    return " ".join(shlex.quote(w) for w in words)


@dataclass(frozen=True)
class _Prepared:
    """A case ready to simulate: its run folder, spec, input frames and the model's expected results."""

    sim_dir: Path
    spec: PipelineSpec
    frames: np.ndarray
    expected: list[ModelResult]
    drive: str
    """The drive path the case runs on (:func:`vkit.run.builds.pick_drive`)."""


@dataclass(frozen=True)
class _Judged:
    """The verdict of a case with its coverage figures, warnings and wave facts (None: no waves)."""

    verdict: Verdict
    coverage: dict[str, Any]
    warnings: list[str]
    waves: dict[str, Any] | None
    by_mutant: MutantDiagnosis | None = None


def _kept_files(out: Path, sim_dir: Path) -> dict[str, Any]:
    """Report-relative paths of what a case's simulation left behind (all kept, even on error)."""
    return {key: os.path.relpath(sim_dir / name, out) for key, name in _KEPT_FILES if (sim_dir / name).exists()}


def _strip_exc_name(text: str) -> str:
    m = re.match(r"(ConfigError|ToolError|DutError): (.*)", text)
    return m.group(2) if m else text


def _prepare(case: Case, options: RunOptions) -> _Prepared:
    """Check the spec and ports, pick the drive path, make the frames and run the bit-exact model on them."""
    sim_dir = case_folder(options.out_dir, case.id, "sim")
    spec = case.design.pipeline_spec()
    check_ports(case)
    frames = make_frames(case, BuildCache(options.cache_dir).cache_dir)
    # stage arrays are made only for the frames that need them (failing ones): big frames stay in bounds
    expected = [StagesOnDemand(spec, f) for f in frames]
    return _Prepared(sim_dir, spec, frames, expected, pick_drive(case, options.drive))  # type: ignore[arg-type]


def _simulate(case: Case, prep: _Prepared, options: RunOptions, left_s: float) -> tuple[BuildOutcome, Capture]:
    """Build (or reuse) and run the simulation on the case's drive path (``left_s`` seconds at most); a
    missing capture becomes a capture that says so."""
    drive = prep.drive
    outcome = build_for_drive(case, BuildCache(options.cache_dir), drive)
    capture = simulate_capture(case, outcome.build_dir, prep.sim_dir, prep.frames, left_s, drive=drive)
    if capture is not None:
        return outcome, capture
    return outcome, Capture(facts=RunFacts(error=f"no capture was written; see {prep.sim_dir / 'sim.log'}"))


def _sim_stop(capture: Capture, timeout_s: float) -> Finding | None:
    """The finding of a simulator stopped at the time limit (kind ``timeout``) or by a signal (``crash``)."""
    raw = capture.facts.sim_outcome
    if not raw:
        return None
    outcome = replace(GuardOutcome(**raw), limit_s=timeout_s)  # the limit the user set, not what was left of it
    if not outcome.timed_out and outcome.signal is None:
        return None
    last = f"last output at clock {int(capture.clock.max())}" if len(capture) else "no output before that"
    evidence = {"pixels_arrived": len(capture), "signal": outcome.signal, "seconds": round(outcome.seconds, 3)}
    return Finding("timeout" if outcome.timed_out else "crash", f"{outcome.describe()}; {last}", evidence, 1.0)


def _judge(case: Case, prep: _Prepared, capture: Capture, options: RunOptions,
           stimulus: Future[tuple[dict[str, Any], list[str]]]) -> _Judged:
    """Score the capture, measure the stimulus coverage, and dump waves when the options ask for them.

    A simulation stopped at the time limit or by a signal is scored up to where it stopped (what
    arrived is compared, the rest counts as missing) and takes the status ``timeout`` (the design's
    fault, as a hung design is the usual cause) or ``error`` (a crash is the tool's), with that first.
    """
    # the coverage (measured while the simulator ran) first: its model runs and the scoring's frames are never
    # in memory at once (measured on 10 frames of 1920x1080: 916 MiB peak with both, 735 MiB without)
    coverage, warnings = stimulus.result()
    verdict = score(prep.expected, capture, max_listed=options.max_listed, spec=prep.spec, images=list(prep.frames),
                    keep_passing=options.pictures == "all", **case.score_settings())
    stop = _sim_stop(capture, options.timeout_s)
    if stop is not None:
        status = "timeout" if stop.kind == "timeout" else "error"
        verdict = replace(verdict, status=status, passed=False, findings=[stop, *verdict.findings])
    by_mutant = mutant_diagnosis(verdict, prep.spec, prep.frames)
    verdict = named_by_mutant(verdict, by_mutant)
    warnings = [*verdict.warnings, *warnings]
    waves: dict[str, Any] | None = None
    wanted = options.waves == "all" or (options.waves == "failing" and verdict.status in ("fail", "no_output"))
    if wanted and stop is None:  # a stopped simulation would only stop again
        try:
            waves = wave_rerun(case, options.out_dir, BuildCache(options.cache_dir), prep.frames, capture, verdict,
                               options.timeout_s)
        except VkitError as exc:  # the verdict stands; say why there is no wave file
            warnings.append(f"no waves: {exc}")
    return _Judged(verdict, coverage, warnings, waves, by_mutant)


_GUESSES = ("shift", "scattered")
"""Finding kinds read off where the mismatches lie rather than what their values are: a spec mutant that
reproduces the values is the better explanation and is reported first (a shift must survive that check)."""
_EXACT_BEATS = (*_GUESSES, "stall")
"""Finding kinds a spec mutant replaces when it reproduces every checked pixel exactly: a pixel that looks
repeated or skipped is then what a line buffer read one address off gives, not a handshake fault."""


DIAGNOSIS_MAX_PIXELS = 1 << 20
"""Output pixels the diagnosis by mutants runs every mutant on: it keeps every mutant's output at once (about
70 of them, 8 bytes a pixel: about 0.6 GB at this bound). A failing run with more is diagnosed on its first
frames that fit, a frame bigger than that alone on its first rows (measured: ten failing 1920x1080 frames
took 13.3 GB of memory without the bound)."""

_CUT_ROWS_UNCHECKED = 2
"""Rows at the bottom of a cut frame left unchecked: the model sees the cut as the frame's last row and pads
past it, so the 3x3 window's outputs there differ from the whole frame's (one row; one more for safety)."""


def _diagnosis_part(frames: list[Any], shape: tuple[int, ...]) -> tuple[list[Any], int]:
    """The frames and rows of each the diagnosis by mutants runs on (:data:`DIAGNOSIS_MAX_PIXELS`)."""
    height, width = int(shape[0]), int(shape[1])
    count = max(1, min(len(frames), DIAGNOSIS_MAX_PIXELS // max(1, height * width)))
    rows = height if height * width <= DIAGNOSIS_MAX_PIXELS else max(_CUT_ROWS_UNCHECKED + 3,
                                                                       DIAGNOSIS_MAX_PIXELS // max(1, width))
    return frames[:count], min(rows, height)


def mutant_diagnosis(verdict: Verdict, spec: PipelineSpec, images: Any) -> MutantDiagnosis | None:
    """For a failing case with wrong pixel values: the spec mutant that reproduces the design's output.

    ``images`` gives each frame's input image by frame number (an ``(N, H, W[, 3])`` array, or a dict).
    Big runs are diagnosed on a part of them (:data:`DIAGNOSIS_MAX_PIXELS`).
    """
    frames = [f for f in verdict.frames if f is not None]
    if verdict.status != "fail" or not verdict.value_mismatches or not frames:
        return None
    shapes = {f.expected.shape for f in frames}
    known = images.keys() if isinstance(images, dict) else range(len(images))
    if len(shapes) != 1 or any(f.index not in known for f in frames):
        return None
    frames, rows = _diagnosis_part(frames, next(iter(shapes)))
    inputs = np.stack([images[f.index][:rows] for f in frames])
    checked = np.stack([(f.valid & f.present & ~f.unknown)[:rows] for f in frames])
    if rows < next(iter(shapes))[0]:
        checked[:, rows - _CUT_ROWS_UNCHECKED:] = False
    return diagnose_with_pairs(spec, inputs, np.stack([f.expected[:rows] for f in frames]),
                               np.stack([f.actual[:rows] for f in frames]), checked)


def named_by_mutant(verdict: Verdict, found: MutantDiagnosis | None) -> Verdict:
    """The verdict with the mutant's explanation first when the checks could only guess (:data:`_GUESSES`)."""
    top = verdict.diagnosis
    if found is None or found.best is None or top is None:
        return verdict
    if top.kind not in (_EXACT_BEATS if found.best.exact else _GUESSES):
        return verdict
    evidence = {"mutant": found.best.name, "explained_share": round(found.best.share, 4), "where": found.where,
                "instead_of": top.kind}
    return replace(verdict, findings=[Finding("variant", found.text, evidence, round(found.best.share, 4)),
                                      *verdict.findings])


def _report(case: Case, prep: _Prepared, outcome: BuildOutcome, capture: Capture, judged: _Judged,
            options: RunOptions, seconds: float, rerun: str | None) -> CaseResult:
    """Write the case's pictures and verdict.json; its report entry and result."""
    out, verdict, waves = options.out_dir, judged.verdict, judged.waves
    meta = {**case_meta(case, seconds), "build_dir": str(outcome.build_dir), "build_reused": outcome.reused,
            "path": prep.drive, "asked_path": options.drive, "warnings": judged.warnings, "rerun": rerun}
    if waves is not None:
        meta["waves"] = waves
    files = write_case_report(case.id, verdict, prep.expected, capture, out, meta=meta, pictures=options.pictures)
    files.update(_kept_files(out, prep.sim_dir))
    if waves is not None:
        files["waves"] = waves["file"]
    coverage = {**judged.coverage, "warnings": list(judged.warnings)}  # report.json carries the words too
    entry = case_entry(case.id, verdict, simulator=case.simulator, seeds=case.seeds(), files=files,
                       coverage=coverage, meta=meta, drive=meta["path"])
    if judged.by_mutant is not None:
        entry["diagnosis_by_mutant"] = judged.by_mutant.to_dict()
    diag = verdict.diagnosis
    return CaseResult(
        case.id, verdict.status, case.simulator, seconds, case.design.expect, case.design.expect_kind,
        diagnosis=f"{diag.kind}: {diag.message}" if diag else None, diagnosis_kind=diag.kind if diag else None,
        warnings=judged.warnings, tool_error=verdict.status == "error", entry=entry, rerun=rerun,
        waves=waves["file"] if waves else None,
    )


def _error(case: Case, options: RunOptions, message: str, is_tool: bool, seconds: float,
           sim_dir: Path | None, rerun: str | None) -> CaseResult:
    """The result of a case that could not be judged, with what its simulation left behind."""
    files = _kept_files(options.out_dir, sim_dir) if sim_dir is not None else {}
    res = error_result(case, message, seconds, is_tool, files)
    res.rerun = rerun
    res.entry["meta"]["rerun"] = rerun
    return res


def _too_slow(case: Case, options: RunOptions, seconds: float, sim_dir: Path, rerun: str | None) -> CaseResult:
    message = (f"making the stimulus and the expected frames took {seconds:.1f} s, past timeout_s = "
               f"{options.timeout_s:g} s, before the simulation started; use fewer or smaller frames or raise timeout_s")
    res = stopped_result(case, "timeout", message, seconds, _kept_files(options.out_dir, sim_dir))
    res.rerun = rerun
    res.entry["meta"]["rerun"] = rerun
    return res


def run_one_case(case: Case, options: RunOptions) -> CaseResult:
    """Run one case end to end and write its report; never raises for a case-level problem.

    Args:
        case: the case.
        options: the run's options (report folder, build cache, time limit, waves, pictures, drive
            mode; with ``config_path`` the report carries the command that reruns exactly this case).

    Returns:
        A :class:`CaseResult`; errors (bad stimulus, build failure, simulator crash) come back as
        status ``error`` with the one-line reason as the diagnosis.
    """
    t0 = time.monotonic()
    bound_heap()
    out = options.out_dir
    rerun = (rerun_command(options.config_path, case.id, case.simulator, out / "rerun")
             if options.config_path is not None else None)
    sim_dir: Path | None = None
    in_simulation = False
    try:
        prep = _prepare(case, options)
        left_s = options.timeout_s - (time.monotonic() - t0)
        if left_s <= 0:  # the time limit covers the stimulus and the model too
            return _too_slow(case, options, time.monotonic() - t0, prep.sim_dir, rerun)
        sim_dir, in_simulation = prep.sim_dir, True
        with ThreadPoolExecutor(1) as pool:
            # what the stimulus covers depends on the spec and frames only: measured while the simulator runs
            stimulus = pool.submit(stimulus_coverage, prep.spec, prep.frames, options.coverage_floor,
                                   BuildCache(options.cache_dir).cache_dir)
            stimulus.add_done_callback(lambda _: trim_heap())  # its model runs' arrays are gone: so is their memory
            outcome, capture = _simulate(case, prep, options, left_s)
            in_simulation = False
        trim_heap()
        if capture.facts.error and capture.facts.sim_outcome is None:
            # the cocotb side stopped (misnamed port, narrow bus, ...): one line, capture and log kept
            message = _strip_exc_name(" ".join(str(capture.facts.error).split()))
            return _error(case, options, message, False, time.monotonic() - t0, sim_dir, rerun)
        judged = _judge(case, prep, capture, options, stimulus)
        return _report(case, prep, outcome, capture, judged, options, time.monotonic() - t0, rerun)
    except VkitError as exc:
        return _error(case, options, str(exc), in_simulation or isinstance(exc, ToolError), time.monotonic() - t0,
                      sim_dir, rerun)
    except Exception as exc:  # a crash inside vkit itself: keep the case and its traceback in the report
        message = f"internal error {type(exc).__name__}: {' '.join(str(exc).split())}"
        res = _error(case, options, message, True, time.monotonic() - t0, sim_dir, rerun)
        res.entry["meta"]["traceback"] = traceback.format_exc(limit=6)
        return res
