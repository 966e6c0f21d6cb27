"""Native runs: ``vkit_fast_top`` built as a plain executable and run with no cocotb in the loop (Verilog harness).

    from vkit.sim.fast import fast_build_plan, native_build, run_native

    plan = fast_build_plan(...)                                     # see vkit.sim.fast.build
    native_build(plan, sim, build_dir)                              # skipped when build_dir holds plan's build
    for case in cases:
        capture = run_native(case, sim, build_dir)                  # also saved to case.capture_file

``native_build_plan(plan, sim, build_dir)`` gives the commands without running them (:class:`NativeBuild`:
``commands``, ``run``, ``key``); ``native_run_args(case)`` the plusargs and capture path of one run.
"""

from __future__ import annotations

import errno
import fcntl
import hashlib
import json
import os
import subprocess
import threading
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import BinaryIO

from vkit.core.errors import ConfigError, ToolError, VkitError
from vkit.sim.case import SimCase
from vkit.sim.fast.build import HarnessBuild, define_args
from vkit.sim.fast.capture_file import read_capture
from vkit.sim.fast.stimulus import StimulusFiles, fast_run_dir, prepare_fast_run, streamed_stimulus
from vkit.sim.fast.vlruntime import make_with_shared_runtime
from vkit.sim.fast.wire import CAPTURE_BIN_NAME, CAPTURE_SPILL_NAME, HARNESS, TOPLEVEL
from vkit.sim.guard import GuardOutcome, run_guarded
from vkit.sim.hdltext import render
from vkit.sim.simulators import find, require, subprocess_env
from vkit.video.capture import Capture

__all__ = ["NATIVE_SIMULATORS", "NATIVE_VERILATOR_ARGS", "NATIVE_MAIN", "STIM_PIPE_NAME", "harness_drives", "NativeBuild", "native_build_plan", "native_build", "native_run_args", "run_native"]

NATIVE_SIMULATORS = ("icarus", "verilator")
"""Simulators :func:`native_build_plan` builds a plain executable with (Verilog harness)."""

_HARNESS_LANGUAGE = {"icarus": "verilog", "verilator": "verilog", "ghdl": "vhdl"}
"""The harness language each simulator builds (the design's language must match it)."""


def harness_drives(simulator: str, language: str) -> tuple[str, ...]:
    """The harness drive paths ``simulator`` offers for a design in ``language``, fastest first.

    ``("native", "fast")`` for a Verilog design on Icarus or Verilator, ``("fast",)`` for a VHDL design on
    GHDL, ``()`` where no harness is made (the design then runs clock by clock).
    """
    if _HARNESS_LANGUAGE.get(simulator) != language:
        return ()
    return ("native", "fast") if simulator in NATIVE_SIMULATORS else ("fast",)


NATIVE_VERILATOR_ARGS = ("--no-timing", "-O3", "-Wno-fatal", "-Wno-lint", "-Wno-style")
"""Verilator flags of a native build: the clock comes from the C++ main (:data:`NATIVE_MAIN`), so no timing engine."""

NATIVE_MAIN = "vkit_native_main.cpp"
"""The C++ main a native Verilator build compiles with the model (text in ``templates/native_main.cpp.j2``)."""

_NATIVE_INFO = "vkit_native.json"
_LOG_TAIL_LINES = 3
"""Lines of a failed tool's output quoted in the error."""


@dataclass
class NativeBuild:
    """The commands that build ``vkit_fast_top`` as a plain executable, and the command that runs it.

    Attributes:
        simulator: "icarus" or "verilator".
        build_dir: the folder the build writes into.
        commands: argument lists run in ``build_dir`` in order (each one a subprocess).
        run: the argument list that runs one case (add the plusargs of :func:`native_run_args`).
        key: the harness build's key plus the simulator: equal keys mean an equal executable.
        make: Verilator: ``[Mdir, makefile, executable]`` that ``make`` builds after ``commands`` (with the
            runtime objects shared between builds, :mod:`vkit.sim.fast.vlruntime`); empty for Icarus.
    """

    simulator: str
    build_dir: Path
    commands: list[list[str]]
    run: list[str]
    key: str
    make: list[str] = field(default_factory=list)


def _tail(res: subprocess.CompletedProcess[str]) -> str:
    return " | ".join((res.stdout + res.stderr).strip().splitlines()[-_LOG_TAIL_LINES:])


