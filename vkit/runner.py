"""Run a regression: build each design once (cached), simulate every case, score it and write the reports.

:func:`run` takes a loaded :class:`~vkit.config.Config`, expands its case matrix, builds every distinct
build first (through :class:`~vkit.buildcache.BuildCache`), then runs the cases, serially or in a
pool of spawned worker processes. Per case it makes the frames, runs the bit-exact model, writes the
frames and the :class:`~vkit.tb.case.SimCase` JSON, runs cocotb's ``vkit.tb.entry`` test in the
simulator (its output goes to ``sim.log``), loads the capture, scores it and writes the case report.
A case that fails to build or crashes still gets a report entry: nothing is lost.

Output folder layout (every path stays inside ``out_dir``)::

    out_dir/report.json, junit.xml, summary.txt
    out_dir/<case>/verdict.json, frameNNN_*.png      (vkit.report)
    out_dir/<case>/sim/frames.npy, case.json, capture.npz, sim.log
"""

from __future__ import annotations

import concurrent.futures
import multiprocessing
import os
import re
import sys
import time
import traceback
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator, TextIO

import numpy as np

from vkit.buildcache import BuildCache, BuildOutcome, BuildRequest, build_key
from vkit.config import Case, Config, expand_matrix, select_cases, shard_cases
from vkit.errors import EXIT_CONFIG, EXIT_DUT, EXIT_PASS, ConfigError, ToolError, VkitError
from vkit.simulators import activate, require

__all__ = [
    "CaseResult",
    "RunResult",
    "run",
    "run_cases",
    "merge",
    "make_frames",
    "build_request",
    "build_design",
    "run_one_case",
    "exit_code_for",
]

_TIMESCALE = ("1ns", "1ps")
_TEST_MODULE = "vkit.tb.entry"
_ERROR_RE = re.compile(r"(%Error|error:|Error:|\berror\b|ERROR|syntax error|cannot|unable to)", re.IGNORECASE)


# ---------------------------------------------------------------------------------------------- results


