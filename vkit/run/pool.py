"""Carrying out a list of cases: every distinct build first, then the cases, each in a process of its own.

Each build and each case runs in a child process that leads its own process group and dies with the
run (:mod:`vkit.run.procs`), at most ``jobs`` at a time; the child gets the case and the frozen
:class:`~vkit.run.options.RunOptions`, nothing else. A build that fails marks its cases ``error``
without running them; a child that dies keeps its case as ``error``; a case that overruns its time
limit is killed with everything it started and reported as ``timeout``. Ctrl-C (SIGINT) or SIGTERM
stops the run: no new case starts, the running ones are killed, and the report holds every finished
case plus the others marked ``interrupted``. The output folder is locked for the run
(:mod:`vkit.run.outlock`).
"""

from __future__ import annotations

import io
import json
import multiprocessing
import os
import signal
import threading
import time
from pathlib import Path
from typing import Any, Callable, Hashable, TextIO

from vkit.core.errors import ConfigError, VkitError
from vkit.report.progress import Progress
from vkit.report.writers import write_run_report
from vkit.run.builds import build_for_drive, build_request
from vkit.run.case import run_one_case
from vkit.run.config import Case
from vkit.run.options import RunOptions
from vkit.run.outlock import lock_out_dir
from vkit.run.procs import JobOutcome, JobRunner
from vkit.run.results import CaseResult, RunResult, error_result, stopped_result
from vkit.sim.buildcache import BuildCache, build_key
from vkit.sim.simulators import require

__all__ = ["run_cases", "JOBS_PER_CPU", "CASE_MARGIN_S", "worker_count"]

_BuildKey = tuple[str, str]
"""(simulator, build key): cases with the same one share a build."""

JOBS_PER_CPU = 4
"""Most workers per CPU a run starts, whatever ``-j`` asks. Each worker runs a simulator, which is
CPU-bound: past a few per CPU more workers only add memory and context switches (the issue that set
this: ``-j 100000`` froze a 2-core machine). Common practice, no source."""

CASE_MARGIN_S = 30.0
"""Seconds a case may run past its ``timeout_s`` (twice that with wave reruns) for scoring and writing its
pictures before the run kills it as a timeout. A value from experience: the frame and pixel limits keep
scoring of one case well under it."""


_CASE_INDENT = "  "
"""Before each case's progress line (see :class:`vkit.report.progress.Progress`)."""


def _start_method() -> str:
    """``fork`` when it is safe (POSIX, this process runs one thread), else ``spawn``.

    Forked children start with vkit, NumPy, Pillow and cocotb's runner already imported (this module
    imports the whole case path at the top); spawned ones import them again each, a fixed cost per case.
    Forking a process that runs other threads (e.g. inside some test harnesses) can deadlock, so that
    case spawns.
    """
    if "fork" not in multiprocessing.get_all_start_methods() or threading.active_count() > 1:
        return "spawn"
    return "fork"


def worker_count(jobs: int, cases: int, cpus: int | None = None) -> tuple[int, str | None]:
    """Workers for ``jobs`` asked and ``cases`` to run: at most one per case and :data:`JOBS_PER_CPU` per
    CPU; with the one-line note to print when the request was cut (else None)."""
    cpus = cpus or os.cpu_count() or 1
    cap = JOBS_PER_CPU * cpus
    workers = max(1, min(jobs, cases, cap))
    if workers == jobs:
        return workers, None
    why = (f"the run has {cases} case{'s' if cases != 1 else ''}" if cases < cap
           else f"{JOBS_PER_CPU} per CPU on {cpus} CPU{'s' if cpus != 1 else ''}")
    return workers, f"-j {jobs} cut to {workers} ({why})"


class _StopSignals:
    """While active, Ctrl-C (SIGINT) and SIGTERM only record that the run must stop (main thread only)."""

    def __init__(self) -> None:
        self.signum: int | None = None
        self._saved: dict[int, Any] = {}

    def requested(self) -> bool:
        return self.signum is not None

    def _handle(self, signum: int, _frame: Any) -> None:
        self.signum = self.signum or signum

    def __enter__(self) -> _StopSignals:
        if threading.current_thread() is threading.main_thread():
            for signum in (signal.SIGINT, signal.SIGTERM):
                self._saved[signum] = signal.signal(signum, self._handle)
        return self

    def __exit__(self, *exc: object) -> None:
        for signum, handler in self._saved.items():
            signal.signal(signum, handler)


