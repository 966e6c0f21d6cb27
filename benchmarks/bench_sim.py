"""Simulation speed side by side: per-clock cocotb path, fast-path harness, exported plain-HDL testbench.

On the sample edge core at 640x480 with 800x525 timing (preset "vga640x480p60", syncs made active
high as the core expects), ``--frames`` frames per run (default 3, so fixed start-up is amortised
as in a real regression), per simulator (Icarus, Verilator):

  (a) the per-clock cocotb path (vkit.tb.entry), Python on every clock;
  (b) the fast path (vkit.tb.fast on vkit_fast_top): the harness makes its clock, plays and captures
      in HDL, Python waits once for done;
  (c) the exported self-checking testbench (vkit.export), no Python at all.

Builds are not timed (one build per path serves every run); each run is timed from the start of
the simulator process to its exit (wall clock), so (a) and (b) include cocotb's start-up and (b)
includes writing the stimulus (a new seed per run, so it is really written) and reading the
capture back. Each figure is the median of ``--repeats`` runs (default 3). (a) may run fewer clocks
(``--per-clock-fraction``, default 0.1): the case's timeout then stops it early and clocks/s are
computed from the clocks it ran, stated in the output.

    python benchmarks/bench_sim.py [--sims icarus verilator] [--frames 3] [--repeats 3] [--per-clock-fraction 0.1]
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from vkit.capture import Capture
from vkit.export import export_case
from vkit.harness import fast_build_plan, fast_test_args
from vkit.pipeline import preset as spec_preset
from vkit.pipeline import run_model
from vkit.simulators import activate, find, subprocess_env
from vkit.tb.case import CASE_ENV, SimCase

__all__ = ["main"]

RTL = Path(__file__).resolve().parent.parent / "sample_rtl"
TIMING = {"preset": "vga640x480p60", "hsync_active_high": True, "vsync_active_high": True}
SIGNALS = {r: r for r in ("in_vsync", "in_hsync", "in_de", "in_valid", "in_data",
                          "out_vsync", "out_hsync", "out_de", "out_valid", "out_data")}
SIGNALS.update(clock="clk", reset="rst")
SOURCES = [RTL / "window3x3.v", RTL / "edge_core.v"]
PARAMS = {"ROOT_TABLE": f'"{RTL / "edge_root_table.hex"}"'}


def _case(work: Path, frames: Path, n_frames: int, seed: int = 0, timeout: int | None = None) -> SimCase:
    return SimCase("video", dict(SIGNALS), str(frames), str(work / f"cap{seed}.npz"), 640, 480, pixel_format="rgb888",
                   timing=dict(TIMING), timeout_clocks=timeout, seed=seed)


def _timed(fn: object) -> float:
    t0 = time.perf_counter()
    fn()  # type: ignore[operator]
    return time.perf_counter() - t0


def _median_rate(runs: list[tuple[float, int]]) -> tuple[float, int, float]:
    """(median seconds, clocks of that run, median clocks/s) over the runs."""
    rates = sorted(c / s for s, c in runs)
    mid = rates[len(rates) // 2]
    secs, clocks = next((s, c) for s, c in runs if c / s == mid)
    return secs, clocks, mid


def _per_clock(sim: str, work: Path, frames: Path, n_frames: int, fraction: float, repeats: int) -> list[tuple[float, int]]:
    from cocotb_tools.runner import get_runner

    timeout = None if fraction >= 1.0 else max(1000, int(fraction * 420_000 * n_frames))
    runner = get_runner(sim)
    runner.build(sources=SOURCES, hdl_toplevel="edge_core", build_dir=work / "build", parameters=PARAMS,
                 timescale=("1ns", "1ps") if sim == "icarus" else None, always=True)
    runs = []
    for seed in range(repeats):
        case = _case(work, frames, n_frames, seed, timeout)
        case_json = case.to_json(work / f"case{seed}.json")
        secs = _timed(lambda: runner.test(hdl_toplevel="edge_core", test_module="vkit.tb.entry",
                                          build_dir=work / "build", test_dir=work,
                                          extra_env={CASE_ENV: str(case_json)}, parameters=PARAMS))
        runs.append((secs, int(Capture.load(case.capture_file).meta.get("clocks_run") or 0)))
    return runs


def _fast(sim: str, work: Path, frames: Path, n_frames: int, repeats: int) -> list[tuple[float, int]]:
    from cocotb_tools.runner import get_runner

    plan = fast_build_plan("edge_core", SOURCES, "verilog", PARAMS, None, "video", SIGNALS, out_dir=work / "harness")
    runner = get_runner(sim)
    runner.build(build_dir=work / "build", **plan.build_kwargs(sim))
    runs = []
    for seed in range(repeats):
        case = _case(work, frames, n_frames, seed)
        secs = _timed(lambda: runner.test(build_dir=work / "build", **fast_test_args(case, sim)))
        runs.append((secs, int(Capture.load(case.capture_file).meta["clocks_run"])))
    return runs


def _exported(sim: str, work: Path, frames: Path, n_frames: int, repeats: int) -> tuple[list[tuple[float, int]], str]:
    case = _case(work, frames, n_frames)
    spec = spec_preset("edge")
    expected = [run_model(spec, f, keep_stages=False) for f in np.load(frames)]
    res = export_case(case, work / "exp", "edge_core", SOURCES, expected, out_width=8, parameters=PARAMS)
    env = subprocess_env(find(sim))
    *builds, run = res.commands[sim]
    for cmd in builds:
        subprocess.run(cmd, cwd=res.out_dir, env=env, check=True, capture_output=True)
    runs = []
    verdict = "?"
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = subprocess.run(run, cwd=res.out_dir, env=env, check=True, capture_output=True, text=True).stdout
        secs = time.perf_counter() - t0
        clocks = int(next(line.split()[-2] for line in out.splitlines() if line.startswith("vkit:") and "clocks" in line))
        verdict = next((line for line in out.splitlines() if "mismatches" in line), "?")
        runs.append((secs, clocks))
    return runs, verdict


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print clocks/s and ratios per simulator."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sims", nargs="+", default=["icarus", "verilator"])
    ap.add_argument("--per-clock-fraction", type=float, default=0.1,
                    help="share of the frames the per-clock path runs (its timeout stops it), 0..1")
    ap.add_argument("--frames", type=int, default=3, help="frames per run (fixed start-up is amortised over them)")
    ap.add_argument("--repeats", type=int, default=3, help="runs per figure; the median is shown")
    args = ap.parse_args(argv)
    from vkit.patterns import conveyor  # the demo scene: parcels on a conveyor belt

    with tempfile.TemporaryDirectory(prefix="vkit_bench_") as tmp:
        root = Path(tmp)
        stack = np.stack([np.asarray(conveyor(480, 640, seed=1 + k, rgb=True), np.uint8) for k in range(args.frames)])
        frames = root / "frames.npy"
        np.save(frames, stack)
        n = args.frames
        print(f"edge_core, 640x480 active, 800x525 timing, {n} frame(s) per run ({n * 420_000:,} clocks + drain), "
              f"median of {args.repeats} runs; (a) runs {args.per_clock_fraction:g} of the clocks")
        for sim in args.sims:
            info = find(sim)
            if not info.available:
                print(f"{sim}: skipped ({info.reason}; install: {info.install_hint})")
                continue
            activate(info)
            a_s, a_c, a = _median_rate(_per_clock(sim, root / f"{sim}_a", frames, n, args.per_clock_fraction, args.repeats))
            b_s, b_c, b = _median_rate(_fast(sim, root / f"{sim}_b", frames, n, args.repeats))
            c_runs, verdict = _exported(sim, root / f"{sim}_c", frames, n, args.repeats)
            c_s, c_c, c = _median_rate(c_runs)
            print(f"{sim}:")
            print(f"  (a) per-clock cocotb : {a_c:>9} clocks in {a_s:7.2f} s = {a:>10.0f} clocks/s")
            print(f"  (b) fast path        : {b_c:>9} clocks in {b_s:7.2f} s = {b:>10.0f} clocks/s")
            print(f"  (c) exported HDL tb  : {c_c:>9} clocks in {c_s:7.2f} s = {c:>10.0f} clocks/s   [{verdict}]")
            print(f"  b/a = {b / a:.1f}x   b/c = {b / c:.2f} (target >= 0.5)", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
