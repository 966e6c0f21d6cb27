"""Simulation speed side by side: per-clock cocotb path, fast-path harness, exported plain-HDL testbench.

On the sample edge core at 640x480 with 800x525 timing (preset "vga640x480p60", syncs made active
high as the core expects), one frame, per simulator (Icarus, Verilator):

  (a) the per-clock cocotb path (vkit.tb.entry), Python on every clock;
  (b) the fast path (vkit.tb.fast): the harness plays and captures in HDL, Python waits per frame;
  (c) the exported self-checking testbench (vkit.export), no Python at all.

Builds are not timed; each run is timed from process start to exit (wall clock), so (a) and (b)
include cocotb's start-up and (b) includes writing the stimulus and reading the capture back.
(a) may run fewer clocks (``--per-clock-fraction``, default 1.0): the case's timeout then stops
it early and clocks/s are computed from the clocks it ran, stated in the output.

    python benchmarks/bench_sim.py [--sims icarus verilator] [--per-clock-fraction 0.25]
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from vkit.capture import Capture
from vkit.export import export_case
from vkit.harness import TOPLEVEL, harness_sources
from vkit.pipeline import preset as spec_preset
from vkit.pipeline import run_model
from vkit.simulators import activate, find, subprocess_env
from vkit.stimulus import fast_run_dir, prepare_fast_run
from vkit.tb.case import CASE_ENV, SimCase

__all__ = ["main"]

RTL = Path(__file__).resolve().parent.parent / "sample_rtl"
TIMING = {"preset": "vga640x480p60", "hsync_active_high": True, "vsync_active_high": True}
SIGNALS = {r: r for r in ("in_vsync", "in_hsync", "in_de", "in_valid", "in_data",
                          "out_vsync", "out_hsync", "out_de", "out_valid", "out_data")}
SIGNALS.update(clock="clk", reset="rst")


def _case(work: Path, frames: Path, timeout: int | None = None) -> SimCase:
    return SimCase("video", dict(SIGNALS), str(frames), str(work / "cap.npz"), 640, 480, pixel_format="rgb888",
                   timing=dict(TIMING), timeout_clocks=timeout)


def _timed(fn: object) -> float:
    t0 = time.perf_counter()
    fn()  # type: ignore[operator]
    return time.perf_counter() - t0


def _per_clock(sim: str, work: Path, frames: Path, fraction: float) -> tuple[float, int]:
    from cocotb_tools.runner import get_runner

    sources = [RTL / "window3x3.v", RTL / "edge_core.v"]
    timeout = None if fraction >= 1.0 else int(fraction * 420_000)
    case = _case(work, frames, timeout)
    case_json = case.to_json(work / "case.json")
    runner = get_runner(sim)
    params = {"ROOT_TABLE": f'"{RTL / "edge_root_table.hex"}"'}
    runner.build(sources=sources, hdl_toplevel="edge_core", build_dir=work / "build", parameters=params,
                 timescale=("1ns", "1ps") if sim == "icarus" else None, always=True)
    secs = _timed(lambda: runner.test(hdl_toplevel="edge_core", test_module="vkit.tb.entry", build_dir=work / "build",
                                      test_dir=work, extra_env={CASE_ENV: str(case_json)}, parameters=params))
    cap = Capture.load(case.capture_file)
    return secs, int(cap.meta.get("clocks_run") or 0)


def _fast(sim: str, work: Path, frames: Path) -> tuple[float, int]:
    from cocotb_tools.runner import get_runner

    sources = [RTL / "window3x3.v", RTL / "edge_core.v"]
    case = _case(work, frames)
    build = harness_sources(case, work / "harness", "edge_core", sources=sources, out_width=8)
    runner = get_runner(sim)
    runner.build(sources=[*build.files, *sources], hdl_toplevel=TOPLEVEL, build_dir=work / "build", always=True)
    shutil.copy(RTL / "edge_root_table.hex", work / "edge_root_table.hex")
    case_json = case.to_json(work / "case.json")

    def run() -> None:
        stim = prepare_fast_run(case, build.spec.in_width)
        runner.test(hdl_toplevel=TOPLEVEL, test_module="vkit.tb.fast", build_dir=work / "build", test_dir=work,
                    extra_env={CASE_ENV: str(case_json)}, plusargs=stim.plusargs(fast_run_dir(case) / "capture.txt"))

    secs = _timed(run)
    cap = Capture.load(case.capture_file)
    return secs, int(cap.meta["clocks_run"])


def _exported(sim: str, work: Path, frames: Path) -> tuple[float, int, str]:
    case = _case(work, frames)
    spec = spec_preset("edge")
    expected = [run_model(spec, f, keep_stages=False) for f in np.load(frames)]
    res = export_case(case, work / "exp", "edge_core", [RTL / "window3x3.v", RTL / "edge_core.v"], expected, out_width=8)
    shutil.copy(RTL / "edge_root_table.hex", res.out_dir / "edge_root_table.hex")
    env = subprocess_env(find(sim))
    *builds, run = res.commands[sim]
    for cmd in builds:
        subprocess.run(cmd, cwd=res.out_dir, env=env, check=True, capture_output=True)
    t0 = time.perf_counter()
    out = subprocess.run(run, cwd=res.out_dir, env=env, check=True, capture_output=True, text=True).stdout
    secs = time.perf_counter() - t0
    clocks = int(next(line.split()[-2] for line in out.splitlines() if line.startswith("vkit:") and "clocks" in line))
    verdict = next((line for line in out.splitlines() if "mismatches" in line), "?")
    return secs, clocks, verdict


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print clocks/s and ratios per simulator."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sims", nargs="+", default=["icarus", "verilator"])
    ap.add_argument("--per-clock-fraction", type=float, default=1.0,
                    help="share of the frame the per-clock path runs (its timeout stops it), 0..1")
    args = ap.parse_args(argv)
    from vkit.patterns import conveyor  # the demo scene: parcels on a conveyor belt

    with tempfile.TemporaryDirectory(prefix="vkit_bench_") as tmp:
        root = Path(tmp)
        frame = np.asarray(conveyor(480, 640, seed=1, rgb=True), np.uint8)
        frames = root / "frames.npy"
        np.save(frames, frame[None])
        print("edge_core, 640x480 active, 800x525 timing, 1 frame (420,000 clocks + drain)")
        for sim in args.sims:
            info = find(sim)
            if not info.available:
                print(f"{sim}: skipped ({info.reason}; install: {info.install_hint})")
                continue
            activate(info)
            a_s, a_c = _per_clock(sim, root / f"{sim}_a", frames, args.per_clock_fraction)
            b_s, b_c = _fast(sim, root / f"{sim}_b", frames)
            c_s, c_c, verdict = _exported(sim, root / f"{sim}_c", frames)
            a, b, c = a_c / a_s, b_c / b_s, c_c / c_s
            print(f"{sim}:")
            print(f"  (a) per-clock cocotb : {a_c:>8} clocks in {a_s:7.2f} s = {a:>10.0f} clocks/s")
            print(f"  (b) fast path        : {b_c:>8} clocks in {b_s:7.2f} s = {b:>10.0f} clocks/s")
            print(f"  (c) exported HDL tb  : {c_c:>8} clocks in {c_s:7.2f} s = {c:>10.0f} clocks/s   [{verdict}]")
            print(f"  b/a = {b / a:.1f}x   b/c = {b / c:.2f} (target >= 0.5)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
