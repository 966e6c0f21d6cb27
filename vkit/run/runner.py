"""Run a regression: build each design once (cached), simulate every case, score it and write the reports.

:func:`run` takes a loaded :class:`~vkit.run.config.Config`, expands its case matrix, builds every distinct
build first (through :class:`~vkit.sim.buildcache.BuildCache`), then runs the cases, serially or in a
pool of spawned worker processes. Per case it makes the frames, runs the bit-exact model, writes the
frames and the :class:`~vkit.sim.case.SimCase` JSON, runs cocotb's ``vkit.sim.tb.entry`` test in the
simulator (its output goes to ``sim.log``), loads the capture, scores it and writes the case report.
A case that fails to build or crashes still gets a report entry: nothing is lost.

Output folder layout (every path stays inside ``out_dir``)::

    out_dir/report.json, junit.xml, summary.txt
    out_dir/<case>/verdict.json, frameNNN_*.png      (vkit.report.writers)
    out_dir/<case>/sim/frames.npy, case.json, capture.npz, sim.log
"""

from __future__ import annotations

import concurrent.futures
import dataclasses
import difflib
import multiprocessing
import os
import re
import shlex
import sys
import time
import traceback
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator, TextIO

import numpy as np

from vkit.sim.buildcache import BuildCache, BuildOutcome, BuildRequest, build_key
from vkit.run.config import Case, Config, expand_matrix, select_cases, shard_cases
from vkit.core.errors import EXIT_CONFIG, EXIT_DUT, EXIT_PASS, ConfigError, ToolError, VkitError
from vkit.sim.simulators import activate, find, require

__all__ = [
    "CaseResult",
    "RunResult",
    "run",
    "run_cases",
    "merge",
    "make_frames",
    "build_request",
    "build_design",
    "build_fast_design",
    "make_sim_case",
    "run_one_case",
    "exit_code_for",
    "check_ports",
    "wave_window",
    "rerun_command",
    "WAVE_MODES",
    "PATHS",
]

_TIMESCALE = ("1ns", "1ps")
_TEST_MODULE = "vkit.sim.tb.entry"
_WAVE_MODULE = "vkit_wave_window"
PATHS: tuple[str, ...] = ("clock", "fast", "native")
"""How a case drives the design: ``clock`` = cocotb source and monitor every clock (interactive
debugging, any user test); ``fast`` = the generated HDL harness plays and captures whole runs under
cocotb; ``native`` = the same harness as a plain executable, no cocotb (Icarus, Verilator)."""
WAVE_MODES: tuple[str, ...] = ("failing", "all", "off")
"""``[run] waves`` values: rerun failing cases with a wave dump (default), every case, or none."""
_WAVE_LINES = 2
"""Video lines of waveform kept on each side of the first mismatch."""
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
    is read in the design's pixel format (conversions only with ``[stimulus] convert = true``) and centre-cropped to the
    case's size; every frame of an image case is that image.
    """
    from vkit.video.images import load_image
    from vkit.video.patterns import make_pattern

    rgb = case.design.pixel_format == "rgb888"
    frames = []
    for k in range(case.frames):
        if case.stimulus == "pattern":
            img = make_pattern(case.stimulus_name, case.height, case.width, seed=case.seed + k, rgb=rgb,
                               **dict(case.pattern_options))
        else:
            try:
                loaded = load_image(case.stimulus_name, mode=case.design.pixel_format, convert=case.convert)
            except ConfigError as exc:
                if "convert" not in str(exc):
                    raise
                raise ConfigError(f"{exc} (in a vkit config: convert = true under [stimulus])") from None
            img = _crop(loaded, case.width, case.height)
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


def build_fast_design(case: Case, cache: BuildCache, native: bool = False) -> BuildOutcome:
    """Build (or reuse) the fast-path harness (:mod:`vkit.sim.fast`) around ``case``'s design.

    The harness depends on the design, its parameters and the family only, so one build serves every
    image, timing, stall pattern and seed. ``native=True`` builds it as a plain executable (no cocotb:
    ``iverilog``/``vvp`` or ``verilator --binary``), for ``path = "native"``.

    Raises:
        ToolError: the simulator is missing or rejected the sources (first error line and log path).
        ConfigError: the harness cannot be made for this design (e.g. a port width cannot be read), or
            ``native`` was asked of a simulator or language that has no native build.
    """
    from cocotb_tools.runner import get_runner

    from vkit.sim.fast import fast_build_plan, native_build, native_build_plan

    info = require(case.simulator)
    activate(info)
    d = case.design
    plan = fast_build_plan(
        d.top, d.sources, d.language, d.build_parameters(case.width, case.height), d.defines, d.family,
        d.ports, reset_active_high=d.reset_active_high, pixel_format=d.pixel_format,
    )  # harness files land in a folder named after their content, so parallel workers never clash
    if native:
        commands = native_build_plan(plan, case.simulator, cache.cache_dir).commands
        build_args = ["native", *[a for cmd in commands for a in cmd if a.startswith("-")]]
    else:
        build_args = [*plan.build_kwargs(case.simulator)["build_args"], *d.build_args]
    request = BuildRequest.make(
        case.simulator, info.version, plan.toplevel, plan.sources, d.language, defines=plan.defines,
        build_args=build_args, data_files=list(d.file_parameters.values()), include_dirs=d.include_dirs,
    )

    def builder(bdir: Path) -> None:
        if native:
            native_build(plan, case.simulator, bdir, always=True)
            return
        log = bdir / "build.log"
        kwargs = plan.build_kwargs(case.simulator)
        kwargs["build_args"] = [*kwargs["build_args"], *d.build_args]
        try:
            with _quiet_pytest_env():
                get_runner(case.simulator).build(
                    build_dir=str(bdir), log_file=str(log), includes=[str(p) for p in d.include_dirs], **kwargs
                )
        except (RuntimeError, ValueError, SystemExit, OSError) as exc:
            line = _first_error_line(log) if log.exists() else " ".join(str(exc).split())
            raise ToolError(
                f"{case.simulator} could not build the fast-path harness of {d.name} (top {d.top}): {line} "
                f"(full log: {log})"
            ) from None

    return cache.ensure(request, builder)


def _wave_module_text(top: str) -> str:
    """A Verilog module that dumps ``top`` only between two times given as plusargs (Icarus)."""
    return f"""// Generated by vkit: dump {top} only inside a time window (plusargs set file and window, in ps).