@dataclass
class CaseResult:
    """What one case came to.

    Attributes:
        id: case id.
        status: ``pass``, ``fail``, ``no_output`` (the design's verdicts) or ``error`` (nothing judged).
        simulator: simulator name.
        seconds: wall time of the case (frames, model, simulation, scoring, report), s.
        expect: what the config expected (``pass`` or ``fail``; reported only).
        expect_kind: the failure class a seeded bug should show, or None.
        diagnosis: ``kind: message`` of the scoreboard's most confident finding, or None.
        warnings: coverage warnings and other remarks.
        tool_error: True when the error came from the tool side (build failed, simulator crashed).
        entry: the case's report entry (:func:`vkit.report.case_entry` shape).
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

    @property
    def exit_code(self) -> int:
        """0 all passed, 1 a design failed, 2 a case could not be judged (config or tool)."""
        return exit_code_for([c.status for c in self.cases])

    def counts(self) -> dict[str, int]:
        """Cases per status."""
        out: dict[str, int] = {}
        for c in self.cases:
            out[c.status] = out.get(c.status, 0) + 1
        return out


def exit_code_for(statuses: list[str]) -> int:
    """Exit code for a list of case statuses: any ``error`` -> 2, else any failure -> 1, else 0."""
    if any(s == "error" for s in statuses):
        return EXIT_CONFIG
    if any(s != "pass" for s in statuses):
        return EXIT_DUT
    return EXIT_PASS


# ---------------------------------------------------------------------------------------------- frames


def _crop(image: np.ndarray, width: int, height: int) -> np.ndarray:
    h, w = image.shape[:2]
    top, left = (h - height) // 2, (w - width) // 2
    return image[top:top + height, left:left + width]


def make_frames(case: Case) -> np.ndarray:
    """The case's input frames, uint8 ``(N, H, W)`` (gray8) or ``(N, H, W, 3)`` (rgb888).

    Frame ``k`` of a pattern uses seed ``case.seed + k`` (seeded patterns differ per frame). An image
    is read in the design's pixel format (explicit conversions allowed) and centre-cropped to the
    case's size; every frame of an image case is that image.
    """
    from vkit.images import load_image
    from vkit.patterns import make_pattern

    rgb = case.design.pixel_format == "rgb888"
    frames = []
    for k in range(case.frames):
        if case.stimulus == "pattern":
            img = make_pattern(case.stimulus_name, case.height, case.width, seed=case.seed + k, rgb=rgb,
                               **dict(case.pattern_options))
        else:
            img = _crop(load_image(case.stimulus_name, mode=case.design.pixel_format, convert=True),
                        case.width, case.height)
        frames.append(np.ascontiguousarray(img, dtype=np.uint8))
    return np.stack(frames)


# ---------------------------------------------------------------------------------------------- builds


def _default_build_args(design: Any, simulator: str) -> list[str]:
    if simulator == "ghdl":
        return ["--std=08"]
    if simulator == "verilator":
        # warnings are reported in build.log but do not stop the build of a user design
        return ["-Wno-fatal"]
    return []


def build_request(case: Case, tool_version: str) -> BuildRequest:
    """The :class:`BuildRequest` of a case (only design, simulator and frame-size parameters matter)."""
    d = case.design
    return BuildRequest.make(
        case.simulator, tool_version, d.top, d.sources, d.language,
        parameters=d.build_parameters(case.width, case.height),
        defines=d.defines,
        build_args=[*_default_build_args(d, case.simulator), *d.build_args],
        data_files=list(d.file_parameters.values()),
        include_dirs=d.include_dirs,
    )


def _first_error_line(log: Path) -> str:
    try:
        lines = log.read_text(errors="replace").splitlines()
    except OSError:
        return "no build log was written"
    for line in lines:
        if _ERROR_RE.search(line) and "Running command" not in line:
            return " ".join(line.split())[:300]
    tail = [ln for ln in lines if ln.strip()]
    return " ".join(tail[-1].split())[:300] if tail else "the tool printed nothing"


@contextmanager
def _quiet_pytest_env() -> Iterator[None]:
    """cocotb's runner behaves differently under pytest (it exits on failed tests); vkit judges itself."""
    saved = os.environ.pop("PYTEST_CURRENT_TEST", None)
    try:
        yield
    finally:
        if saved is not None:
            os.environ["PYTEST_CURRENT_TEST"] = saved


def build_design(case: Case, cache: BuildCache) -> BuildOutcome:
    """Build (or reuse) the simulator model of ``case``'s design.

    Raises:
        ToolError: the simulator is missing, or it rejected the sources (the tool's first error line
            and the path of the full ``build.log``).
    """
    from cocotb_tools.runner import get_runner

    info = require(case.simulator)
    activate(info)
    request = build_request(case, info.version)
    d = case.design

    def builder(bdir: Path) -> None:
        log = bdir / "build.log"
        runner = get_runner(case.simulator)
        kwargs: dict[str, Any] = dict(
            sources=[str(s) for s in d.sources],
            hdl_toplevel=d.top,
            build_dir=str(bdir),
            build_args=list(request.build_args),
            includes=[str(p) for p in d.include_dirs],
            always=True,
            log_file=str(log),
        )
        if case.simulator != "ghdl":
            kwargs["parameters"] = d.build_parameters(case.width, case.height)
            kwargs["defines"] = dict(d.defines)
            kwargs["timescale"] = _TIMESCALE
        try:
            with _quiet_pytest_env():
                runner.build(**kwargs)
        except (RuntimeError, ValueError, SystemExit, OSError) as exc:
            line = _first_error_line(log) if log.exists() else " ".join(str(exc).split())
            raise ToolError(f"{case.simulator} could not build {d.name} (top {d.top}): {line} (full log: {log})") from None

    return cache.ensure(request, builder)


# ---------------------------------------------------------------------------------------------- one case


