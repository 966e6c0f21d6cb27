"""A first run on a fresh machine: ``vkit demo`` with an empty build cache (and an empty compiler cache).

Runs ``vkit demo`` (the bundled sample regression on Verilator, default drive) as a subprocess with
``VKIT_CACHE_DIR`` and ``CCACHE_DIR`` pointing at new empty folders, ``--repeats`` times, and prints per run:
the whole command's wall time, the CPU seconds of it and its children (``resource.getrusage``), the
builds' share (from ``builds.json``: wall from the first build start to the last build end is not logged, so
the share is the sum of build seconds over the run's wall time times the jobs), the drive paths the cases
ran on, and the machine load before and after (all figures are wall clock on a shared machine).

    python benchmarks/bench_first_run.py [--repeats 1] [--jobs 2] [--keep DIR]

Target (issue: a fast first run): the demo from a fresh clone on 2 cores in <= 60 s wall, builds included.
CPU seconds / cores is the wall an idle machine of that many cores would need at best.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

__all__ = ["main"]


def _one_run(root: Path, jobs: int) -> dict[str, object]:
    env = dict(os.environ, VKIT_CACHE_DIR=str(root / "builds"), CCACHE_DIR=str(root / "ccache"))
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    load0 = os.getloadavg()[0]
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "vkit", "demo", "--out", str(root / "demo"), "-j", str(jobs)],
                          env=env, capture_output=True, text=True, check=False)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    builds = json.loads((root / "demo" / "builds.json").read_text()) if (root / "demo" / "builds.json").is_file() else []
    report = json.loads((root / "demo" / "report.json").read_text()) if (root / "demo" / "report.json").is_file() else {}
    paths: dict[str, int] = {}
    for case in report.get("cases", []):
        paths[str(case.get("drive"))] = paths.get(str(case.get("drive")), 0) + 1
    build_s = sum(float(b.get("seconds", 0)) for b in builds)
    return {"exit": proc.returncode, "wall_s": wall, "cpu_s": cpu, "builds": len(builds), "build_s": build_s,
            "build_share": build_s / (wall * jobs) if wall else 0.0, "paths": paths, "load": (load0, os.getloadavg()[0]),
            "tail": proc.stdout.strip().splitlines()[-12:] if proc.returncode not in (0, 1) else []}


def main(argv: list[str] | None = None) -> int:
    """Run the demo on empty caches and print wall, CPU and build share per run."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=1, help="fresh runs (each on new empty caches)")
    ap.add_argument("--jobs", type=int, default=2, help="vkit demo -j")
    ap.add_argument("--keep", default=None, help="keep the runs' folders under DIR (default: a temporary folder)")
    args = ap.parse_args(argv)
    print(f"vkit demo on an empty build cache and an empty compiler cache, -j {args.jobs}, {os.cpu_count()} cores")
    walls = []
    with tempfile.TemporaryDirectory(prefix="vkit_first_run_") as tmp:
        base = Path(args.keep) if args.keep else Path(tmp)
        for k in range(args.repeats):
            r = _one_run(base / f"run{k}", args.jobs)
            walls.append(float(r["wall_s"]))  # type: ignore[arg-type]
            print(f"run {k + 1}: exit {r['exit']}, wall {r['wall_s']:.1f} s, CPU {r['cpu_s']:.1f} s "
                  f"(= {float(r['cpu_s']) / args.jobs:.1f} s on {args.jobs} idle cores), {r['builds']} builds "
                  f"taking {r['build_s']:.1f} s ({100 * float(r['build_share']):.0f}% of the run's worker time), "
                  f"drive paths {r['paths']}, load average {r['load'][0]:.2f} -> {r['load'][1]:.2f}")
            for line in r["tail"]:  # type: ignore[union-attr]
                print(f"  | {line}")
    walls.sort()
    print(f"median wall {walls[len(walls) // 2]:.1f} s (target <= 60 s on 2 cores)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
