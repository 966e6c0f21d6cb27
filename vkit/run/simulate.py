"""One simulation of one case on a finished build: the cocotb test (or the native executable), time-bounded."""

from __future__ import annotations

import os
from contextlib import contextmanager
from pathlib import Path
from dataclasses import asdict
from typing import Any, Iterator, Mapping, NamedTuple

import numpy as np
from vkit.core.errors import ToolError, VkitError
from vkit.run.builds import TIMESCALE, first_error_line, get_runner, quiet_pytest_env
from vkit.run.config import Case
from vkit.run.inputs import make_sim_case
from vkit.sim.case import CASE_ENV, SimCase
from vkit.sim import guard
from vkit.sim.fast import fast_test_args, run_native
from vkit.sim.fast.capture_file import read_capture
from vkit.sim.fast.stimulus import fast_run_dir
from vkit.sim.fast.wire import capture_file_name
from vkit.video.capture import Capture, RunFacts, lines_file_for, read_lines_file
from vkit.video.stored import open_capture

__all__ = ["TEST_MODULE", "GUARD_STATUS", "WaveDump", "simulate", "simulate_capture"]


TEST_MODULE = "vkit.sim.tb.entry"
"""The cocotb test module that plays a SimCase clock by clock."""


GUARD_STATUS = "guard.json"
"""The simulator guard's status file in a case's run folder (how the simulator process ended)."""


class WaveDump(NamedTuple):
    """Where a wave rerun dumps, and the time window it keeps (ps from the start of the simulation)."""

    file: Path
    from_ps: int
    to_ps: int


def _test_kwargs(case: Case, simcase: SimCase, case_json: Path, build_dir: Path, sim_dir: Path,
                 drive: str, wave: WaveDump | None) -> dict[str, Any]:
    """``runner.test`` keywords for the case's drive mode (a wave rerun always drives clock by clock)."""
    d = case.design
    kwargs: dict[str, Any] = dict(
        test_module=TEST_MODULE, hdl_toplevel=d.top, hdl_toplevel_lang=d.language,
        build_dir=str(build_dir), test_dir=str(sim_dir),
        extra_env={CASE_ENV: str(case_json)}, log_file=str(sim_dir / "sim.log"),
        results_xml=str(sim_dir / "results.xml"),
    )
    if drive == "fast" and wave is None:
        fast = fast_test_args(simcase, case.simulator)
        fast["test_dir"] = fast["test_dir"] or str(build_dir)
        kwargs.update(fast)
    elif case.simulator == "ghdl":
        kwargs["parameters"] = case.build_parameters()
        kwargs["test_args"] = ["--std=08", f"--workdir={build_dir}"]
        kwargs["timescale"] = TIMESCALE
    if wave is not None and case.simulator == "ghdl":
        # GHDL dumps the whole run as VCD; the wave rerun cuts it to the window afterwards
        kwargs["plusargs"] = [f"--vcd={wave.file}"]  # a run option: cocotb puts plusargs after the unit
    elif wave is not None:
        # waves=True only makes vvp write FST; what is dumped, and when, is up to the window module
        kwargs["waves"] = True
        kwargs["plusargs"] = [f"+vkit_wave_file={wave.file}", f"+vkit_wave_from_ps={wave.from_ps}",
                              f"+vkit_wave_to_ps={wave.to_ps}"]
    return kwargs


@contextmanager
def _time_limit(timeout_s: float, status_file: Path) -> Iterator[None]:
    """cocotb's runner has no time limit: the simulator runs under :mod:`vkit.sim.guard` (``SIM_CMD_PREFIX``),
    which stops it at ``timeout_s``, keeps it in this case's process group and writes how it ended."""
    saved = os.environ.get("SIM_CMD_PREFIX")
    os.environ["SIM_CMD_PREFIX"] = guard.prefix(timeout_s, status_file)
    try:
        yield
    finally:
        if saved is None:
            os.environ.pop("SIM_CMD_PREFIX", None)
        else:
            os.environ["SIM_CMD_PREFIX"] = saved


def _left_behind(simcase: SimCase, language: str, drive: str, outcome: guard.GuardOutcome) -> Capture:
    """What a stopped simulator left: the harness's own capture file (fast path, flushed per line), the
    lines the per-clock monitor finished (clock path), or nothing."""
    raw = fast_run_dir(simcase) / capture_file_name(language)
    if drive == "fast" and raw.is_file():
        try:
            return read_capture(raw, simcase)
        except VkitError:
            pass
    lines = lines_file_for(simcase.capture_file)
    if drive == "clock" and lines.is_file():
        facts = RunFacts(family=simcase.family, simulator=simcase.simulator,
                         notes=[f"{outcome.describe()}; the capture holds the output lines finished before that"])
        return read_lines_file(lines, facts)
    return Capture(facts=RunFacts(notes=[f"{outcome.describe()}; it left no capture"]))