def _inside(out_dir: Path, path: Path) -> Path:
    resolved = path.resolve()
    if resolved != out_dir.resolve() and out_dir.resolve() not in resolved.parents:
        raise ConfigError(f"output path {path} would leave the report folder {out_dir}; use plain case names")
    return resolved


def _coverage(case: Case, spec: Any, frames: np.ndarray, floor: float) -> tuple[dict[str, Any], list[str]]:
    from vkit.quality import compare

    report = compare(spec, [f for f in frames])
    stages = [c.to_dict() for c in report.overall.coverage]
    warnings = []
    for c in report.overall.coverage:
        if c.hi != c.lo and c.share < floor:
            warnings.append(
                f"stage {c.name} reached {100 * c.share:.0f}% of its range "
                f"({c.seen_min}..{c.seen_max} of {c.lo}..{c.hi}): a pass proves less than it seems"
            )
    clamps = {k: round(float(v), 6) for k, v in report.overall.clamp_shares.items()}
    return {"stages": stages, "clamp_shares": clamps, "floor": floor}, warnings


def _sim_dir(out_dir: Path, case: Case) -> Path:
    from vkit.report import safe_name

    return _inside(out_dir, out_dir / safe_name(case.id) / "sim")


def _error_entry(case: Case, message: str, seconds: float, tool_error: bool, files: dict[str, Any] | None = None) -> CaseResult:
    from vkit.report import case_entry

    verdict = {
        "passed": False, "status": "error", "timing_errors": [message],
        "findings": [{"kind": "error", "message": message, "confidence": 1.0, "evidence": {}}],
        "diagnosis": {"kind": "error", "message": message, "confidence": 1.0, "evidence": {}},
    }
    entry = case_entry(case.id, verdict, simulator=case.simulator, seeds=case.seeds(), files=files or {},
                       meta=_case_meta(case, seconds))
    return CaseResult(case.id, "error", case.simulator, seconds, case.design.expect, case.design.expect_kind,
                      f"error: {message}", "error", [], tool_error, entry)


def _case_meta(case: Case, seconds: float) -> dict[str, Any]:
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
    return meta


def _simulate(case: Case, build_dir: Path, sim_dir: Path, frames: np.ndarray, timeout_s: float) -> Path:
    """Write the SimCase, run the cocotb entry, return the capture path (which may be missing)."""
    from cocotb_tools.runner import get_runner

    from vkit.tb.case import CASE_ENV, SimCase

    d = case.design
    sim_dir.mkdir(parents=True, exist_ok=True)
    frames_file = sim_dir / "frames.npy"
    np.save(frames_file, frames)
    capture_file = sim_dir / "capture.npz"
    capture_file.unlink(missing_ok=True)
    simcase = SimCase(
        family=d.family, signals=dict(d.ports), frames_file=str(frames_file), capture_file=str(capture_file),
        width=case.width, height=case.height, pixel_format=d.pixel_format, timing=case.timing,
        stalls=case.stalls.as_pattern(case.seed) if d.family == "video" else None,
        stream_gaps=case.gaps.as_pattern(case.seed) if d.family == "stream" else None,
        backpressure=case.backpressure.as_pattern(case.seed + 7919) if d.family == "stream" else None,
        blanking=case.blanking, blanking_value=case.blanking_value, seed=case.seed,
        clock_period_ns=d.clock_period_ns, reset_active_high=d.reset_active_high, reset_cycles=d.reset_cycles,
        timeout_clocks=d.timeout_clocks, simulator=case.simulator, label=case.id,
    )
    case_json = simcase.to_json(sim_dir / "case.json")
    runner = get_runner(case.simulator)
    kwargs: dict[str, Any] = dict(
        test_module=_TEST_MODULE, hdl_toplevel=d.top, hdl_toplevel_lang=d.language,
        build_dir=str(build_dir), test_dir=str(sim_dir),
        extra_env={CASE_ENV: str(case_json)}, log_file=str(sim_dir / "sim.log"),
        results_xml=str(sim_dir / "results.xml"),
    )
    if case.simulator == "ghdl":
        kwargs["parameters"] = d.build_parameters(case.width, case.height)
        kwargs["test_args"] = ["--std=08", f"--workdir={build_dir}"]
        kwargs["timescale"] = _TIMESCALE
    saved_prefix = os.environ.get("SIM_CMD_PREFIX")
    # cocotb's runner has no time limit; coreutils `timeout` bounds the simulator process.
    os.environ["SIM_CMD_PREFIX"] = f"timeout -k 10 {max(1, int(timeout_s))}"
    try:
        with _quiet_pytest_env():
            runner.test(**kwargs)
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else 1
        if not capture_file.exists():
            why = "exceeded timeout_s" if code == 124 else f"exited with code {code}"
            raise ToolError(f"{case.simulator} {why} before writing a capture: "
                            f"{_first_error_line(sim_dir / 'sim.log')} (log: {sim_dir / 'sim.log'})") from None
    finally:
        if saved_prefix is None:
            os.environ.pop("SIM_CMD_PREFIX", None)
        else:
            os.environ["SIM_CMD_PREFIX"] = saved_prefix
    return capture_file


