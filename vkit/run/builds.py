"""The build phase: one simulator build per design, simulator and frame-size parameters, through the build cache.

Three kinds of build serve the drive modes and the wave reruns: the design itself (``clock``), the
generated fast-path harness around it (``fast``; as a plain executable for ``native``), and the design
with a wave-window module beside it (Icarus, for windowed waveform dumps). A build that fails is one
:class:`~vkit.core.errors.ToolError` line: the tool's first error line and the path of the full log.
"""

from __future__ import annotations

import os
import re
from contextlib import contextmanager
from importlib import resources
from pathlib import Path
from typing import Any, Iterator

from vkit.core.errors import ConfigError, ToolError
from vkit.core.validate import want_choice
from vkit.core.vocab import DRIVE_DEFAULT, DRIVE_MODES
from vkit.run.config import Case
from vkit.run.inputs import check_parameters, check_ports
from vkit.sim.buildcache import BuildCache, BuildOutcome, BuildRequest
from vkit.sim.fast import HarnessBuild, fast_build_plan, harness_drives, native_build, native_build_plan
from vkit.sim.simulators import TIMESCALE, activate, require

__all__ = [
    "TIMESCALE",
    "WAVE_MODULE",
    "build_request",
    "build_design",
    "build_fast_design",
    "build_wave_design",
    "build_for_drive",
    "pick_drive",
    "first_error_line",
    "parameter_error_line",
    "PARAMETER_WORDING",
    "quiet_pytest_env",
]



def get_runner(simulator: str) -> Any:
    """cocotb's runner for ``simulator``, imported on first use: a run on the native path never needs cocotb
    (importing it costs about a second in every ``vkit run``)."""
    from cocotb_tools.runner import get_runner as cocotb_runner

    return cocotb_runner(simulator)


RUNTIME_FOLDER = "verilator-runtime"
"""Folder of the build cache holding Verilator's runtime objects, compiled once for every native build."""
WAVE_MODULE = "vkit_wave_window"
"""Name of the Verilog module that limits a waveform dump to a time window."""
PARAMETER_WORDING: dict[str, tuple[str, ...]] = {
    "icarus": (r"invalid value specified for defparam: \S+", r"warning: parameter \w+ not found in \S+"),
    "verilator": (r"Parameters from the command line were not found in the design: .+",),
    "ghdl": (r"cannot find in top entity generic '\w+'", r"value not in range for generic '\w+'",
             r"^'value: .+"),
}
"""How each simulator says it rejected a parameter/generic value or name (regular expressions on one
log line). Icarus only warns and exits 0, so a build log holding one of these lines fails the build;
GHDL takes generics at run time and says so in the run log."""
_PARAMETER_RE = re.compile("|".join(f"(?:{w})" for words in PARAMETER_WORDING.values() for w in words))
_ERROR_RE = re.compile(r"(%Error|error:|Error:|\berror\b|ERROR|syntax error|cannot|unable to)", re.IGNORECASE)


def _default_build_args(simulator: str) -> list[str]:
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
        parameters=case.build_parameters(),
        defines=d.defines,
        build_args=[*_default_build_args(case.simulator), *d.build_args],
        data_files=list(d.file_parameters.values()),
        include_dirs=d.include_dirs,
    )


def _log_lines(log: Path) -> list[str] | None:
    try:
        return log.read_text(errors="replace").splitlines()
    except OSError:
        return None


def parameter_error_line(log: Path) -> str | None:
    """The first line of a tool log where the simulator rejects a parameter (:data:`PARAMETER_WORDING`)."""
    for line in _log_lines(log) or []:
        if _PARAMETER_RE.search(line):
            return " ".join(line.split())[:300]
    return None


def first_error_line(log: Path) -> str:
    """The first line of a tool log that rejects a parameter, else the first that reads like an error
    (else its last line), squeezed to 300 chars."""
    lines = _log_lines(log)
    if lines is None:
        return "no build log was written"
    rejected = parameter_error_line(log)
    if rejected is not None:
        return rejected
    for line in lines:
        if _ERROR_RE.search(line) and "Running command" not in line:
            return " ".join(line.split())[:300]
    tail = [ln for ln in lines if ln.strip()]
    return " ".join(tail[-1].split())[:300] if tail else "the tool printed nothing"