def _build_key(case: Case) -> _BuildKey:
    return case.simulator, build_key(build_request(case, require(case.simulator).version))


def _build_worker(case: Case, cache_dir: Path | None, drive: str) -> tuple[str, dict[str, Any]]:
    """``("ok", facts)`` of the build a case runs on, or ``("error", {"message": ...})``."""
    try:
        outcome = build_for_drive(case, BuildCache(cache_dir), drive)
        return "ok", {"build_dir": str(outcome.build_dir), "reused": outcome.reused,
                      "seconds": round(outcome.seconds, 3), "waited_s": round(outcome.waited_s, 3)}
    except VkitError as exc:
        return "error", {"message": str(exc)}
    except Exception as exc:  # keep the message; the case phase reports it per case
        return "error", {"message": f"internal error {type(exc).__name__}: {exc}"}


def _note(res: CaseResult) -> str:
    if res.expect != "fail":
        return ""
    return f"expected to fail{': ' + res.expect_kind if res.expect_kind else ''}"


def _show(progress: Progress, res: CaseResult) -> None:
    progress.update(res.id, res.status, res.seconds, res.diagnosis, _note(res))


def _case_limit_s(options: RunOptions) -> float:
    """Wall-clock seconds a case process may run before the run kills it (see :data:`CASE_MARGIN_S`)."""
    sims = 1 if options.waves == "off" else 2  # a failing case is simulated again for its waves
    return sims * options.timeout_s + CASE_MARGIN_S


def _run_builds(cases: list[Case], options: RunOptions, runner: JobRunner,
                progress: Progress) -> tuple[list[dict[str, Any]], dict[_BuildKey, str]]:
    """Build one representative case per distinct build; the builds' facts and the failed builds' messages."""
    reps: dict[_BuildKey, Case] = {}
    for c in cases:
        reps.setdefault(_build_key(c), c)
    done = runner.run({k: (_build_worker, (c, options.cache_dir, options.drive), None) for k, c in reps.items()})
    builds: list[dict[str, Any]] = []
    errors: dict[_BuildKey, str] = {}
    for (sim, key), outcome in done.items():
        state, info = outcome.result if outcome.state == "done" else ("error", {"message": _lost(outcome, "build")})
        name = reps[(sim, key)].design.name
        builds.append({"design": name, "simulator": sim, "key": key[:12], "state": state, **info})
        if state == "error":
            errors[(sim, key)] = info["message"]
            if outcome.state != "interrupted":
                progress.echo(f"build {name} on {sim}: FAILED: {info['message']}")
        else:
            how = "reused" if info["reused"] else f"built in {info['seconds']:.1f} s"
            progress.echo(f"build {name} on {sim}: {how}")
    return builds, errors


def _lost(outcome: JobOutcome, what: str) -> str:
    """Why a job has no result (its process died or the run was stopped)."""
    if outcome.state == "interrupted":
        return f"the run was stopped before the {what} ended"
    code = outcome.exitcode
    how = f"signal {-code} ({signal.Signals(-code).name})" if code is not None and code < 0 else f"exit code {code}"
    return f"the {what}'s worker process died with {how} before it gave a result"


def _case_outcome(case: Case, outcome: JobOutcome, options: RunOptions, signum: int | None) -> CaseResult:
    """The result a case's process gave, or the result that says why it gave none."""
    if outcome.state == "done":
        return outcome.result
    if outcome.state == "timeout":
        message = (f"the case ran past timeout_s = {options.timeout_s:g} s (plus {CASE_MARGIN_S:g} s for scoring) "
                   "and was stopped, simulator and all; stimulus, model and scoring count towards the limit")
        return stopped_result(case, "timeout", message, outcome.seconds)
    if outcome.state == "interrupted":
        name = signal.Signals(signum).name if signum else "the run"
        return stopped_result(case, "interrupted", f"stopped by {name} before the case ended", outcome.seconds)
    return error_result(case, _lost(outcome, "case"), outcome.seconds, True)