def run_one_case(case: Case, out_dir: str | Path, cache_dir: str | Path | None = None, *,
                 timeout_s: float = 600.0, max_listed: int = 20, coverage_floor: float = 0.5) -> CaseResult:
    """Run one case end to end and write its report; never raises for a case-level problem.

    Returns:
        A :class:`CaseResult`; errors (bad stimulus, build failure, simulator crash) come back as
        status ``error`` with the one-line reason as the diagnosis.
    """
    from vkit.capture import Capture
    from vkit.pipeline import run_model
    from vkit.report import case_entry, write_case_report
    from vkit.scoreboard import score

    t0 = time.monotonic()
    out = Path(out_dir).resolve()
    d = case.design
    tool_error = False
    try:
        sim_dir = _sim_dir(out, case)
        spec = d.pipeline_spec()
        if spec.input != d.pixel_format:
            raise ConfigError(
                f"design {d.name}: spec {spec.name!r} takes {spec.input} but the design's pixel_format is "
                f"{d.pixel_format}; make them agree"
            )
        frames = make_frames(case)
        expected = [run_model(spec, f) for f in frames]
        tool_error = True
        outcome = build_design(case, BuildCache(cache_dir))
        capture_file = _simulate(case, outcome.build_dir, sim_dir, frames, timeout_s)
        tool_error = False
        if capture_file.exists():
            capture = Capture.load(capture_file)
        else:
            capture = Capture(meta={"error": f"no capture was written; see {sim_dir / 'sim.log'}"})
        verdict = score(
            expected, capture, tolerance_lsb=d.tolerance_lsb,
            declared_latency_clocks=case.declared_latency_clocks(), align=d.align, max_listed=max_listed,
            spec=spec, images=list(frames),
        )
        coverage, warnings = _coverage(case, spec, frames, coverage_floor)
        seconds = time.monotonic() - t0
        meta = _case_meta(case, seconds)
        meta["build_dir"] = str(outcome.build_dir)
        meta["build_reused"] = outcome.reused
        meta["warnings"] = warnings
        files = write_case_report(case.id, verdict, expected, capture, out, meta=meta)
        files["sim_log"] = os.path.relpath(sim_dir / "sim.log", out)
        entry = case_entry(case.id, verdict, simulator=case.simulator, seeds=case.seeds(), files=files,
                           coverage=coverage, meta=meta)
        diag = verdict.diagnosis
        status = verdict.status
        tool_error = status == "error"
        return CaseResult(case.id, status, case.simulator, seconds, d.expect, d.expect_kind,
                          f"{diag.kind}: {diag.message}" if diag else None, diag.kind if diag else None,
                          warnings, tool_error, entry)
    except VkitError as exc:
        return _error_entry(case, str(exc), time.monotonic() - t0, tool_error or isinstance(exc, ToolError))
    except Exception as exc:  # a crash inside vkit itself: keep the case and its traceback in the report
        tb = traceback.format_exc(limit=6)
        msg = f"internal error {type(exc).__name__}: {' '.join(str(exc).split())}"
        res = _error_entry(case, msg, time.monotonic() - t0, True)
        res.entry["meta"]["traceback"] = tb
        return res