@contextmanager
def quiet_pytest_env() -> Iterator[None]:
    """cocotb's runner behaves differently under pytest (it exits on failed tests); vkit judges itself."""
    saved = os.environ.pop("PYTEST_CURRENT_TEST", None)
    try:
        yield
    finally:
        if saved is not None:
            os.environ["PYTEST_CURRENT_TEST"] = saved


def _cocotb_build(simulator: str, what: str, bdir: Path, **kwargs: Any) -> None:
    """``runner.build(**kwargs)`` into ``bdir``; a failure is one ToolError naming ``what`` and the log."""
    log = bdir / "build.log"
    try:
        with quiet_pytest_env():
            get_runner(simulator).build(build_dir=str(bdir), log_file=str(log), **kwargs)
    except (RuntimeError, ValueError, SystemExit, OSError) as exc:
        line = first_error_line(log) if log.exists() else " ".join(str(exc).split())
        raise ToolError(f"{simulator} could not build {what}: {line} (full log: {log})") from None
    rejected = parameter_error_line(log)
    if rejected is not None:  # Icarus warns about a parameter it ignored and still exits 0
        raise ToolError(f"{simulator} did not build {what} as asked: {rejected}; fix the parameter in the "
                        f"design's parameters table (full log: {log})")


def _design_build_kwargs(case: Case, build_args: list[str]) -> dict[str, Any]:
    """``runner.build`` keywords for the design's own sources (GHDL takes its generics at run time)."""
    d = case.design
    kwargs: dict[str, Any] = dict(hdl_toplevel=d.top, build_args=build_args, always=True,
                                  includes=[str(p) for p in d.include_dirs])
    if case.simulator != "ghdl":
        kwargs.update(parameters=case.build_parameters(), defines=dict(d.defines),
                      timescale=TIMESCALE)
    return kwargs


def build_design(case: Case, cache: BuildCache) -> BuildOutcome:
    """Build (or reuse) the simulator model of ``case``'s design.

    Raises:
        ToolError: the simulator is missing, or it rejected the sources (the tool's first error line
            and the path of the full ``build.log``).
    """
    check_parameters(case)
    info = require(case.simulator)
    activate(info)
    request = build_request(case, info.version)
    d = case.design

    def builder(bdir: Path) -> None:
        _cocotb_build(case.simulator, f"{d.name} (top {d.top})", bdir, sources=[str(s) for s in d.sources],
                      **_design_build_kwargs(case, list(request.build_args)))

    return cache.ensure(request, builder)


def _harness_plan(case: Case) -> HarnessBuild:
    """The fast-path harness of ``case``'s design (written to a folder named after its content, so
    parallel workers never clash)."""
    d = case.design
    return fast_build_plan(
        d.top, d.sources, d.language, case.build_parameters(), d.defines, d.family,
        d.ports, reset_active_high=d.reset_active_high, pixel_format=d.pixel_format, include_dirs=d.include_dirs,
        out_active_high={r: d.port_polarity.get(r, True) for r in ("out_de", "out_valid", "out_enable")},
        lanes=d.pixels_per_clock,
    )


def pick_drive(case: Case, drive: str = DRIVE_DEFAULT) -> str:
    """The drive path ``case`` runs on: ``drive`` itself when it names one, else (``"auto"``) the fastest
    that can run the case.

    ``auto`` takes ``native`` where the simulator builds the harness as a plain executable (a Verilog
    design on Icarus or Verilator), ``fast`` where it builds the harness under cocotb only (a VHDL design
    on GHDL), and ``clock`` where no harness can be made for the design (e.g. a port width that cannot
    be read from its sources, or an input bus wider than the player's words).
    """
    want_choice("run options", "drive", drive, DRIVE_MODES)
    if drive != DRIVE_DEFAULT:
        return drive
    paths = harness_drives(case.simulator, case.design.language)
    if not paths:
        return "clock"
    try:
        _harness_plan(case)
    except ConfigError:  # the harness cannot wrap this design: cocotb drives it clock by clock
        return "clock"
    return paths[0]