def native_build_plan(plan: HarnessBuild, simulator: str, build_dir: str | Path) -> NativeBuild:
    """The build of ``plan``'s harness and design as a plain executable (``iverilog``/``vvp`` or ``verilator --cc --exe`` with a generated C++ main).

    Args:
        plan: from :func:`vkit.sim.fast.build.fast_build_plan` (Verilog harness).
        simulator: "icarus" or "verilator".
        build_dir: folder for the build products (absolute paths are used throughout).

    Raises:
        ConfigError: a VHDL harness or a simulator without a native build here.
    """
    if plan.language != "verilog" or simulator not in NATIVE_SIMULATORS:
        raise ConfigError(
            f"native path: {simulator!r} with a {plan.language} harness has no native build; use icarus or verilator "
            "with a Verilog design, or path = \"fast\""
        )
    out = Path(build_dir).resolve()
    srcs = [str(Path(p).resolve()) for p in plan.sources]
    defs = define_args(plan.defines)
    make: list[str] = []
    if simulator == "icarus":
        vvp = out / f"{TOPLEVEL}.vvp"
        commands = [["iverilog", "-g2012", *defs, "-s", TOPLEVEL, "-o", str(vvp), *srcs]]
        run = ["vvp", "-n", str(vvp)]
    else:
        commands, run, make = _verilator_native(out, defs, srcs)
    key = hashlib.sha256(f"{plan.key}\0{simulator}\0native\0{_main_text()}".encode()).hexdigest()
    return NativeBuild(simulator, out, commands, run, key, make)


def _main_text() -> str:
    return render("native_main.cpp.j2", model=f"V{HARNESS}")


def _verilator_native(out: Path, defs: list[str], srcs: list[str]) -> tuple[list[list[str]], list[str], list[str]]:
    """Commands, run and make target of a Verilator native build: ``vkit_harness`` as the top, clocked by
    the generated C++ main (measured: about 1.8 times the clocks/s of the self-clocked ``vkit_fast_top``
    under ``--binary --timing``, the same capture byte for byte)."""
    mdir = out / "obj_native"
    main = out / NATIVE_MAIN
    # the main's text is part of the build: its hash rides in the compile flags, so the build cache sees it
    rev = hashlib.sha256(_main_text().encode()).hexdigest()[:12]
    commands = [["verilator", "--cc", "--exe", *NATIVE_VERILATOR_ARGS, "-CFLAGS", f"-DVKIT_NATIVE_MAIN={rev}", *defs,
                 "--top-module", HARNESS, "--Mdir", str(mdir), "-o", f"V{HARNESS}", str(main), *srcs]]
    return commands, [str(mdir / f"V{HARNESS}")], [str(mdir), f"V{HARNESS}.mk", f"V{HARNESS}"]


def native_build(plan: HarnessBuild, simulator: str, build_dir: str | Path, *, always: bool = False,
                 runtime_dir: str | Path | None = None) -> NativeBuild:
    """Run :func:`native_build_plan`'s commands unless ``build_dir`` already holds the same build; record it there.

    ``runtime_dir``: a folder where Verilator's runtime objects are compiled once and taken from by every
    later build (:mod:`vkit.sim.fast.vlruntime`; the build cache passes one of its folders); None compiles
    them in each build.

    Raises:
        ToolError: the simulator is not installed, or a build command failed (its last output lines are given).
    """
    nb = native_build_plan(plan, simulator, build_dir)
    info_file = nb.build_dir / _NATIVE_INFO
    if not always and info_file.is_file() and Path(nb.run[-1]).is_file():
        if json.loads(info_file.read_text()).get("key") == nb.key:
            return nb
    env = subprocess_env(require(simulator))
    nb.build_dir.mkdir(parents=True, exist_ok=True)
    if nb.make:
        (nb.build_dir / NATIVE_MAIN).write_text(_main_text())
    for cmd in nb.commands:
        res = subprocess.run(cmd, cwd=nb.build_dir, env=env, capture_output=True, text=True)
        if res.returncode != 0:
            raise ToolError(f"native build: {cmd[0]} exited with {res.returncode}: {_tail(res)}; fix the design or its sources")
    if nb.make:
        mdir, makefile, target = nb.make
        res = make_with_shared_runtime(Path(mdir), makefile, target, env, Path(runtime_dir) if runtime_dir else None)
        if res.returncode != 0:
            raise ToolError(f"native build: make exited with {res.returncode}: {_tail(res)}; see {mdir}")
    info_file.write_text(json.dumps({"key": nb.key, "simulator": simulator, "run": nb.run}) + "\n")
    return nb


