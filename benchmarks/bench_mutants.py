"""Time the mutant runs add to a 32x24 case: every spec mutant's model run on the case's frames, the
strength report and the diagnosis by mutants, against the case's own wall time on Icarus (native path,
cached build), side by side in one invocation; medians of ``--repeats`` runs.

Two figures per stimulus: cold (the first case that meets these frames) and kept (every later case with
the same frames: the other stall settings, simulators and drive paths, and the next run, read the
coverage figures from the build cache). A passing case runs no diagnosis; the cold figure includes one
anyway, as a failing case would.

Target (issue 11): the mutant runs add under 10% of the case's time.
Run from the repository: ``python benchmarks/bench_mutants.py [--design edge_core] [--repeats 5]``.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

from vkit.check.by_mutant import diagnose_by_mutants, expected_by_mutant
from vkit.model.exact import run_model
from vkit.model.presets import preset
from vkit.model.strength import stimulus_strength
from vkit.run.config import load_config
from vkit.run.coverage import stimulus_coverage
from vkit.run.runner import run

__all__ = ["main"]

TARGET = 0.10
"""Mutant runs per case over the case's own time (issue 11)."""

_REPO = Path(__file__).resolve().parent.parent
_CONFIG = """
[run]
simulators = ["icarus"]
path = "native"
cache_dir = "{cache}"
waves = "off"

[[import]]
manifest = "{manifest}"
use = ["{design}"]

[stimulus]
patterns = ["{pattern}"]
timings = ["tiny32x24"]
frames = 2
seeds = [1]
"""


def _case_seconds(root: Path, design: str, pattern: str, repeats: int) -> tuple[float, Path]:
    cfg = root / "bench.toml"
    name, _, seed = pattern.partition(":")
    cfg.write_text(_CONFIG.format(cache=(root / "cache").as_posix(), design=design, pattern=name,
                                  manifest=(_REPO / "sample_rtl" / "designs.toml").as_posix()).replace(
                                      "seeds = [1]", f"seeds = [{seed or 1}]"))
    config = load_config(cfg)
    run(config, progress=False, out_dir=root / "warm")  # build once: the cached case is what a regression repeats
    times = []
    for i in range(repeats):
        t0 = time.perf_counter()
        run(config, progress=False, out_dir=root / f"run{i}")
        times.append(time.perf_counter() - t0)
    (case_dir,) = [p for p in (root / "run0").iterdir() if (p / "sim" / "frames.npy").exists()]
    return statistics.median(times), case_dir


def _mutant_seconds(spec_name: str, frames: np.ndarray, repeats: int, root: Path) -> tuple[float, float]:
    """(cold, kept): the strength and a diagnosis measured afresh, and the coverage figures read back."""
    spec = preset(spec_name)
    cold, kept = [], []
    for i in range(repeats):
        t0 = time.perf_counter()
        outs = expected_by_mutant(spec, frames)
        exp = np.stack([run_model(spec, f, keep_stages=False).output for f in frames])
        diagnose_by_mutants(exp, exp, outs)
        stimulus_strength(spec, frames, outputs=outs)
        cold.append(time.perf_counter() - t0)
        stimulus_coverage(spec, frames, 0.5, root / f"kept{i}")
        t0 = time.perf_counter()
        stimulus_coverage(spec, frames, 0.5, root / f"kept{i}")
        kept.append(time.perf_counter() - t0)
    return statistics.median(cold), statistics.median(kept)


def main() -> None:
    """Print the case time, the mutant time and their ratio against the target."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--design", default="edge_core", help="sample design (edge_core, blur_core, median_core)")
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--patterns", nargs="+", default=["conveyor:1", "killers:0"],
                    help="stimuli, name[:seed] (default: the scene and the mutant killers the scaffold writes)")
    args = ap.parse_args()
    spec_name = {"edge_core": "edge", "blur_core": "blur", "median_core": "median"}[args.design]
    for pattern in args.patterns:
        with tempfile.TemporaryDirectory() as tmp:
            case_s, case_dir = _case_seconds(Path(tmp), args.design, pattern, args.repeats)
            frames = np.load(case_dir / "sim" / "frames.npy")
            cold_s, kept_s = _mutant_seconds(spec_name, frames, args.repeats, Path(tmp))
        print(f"{args.design} 32x24 {pattern}, {len(frames)} frames: case {case_s * 1000:.0f} ms "
              f"(Icarus native, cached build); mutant runs + strength + diagnosis cold {cold_s * 1000:.0f} ms "
              f"= {100 * cold_s / case_s:.1f}% ({'within' if cold_s / case_s < TARGET else 'over'} the "
              f"{100 * TARGET:.0f}% target), kept {kept_s * 1000:.1f} ms = {100 * kept_s / case_s:.2f}%")


if __name__ == "__main__":
    main()
