"""Regression throughput: a 12-case matrix run with -j 2 against -j 1, and a second run that hits the build cache.

All figures come from one invocation, side by side, on the same machine state:

1. cold: an empty build cache, -j 2 (builds every design once, then runs the cases);
2. cached -j 1 and cached -j 2, alternating, ``--repeats`` times each; medians are printed;
3. the -j 2 / -j 1 speed-up (target >= 1.8x on 2 cores) and the cache-hit saving.

Run from the repository: ``python benchmarks/bench_regression.py [--sim verilator|icarus] [--repeats 3]``.
"""

from __future__ import annotations

import argparse
import io
import statistics
import sys
import tempfile
import time
from pathlib import Path

__all__ = ["main"]

_CONFIG = """
[run]
simulators = ["{sim}"]
cache_dir = "{cache}"
out_dir = "out"
waves = "off"

[[import]]
manifest = "{manifest}"
use = ["edge_core", "blur_core", "median_core"]

[stimulus]
timings = ["tiny64x48"]
stalls = [0, {{ probability = 0.1, max_length = 3 }}]
patterns = ["conveyor", "checkerboard"]
"""
"""3 designs x 2 patterns x 2 stall settings = 12 cases on one simulator."""


def _run(config_path: Path, jobs: int, out: Path) -> float:
    from vkit.run.config import load_config
    from vkit.run.runner import run

    config = load_config(config_path)
    t0 = time.perf_counter()
    result = run(config, jobs=jobs, out_dir=out, progress=False, stream=io.StringIO())
    seconds = time.perf_counter() - t0
    if result.exit_code != 0 or len(result.cases) != 12:
        raise SystemExit(f"bench_regression: the matrix did not pass ({len(result.cases)} cases, "
                         f"exit {result.exit_code}); see {out / 'summary.txt'}")
    return seconds


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sim", default="verilator", help="simulator (default verilator, whose builds are worth caching)")
    ap.add_argument("--repeats", type=int, default=3, help="cached runs per -j setting; the median is shown")
    args = ap.parse_args(argv)
    manifest = Path(__file__).resolve().parent.parent / "sample_rtl" / "designs.toml"
    with tempfile.TemporaryDirectory(prefix="vkit_bench_reg_") as tmp:
        root = Path(tmp)
        cfg = root / "vkit.toml"
        cfg.write_text(_CONFIG.format(sim=args.sim, cache=root / "cache", manifest=manifest))
        cold = _run(cfg, 2, root / "cold")
        j1, j2 = [], []
        for i in range(args.repeats):
            j1.append(_run(cfg, 1, root / f"j1_{i}"))
            j2.append(_run(cfg, 2, root / f"j2_{i}"))
    m1, m2 = statistics.median(j1), statistics.median(j2)
    print(f"simulator {args.sim}, 12 cases (3 designs x 2 patterns x 2 stall settings, 64x48 active)")
    print(f"cold run, empty build cache, -j 2:   {cold:7.2f} s")
    print(f"cached run, -j 1 (median of {args.repeats}):     {m1:7.2f} s   runs: " + ", ".join(f"{t:.2f}" for t in j1))
    print(f"cached run, -j 2 (median of {args.repeats}):     {m2:7.2f} s   runs: " + ", ".join(f"{t:.2f}" for t in j2))
    print(f"speed-up -j 2 / -j 1:               {m1 / m2:7.2f}x  (target >= 1.8x on 2 cores)")
    print(f"cache hit saves (cold - cached, -j 2): {cold - m2:6.2f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