def _run_case_phase(cases: list[Case], build_errors: dict[_BuildKey, str], options: RunOptions,
                    runner: JobRunner, progress: Progress, stop: _StopSignals) -> dict[str, CaseResult]:
    """Every case's result: cases of a failed build are errors at once, the others run."""
    results: dict[str, CaseResult] = {}
    pending: dict[Hashable, tuple[Callable[..., Any], tuple[Any, ...], float | None]] = {}
    by_id = {c.id: c for c in cases}
    for c in cases:
        message = build_errors.get(_build_key(c))
        if message is None:
            pending[c.id] = (run_one_case, (c, options), _case_limit_s(options))
        elif stop.requested():
            results[c.id] = stopped_result(c, "interrupted", "stopped before its build ended", 0.0)
        else:
            results[c.id] = error_result(c, message, 0.0, True)
            _show(progress, results[c.id])

    def done(case_id: Hashable, outcome: JobOutcome) -> None:
        results[str(case_id)] = _case_outcome(by_id[str(case_id)], outcome, options, stop.signum)
        _show(progress, results[str(case_id)])

    for case_id, outcome in runner.run(pending, done).items():
        if case_id not in results:  # stopped: never ended on its own
            results[str(case_id)] = _case_outcome(by_id[str(case_id)], outcome, options, stop.signum)
    return results


def _write_reports(ordered: list[CaseResult], builds: list[dict[str, Any]], out: Path) -> dict[str, str]:
    """report.json, junit.xml, summary.txt and builds.json; a full disk or a lost folder is one clear error."""
    try:
        files = write_run_report([r.entry for r in ordered], out)
        (out / "builds.json").write_text(json.dumps(builds, indent=2) + "\n")
    except OSError as exc:
        why = exc.strerror or type(exc).__name__
        raise ConfigError(f"the report cannot be written to {out} ({why}); free some space or give another --out, "
                          "then run again") from None
    return files


def run_cases(cases: list[Case], options: RunOptions, *, progress: bool = True,
              stream: TextIO | None = None, new_out: bool = False) -> RunResult:
    """Build, run, score and report a list of cases into ``options.out_dir`` (see :func:`vkit.run.runner.run`).

    Args:
        cases: the cases, in report order.
        options: the run's options.
        progress: show the progress (one updating line on a terminal, a line per case elsewhere).
        stream: where progress goes (default stdout).
        new_out: when another run is writing ``options.out_dir``, write a sibling folder (``out-2``, ...)
            instead of stopping.

    Raises:
        ConfigError: ``out_dir`` cannot be created or written, or another run is writing it.
        ToolError: a simulator the cases name is missing (before anything runs).
    """
    t0 = time.monotonic()
    for sim in sorted({c.simulator for c in cases}):
        require(sim)  # a missing simulator is one clear error before anything runs
    # vkit does no linear algebra; an idle BLAS thread pool in every worker and every simulator's
    # embedded Python only takes CPU from the other jobs (measured: -j 2 scaling 1.78x -> 2.04x).
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    shown = Progress(len(cases), stream if progress else io.StringIO(), indent=_CASE_INDENT)
    with lock_out_dir(options.out_dir, new_out=new_out) as lock, _StopSignals() as stop:
        notes = [lock.note] if lock.note else []
        if lock.out_dir != options.out_dir:
            options = options.with_out_dir(lock.out_dir)
        workers, cut = worker_count(options.jobs, len(cases))
        notes += [cut] if cut else []
        for line in notes:
            shown.echo(f"vkit: {line}")
        runner = JobRunner(workers, _start_method(), stop.requested)
        builds, build_errors = _run_builds(cases, options, runner, shown)
        results = _run_case_phase(cases, build_errors, options, runner, shown, stop)
        shown.close()
        ordered = [results[c.id] for c in cases]
        files = _write_reports(ordered, builds, options.out_dir)
    return RunResult(out_dir=options.out_dir, cases=ordered, report_files=files, builds=builds,
                     wall_s=time.monotonic() - t0, stopped_by=stop.signum, notes=notes)
