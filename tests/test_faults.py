"""Fault injection: a hung design under Ctrl-C, SIGTERM, SIGKILL of the run and its own time limit.

Each cell runs ``vkit run`` as a subprocess in a session of its own (as a terminal or a CI job starts
it) on two cases: the sample blur core (passes) and ``tests/hdl_faults/video_hang.v`` (the same core
that spins in a zero-delay loop after 4 input lines, so its simulator runs at 100% CPU forever). It
asserts the exit code, the report (finished cases kept, the stopped one marked, valid against the
shipped JSON Schema) and that no process of the run is left: none in the run's session, none whose
command line or working folder is inside the test's folder. Exit codes 130 / 143 are 128 + the signal
number, as POSIX shells report a command ended by a signal (POSIX.1-2017, Shell Command Language 2.8.2).

With ``VKIT_FAULT_MATRIX=<file>`` every cell appends its row (JSON) to that file;
``benchmarks/fault_matrix.py`` runs this module that way and prints the table.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import jsonschema
import pytest

from conftest import REPO, SAMPLE_RTL, simulator_available
from vkit.run.outlock import LOCK_NAME
from vkit.run.pool import JOBS_PER_CPU, worker_count

pytestmark = [pytest.mark.sim, pytest.mark.faults,
              pytest.mark.skipif(not sys.platform.startswith("linux"), reason="process checks read /proc")]

SCHEMA = json.loads((REPO / "vkit" / "report" / "report.schema.json").read_text())
PORTS = ("{ clock = \"clk\", reset = \"rst\", in_vsync = \"in_vsync\", in_hsync = \"in_hsync\", in_de = \"in_de\", "
         "in_valid = \"in_valid\", in_data = \"in_data\", out_vsync = \"out_vsync\", out_hsync = \"out_hsync\", "
         "out_de = \"out_de\", out_valid = \"out_valid\", out_data = \"out_data\" }")
HANG_LINE = 4
"""Input lines the hung design lets through before it spins (a partial capture has whole lines)."""
TIMEOUT_S = {"clock": 12, "fast": 8, "native": 3}
"""timeout_s of the timeout cells: short (the hung design never finishes anyway), but long enough for the
passing case on a busy machine (cocotb's start-up is most of it)."""
SIGNAL_TIMEOUT_S = 60
"""timeout_s of the signal cells: far past the moment the test signals the run."""
SETTLE_S = 10.0
"""Seconds a run has to be gone after the signal (and its processes after a SIGKILL of the run)."""


def _config(tmp: Path, cache: Path, path: str, timeout_s: float) -> Path:
    core = [SAMPLE_RTL / "window3x3.v", SAMPLE_RTL / "blur_core.v"]
    hang = [*core, REPO / "tests" / "hdl_faults" / "video_hang.v"]

    def design(name: str, top: str, sources: list[Path], params: str) -> str:
        srcs = ", ".join(json.dumps(str(s)) for s in sources)
        return (f"[designs.{name}]\ntop = \"{top}\"\nsources = [{srcs}]\nspec = \"blur\"\n{params}"
                f"ports = {PORTS}\n")

    cfg = tmp / "vkit.toml"
    cfg.write_text(
        f"[run]\nsimulators = [\"icarus\"]\nout_dir = \"out\"\ncache_dir = \"{cache}\"\ntimeout_s = {timeout_s}\n"
        f"waves = \"off\"\npath = \"{path}\"\n\n"
        + design("a_ok", "blur_core", core, "")
        + design("b_hang", "video_hang", hang, f"parameters = {{ HANG_LINE = {HANG_LINE} }}\n")
        + "\n[stimulus]\npatterns = [\"impulse\"]\ntimings = [\"tiny32x24\"]\n"
    )
    return cfg


def _start(tmp: Path, *args: str) -> tuple[subprocess.Popen, Path]:
    log = tmp / f"run-{time.monotonic_ns()}.log"
    with open(log, "w") as out:
        proc = subprocess.Popen([sys.executable, "-m", "vkit", "run", *args], cwd=tmp, stdout=out,
                                stderr=subprocess.STDOUT, start_new_session=True)
    return proc, log


def _processes() -> list[tuple[int, int, str, str]]:
    """(pid, session, command line, working folder) of every process now running."""
    rows = []
    for d in Path("/proc").iterdir():
        if not d.name.isdigit():
            continue
        try:
            stat = (d / "stat").read_text()
            session = int(stat.rsplit(")", 1)[1].split()[3])
            cmd = (d / "cmdline").read_bytes().replace(b"\0", b" ").decode(errors="replace")
            try:
                cwd = os.readlink(d / "cwd")
            except OSError:
                cwd = ""
            if stat.rsplit(")", 1)[1].split()[0] != "Z":
                rows.append((int(d.name), session, cmd, cwd))
        except (OSError, IndexError, ValueError):
            continue
    return rows


def _leftovers(run_pid: int, tmp: Path) -> list[str]:
    me = os.getpid()
    return [f"{pid} {cmd[:120]}" for pid, sid, cmd, cwd in _processes()
            if pid != me and (sid == run_pid or str(tmp) in cmd or cwd.startswith(str(tmp)))]


def _wait_gone(run_pid: int, tmp: Path, seconds: float = SETTLE_S) -> list[str]:
    deadline = time.monotonic() + seconds
    left = _leftovers(run_pid, tmp)
    while left and time.monotonic() < deadline:
        time.sleep(0.2)
        left = _leftovers(run_pid, tmp)
    return left


def _wait_for_hang(proc: subprocess.Popen, log: Path, jobs: int) -> None:
    """Until the passing case has finished and the hung simulator is running (in the run's session)."""
    deadline = time.monotonic() + 240
    while time.monotonic() < deadline:
        assert proc.poll() is None, log.read_text()
        done = "  pass a_ok" in log.read_text()
        sims = [p for p, sid, cmd, _ in _processes() if sid == proc.pid and ("vvp" in cmd or "Vvkit" in cmd)]
        if done and sims:
            time.sleep(0.5)
            return
        time.sleep(0.1)
    pytest.fail(f"the hung case never started: {log.read_text()}")


def _report(tmp: Path) -> dict | None:
    p = tmp / "out" / "report.json"
    if not p.is_file():
        return None
    body = json.loads(p.read_text())
    jsonschema.validate(body, SCHEMA)  # the shipped report format
    return body


def _record(row: dict) -> None:
    target = os.environ.get("VKIT_FAULT_MATRIX")
    if target:
        with open(target, "a") as f:
            f.write(json.dumps(row) + "\n")


CELLS = [(fault, jobs, path) for path in ("clock", "fast", "native") for jobs in (1, 2)
         for fault in ("SIGINT", "SIGTERM", "SIGKILL", "timeout")]
EXPECTED_EXIT = {"SIGINT": 130, "SIGTERM": 143, "SIGKILL": -signal.SIGKILL, "timeout": 1}
EXPECTED_HANG = {"SIGINT": "interrupted", "SIGTERM": "interrupted", "timeout": "timeout"}


@pytest.mark.parametrize(("fault", "jobs", "path"), CELLS, ids=[f"{f}-j{j}-{p}" for f, j, p in CELLS])
def test_a_hung_design_leaves_nothing_running(fault: str, jobs: int, path: str, tmp_path: Path,
                                               build_cache_dir: Path) -> None:
    simulator_available("icarus")
    cfg = _config(tmp_path, build_cache_dir, path, TIMEOUT_S[path] if fault == "timeout" else SIGNAL_TIMEOUT_S)
    proc, log = _start(tmp_path, str(cfg), "-j", str(jobs))
    t0 = time.monotonic()
    if fault != "timeout":
        _wait_for_hang(proc, log, jobs)
        t0 = time.monotonic()
        if fault == "SIGINT":
            os.killpg(proc.pid, signal.SIGINT)  # a terminal's Ctrl-C goes to the foreground process group
        else:
            os.kill(proc.pid, getattr(signal, fault))
    code = proc.wait(SETTLE_S if fault != "timeout" else 300)
    exit_s = time.monotonic() - t0
    left = _wait_gone(proc.pid, tmp_path)
    report = _report(tmp_path)
    statuses = {c["id"].split("/")[0]: c["status"] for c in report["cases"]} if report else None
    _record({"fault": fault, "jobs": jobs, "path": path, "exit": code, "exit_s": round(exit_s, 1),
             "report": statuses, "leftover": len(left)})
    assert code == EXPECTED_EXIT[fault], log.read_text()
    assert left == [], f"left running: {left}"
    if fault == "SIGKILL":
        return  # the run had no chance to write anything; what matters is that nothing survived it
    assert statuses == {"a_ok": "pass", "b_hang": EXPECTED_HANG[fault]}, log.read_text()
    hang = next(c for c in report["cases"] if c["id"].startswith("b_hang"))
    text = log.read_text()
    if fault == "timeout":
        assert hang["diagnosis"]["kind"] == "timeout"
        assert hang["diagnosis"]["message"].startswith(f"the simulator ran past timeout_s = {TIMEOUT_S[path]} s"), hang
        # the harness (fast, native) and the per-clock monitor (clock) keep every finished line: the lines
        # before the hang arrived and were scored, and they match the model
        assert hang["verdict"]["pixels_arrived"] >= 32 * (HANG_LINE - 2), hang["verdict"]
        assert hang["verdict"]["value_mismatches"] == 0, hang["verdict"]
    else:
        assert f"stopped by {fault}" in text and "1 interrupted" in text, text
    assert (tmp_path / "out" / "junit.xml").is_file() and (tmp_path / "out" / "summary.txt").is_file()


def test_a_second_run_into_a_busy_folder_stops_or_moves_aside(tmp_path: Path, build_cache_dir: Path) -> None:
    simulator_available("icarus")
    cfg = _config(tmp_path, build_cache_dir, "native", SIGNAL_TIMEOUT_S)
    first, first_log = _start(tmp_path, str(cfg), "-j", "8")
    _wait_for_hang(first, first_log, 2)
    assert "vkit: -j 8 cut to 2 (the run has 2 cases)" in first_log.read_text()
    second = subprocess.run([sys.executable, "-m", "vkit", "run", str(cfg)], cwd=tmp_path, capture_output=True,
                            text=True, timeout=120)
    assert second.returncode == 2
    lines = second.stderr.strip().splitlines()
    assert len(lines) == 1 and f"being written by another vkit run (pid {first.pid}, started " in lines[0], lines
    assert "--new-out" in lines[0] and "Traceback" not in second.stdout + second.stderr
    third = subprocess.run([sys.executable, "-m", "vkit", "run", str(cfg), "--only", "a_ok", "--new-out"],
                           cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert third.returncode == 0, third.stdout + third.stderr
    assert f"writing to {tmp_path / 'out-2'}" in third.stdout
    assert json.loads((tmp_path / "out-2" / "report.json").read_text())["totals"]["passed"] == 1
    os.killpg(first.pid, signal.SIGINT)
    assert first.wait(SETTLE_S) == 130
    assert _wait_gone(first.pid, tmp_path) == []
    assert _report(tmp_path) is not None and (tmp_path / "out" / LOCK_NAME).is_file()


def test_jobs_below_one_are_refused_like_the_config_key(tmp_path: Path, build_cache_dir: Path) -> None:
    cfg = _config(tmp_path, build_cache_dir, "native", TIMEOUT_S["native"])
    for bad in ("0", "-1"):
        done = subprocess.run([sys.executable, "-m", "vkit", "run", str(cfg), "-j", bad], cwd=tmp_path,
                              capture_output=True, text=True, timeout=120)
        assert done.returncode == 2
        assert done.stderr.strip() == f"vkit: error: command line: --jobs = {bad} is out of range; give an integer >= 1"
    assert worker_count(100000, 3, cpus=2) == (3, "-j 100000 cut to 3 (the run has 3 cases)")
    assert worker_count(100000, 500, cpus=2) == (2 * JOBS_PER_CPU, f"-j 100000 cut to {2 * JOBS_PER_CPU} "
                                                                  f"({JOBS_PER_CPU} per CPU on 2 CPUs)")
    assert worker_count(2, 5, cpus=2) == (2, None)


def test_a_full_disk_is_one_line_and_exit_2(tmp_path: Path, build_cache_dir: Path) -> None:
    simulator_available("icarus")
    mnt = tmp_path / "small"
    mnt.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", str(mnt)], capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"mount -t tmpfs is not allowed here ({done.stderr.strip() or done.returncode})")
    try:
        cfg = _config(tmp_path, build_cache_dir, "native", TIMEOUT_S["native"])
        run = subprocess.run([sys.executable, "-m", "vkit", "run", str(cfg), "--only", "a_ok", "--out", str(mnt / "out")],
                             cwd=tmp_path, capture_output=True, text=True, timeout=300)
        assert run.returncode == 2, run.stdout + run.stderr
        assert "Traceback" not in run.stdout + run.stderr
        assert "No space left on device" in run.stderr and len(run.stderr.strip().splitlines()) == 1, run.stderr
    finally:
        subprocess.run(["umount", str(mnt)], check=False)


@pytest.mark.sim
def test_the_time_limit_covers_stimulus_and_model_generation(tmp_path: Path, build_cache_dir: Path) -> None:
    """A case whose frames and model alone take longer than timeout_s is a timeout before any simulator starts."""
    simulator_available("icarus")
    cfg = tmp_path / "vkit.toml"
    cfg.write_text(f'[run]\nsimulators = ["icarus"]\nout_dir = "out"\ncache_dir = "{build_cache_dir}"\n'
                   'timeout_s = 0.001\nwaves = "off"\n'
                   f'[[import]]\nmanifest = "{REPO / "sample_rtl" / "designs.toml"}"\nuse = ["blur_core"]\n'
                   '[stimulus]\npatterns = ["conveyor"]\ntimings = ["vga640x480p60"]\nframes = 2\n')
    done = subprocess.run([sys.executable, "-m", "vkit", "run", str(cfg)], cwd=tmp_path, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 1, done.stdout[-2000:] + done.stderr[-2000:]
    (case,) = json.loads((tmp_path / "out" / "report.json").read_text())["cases"]
    assert case["status"] == "timeout" and case["diagnosis"]["kind"] == "timeout", case["diagnosis"]
    assert "sim.log" not in json.dumps(case["files"]), "no simulator may have started"
