"""Big frames with bounded memory: wall time and peak resident memory of a whole ``vkit run``.

Runs, as a subprocess, ``vkit run`` of the sample edge core (RGB, MAX_WIDTH raised to 4096) on the
conveyor scene on Verilator with the default drive:

  (1) ``--frames`` frames (default 10) of 1920x1080 in CTA-861 1080p timing ("fhd1920x1080p60");
  (2) one 3840x2160 frame in 4400x2250 timing (CTA-861 3840x2160p30 porches, from memory).

Peak memory is measured two ways: the sum of VmRSS over the whole process tree of the run (the command,
its case worker, the simulator), sampled from /proc every ``--sample-ms`` ms, and the largest single
process's peak (``ru_maxrss`` of the children, from ``resource.getrusage``). The build (cached after the
first run) is made before the timed runs.

    python benchmarks/bench_big_frames.py [--frames 10] [--skip-4k] [--keep DIR]

Target (issue: big frames with bounded memory): (1) under 1 GB peak for the whole run; (2) runs without error.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

__all__ = ["main"]

RTL = Path(__file__).resolve().parent.parent / "sample_rtl"
_FHD = '"fhd1920x1080p60"'
_UHD = ("{ h_active = 3840, h_front_porch = 176, h_sync = 88, h_back_porch = 296, v_active = 2160, "
        "v_front_porch = 8, v_sync = 10, v_back_porch = 72, hsync_active_high = true, vsync_active_high = true }")


_SMALL = ("{ h_active = 64, h_front_porch = 8, h_sync = 8, h_back_porch = 8, v_active = 48, v_front_porch = 2, "
          "v_sync = 2, v_back_porch = 2, hsync_active_high = true, vsync_active_high = true }")


def _config(root: Path, width: int, height: int, frames: int, timing: str) -> Path:
    root.mkdir(parents=True, exist_ok=True)
    cfg = root / "vkit.toml"
    cfg.write_text(
        '[run]\nout_dir = "out"\nwaves = "off"\nsimulators = ["verilator"]\ntimeout_s = 3600\n'
        f'[[import]]\nmanifest = "{RTL / "designs.toml"}"\nuse = ["edge_core"]\n'
        'set = { parameters = { MAX_WIDTH = 4096, BORDER = 0 } }\n'
        f'[stimulus]\npatterns = ["conveyor"]\nsize = [{width}, {height}]\nframes = {frames}\ntimings = [{timing}]\n')
    return cfg


def _tree_rss(root_pid: int) -> int:
    """Resident bytes of ``root_pid`` and every process below it (from /proc)."""
    parent: dict[int, int] = {}
    rss: dict[int, int] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as f:
                fields = f.read().rsplit(")", 1)[1].split()
            parent[int(entry)] = int(fields[1])
            rss[int(entry)] = int(fields[21]) * os.sysconf("SC_PAGE_SIZE")
        except (OSError, IndexError, ValueError):
            continue
    total, todo = 0, [root_pid]
    while todo:
        pid = todo.pop()
        total += rss.get(pid, 0)
        todo += [p for p, pp in parent.items() if pp == pid]
    return total


def _run(cfg: Path, env: dict[str, str], sample_s: float) -> dict[str, object]:
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "vkit", "run", str(cfg)], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True)
    peak = [0]

    def sample() -> None:
        while proc.poll() is None:
            peak[0] = max(peak[0], _tree_rss(proc.pid))
            time.sleep(sample_s)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    out, _ = proc.communicate()
    wall = time.perf_counter() - t0
    sampler.join()
    maxrss_kb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    lines = out.strip().splitlines()
    return {"exit": proc.returncode, "wall_s": wall, "tree_peak": peak[0],
            "process_peak": maxrss_kb * 1024 if maxrss_kb > before else None,
            "verdict": next((ln for ln in lines if " cases: " in ln), "?"),
            "paths": next((ln for ln in lines if ln.startswith("drive paths:")), "?"),
            "tail": lines[-15:] if proc.returncode != 0 else []}


def main(argv: list[str] | None = None) -> int:
    """Run the big-frame cases and print wall time and peak memory."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=10, help="1920x1080 frames in the first run")
    ap.add_argument("--skip-4k", action="store_true", help="leave out the 3840x2160 run")
    ap.add_argument("--sample-ms", type=float, default=100.0, help="memory sampling period, ms")
    ap.add_argument("--keep", default=None, help="keep the runs' folders under DIR")
    args = ap.parse_args(argv)
    runs = [("1920x1080", 1920, 1080, args.frames, _FHD)]
    if not args.skip_4k:
        runs.append(("3840x2160", 3840, 2160, 1, _UHD))
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())} ({os.cpu_count()} cores)")
    with tempfile.TemporaryDirectory(prefix="vkit_big_") as tmp:
        base = Path(args.keep) if args.keep else Path(tmp)
        env = dict(os.environ, VKIT_CACHE_DIR=os.environ.get("VKIT_CACHE_DIR", str(base / "builds")))
        env.pop("PYTHONDONTWRITEBYTECODE", None)  # as an installed vkit runs: from bytecode
        # the build first, untimed: one small frame of the same design and parameters (the harness does not
        # depend on the frame size), so no compiler's memory lands in the figures
        subprocess.run([sys.executable, "-m", "vkit", "run", str(_config(base / "build", 64, 48, 1, _SMALL))],
                       env=env, check=True, capture_output=True)
        for label, width, height, frames, timing in runs:
            cfg = _config(base / label, width, height, frames, timing)
            r = _run(cfg, env, args.sample_ms / 1000)
            single = f"{int(r['process_peak']) / 2**20:.0f} MiB" if r["process_peak"] else "n/a"
            print(f"{label} x {frames} frame(s): exit {r['exit']}, wall {r['wall_s']:.1f} s, peak RSS of the run's "
                  f"process tree {int(r['tree_peak']) / 2**20:.0f} MiB (largest single process {single}); "
                  f"{r['verdict']}; {r['paths']}")
            for line in r["tail"]:  # type: ignore[union-attr]
                print(f"  | {line}")
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
