"""Run a simulator so that it can never outlive the run that started it.

A guarded process gets a wall-clock limit (killed at the limit, SIGTERM then SIGKILL), a parent-death
signal (Linux ``PR_SET_PDEATHSIG``: when the process that started it dies, even by SIGKILL, the kernel
kills it too) and stays in its starter's process group, so a run that kills a case's group kills its
simulator with it. Unlike coreutils ``timeout``, which moves itself and the command into a process group
of their own (and so out of reach of a Ctrl-C or a group kill), nothing escapes.

Used in two ways: in-process by :func:`run_guarded` (native runs), and as the command prefix of cocotb's
runner (``SIM_CMD_PREFIX``), ``python -m vkit.sim.guard --seconds N --status FILE -- CMD ...``, which
writes the outcome to FILE as JSON and exits with the command's code, 124 at the limit, 128 + N when a
signal ended it.
"""

from __future__ import annotations

import argparse
import ctypes
import json
import os
import select
import signal
import subprocess
import sys
import time
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import IO, Mapping, Sequence

__all__ = ["GuardOutcome", "EXIT_TIMED_OUT", "set_parent_death_signal", "run_guarded", "prefix", "read_status"]

EXIT_TIMED_OUT = 124
"""Exit code of the guard when it killed the command at its wall-clock limit (as coreutils timeout)."""

_GRACE_S = 2.0
"""Seconds between SIGTERM and SIGKILL: enough for a simulator to flush its capture file."""

_PR_SET_PDEATHSIG = 1  # <linux/prctl.h>


@dataclass(frozen=True)
class GuardOutcome:
    """How a guarded command ended."""

    returncode: int
    """The command's exit code; negative N when signal N ended it (as :mod:`subprocess` reports)."""
    timed_out: bool
    """True when the guard killed it at the wall-clock limit."""
    seconds: float
    """Wall-clock seconds it ran."""
    limit_s: float | None
    """The wall-clock limit in seconds (None: none)."""

    @property
    def signal(self) -> int | None:
        """The signal that ended the command, when one did and the guard did not send it at the limit."""
        return -self.returncode if self.returncode < 0 and not self.timed_out else None

    def describe(self, what: str = "the simulator") -> str:
        """One line: ``the simulator ran past timeout_s = 20 s``, ``... died with signal 9 (SIGKILL)``."""
        if self.timed_out:
            return f"{what} ran past timeout_s = {self.limit_s:g} s and was stopped"
        if self.signal is not None:
            return f"{what} died with signal {self.signal} ({signal.Signals(self.signal).name})"
        return f"{what} exited with code {self.returncode}"


def set_parent_death_signal(sig: int = signal.SIGKILL) -> None:
    """Ask the kernel to send ``sig`` to this process when its parent dies (Linux only; else nothing)."""
    if not sys.platform.startswith("linux"):
        return
    libc = ctypes.CDLL(None, use_errno=True)
    libc.prctl(_PR_SET_PDEATHSIG, int(sig), 0, 0, 0)


def _child_setup() -> None:
    set_parent_death_signal(signal.SIGKILL)


def _stop(proc: subprocess.Popen, grace_s: float = _GRACE_S) -> None:
    """SIGTERM, then SIGKILL after ``grace_s``; reaps the process."""
    if proc.poll() is not None:
        return
    proc.terminate()
    try:
        proc.wait(grace_s)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()


def _wait(proc: subprocess.Popen, timeout_s: float | None) -> None:
    """``proc.wait(timeout_s)``, woken the moment the process ends (a Linux pidfd) rather than by
    ``Popen.wait``'s polling, whose sleeps grow to 50 ms and so add 25 ms to a run on average."""
    pidfd_open = getattr(os, "pidfd_open", None)
    if timeout_s is None or pidfd_open is None:
        proc.wait(timeout_s)
        return
    try:
        fd = pidfd_open(proc.pid)
    except OSError:  # an older kernel, or the process is gone already
        proc.wait(timeout_s)
        return
    try:
        ready, _, _ = select.select([fd], [], [], timeout_s)
    finally:
        os.close(fd)
    if not ready:
        raise subprocess.TimeoutExpired(proc.args, timeout_s)
    proc.wait()


def run_guarded(cmd: Sequence[str], *, timeout_s: float | None, cwd: str | Path | None = None,
                env: Mapping[str, str] | None = None, stdout: IO | int | None = None,
                stderr: IO | int | None = None) -> GuardOutcome:
    """Run ``cmd`` to its end or to ``timeout_s`` wall-clock seconds, whichever comes first.

    The command stays in this process's group and dies with this process (parent-death signal).
    """
    t0 = time.monotonic()
    proc = subprocess.Popen(list(cmd), cwd=cwd, env=None if env is None else dict(env), stdout=stdout,
                            stderr=stderr, preexec_fn=_child_setup)
    timed_out = False
    try:
        _wait(proc, timeout_s)
    except subprocess.TimeoutExpired:
        timed_out = True
        _stop(proc)
    except BaseException:  # Ctrl-C or a signal handler's exception: the command goes with us
        _stop(proc, grace_s=0.5)
        raise
    return GuardOutcome(returncode=proc.returncode, timed_out=timed_out, seconds=time.monotonic() - t0,
                        limit_s=timeout_s)


def prefix(seconds: float, status_file: str | Path) -> str:
    """``SIM_CMD_PREFIX`` for cocotb's runner: run the simulator under this guard (split on white space)."""
    return f"{sys.executable} -m vkit.sim.guard --seconds {seconds:g} --status {status_file} --"


def read_status(status_file: str | Path) -> GuardOutcome | None:
    """The outcome the guard wrote, or None when there is none (the guard never ran or was killed)."""
    try:
        data = json.loads(Path(status_file).read_text())
        return GuardOutcome(**data)
    except (OSError, ValueError, TypeError):
        return None


def _forward_and_exit(proc: subprocess.Popen, signum: int) -> None:
    _stop(proc, grace_s=0.5)
    os._exit(128 + signum)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m vkit.sim.guard", description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, required=True, help="wall-clock limit")
    parser.add_argument("--status", required=True, help="JSON file for the outcome")
    parser.add_argument("cmd", nargs=argparse.REMAINDER, help="-- then the command")
    args = parser.parse_args(argv)
    cmd = args.cmd[1:] if args.cmd[:1] == ["--"] else args.cmd
    if not cmd:
        parser.error("no command after --")
    set_parent_death_signal(signal.SIGKILL)
    if os.getppid() == 1:  # the starter died before the line above took effect
        return 128 + signal.SIGKILL
    t0 = time.monotonic()
    proc = subprocess.Popen(cmd, preexec_fn=_child_setup)
    for signum in (signal.SIGTERM, signal.SIGINT, signal.SIGHUP):
        signal.signal(signum, lambda n, _f: _forward_and_exit(proc, n))
    timed_out = False
    try:
        proc.wait(args.seconds)
    except subprocess.TimeoutExpired:
        timed_out = True
        _stop(proc)
    outcome = GuardOutcome(returncode=proc.returncode, timed_out=timed_out, seconds=time.monotonic() - t0,
                           limit_s=args.seconds)
    Path(args.status).write_text(json.dumps(asdict(outcome)))
    if timed_out:
        return EXIT_TIMED_OUT
    return 128 - proc.returncode if proc.returncode < 0 else proc.returncode


if __name__ == "__main__":
    sys.exit(main())