def native_run_args(case: SimCase, *, in_width: int | None = None) -> tuple[list[str], Path]:
    """Write ``case``'s stimulus (once) and return (plusargs for a native run, the capture file it will write)."""
    stim = prepare_fast_run(case, in_width, language="verilog")
    capture = fast_run_dir(case) / CAPTURE_BIN_NAME
    return _plusargs(case, stim, capture), capture


def _plusargs(case: SimCase, stim: StimulusFiles, capture: Path) -> list[str]:
    return stim.plusargs(capture) + [f"+vkit_half_ns={case.clock_period_ns / 2:.6f}",
                                     f"+vkit_reset_cycles={case.reset_cycles}", "+vkit_native=1"]


STIM_PIPE_NAME = "stim.pipe"
"""The named pipe a native run reads its stimulus from while Python writes it, in the run folder."""

_PIPE_BYTES = 1 << 20
"""Pipe buffer asked for (Linux ``F_SETPIPE_SZ``): fewer switches between the writer and the simulator."""
_F_SETPIPE_SZ = 1031


def _stimulus(case: SimCase, in_width: int | None) -> tuple[StimulusFiles, Callable[[BinaryIO], None] | None]:
    """The stimulus of a native run: a named pipe Python fills while the simulator plays it (when the words can
    be written a frame at a time, :func:`~vkit.sim.fast.stimulus.streamed_stimulus`), else the file written first."""
    run_dir = fast_run_dir(case)
    pipe = run_dir / STIM_PIPE_NAME
    streamed = streamed_stimulus(case, pipe, in_width) if hasattr(os, "mkfifo") else None
    if streamed is None:
        return prepare_fast_run(case, in_width, language="verilog"), None
    run_dir.mkdir(parents=True, exist_ok=True)
    pipe.unlink(missing_ok=True)
    os.mkfifo(pipe)
    (run_dir / "stimulus.json").write_text(streamed[0].to_json("streamed"))  # no stale description stays behind
    return streamed


def _feed(pipe: Path, write: Callable[[BinaryIO], None], done: threading.Event) -> None:
    """Write the stimulus into ``pipe`` once the simulator opened it; give up when the run ended first or the
    simulator stopped reading (it ended: the guard's outcome says how)."""
    while True:
        try:
            fd = os.open(pipe, os.O_WRONLY | os.O_NONBLOCK)
            break
        except OSError as exc:
            if exc.errno != errno.ENXIO or done.is_set():  # ENXIO: no reader yet
                return
            time.sleep(0.001)
    os.set_blocking(fd, True)
    try:
        fcntl.fcntl(fd, _F_SETPIPE_SZ, _PIPE_BYTES)
    except OSError:  # a smaller limit for this user: the default buffer works too
        pass
    try:
        with open(fd, "wb") as fh:
            write(fh)
    except (BrokenPipeError, ConnectionResetError):
        pass


def _native_info(build_dir: str | Path, simulator: str) -> dict[str, object]:
    info_file = Path(build_dir) / _NATIVE_INFO
    info = json.loads(info_file.read_text()) if info_file.is_file() else {}
    if info.get("simulator") != simulator:
        raise ConfigError(f"native path: {str(build_dir)!r} holds no native {simulator} build; call "
                          "vkit.sim.fast.native_build first")
    return info


def _finish(cap: Capture, case: SimCase, simulator: str, note: str | None = None,
            outcome: GuardOutcome | None = None) -> Capture:
    """Stamp the run facts of a native run on ``cap`` and save it to the case's capture file."""
    cap.facts.simulator, cap.facts.path = simulator, "native"
    if note is not None:
        cap.facts.notes.append(note)
    if outcome is not None:
        cap.facts.sim_outcome = asdict(outcome)
    cap.save(case.capture_file, compress=False)
    return cap