`timescale 1ps/1ps
module {_WAVE_MODULE};
    reg [8*1024-1:0] file;
    reg [63:0] from_ps, to_ps;
    initial begin
        if ($value$plusargs("vkit_wave_file=%s", file)) begin
            if (!$value$plusargs("vkit_wave_from_ps=%d", from_ps)) from_ps = 0;
            if (!$value$plusargs("vkit_wave_to_ps=%d", to_ps)) to_ps = 64'hFFFFFFFFFFFF;
            $dumpfile(file);
            $dumpvars(0, {top});
            $dumpoff;
            #(from_ps) $dumpon;
            #(to_ps - from_ps) $dumpoff;
        end
    end
endmodule
"""


def build_wave_design(case: Case, cache: BuildCache) -> BuildOutcome:
    """Build (or reuse) the design with the wave-window module as a second root (Icarus only).

    The window module reads ``+vkit_wave_file``, ``+vkit_wave_from_ps`` and ``+vkit_wave_to_ps`` at
    run time, so one such build serves every case of the design.

    Raises:
        ToolError: the simulator rejected the sources.
        ConfigError: the simulator is not Icarus.
    """
    from cocotb_tools.runner import get_runner

    if case.simulator != "icarus":
        raise ConfigError(f"waves: windowed dumps are made on icarus, not {case.simulator}; "
                          f"rerun the case with --sim icarus --waves")
    info = require(case.simulator)
    activate(info)
    d = case.design
    base = build_request(case, info.version)
    request = BuildRequest.make(
        base.simulator, base.tool_version, base.top, base.sources, base.language,
        parameters=d.build_parameters(case.width, case.height), defines=d.defines,
        build_args=[*base.build_args, "-s", _WAVE_MODULE], data_files=base.data_files, include_dirs=base.include_dirs,
    )

    def builder(bdir: Path) -> None:
        log = bdir / "build.log"
        module = bdir / f"{_WAVE_MODULE}.v"
        module.write_text(_wave_module_text(d.top))
        runner = get_runner(case.simulator)
        try:
            with _quiet_pytest_env():
                runner.build(
                    sources=[*(str(s) for s in d.sources), str(module)], hdl_toplevel=d.top, build_dir=str(bdir),
                    build_args=[*base.build_args, "-s", _WAVE_MODULE], includes=[str(p) for p in d.include_dirs],
                    always=True, log_file=str(log), parameters=d.build_parameters(case.width, case.height),
                    defines=dict(d.defines), timescale=_TIMESCALE,
                )
        except (RuntimeError, ValueError, SystemExit, OSError) as exc:
            line = _first_error_line(log) if log.exists() else " ".join(str(exc).split())
            raise ToolError(f"{case.simulator} could not build {d.name} with the wave module: {line} (full log: {log})") from None

    return cache.ensure(request, builder)


def wave_window(case: Case, capture: Any, verdict: Any) -> tuple[int, int, int]:
    """The clock window to dump for a case: ``(anchor_clock, first_clock, last_clock)``.

    The anchor is the clock of the first mismatching pixel the scoreboard listed; when that has no
    clock (missing pixels, no output) it is the first output clock, else the first input clock, else 0.
    The window spans :data:`_WAVE_LINES` video lines (``h_total`` clocks each; stream: ``width + 2``
    beats) on each side of the anchor, never before clock 0.
    """
    anchor = None
    for m in (verdict.first_mismatches if verdict is not None else []) or []:
        if m.get("clock") is not None:
            anchor = int(m["clock"])
            break
    meta = getattr(capture, "meta", {}) or {}
    if anchor is None:
        for key in ("first_output_clock", "first_input_clock"):
            if meta.get(key) is not None:
                anchor = int(meta[key])
                break
    anchor = anchor or 0
    if case.timing is not None:
        line = int(case.timing["h_active"]) + int(case.timing["h_front_porch"]) + int(case.timing["h_sync"]) \
            + int(case.timing["h_back_porch"])
    else:
        line = case.width + 2
    span = _WAVE_LINES * line
    return anchor, max(0, anchor - span), anchor + span


def rerun_command(config_path: str | Path, case_id: str, simulator: str, out_dir: str | Path | None = None,
                  waves: bool = False) -> str:
    """The shell command that reruns exactly one case of a config (same seeds), quoted for a POSIX shell."""
    words = ["vkit", "run", str(Path(config_path).resolve()), "--only", case_id, "--sim", simulator]
    if out_dir is not None:
        words += ["--out", str(out_dir)]
    if waves:
        words.append("--waves")
    return " ".join(shlex.quote(w) for w in words)


# ---------------------------------------------------------------------------------------------- one case


def _inside(out_dir: Path, path: Path) -> Path:
    resolved = path.resolve()
    if resolved != out_dir.resolve() and out_dir.resolve() not in resolved.parents:
        raise ConfigError(f"output path {path} would leave the report folder {out_dir}; use plain case names")
    return resolved


def check_ports(case: Case) -> None:
    """Check the case's signal map against the top level's ports as written in the sources.

    Runs before any build, so a misnamed port or a narrow data bus is one line naming the role, the
    port, the closest real port and the port list. When the light HDL reader cannot read the top
    level, nothing is checked here (the cocotb side checks the elaborated design again).

    Raises:
        ConfigError: a mapped port is missing, a control role is not 1 bit, or ``in_data`` is
            narrower than the pixel format.
    """
    from vkit.sim.hdlports import parse_ports
    from vkit.sim.signals import CONTROL_ROLES, PIXEL_FORMAT_BITS

    d = case.design
    ints = {k: v for k, v in d.build_parameters(case.width, case.height).items()
            if isinstance(v, int) and not isinstance(v, bool)}
    try:
        ports = parse_ports(d.sources, d.top, parameters=ints, defines={k: str(v) for k, v in d.defines.items()})
    except Exception:  # noqa: BLE001 - the reader is a pre-check only; the simulator has the last word
        return
    if not ports:
        return
    names = [p.name for p in ports]
    by_name = {p.name: p for p in ports}
    by_lower = {p.name.lower(): p for p in ports}
    for role, name in d.ports.items():
        port = by_name.get(name) or by_lower.get(name.lower())
        if port is None:
            close = difflib.get_close_matches(name, names, n=1, cutoff=0.0)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise ConfigError(
                f"design {d.name}: role {role!r} -> port {name!r} is not a port of {d.top}; {hint}"
                f"ports of {d.top}: {', '.join(names)}; fix the name in the design's ports table"
            )
        if port.width is None:
            continue
        if role in CONTROL_ROLES and port.width != 1:
            raise ConfigError(
                f"design {d.name}: role {role!r} -> port {port.name!r} is {port.width} bits wide; "
                f"a control role needs a 1-bit port; map {role!r} to a 1-bit port"
            )
        need = PIXEL_FORMAT_BITS.get(d.pixel_format)
        if role == "in_data" and need is not None and port.width < need:
            raise ConfigError(
                f"design {d.name}: role 'in_data' -> port {port.name!r} is {port.width} bits wide but pixel_format "
                f"{d.pixel_format} needs {need} bits; widen the port or use a narrower pixel_format"
            )


def _coverage(case: Case, spec: Any, frames: np.ndarray, floor: float) -> tuple[dict[str, Any], list[str]]:
    from vkit.model.quality import compare

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
    if spec.window.border != "unchecked":
        from vkit.check.align import border_coverage

        border_share = border_coverage(spec, list(frames))
        if border_share == 0.0:
            warnings.append("the stimulus cannot tell border policies apart (they agree on every border pixel): "
                            "a pass says nothing about the border logic")
    else:
        border_share = None
    if spec.input == "rgb888" and all(
        np.array_equal(f[..., 0], f[..., 1]) and np.array_equal(f[..., 1], f[..., 2]) for f in frames
    ):
        warnings.append("gray input on an RGB design (R = G = B everywhere): the colour weights are untested")
    return {"stages": stages, "clamp_shares": clamps, "border_share": border_share, "floor": floor}, warnings


def _sim_dir(out_dir: Path, case: Case) -> Path:
    from vkit.report.writers import safe_name

    return _inside(out_dir, out_dir / safe_name(case.id) / "sim")


def _error_entry(case: Case, message: str, seconds: float, tool_error: bool, files: dict[str, Any] | None = None) -> CaseResult:
    from vkit.report.writers import case_entry

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


def make_sim_case(case: Case, sim_dir: Path, frames: np.ndarray) -> Any:
    """The :class:`vkit.sim.case.SimCase` of ``case``: frames saved to ``sim_dir/frames.npy``, capture to
    ``sim_dir/capture.npz``; the same seeds and flow patterns whichever path or test drives it."""
    from vkit.sim.case import SimCase

    d = case.design
    sim_dir.mkdir(parents=True, exist_ok=True)
    frames_file = sim_dir / "frames.npy"
    np.save(frames_file, frames)
    return SimCase(
        family=d.family, signals=dict(d.ports), frames_file=str(frames_file),
        capture_file=str(sim_dir / "capture.npz"),
        width=case.width, height=case.height, pixel_format=d.pixel_format, timing=case.timing,
        stalls=case.stalls.as_pattern(case.seed) if d.family == "video" else None,
        stream_gaps=case.gaps.as_pattern(case.seed) if d.family == "stream" else None,
        backpressure=case.backpressure.as_pattern(case.seed + 7919) if d.family == "stream" else None,
        blanking=case.blanking, blanking_value=case.blanking_value, seed=case.seed,
        clock_period_ns=d.clock_period_ns, reset_active_high=d.reset_active_high, reset_cycles=d.reset_cycles,
        timeout_clocks=d.timeout_clocks, simulator=case.simulator, label=case.id,
    )


def _simulate(case: Case, build_dir: Path, sim_dir: Path, frames: np.ndarray, timeout_s: float,
              wave: tuple[Path, int, int] | None = None, path: str = "clock") -> Path:
    """Write the SimCase, run the cocotb test of ``path``, return the capture path (which may be missing).

    ``wave`` is ``(file, from_ps, to_ps)`` for a run on a :func:`build_wave_design` build (always the
    per-clock path).
    """
    from cocotb_tools.runner import get_runner

    from vkit.sim.case import CASE_ENV

    d = case.design
    simcase = make_sim_case(case, sim_dir, frames)
    capture_file = Path(simcase.capture_file)
    capture_file.unlink(missing_ok=True)
    case_json = simcase.to_json(sim_dir / "case.json")
    if path == "native" and wave is None:
        from vkit.sim.fast import run_native

        run_native(simcase, case.simulator, build_dir, timeout_s=timeout_s)
        return capture_file
    runner = get_runner(case.simulator)
    kwargs: dict[str, Any] = dict(
        test_module=_TEST_MODULE, hdl_toplevel=d.top, hdl_toplevel_lang=d.language,
        build_dir=str(build_dir), test_dir=str(sim_dir),
        extra_env={CASE_ENV: str(case_json)}, log_file=str(sim_dir / "sim.log"),
        results_xml=str(sim_dir / "results.xml"),
    )
    if path == "fast" and wave is None:
        from vkit.sim.fast import fast_test_args

        fast = fast_test_args(simcase, case.simulator)
        fast["test_dir"] = fast["test_dir"] or str(build_dir)
        kwargs.update(fast)
    elif case.simulator == "ghdl":
        kwargs["parameters"] = d.build_parameters(case.width, case.height)
        kwargs["test_args"] = ["--std=08", f"--workdir={build_dir}"]
        kwargs["timescale"] = _TIMESCALE
    if wave is not None and case.simulator == "ghdl":
        # GHDL dumps the whole run as VCD; _wave_rerun cuts it to the window afterwards
        kwargs["plusargs"] = [f"--vcd={wave[0]}"]  # a run option: cocotb puts plusargs after the unit
    elif wave is not None:
        # waves=True only makes vvp write FST; what is dumped, and when, is up to the window module
        kwargs["waves"] = True
        kwargs["plusargs"] = [f"+vkit_wave_file={wave[0]}", f"+vkit_wave_from_ps={wave[1]}",
                              f"+vkit_wave_to_ps={wave[2]}"]
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


def _kept_files(out: Path, sim_dir: Path) -> dict[str, Any]:
    """Report-relative paths of what a case's simulation left behind (all kept, even on error)."""
    files: dict[str, Any] = {}
    for key, name in (("case_json", "case.json"), ("frames_npy", "frames.npy"), ("capture", "capture.npz"),
                      ("capture_error", "capture.error.txt"), ("sim_log", "sim.log")):
        if (sim_dir / name).exists():
            files[key] = os.path.relpath(sim_dir / name, out)
    return files


def _strip_exc_name(text: str) -> str:
    m = re.match(r"(ConfigError|ToolError|DutError): (.*)", text)
    return m.group(2) if m else text


def _wave_rerun(case: Case, out: Path, cache_dir: str | Path | None, frames: np.ndarray, capture: Any,
                verdict: Any, timeout_s: float) -> dict[str, Any]:
    """Rerun the case on the wave build with a dump limited to the window; returns report facts."""
    from vkit.report.writers import safe_name

    if case.simulator != "icarus" and case.design.language == "verilog" and find("icarus").available:
        # Windowed dumps are made on Icarus: the same stimulus replays clock for clock there (the
        # simulators agree on every capture, a tested fact), so the window found here still holds.
        case = dataclasses.replace(case, simulator="icarus")
    anchor, first, last = wave_window(case, capture, verdict)
    start_ps = (capture.meta or {}).get("start_time_ps")
    if start_ps is None:
        raise ToolError("waves: the capture holds no start_time_ps, so clocks cannot be turned into times; "
                        "rerun with the current vkit.sim.tb.entry")
    period_ps = int(round(case.design.clock_period_ns * 1000))
    # clock k of the capture is the (k+1)-th rising edge after the monitor started (vkit.sim.tb.entry)
    from_ps = int(start_ps) + first * period_ps
    to_ps = int(start_ps) + (last + 2) * period_ps
    wave_dir = _inside(out, out / safe_name(case.id) / "waves")
    if case.simulator == "ghdl":
        # GHDL cannot start and stop a dump at run time: dump the run, keep the window, drop the rest
        from vkit.sim.vcd import cut_vcd

        full = wave_dir / "whole_run.vcd"
        wave_file = wave_dir / "waves.vcd"
        outcome = build_design(case, BuildCache(cache_dir))
        _simulate(case, outcome.build_dir, wave_dir, frames, timeout_s, wave=(full, from_ps, to_ps))
        cut_vcd(full, wave_file, from_ps, to_ps)
        full.unlink(missing_ok=True)
        fmt = "vcd"
    else:
        wave_file = wave_dir / "waves.fst"
        wave_file.unlink(missing_ok=True)
        outcome = build_wave_design(case, BuildCache(cache_dir))
        _simulate(case, outcome.build_dir, wave_dir, frames, timeout_s, wave=(wave_file, from_ps, to_ps))
        fmt = "fst"
    if not wave_file.is_file():
        raise ToolError(f"waves: {case.simulator} wrote no {wave_file.name}; see {wave_dir / 'sim.log'}")
    return {"file": os.path.relpath(wave_file, out), "anchor_clock": anchor, "first_clock": first,
            "last_clock": last, "from_ps": from_ps, "to_ps": to_ps, "format": fmt,
            "simulator": case.simulator}


def run_one_case(case: Case, out_dir: str | Path, cache_dir: str | Path | None = None, *,
                 timeout_s: float = 600.0, max_listed: int = 20, coverage_floor: float = 0.5,
                 waves: str = "failing", config_path: str | Path | None = None,
                 pictures: str = "failing", path: str = "clock") -> CaseResult:
    """Run one case end to end and write its report; never raises for a case-level problem.

    Args:
        waves: ``"failing"`` reruns a failing case with a dump of a clock window around its first
            mismatch (Icarus), ``"all"`` does so for every case, ``"off"`` never.
        config_path: the config the case came from; when given, the report carries the command
            that reruns exactly this case.
        pictures: ``"failing"`` writes PNGs for failing frames only, ``"all"`` for every frame.
        path: ``"clock"`` (cocotb every clock) or ``"fast"`` (generated HDL harness), see :data:`PATHS`.

    Returns:
        A :class:`CaseResult`; errors (bad stimulus, build failure, simulator crash) come back as
        status ``error`` with the one-line reason as the diagnosis.
    """
    from vkit.video.capture import Capture
    from vkit.model.pipeline import run_model
    from vkit.report.writers import case_entry, write_case_report
    from vkit.check.scoreboard import score

    t0 = time.monotonic()
    out = Path(out_dir).resolve()
    d = case.design
    tool_error = False
    sim_dir: Path | None = None
    rerun = (rerun_command(config_path, case.id, case.simulator, out / "rerun")
             if config_path is not None else None)

    def error(message: str, is_tool: bool) -> CaseResult:
        files = _kept_files(out, sim_dir) if sim_dir is not None else {}
        res = _error_entry(case, message, time.monotonic() - t0, is_tool, files)
        res.rerun = rerun
        res.entry["meta"]["rerun"] = rerun
        return res

    try:
        sim_dir = _sim_dir(out, case)
        spec = d.pipeline_spec()
        if spec.input != d.pixel_format:
            raise ConfigError(
                f"design {d.name}: spec {spec.name!r} takes {spec.input} but the design's pixel_format is "
                f"{d.pixel_format}; make them agree"
            )
        check_ports(case)
        frames = make_frames(case)
        expected = [run_model(spec, f) for f in frames]
        tool_error = True
        outcome = _build(case, BuildCache(cache_dir), path)
        capture_file = _simulate(case, outcome.build_dir, sim_dir, frames, timeout_s, path=path)
        tool_error = False
        if capture_file.exists():
            capture = Capture.load(capture_file)
        else:
            capture = Capture(meta={"error": f"no capture was written; see {sim_dir / 'sim.log'}"})
        if capture.meta.get("error"):
            # the cocotb side stopped (misnamed port, narrow bus, ...): one line, capture and log kept
            return error(_strip_exc_name(" ".join(str(capture.meta["error"]).split())), False)
        verdict = score(
            expected, capture, tolerance_lsb=d.tolerance_lsb,
            declared_latency_clocks=case.declared_latency_clocks(), align=d.align, max_listed=max_listed,
            spec=spec, images=list(frames),
        )
        coverage, warnings = _coverage(case, spec, frames, coverage_floor)
        wave_info: dict[str, Any] | None = None
        if waves == "all" or (waves == "failing" and verdict.status in ("fail", "no_output")):
            try:
                wave_info = _wave_rerun(case, out, cache_dir, frames, capture, verdict, timeout_s)
            except VkitError as exc:  # the verdict stands; say why there is no wave file
                warnings.append(f"no waves: {exc}")
        seconds = time.monotonic() - t0
        meta = _case_meta(case, seconds)
        meta["build_dir"] = str(outcome.build_dir)
        meta["build_reused"] = outcome.reused
        meta["path"] = path
        meta["warnings"] = warnings
        meta["rerun"] = rerun
        if wave_info is not None:
            meta["waves"] = wave_info
        files = write_case_report(case.id, verdict, expected, capture, out, meta=meta, pictures=pictures)
        files.update(_kept_files(out, sim_dir))
        if wave_info is not None:
            files["waves"] = wave_info["file"]
        coverage["warnings"] = list(warnings)  # report.json carries the words, not just the figures
        entry = case_entry(case.id, verdict, simulator=case.simulator, seeds=case.seeds(), files=files,
                           coverage=coverage, meta=meta)
        diag = verdict.diagnosis
        status = verdict.status
        tool_error = status == "error"
        return CaseResult(case.id, status, case.simulator, seconds, d.expect, d.expect_kind,
                          f"{diag.kind}: {diag.message}" if diag else None, diag.kind if diag else None,
                          warnings, tool_error, entry, rerun, wave_info["file"] if wave_info else None)
    except VkitError as exc:
        return error(str(exc), tool_error or isinstance(exc, ToolError))
    except Exception as exc:  # a crash inside vkit itself: keep the case and its traceback in the report
        tb = traceback.format_exc(limit=6)
        res = error(f"internal error {type(exc).__name__}: {' '.join(str(exc).split())}", True)
        res.entry["meta"]["traceback"] = tb
        return res


# ---------------------------------------------------------------------------------------------- workers


def _build(case: Case, cache: BuildCache, path: str) -> BuildOutcome:
    """The build a case of ``path`` runs on (the design itself, or the harness around it)."""
    if path not in PATHS:
        raise ConfigError(f"path = {path!r}; use one of {', '.join(PATHS)}")
    if path == "clock":
        return build_design(case, cache)
    return build_fast_design(case, cache, native=path == "native")


def _start_method(jobs: int) -> str:
    """``fork`` when it is safe (POSIX, this process runs one thread), else ``spawn``.

    Forked workers start with vkit, NumPy, Pillow and cocotb's runner already imported; spawned ones
    import them again each, a fixed cost a short matrix feels in its -j scaling. Forking a process that
    runs other threads (e.g. inside some test harnesses) can deadlock, so that case spawns.
    """
    import threading

    if jobs <= 1 or "fork" not in multiprocessing.get_all_start_methods() or threading.active_count() > 1:
        return "spawn"
    import PIL.Image  # noqa: F401  (warm the modules every case needs, once, before forking)
    import cocotb_tools.runner  # noqa: F401

    import vkit.check.align  # noqa: F401
    import vkit.model.pipeline  # noqa: F401
    import vkit.model.quality  # noqa: F401
    import vkit.report.writers  # noqa: F401
    import vkit.check.scoreboard  # noqa: F401

    return "fork"


def _build_worker(case: Case, cache_dir: str | None, path: str = "clock") -> tuple[str, dict[str, Any]]:
    try:
        outcome = _build(case, BuildCache(cache_dir), path)
        return "ok", {"build_dir": str(outcome.build_dir), "reused": outcome.reused,
                      "seconds": round(outcome.seconds, 3), "waited_s": round(outcome.waited_s, 3)}
    except VkitError as exc:
        return "error", {"message": str(exc)}
    except Exception as exc:  # keep the message; the case phase reports it per case
        return "error", {"message": f"internal error {type(exc).__name__}: {exc}"}


def _case_worker(case: Case, out_dir: str, cache_dir: str | None, timeout_s: float, max_listed: int,
                 floor: float, waves: str = "failing", config_path: str | None = None,
                 pictures: str = "failing", path: str = "clock") -> CaseResult:
    return run_one_case(case, out_dir, cache_dir, timeout_s=timeout_s, max_listed=max_listed, coverage_floor=floor,
                        waves=waves, config_path=config_path, pictures=pictures, path=path)


def _progress_line(i: int, n: int, res: CaseResult) -> str:
    text = f"[{i}/{n}] {res.id} {res.status} {res.seconds:.1f} s"
    if res.status != "pass" and res.diagnosis:
        text += f"  ({res.diagnosis[:120]})"
    if res.expect == "fail":
        text += f"  [expected to fail{': ' + res.expect_kind if res.expect_kind else ''}]"
    return text


def _check_writable(out: Path) -> None:
    """Create ``out`` and prove a file can be written there, before anything runs."""
    try:
        out.mkdir(parents=True, exist_ok=True)
        probe = out / f".vkit-write-test-{os.getpid()}"
        probe.write_text("ok\n")
        probe.unlink()
    except OSError as exc:
        why = exc.strerror or type(exc).__name__
        raise ConfigError(f"output folder {out} cannot be written ({why}); pick a writable folder with --out "
                          "or [run] out_dir") from None


def run_cases(cases: list[Case], out_dir: str | Path, *, jobs: int = 1, cache_dir: str | Path | None = None,
              timeout_s: float = 600.0, max_listed: int = 20, coverage_floor: float = 0.5,
              progress: bool = True, stream: TextIO | None = None, waves: str = "failing",
              config_path: str | Path | None = None, pictures: str = "failing", path: str = "clock") -> RunResult:
    """Build, run, score and report a list of cases into ``out_dir`` (see :func:`run`).

    Raises:
        ConfigError: ``out_dir`` cannot be created or written; ``waves`` is not one of :data:`WAVE_MODES`.
    """
    t0 = time.monotonic()
    stream = stream or sys.stdout
    if waves not in WAVE_MODES:
        raise ConfigError(f"waves = {waves!r}; use one of {', '.join(WAVE_MODES)}")
    out = Path(out_dir).resolve()
    _check_writable(out)
    cfg_path = str(Path(config_path).resolve()) if config_path is not None else None
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
    # vkit does no linear algebra; an idle BLAS thread pool in every worker and every simulator's
    # embedded Python only takes CPU from the other jobs (measured: -j 2 scaling 1.78x -> 2.04x).
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    ctx = multiprocessing.get_context(_start_method(jobs))
    pool = concurrent.futures.ProcessPoolExecutor(max_workers=jobs, mp_context=ctx) if jobs > 1 else None
    try:
        if pool is None:
            done_builds = [(k, _build_worker(c, cache, path)) for k, c in reps.items()]
        else:
            futs = {k: pool.submit(_build_worker, c, cache, path) for k, c in reps.items()}
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
                res = _case_worker(c, str(out), cache, timeout_s, max_listed, coverage_floor, waves, cfg_path,
                                   pictures, path)
                results[c.id] = res
                counter += 1
                if progress:
                    print(_progress_line(counter, n, res), file=stream, flush=True)
        else:
            futs2 = {pool.submit(_case_worker, c, str(out), cache, timeout_s, max_listed, coverage_floor, waves,
                                 cfg_path, pictures, path): c
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
    from vkit.report.writers import write_run_report

    files = write_run_report([r.entry for r in ordered], out)
    (out / "builds.json").write_text(__import__("json").dumps(builds, indent=2) + "\n")
    return RunResult(out, ordered, files, builds, time.monotonic() - t0)


def run(config: Config, jobs: int | None = None, shard: tuple[int, int] | str | None = None,
        only: str | list[str] | None = None, progress: bool = True, *, out_dir: str | Path | None = None,
        simulators: list[str] | None = None, stream: TextIO | None = None, waves: str | None = None,
        path: str | None = None) -> RunResult:
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
        waves: ``"failing"``, ``"all"`` or ``"off"`` (default ``[run] waves``); see :func:`run_one_case`.
        path: ``"clock"`` or ``"fast"`` (default ``[run] path``); see :data:`PATHS`.

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
        waves=waves or config.run.waves, config_path=config.path, pictures=config.run.pictures,
        path=path or config.run.path,
    )


def merge(out_dir: str | Path, reports: list[str | Path]) -> tuple[dict[str, Any], int]:
    """Merge shard ``report.json`` files into one report in ``out_dir``; returns (report, exit code)."""
    from vkit.report.writers import merge_reports

    if not reports:
        raise ConfigError("merge: no report.json given; pass the shard reports (or their folders)")
    merged = merge_reports(list(reports), Path(out_dir))
    statuses = [c.get("status") or c.get("verdict", {}).get("status", "error") for c in merged["cases"]]
    return merged, exit_code_for(statuses)
