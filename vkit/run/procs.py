"""Jobs in processes of their own: one process group per job, killed as a group, dying with the run.

A run carries out each build and each case in a child process that leads a process group of its own,
so that everything it starts (the simulator, the guard around it, a compiler) can be stopped with one
``killpg``. The child dies with the run even when the run is killed with SIGKILL: the kernel sends it
SIGTERM when its parent dies (parent-death signal), its SIGTERM handler kills its whole group, and a
watchdog thread does the same when it sees its parent change (``getppid``), in case the signal was
missed. A terminal's Ctrl-C reaches only the run (the children are in other groups); the run then
stops its children itself (:class:`JobRunner`).
"""

from __future__ import annotations

import multiprocessing
import multiprocessing.connection
import os
import signal
import threading
import time
from dataclasses import dataclass, field
from typing import Any, Callable, Hashable

from vkit.sim.guard import set_parent_death_signal

__all__ = ["JobRunner", "JobOutcome", "kill_group"]

_WATCHDOG_PERIOD_S = 0.5
"""How often a child checks that its parent is still the run (a cheap ``getppid``)."""
_POLL_S = 0.2
"""Longest the run waits before it looks at its stop flag and the deadlines again."""


def kill_group(pid: int) -> None:
    """SIGKILL the process group led by ``pid`` and ``pid`` itself (gone already: nothing)."""
    for kill in (os.killpg, os.kill):
        try:
            kill(pid, signal.SIGKILL)
        except (ProcessLookupError, PermissionError):
            pass


def _watchdog(parent: int) -> None:
    while True:
        time.sleep(_WATCHDOG_PERIOD_S)
        if os.getppid() != parent:
            os.killpg(0, signal.SIGKILL)


def _kill_own_group(_signum: int, _frame: Any) -> None:
    os.killpg(0, signal.SIGKILL)


def _child_main(conn: multiprocessing.connection.Connection, parent: int, fn: Callable[..., Any],
                args: tuple[Any, ...]) -> None:
    """Lead a new process group, die with the run, run ``fn(*args)`` and send its result back."""
    try:
        os.setpgid(0, 0)
    except PermissionError:  # the parent already made this process a group leader
        pass
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the run decides what a Ctrl-C stops
    signal.signal(signal.SIGTERM, _kill_own_group)
    set_parent_death_signal(signal.SIGTERM)
    if os.getppid() != parent:  # the run died before the line above took effect
        _kill_own_group(0, None)
    threading.Thread(target=_watchdog, args=(parent,), daemon=True, name="vkit-watchdog").start()
    conn.send(fn(*args))
    conn.close()


@dataclass
class JobOutcome:
    """How one job ended: its result, or why there is none."""

    result: Any = None
    state: str = "done"
    """``done`` (``result`` holds fn's return value), ``timeout`` (killed at its limit), ``died`` (the
    process ended without a result; ``exitcode`` says how) or ``interrupted`` (stopped or never started)."""
    seconds: float = 0.0
    exitcode: int | None = None


@dataclass
class _Running:
    key: Hashable
    proc: Any
    conn: multiprocessing.connection.Connection
    started: float
    deadline: float | None


@dataclass
class JobRunner:
    """Runs jobs ``key: (fn, args, limit_s)`` at most ``workers`` at a time, each in a process group of its own.

    Args:
        workers: jobs running at once (>= 1).
        start_method: the :mod:`multiprocessing` start method (``fork`` or ``spawn``).
        should_stop: polled between waits; when it returns True the running jobs are killed and every
            job not finished comes back ``interrupted``.
    """

    workers: int
    start_method: str
    should_stop: Callable[[], bool] = lambda: False
    _ctx: Any = field(init=False, repr=False)

    def __post_init__(self) -> None:
        self._ctx = multiprocessing.get_context(self.start_method)

    def run(self, jobs: dict[Hashable, tuple[Callable[..., Any], tuple[Any, ...], float | None]],
            on_done: Callable[[Hashable, JobOutcome], None] = lambda k, o: None) -> dict[Hashable, JobOutcome]:
        """Every job's outcome (``on_done`` is called as each one ends, in the order they end)."""
        waiting = list(jobs)
        running: dict[Hashable, _Running] = {}
        done: dict[Hashable, JobOutcome] = {}
        try:
            while (waiting or running) and not self.should_stop():
                while waiting and len(running) < self.workers:
                    key = waiting.pop(0)
                    running[key] = self._start(key, *jobs[key])
                for key, outcome in self._collect(running).items():
                    done[key] = outcome
                    on_done(key, outcome)
        finally:
            for job in running.values():
                kill_group(job.proc.pid)
                job.proc.join()
                done[job.key] = JobOutcome(state="interrupted", seconds=time.monotonic() - job.started)
            for key in waiting:
                done[key] = JobOutcome(state="interrupted")
        return done

    def _start(self, key: Hashable, fn: Callable[..., Any], args: tuple[Any, ...], limit_s: float | None) -> _Running:
        receive, send = self._ctx.Pipe(duplex=False)
        proc = self._ctx.Process(target=_child_main, args=(send, os.getpid(), fn, args), daemon=False)
        proc.start()
        send.close()
        try:
            os.setpgid(proc.pid, proc.pid)  # both sides set it: no window where a kill misses the group
        except (PermissionError, ProcessLookupError):
            pass
        now = time.monotonic()
        return _Running(key, proc, receive, now, None if limit_s is None else now + limit_s)

    def _collect(self, running: dict[Hashable, _Running]) -> dict[Hashable, JobOutcome]:
        """Wait up to :data:`_POLL_S` for jobs to end; the outcomes of those that ended or overran."""
        now = time.monotonic()
        deadlines = [j.deadline - now for j in running.values() if j.deadline is not None]
        wait_s = max(0.0, min([_POLL_S, *deadlines]))
        ready = set(multiprocessing.connection.wait([j.conn for j in running.values()], timeout=wait_s))
        out: dict[Hashable, JobOutcome] = {}
        for key, job in list(running.items()):
            if job.conn in ready:
                out[key] = self._finish(job)
            elif job.deadline is not None and time.monotonic() >= job.deadline:
                kill_group(job.proc.pid)
                job.proc.join()
                out[key] = JobOutcome(state="timeout", seconds=time.monotonic() - job.started)
            else:
                continue
            job.conn.close()
            del running[key]
        return out

    @staticmethod
    def _finish(job: _Running) -> JobOutcome:
        try:
            result = job.conn.recv()
        except (EOFError, OSError):
            result = None
            state = "died"
        else:
            state = "done"
        job.proc.join()
        kill_group(job.proc.pid)  # nothing the job started may outlive it
        return JobOutcome(result, state, time.monotonic() - job.started, job.proc.exitcode)