# ---------------------------------------------------------------------------------------------- workers


def _build_worker(case: Case, cache_dir: str | None) -> tuple[str, dict[str, Any]]:
    try:
        outcome = build_design(case, BuildCache(cache_dir))
        return "ok", {"build_dir": str(outcome.build_dir), "reused": outcome.reused,
                      "seconds": round(outcome.seconds, 3), "waited_s": round(outcome.waited_s, 3)}
    except VkitError as exc:
        return "error", {"message": str(exc)}
    except Exception as exc:  # keep the message; the case phase reports it per case
        return "error", {"message": f"internal error {type(exc).__name__}: {exc}"}


def _case_worker(case: Case, out_dir: str, cache_dir: str | None, timeout_s: float, max_listed: int,
                 floor: float) -> CaseResult:
    return run_one_case(case, out_dir, cache_dir, timeout_s=timeout_s, max_listed=max_listed, coverage_floor=floor)


def _progress_line(i: int, n: int, res: CaseResult) -> str:
    text = f"[{i}/{n}] {res.id} {res.status} {res.seconds:.1f} s"
    if res.status != "pass" and res.diagnosis:
        text += f"  ({res.diagnosis[:120]})"
    if res.expect == "fail":
        text += f"  [expected to fail{': ' + res.expect_kind if res.expect_kind else ''}]"
    return text


def run_cases(cases: list[Case], out_dir: str | Path, *, jobs: int = 1, cache_dir: str | Path | None = None,
              timeout_s: float = 600.0, max_listed: int = 20, coverage_floor: float = 0.5,
              progress: bool = True, stream: TextIO | None = None) -> RunResult:
    """Build, run, score and report a list of cases into ``out_dir`` (see :func:`run`)."""
    t0 = time.monotonic()
    stream = stream or sys.stdout
    out = Path(out_dir).resolve()
    out.mkdir(parents=True, exist_ok=True)
    cache = str(Path(cache_dir).resolve()) if cache_dir is not None else None
    for sim in sorted({c.simulator for c in cases}):
        require(sim)  # a missing simulator is one clear error before anything runs
    # one representative case per distinct build
    reps: dict[tuple[str, str], Case] = {}
    for c in cases:
        info = require(c.simulator)
        reps.setdefault((c.simulator, build_key(build_request(c, info.version))), c)
    builds: list[dict[str, Any]] = []
    build_errors: dict[tuple[str, str], str] = {}
    jobs = max(1, int(jobs))
    ctx = multiprocessing.get_context("spawn")
    pool = concurrent.futures.ProcessPoolExecutor(max_workers=jobs, mp_context=ctx) if jobs > 1 else None
    try:
        if pool is None:
            done_builds = [(k, _build_worker(c, cache)) for k, c in reps.items()]
        else:
            futs = {k: pool.submit(_build_worker, c, cache) for k, c in reps.items()}
            done_builds = [(k, f.result()) for k, f in futs.items()]
        for (sim, key), (state, info) in done_builds:
            rep = reps[(sim, key)]
            builds.append({"design": rep.design.name, "simulator": sim, "key": key[:12], "state": state, **info})
            if state == "error":
                build_errors[(sim, key)] = info["message"]
            if progress:
                if state == "ok":
                    how = "reused" if info["reused"] else f"built in {info['seconds']:.1f} s"
                    print(f"build {rep.design.name} on {sim}: {how}", file=stream, flush=True)
                else:
                    print(f"build {rep.design.name} on {sim}: FAILED: {info['message']}", file=stream, flush=True)

        results: dict[str, CaseResult] = {}
        pending = []
        n = len(cases)
        counter = 0
        for c in cases:
            key = (c.simulator, build_key(build_request(c, require(c.simulator).version)))
            if key in build_errors:
                res = _error_entry(c, build_errors[key], 0.0, True)
                results[c.id] = res
                counter += 1
                if progress:
                    print(_progress_line(counter, n, res), file=stream, flush=True)
            else:
                pending.append(c)
        if pool is None:
            for c in pending:
                res = _case_worker(c, str(out), cache, timeout_s, max_listed, coverage_floor)
                results[c.id] = res
                counter += 1
                if progress:
                    print(_progress_line(counter, n, res), file=stream, flush=True)
        else:
            futs2 = {pool.submit(_case_worker, c, str(out), cache, timeout_s, max_listed, coverage_floor): c
                     for c in pending}
            for f in concurrent.futures.as_completed(futs2):
                c = futs2[f]
                try:
                    res = f.result()
                except Exception as exc:  # a worker died: keep the case
                    res = _error_entry(c, f"worker process failed: {type(exc).__name__}: {exc}", 0.0, True)
                results[c.id] = res
                counter += 1
                if progress:
                    print(_progress_line(counter, n, res), file=stream, flush=True)
    finally:
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)
    ordered = [results[c.id] for c in cases]
    from vkit.report import write_run_report

    files = write_run_report([r.entry for r in ordered], out)
    (out / "builds.json").write_text(__import__("json").dumps(builds, indent=2) + "\n")
    return RunResult(out, ordered, files, builds, time.monotonic() - t0)