def simulate(case: Case, build_dir: Path, sim_dir: Path, frames: np.ndarray, timeout_s: float, *,
             wave: WaveDump | None = None, drive: str = "clock", test_module: str = TEST_MODULE,
             extra_env: Mapping[str, str] | None = None) -> Path:
    """Write the SimCase, run the simulation of ``drive``, return the capture path (which may be missing).

    A simulator stopped at ``timeout_s`` or ended by a signal leaves a capture all the same (partial, or
    empty when nothing was kept) whose facts ``sim_outcome`` says how it ended
    (:class:`vkit.sim.guard.GuardOutcome` as a dict).

    Args:
        case: the case.
        build_dir: the build of :func:`vkit.run.builds.build_for_drive` (or ``build_wave_design``).
        sim_dir: the case's run folder (frames, case.json, capture, sim.log).
        frames: the input frames (:func:`vkit.run.inputs.make_frames`).
        timeout_s: wall-clock limit of the simulator process, s.
        wave: a dump and its window, for a rerun on a wave build (always clock by clock).
        drive: ``"clock"``, ``"fast"`` or ``"native"``.
        test_module: the cocotb test module of a per-clock run (default :data:`TEST_MODULE`); another module
            plays the case with :func:`vkit.sim.tb.entry.run_case` and adds its own checks (a passive board).
        extra_env: environment of the simulator added to the case's (``PYTHONPATH`` for ``test_module``).

    Raises:
        ToolError: the simulator failed (an exit code, not a signal or the time limit) before writing a capture.
    """
    return _run(case, build_dir, sim_dir, frames, timeout_s, wave, drive, test_module, extra_env)[0]


def simulate_capture(case: Case, build_dir: Path, sim_dir: Path, frames: np.ndarray, timeout_s: float, *,
                     drive: str = "clock") -> Capture | None:
    """:func:`simulate`, returning the capture (None when none was written); a native run hands over the
    capture it read instead of it being loaded back from the file it was saved to, a fast run's is opened
    to be read a frame at a time (:func:`vkit.video.stored.open_capture`)."""
    capture_file, capture = _run(case, build_dir, sim_dir, frames, timeout_s, None, drive, TEST_MODULE, None)
    if capture is None and capture_file.exists():  # read a frame at a time when saved plain (the fast path's)
        capture = open_capture(capture_file) or Capture.load(capture_file)
    return capture


def _run(case: Case, build_dir: Path, sim_dir: Path, frames: np.ndarray, timeout_s: float, wave: WaveDump | None,
         drive: str, test_module: str, extra_env: Mapping[str, str] | None) -> tuple[Path, Capture | None]:
    """The simulation of :func:`simulate`: the capture path, and the capture when it is at hand."""
    simcase = make_sim_case(case, sim_dir, frames)
    capture_file = Path(simcase.capture_file)
    capture_file.unlink(missing_ok=True)
    case_json = simcase.to_json(sim_dir / "case.json")
    if drive == "native" and wave is None:
        return capture_file, run_native(simcase, case.simulator, build_dir, timeout_s=timeout_s)
    kwargs = _test_kwargs(case, simcase, Path(case_json), build_dir, sim_dir, drive, wave)
    if drive == "clock":
        kwargs["test_module"] = test_module
    kwargs["extra_env"] = {**kwargs["extra_env"], **(extra_env or {})}
    status_file = sim_dir / GUARD_STATUS
    status_file.unlink(missing_ok=True)
    try:
        with _time_limit(timeout_s, status_file), quiet_pytest_env():
            get_runner(case.simulator).test(**kwargs)
    except (SystemExit, RuntimeError) as exc:  # cocotb's runner: RuntimeError, or SystemExit under pytest
        outcome = guard.read_status(status_file)
        if outcome is not None and (outcome.timed_out or outcome.signal is not None):
            cap = Capture.load(capture_file) if capture_file.is_file() else _left_behind(simcase, case.design.language, drive, outcome)
            cap.facts.sim_outcome = asdict(outcome)
            cap.save(capture_file)
        elif not capture_file.exists():
            code = outcome.returncode if outcome is not None else getattr(exc, "code", 1)
            raise ToolError(f"{case.simulator} exited with code {code} before writing a capture: "
                            f"{first_error_line(sim_dir / 'sim.log')} (log: {sim_dir / 'sim.log'})") from None
    return capture_file, None