def build_fast_design(case: Case, cache: BuildCache, native: bool = False) -> BuildOutcome:
    """Build (or reuse) the fast-path harness (:mod:`vkit.sim.fast`) around ``case``'s design.

    The harness depends on the design, its parameters and the family only, so one build serves every
    image, timing, stall pattern and seed. ``native=True`` builds it as a plain executable (no cocotb:
    ``iverilog``/``vvp`` or Verilator with a generated C++ main), for the drive mode ``native``.

    Raises:
        ToolError: the simulator is missing or rejected the sources (first error line and log path).
        ConfigError: the harness cannot be made for this design (e.g. a port width cannot be read), or
            ``native`` was asked of a simulator or language that has no native build.
    """
    check_parameters(case)
    check_ports(case)  # the harness names every mapped port: a misnamed one is the config's error, said as such
    info = require(case.simulator)
    activate(info)
    d = case.design
    plan = _harness_plan(case)
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
            native_build(plan, case.simulator, bdir, always=True, runtime_dir=cache.cache_dir / RUNTIME_FOLDER)
            return
        kwargs = plan.build_kwargs(case.simulator)
        kwargs["build_args"] = [*kwargs["build_args"], *d.build_args]
        _cocotb_build(case.simulator, f"the fast-path harness of {d.name} (top {d.top})", bdir,
                      includes=[str(p) for p in d.include_dirs], **kwargs)

    return cache.ensure(request, builder)


def _wave_module_text(top: str) -> str:
    """A Verilog module that dumps ``top`` only between two times given as plusargs (Icarus)."""
    text = resources.files("vkit.run").joinpath("templates", "wave_window.v.tmpl").read_text(encoding="utf-8")
    return text.replace("{{top}}", top).replace("{{module}}", WAVE_MODULE)


def build_wave_design(case: Case, cache: BuildCache) -> BuildOutcome:
    """Build (or reuse) the design with the wave-window module as a second root (Icarus only).

    The window module reads ``+vkit_wave_file``, ``+vkit_wave_from_ps`` and ``+vkit_wave_to_ps`` at
    run time, so one such build serves every case of the design.

    Raises:
        ToolError: the simulator rejected the sources.
        ConfigError: the simulator is not Icarus.
    """
    if case.simulator != "icarus":
        raise ConfigError(f"waves: windowed dumps are made on icarus, not {case.simulator}; "
                          f"rerun the case with --sim icarus --waves")
    info = require(case.simulator)
    activate(info)
    d = case.design
    base = build_request(case, info.version)
    build_args = [*base.build_args, "-s", WAVE_MODULE]
    request = BuildRequest.make(
        base.simulator, base.tool_version, base.top, base.sources, base.language,
        parameters=case.build_parameters(), defines=d.defines,
        build_args=build_args, data_files=base.data_files, include_dirs=base.include_dirs,
    )

    def builder(bdir: Path) -> None:
        module = bdir / f"{WAVE_MODULE}.v"
        module.write_text(_wave_module_text(d.top))
        _cocotb_build(case.simulator, f"{d.name} with the wave module", bdir,
                      sources=[*(str(s) for s in d.sources), str(module)], **_design_build_kwargs(case, build_args))

    return cache.ensure(request, builder)


def build_for_drive(case: Case, cache: BuildCache, drive: str) -> BuildOutcome:
    """The build a case driven by ``drive`` runs on: the design itself, or the harness around it
    (``"auto"``: the build of :func:`pick_drive`'s path)."""
    drive = pick_drive(case, drive)
    if drive == "clock":
        return build_design(case, cache)
    return build_fast_design(case, cache, native=drive == "native")