def run_native(case: SimCase, simulator: str, build_dir: str | Path, *, in_width: int | None = None,
               timeout_s: float | None = None) -> Capture:
    """Run ``case`` on the native executable in ``build_dir`` (made by :func:`native_build`); return its Capture.

    Python runs the executable once with the harness's plusargs (no cocotb) under
    :func:`vkit.sim.guard.run_guarded`; while it runs, one thread writes the stimulus into the named pipe it
    plays (:data:`STIM_PIPE_NAME`; a file written first where stalls or a clock enable rule that out) and
    another reads the binary capture as the harness flushes it; the capture is saved to ``case.capture_file``.
    A run stopped at ``timeout_s`` or ended by a signal is no error here: its capture (partial, as the
    harness flushes it line by line; empty when there is none) carries ``facts.sim_outcome``, the
    :class:`~vkit.sim.guard.GuardOutcome` as a dict.

    Args:
        case: the case.
        simulator: the simulator the build was made with ("icarus" or "verilator").
        build_dir: the folder given to :func:`native_build`.
        in_width: input data bus bits when it differs from the pixel format's bits.
        timeout_s: wall-clock limit of the run in seconds (None: none; the harness's own timeout still holds).

    Returns:
        A :class:`~vkit.video.capture.Capture` with ``facts.path = "native"``.

    Raises:
        ConfigError: ``build_dir`` holds no native build for ``simulator``.
        ToolError: the executable exited with an error code, or wrote no capture.
    """
    info = _native_info(build_dir, simulator)
    stim, feed = _stimulus(case, in_width)
    run_dir = fast_run_dir(case)
    capture = run_dir / CAPTURE_BIN_NAME
    capture.unlink(missing_ok=True)
    log = run_dir / "native.log"
    try:
        outcome, followed = _run_reading([*info["run"], *_plusargs(case, stim, capture)], capture, case, stim,
                                         timeout_s, log, subprocess_env(find(simulator)), feed)
    finally:
        if feed is not None:
            stim.stim.unlink(missing_ok=True)
    stopped = outcome.timed_out or outcome.signal is not None
    if stopped:
        return _finish(_partial(capture, case, stim), case, simulator, outcome.describe(), outcome)
    if outcome.returncode != 0:
        message = f"native run: {info['run'][0]} exited with {outcome.returncode}: {_log_tail(log)}; see {log}"
        if capture.is_file():  # keep what was captured before the failure
            _finish(read_capture(capture, case, stim), case, simulator, message)
        raise ToolError(message)
    if not capture.is_file():
        raise ToolError(f"native run: no capture file after {outcome.seconds:.1f} s; see {log}")
    return _finish(followed if followed is not None else read_capture(capture, case, stim, spill=_spill_dir(case)),
                   case, simulator)


def _run_reading(cmd: list[str], capture: Path, case: SimCase, stim: StimulusFiles, timeout_s: float | None,
                 log: Path, env: dict[str, str], feed: Callable[[BinaryIO], None] | None = None
                 ) -> tuple[GuardOutcome, Capture | None]:
    """Run the executable under the guard while a thread reads its capture as it grows (the harness flushes
    it at every output line end), and, with ``feed``, another writes its stimulus into the pipe it plays, so
    both overlap the simulation. The capture is None when that reading failed (the caller reads the file
    again, and says why)."""
    done = threading.Event()
    feeder = threading.Thread(target=_feed, args=(stim.stim, feed, done), name="vkit-stimulus-writer", daemon=True)
    if feed is not None:
        feeder.start()
    box: list[Capture | None] = [None]

    def follow() -> None:
        try:
            box[0] = read_capture(capture, case, stim, running=lambda: not done.is_set(), spill=_spill_dir(case))
        except Exception:  # noqa: BLE001 - read again after the run, where the error is reported
            box[0] = None

    reader = threading.Thread(target=follow, name="vkit-capture-reader", daemon=True)
    reader.start()
    try:
        with open(log, "w") as log_file:
            outcome = run_guarded(cmd, timeout_s=timeout_s, cwd=log.parent, env=env, stdout=log_file,
                                  stderr=subprocess.STDOUT)
    finally:
        done.set()
        reader.join()
        if feed is not None:
            feeder.join()
    return outcome, box[0]


def _spill_dir(case: SimCase) -> Path:
    return fast_run_dir(case) / CAPTURE_SPILL_NAME


def _partial(capture: Path, case: SimCase, stim: StimulusFiles) -> Capture:
    """The capture a stopped run left (up to its last flushed line), or an empty one."""
    try:
        return read_capture(capture, case, stim)
    except VkitError:  # no file, or not even a header
        return Capture()


def _log_tail(log: Path) -> str:
    return " | ".join(log.read_text(errors="replace").strip().splitlines()[-_LOG_TAIL_LINES:])
