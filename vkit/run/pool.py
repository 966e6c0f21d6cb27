"""Carrying out a list of cases: every distinct build first, then the cases, serially or in worker processes.

With ``jobs`` above 1 both phases go to a process pool (forked when that is safe, else spawned); each
worker gets the case and the frozen :class:`~vkit.run.options.RunOptions`, nothing else. A build that
fails marks its cases ``error`` without running them; a worker that dies keeps its case as ``error``.
"""

from __future__ import annotations

import concurrent.futures
import json
import multiprocessing
import os
import sys
import threading
import time
from pathlib import Path
from typing import Any, Callable, TextIO

from vkit.core.errors import ConfigError, VkitError
from vkit.report.writers import write_run_report
from vkit.run.builds import build_for_drive, build_request
from vkit.run.case import run_one_case
from vkit.run.config import Case
from vkit.run.options import RunOptions
from vkit.run.results import CaseResult, RunResult, error_result
from vkit.sim.buildcache import BuildCache, build_key
from vkit.sim.simulators import require

__all__ = ["run_cases"]

_BuildKey = tuple[str, str]
"""(simulator, build key): cases with the same one share a build."""


def _start_method(jobs: int) -> str:
    """``fork`` when it is safe (POSIX, this process runs one thread), else ``spawn``.

    Forked workers start with vkit, NumPy, Pillow and cocotb's runner already imported (this module
    imports the whole case path at the top); spawned ones import them again each, a fixed cost a short
    matrix feels in its -j scaling. Forking a process that runs other threads (e.g. inside some test
    harnesses) can deadlock, so that case spawns.
    """
    if jobs <= 1 or "fork" not in multiprocessing.get_all_start_methods() or threading.active_count() > 1:
        return "spawn"
    return "fork"


def _check_writable(out: Path) -> None:
    """Create ``out`` and prove a file can be written there, before anything runs."""
    try:
        out.mkdir(parents=True, exist_ok=True)
        probe = out / f".vkit-write-test-{os.getpid()}"
        try:
            probe.write_text("ok\n")
        finally:  # a write that fails (disk full) still leaves the created file: never leave it behind
            probe.unlink(missing_ok=True)
    except OSError as exc:
        why = exc.strerror or type(exc).__name__
        raise ConfigError(f"output folder {out} cannot be written ({why}); pick a writable folder with --out "
                          "or [run] out_dir") from None


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


def _progress_line(i: int, n: int, res: CaseResult) -> str:
    text = f"[{i}/{n}] {res.id} {res.status} {res.seconds:.1f} s"
    if res.status != "pass" and res.diagnosis:
        text += f"  ({res.diagnosis[:120]})"
    if res.expect == "fail":
        text += f"  [expected to fail{': ' + res.expect_kind if res.expect_kind else ''}]"
    return text


class _Progress:
    """The progress lines of a run (``build ...`` and ``[3/12] id pass 1.2 s``), or silence."""

    def __init__(self, total: int, enabled: bool, stream: TextIO | None) -> None:
        self.total, self.done, self.enabled = total, 0, enabled
        self.stream = stream or sys.stdout

    def say(self, text: str) -> None:
        if self.enabled:
            print(text, file=self.stream, flush=True)

    def case(self, res: CaseResult) -> None:
        self.done += 1
        self.say(_progress_line(self.done, self.total, res))


def _map(pool: concurrent.futures.Executor | None, fn: Callable[..., Any], jobs: dict[Any, tuple[Any, ...]]) -> dict[Any, Any]:
    """``{key: fn(*args)}`` for every ``key: args`` of ``jobs``, in the pool when there is one."""
    if pool is None:
        return {key: fn(*args) for key, args in jobs.items()}
    futures = {key: pool.submit(fn, *args) for key, args in jobs.items()}
    return {key: f.result() for key, f in futures.items()}


def _run_builds(cases: list[Case], options: RunOptions, pool: concurrent.futures.Executor | None,
                progress: _Progress) -> tuple[list[dict[str, Any]], dict[_BuildKey, str]]:
    """Build one representative case per distinct build; the builds' facts and the failed builds' messages."""
    reps: dict[_BuildKey, Case] = {}
    for c in cases:
        reps.setdefault(_build_key(c), c)
    done = _map(pool, _build_worker, {k: (c, options.cache_dir, options.drive) for k, c in reps.items()})
    builds: list[dict[str, Any]] = []
    errors: dict[_BuildKey, str] = {}
    for (sim, key), (state, info) in done.items():
        name = reps[(sim, key)].design.name
        builds.append({"design": name, "simulator": sim, "key": key[:12], "state": state, **info})
        if state == "error":
            errors[(sim, key)] = info["message"]
            progress.say(f"build {name} on {sim}: FAILED: {info['message']}")
        else:
            how = "reused" if info["reused"] else f"built in {info['seconds']:.1f} s"
            progress.say(f"build {name} on {sim}: {how}")
    return builds, errors


def _run_case_phase(cases: list[Case], build_errors: dict[_BuildKey, str], options: RunOptions,
                    pool: concurrent.futures.Executor | None, progress: _Progress) -> dict[str, CaseResult]:
    """Every case's result: cases of a failed build are errors at once, the others run."""
    results: dict[str, CaseResult] = {}
    pending = []
    for c in cases:
        message = build_errors.get(_build_key(c))
        if message is None:
            pending.append(c)
            continue
        results[c.id] = error_result(c, message, 0.0, True)
        progress.case(results[c.id])
    if pool is None:
        for c in pending:
            results[c.id] = run_one_case(c, options)
            progress.case(results[c.id])
        return results
    futures = {pool.submit(run_one_case, c, options): c for c in pending}
    for f in concurrent.futures.as_completed(futures):
        c = futures[f]
        try:
            results[c.id] = f.result()
        except Exception as exc:  # a worker died: keep the case
            results[c.id] = error_result(c, f"worker process failed: {type(exc).__name__}: {exc}", 0.0, True)
        progress.case(results[c.id])
    return results


def run_cases(cases: list[Case], options: RunOptions, *, progress: bool = True,
              stream: TextIO | None = None) -> RunResult:
    """Build, run, score and report a list of cases into ``options.out_dir`` (see :func:`vkit.run.runner.run`).

    Raises:
        ConfigError: ``out_dir`` cannot be created or written.
        ToolError: a simulator the cases name is missing (before anything runs).
    """
    t0 = time.monotonic()
    out = options.out_dir
    _check_writable(out)
    for sim in sorted({c.simulator for c in cases}):
        require(sim)  # a missing simulator is one clear error before anything runs
    # vkit does no linear algebra; an idle BLAS thread pool in every worker and every simulator's
    # embedded Python only takes CPU from the other jobs (measured: -j 2 scaling 1.78x -> 2.04x).
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    ctx = multiprocessing.get_context(_start_method(options.jobs))
    pool = (concurrent.futures.ProcessPoolExecutor(max_workers=options.jobs, mp_context=ctx)
            if options.jobs > 1 else None)
    shown = _Progress(len(cases), progress, stream)
    try:
        builds, build_errors = _run_builds(cases, options, pool, shown)
        results = _run_case_phase(cases, build_errors, options, pool, shown)
    finally:
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)
    ordered = [results[c.id] for c in cases]
    files = write_run_report([r.entry for r in ordered], out)
    (out / "builds.json").write_text(json.dumps(builds, indent=2) + "\n")
    return RunResult(out, ordered, files, builds, time.monotonic() - t0)