def run(config: Config, jobs: int | None = None, shard: tuple[int, int] | str | None = None,
        only: str | list[str] | None = None, progress: bool = True, *, out_dir: str | Path | None = None,
        simulators: list[str] | None = None, stream: TextIO | None = None) -> RunResult:
    """Run a config's regression.

    Args:
        config: a loaded config.
        jobs: worker processes (default: ``[run] jobs``); above 1 a spawn-based process pool.
        shard: ``(K, N)`` or ``"K/N"``: run only case ``i`` with ``i % N + 1 == K`` of the sorted matrix.
        only: keep cases whose id matches (glob or substring; a list = any).
        progress: print a line per build and per case (``[3/12] id pass 1.2 s``).
        out_dir: report folder (default ``[run] out_dir``).
        simulators: replaces ``[run] simulators``.
        stream: where progress goes (default stdout).

    Returns:
        A :class:`RunResult`; ``exit_code`` is 0 all pass, 1 a design failed, 2 a case errored.

    Raises:
        ConfigError / ToolError: nothing could run (empty selection, missing simulator).
    """
    cases = expand_matrix(config, simulators)
    cases = select_cases(cases, only)
    cases = shard_cases(cases, shard)
    if not cases:
        raise ConfigError(f"shard {shard} of {config.path.name} holds no case; use fewer shards")
    out = Path(out_dir).resolve() if out_dir is not None else config.run.out_dir
    return run_cases(
        cases, out, jobs=jobs or config.run.jobs, cache_dir=config.run.cache_dir, timeout_s=config.run.timeout_s,
        max_listed=config.run.max_listed, coverage_floor=config.run.coverage_floor, progress=progress, stream=stream,
    )


def merge(out_dir: str | Path, reports: list[str | Path]) -> tuple[dict[str, Any], int]:
    """Merge shard ``report.json`` files into one report in ``out_dir``; returns (report, exit code)."""
    from vkit.report import merge_reports

    if not reports:
        raise ConfigError("merge: no report.json given; pass the shard reports (or their folders)")
    merged = merge_reports(list(reports), Path(out_dir))
    statuses = [c.get("status") or c.get("verdict", {}).get("status", "error") for c in merged["cases"]]
    return merged, exit_code_for(statuses)
