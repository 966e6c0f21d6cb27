"""The simulator guard: a wall-clock limit, signals named, and nothing outlives its starter."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from vkit.sim.guard import EXIT_TIMED_OUT, read_status, run_guarded

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="parent-death signal is Linux only")


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    stat = Path(f"/proc/{pid}/stat")
    return not (stat.exists() and stat.read_text().split(") ")[1].startswith("Z"))


def test_run_guarded_stops_a_hung_command_at_the_limit() -> None:
    out = run_guarded(["sleep", "30"], timeout_s=0.5)
    assert out.timed_out and out.signal is None
    assert out.seconds < 10
    assert out.describe() == "the simulator ran past timeout_s = 0.5 s and was stopped"


def test_run_guarded_names_the_signal_that_killed_the_command() -> None:
    out = run_guarded(["sh", "-c", "kill -9 $$"], timeout_s=10)
    assert not out.timed_out and out.signal == signal.SIGKILL
    assert out.describe() == "the simulator died with signal 9 (SIGKILL)"
    assert run_guarded(["sh", "-c", "exit 3"], timeout_s=10).describe() == "the simulator exited with code 3"


def test_guard_command_writes_its_status_and_exits_124_at_the_limit(tmp_path: Path) -> None:
    status = tmp_path / "status.json"
    done = subprocess.run([sys.executable, "-m", "vkit.sim.guard", "--seconds", "0.5", "--status", str(status),
                           "--", "sleep", "30"], timeout=60)
    assert done.returncode == EXIT_TIMED_OUT
    outcome = read_status(status)
    assert outcome is not None and outcome.timed_out and outcome.limit_s == 0.5
    assert json.loads(status.read_text())["timed_out"] is True


def test_nothing_outlives_a_starter_killed_with_sigkill(tmp_path: Path) -> None:
    pid_file = tmp_path / "pid"
    starter = subprocess.Popen([
        sys.executable, "-c",
        "import sys, time\n"
        "from vkit.sim.guard import run_guarded\n"
        f"run_guarded(['sh', '-c', 'echo $$ > {pid_file}; exec sleep 300'], timeout_s=300)\n",
    ])
    deadline = time.monotonic() + 30
    while not (pid_file.exists() and pid_file.read_text().strip()) and time.monotonic() < deadline:
        time.sleep(0.05)
    child = int(pid_file.read_text())
    assert _alive(child)
    starter.kill()
    starter.wait()
    deadline = time.monotonic() + 10
    while _alive(child) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not _alive(child), "the guarded command outlived its starter"
