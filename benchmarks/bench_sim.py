"""Simulation speed side by side: per-clock cocotb path, fast-path harness, exported plain-HDL testbench.

On the sample edge core at 640x480 with 800x525 timing (preset "vga640x480p60", syncs made active
high as the core expects), for each of ``--frames`` frame counts (default 3 and 10, so fixed start-up is
amortised as in a real regression; the ratios of every count are printed side by side at the end), per
simulator (Icarus, Verilator):

  (a) the per-clock cocotb path (vkit.sim.tb.entry), Python on every clock;
  (b) the fast path (vkit.sim.tb.fast on vkit_fast_top): the harness makes its clock, plays and captures
      in HDL, Python waits once for done;
  (b') the native fast path (vkit.sim.fast.run_native): the same harness built as a plain executable
      (Icarus: vkit_fast_top under vvp; Verilator: vkit_harness clocked by a generated C++ main, no timing
      engine) and run as a subprocess, no cocotb at all;
  (c) the exported self-checking testbench (vkit.run.export), no Python at all;
  (w) the whole command: ``vkit run`` of a config with the same design, size, timing and frame count on the
      default drive (model, drive, capture, score, report; waves off), the build (and the drawn frames, kept
      in the build cache) cached by a first untimed run, Python modules from bytecode as an installed vkit
      runs them. The path the default picked is printed, and c/w is the whole command's speed as a share of the
      plain testbench's (issue targets: >= 0.6 for 3 frames, >= 0.8 for 10).

Builds are not timed (one build per path serves every run); each run is timed from the start of
the simulator process to its exit (wall clock), so (a) and (b) include cocotb's start-up, and (b)
and (b') include writing the stimulus (a new seed per run, so it is really written), reading the
binary capture back and saving it. Each figure is the median of ``--repeats`` runs (default 3). (a) may run fewer clocks
(``--per-clock-fraction``, default 0.1): the case's timeout then stops it early and clocks/s are
computed from the clocks it ran, stated in the output.

    python benchmarks/bench_sim.py [--sims icarus verilator] [--frames 3 10] [--repeats 3] [--per-clock-fraction 0.1]

The machine load (``os.getloadavg``) is printed before and after, since all figures are wall clock.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Callable

import numpy as np

from vkit.video.capture import Capture
from vkit.run.export import export_case
from vkit.sim.fast import fast_build_plan, fast_test_args, native_build, run_native
from vkit.model.pipeline import preset as spec_preset
from vkit.model.pipeline import run_model
from vkit.sim.simulators import activate, find, subprocess_env
from vkit.sim.case import CASE_ENV, SimCase

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


Run = Callable[[int], tuple[float, int]]
"""One timed run for a seed: (wall-clock seconds, clocks run)."""


def _per_clock(sim: str, work: Path, frames: Path, n_frames: int, fraction: float) -> Run:
    from cocotb_tools.runner import get_runner

    timeout = None if fraction >= 1.0 else max(1000, int(fraction * 420_000 * n_frames))
    runner = get_runner(sim)
    runner.build(sources=SOURCES, hdl_toplevel="edge_core", build_dir=work / "build", parameters=PARAMS,
                 timescale=("1ns", "1ps") if sim == "icarus" else None, always=True)

    def run(seed: int) -> tuple[float, int]:
        case = _case(work, frames, n_frames, seed, timeout)
        case_json = case.to_json(work / f"case{seed}.json")
        secs = _timed(lambda: runner.test(hdl_toplevel="edge_core", test_module="vkit.sim.tb.entry",
                                          build_dir=work / "build", test_dir=work,
                                          extra_env={CASE_ENV: str(case_json)}, parameters=PARAMS))
        return secs, int(Capture.load(case.capture_file).facts.clocks_run or 0)

    return run


def _fast(sim: str, work: Path, frames: Path, n_frames: int, stim_secs: list[float]) -> Run:
    """The cocotb-hosted fast path; appends the seconds spent writing each stimulus to ``stim_secs``."""
    from cocotb_tools.runner import get_runner

    plan = fast_build_plan("edge_core", SOURCES, "verilog", PARAMS, None, "video", SIGNALS, out_dir=work / "harness")
    runner = get_runner(sim)
    runner.build(build_dir=work / "build", **plan.build_kwargs(sim))

    def run(seed: int) -> tuple[float, int]:
        case = _case(work, frames, n_frames, seed)
        t0 = time.perf_counter()
        kw = fast_test_args(case, sim)
        stim_secs.append(time.perf_counter() - t0)
        runner.test(build_dir=work / "build", **kw)
        return time.perf_counter() - t0, int(Capture.load(case.capture_file).facts.clocks_run)

    return run


def _native(sim: str, work: Path, frames: Path, n_frames: int) -> Run:
    plan = fast_build_plan("edge_core", SOURCES, "verilog", PARAMS, None, "video", SIGNALS, out_dir=work / "harness")
    native_build(plan, sim, work / "build", always=True)

    def run(seed: int) -> tuple[float, int]:
        case = _case(work, frames, n_frames, seed)
        secs = _timed(lambda: run_native(case, sim, work / "build"))
        return secs, int(Capture.load(case.capture_file).facts.clocks_run)

    return run


def _exported(sim: str, work: Path, frames: Path, n_frames: int, verdict: list[str]) -> Run:
    """The exported testbench; appends each run's mismatch line to ``verdict``."""
    case = _case(work, frames, n_frames)
    spec = spec_preset("edge")
    expected = [run_model(spec, f, keep_stages=False) for f in np.load(frames)]
    res = export_case(case, work / "exp", "edge_core", SOURCES, expected, out_width=8, parameters=PARAMS)
    env = subprocess_env(find(sim))
    *builds, command = res.commands[sim]
    for cmd in builds:
        subprocess.run(cmd, cwd=res.out_dir, env=env, check=True, capture_output=True)

    def run(seed: int) -> tuple[float, int]:
        del seed  # the exported stimulus is fixed; the simulator reads it afresh each run
        t0 = time.perf_counter()
        out = subprocess.run(command, cwd=res.out_dir, env=env, check=True, capture_output=True, text=True).stdout
        secs = time.perf_counter() - t0
        clocks = int(next(line.split()[-2] for line in out.splitlines() if line.startswith("vkit:") and "clocks" in line))
        verdict.append(next((line for line in out.splitlines() if "mismatches" in line), "?"))
        return secs, clocks

    return run


def _whole(sim: str, work: Path, n_frames: int, picked: list[str]) -> Run:
    """The whole ``vkit run`` on the default drive; appends the path each run took to ``picked``."""
    work.mkdir(parents=True, exist_ok=True)
    timing = ", ".join(f"{k} = {json.dumps(v)}" for k, v in TIMING.items())
    cfg = work / "vkit.toml"
    cfg.write_text(f'[run]\nout_dir = "out"\nwaves = "off"\ncache_dir = "{work / "cache"}"\n'
                   f'[[import]]\nmanifest = "{RTL / "designs.toml"}"\nuse = ["edge_core"]\n'
                   f'[stimulus]\npatterns = ["conveyor"]\nsize = [640, 480]\nframes = {n_frames}\n'
                   f'timings = [{{ {timing} }}]\n')
    command = [sys.executable, "-m", "vkit", "run", str(cfg), "--sim", sim]
    # as an installed vkit runs: from bytecode (PYTHONDONTWRITEBYTECODE=1 would compile every module, 0.25 s a run)
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    subprocess.run(command, check=True, capture_output=True, env=env)  # the build, not timed

    def run(seed: int) -> tuple[float, int]:
        del seed  # the config's own seed: the stimulus is made afresh by each run all the same
        secs = _timed(lambda: subprocess.run(command, check=True, capture_output=True, env=env))
        (case,) = json.loads((work / "out" / "report.json").read_text())["cases"]
        picked.append(str(case.get("drive")))
        return secs, int(Capture.load(work / "out" / case["files"]["capture"]).facts.clocks_run or 0)

    return run


def _measure(sim: str, root: Path, n: int, args: argparse.Namespace) -> tuple[list[str], dict[str, float]]:
    """Every path for ``n`` frames on ``sim``, interleaved; the printed lines and the ratios."""
    from vkit.video.patterns import conveyor  # the demo scene: parcels on a conveyor belt

    root.mkdir(parents=True, exist_ok=True)
    stack = np.stack([np.asarray(conveyor(480, 640, seed=1 + k, rgb=True), np.uint8) for k in range(n)])
    frames = root / "frames.npy"
    np.save(frames, stack)
    stim_secs: list[float] = []
    verdicts: list[str] = []
    picked: list[str] = []
    paths = {
        "a": _per_clock(sim, root / f"{sim}_a", frames, n, args.per_clock_fraction),
        "b": _fast(sim, root / f"{sim}_b", frames, n, stim_secs),
        "n": _native(sim, root / f"{sim}_n", frames, n),
        "c": _exported(sim, root / f"{sim}_c", frames, n, verdicts),
        "w": _whole(sim, root / f"{sim}_w", n, picked),
    }
    # Interleaved (a, b, b', c, w, a, b, ...) so a change of machine load hits every path alike.
    runs: dict[str, list[tuple[float, int]]] = {k: [] for k in paths}
    for seed in range(args.repeats):
        for key, run in paths.items():
            runs[key].append(run(seed))
    (a_s, a_c, a), (b_s, b_c, b), (n_s, n_c, nat), (c_s, c_c, c), (w_s, w_c, w) = (
        _median_rate(runs[k]) for k in ("a", "b", "n", "c", "w"))
    b_stim = sorted(stim_secs)[len(stim_secs) // 2]
    lines = [
        f"{sim}, {n} frame(s):",
        f"  (a) per-clock cocotb : {a_c:>9} clocks in {a_s:7.2f} s = {a:>10.0f} clocks/s",
        f"  (b) fast path        : {b_c:>9} clocks in {b_s:7.2f} s = {b:>10.0f} clocks/s"
        f"   [{b_stim:.2f} s of it writing the stimulus]",
        f"  (b') native fast path: {n_c:>9} clocks in {n_s:7.2f} s = {nat:>10.0f} clocks/s",
        f"  (c) exported HDL tb  : {c_c:>9} clocks in {c_s:7.2f} s = {c:>10.0f} clocks/s   [{verdicts[-1]}]",
        f"  (w) whole vkit run   : {w_c:>9} clocks in {w_s:7.2f} s = {w:>10.0f} clocks/s"
        f"   [default drive picked: {', '.join(sorted(set(picked)))}]",
    ]
    return lines, {"b/a": b / a if a else float("nan"), "b/c": b / c, "b'/c": nat / c, "c/w": c_s / w_s}


_TARGETS = {"b/c": ">= 0.5", "b'/c": ">= 0.9", "c/w": ">= 0.6 (3 frames), >= 0.8 (10 frames)"}
"""The issue's targets for the ratios (c/w: plain testbench wall / whole ``vkit run`` wall)."""


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print clocks/s per path, then the ratios of every frame count side by side."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sims", nargs="+", default=["icarus", "verilator"])
    ap.add_argument("--per-clock-fraction", type=float, default=0.1,
                    help="share of the frames the per-clock path runs (its timeout stops it), 0..1")
    ap.add_argument("--frames", type=int, nargs="+", default=[3, 10],
                    help="frames per run, one measurement per count (fixed start-up is amortised over them)")
    ap.add_argument("--repeats", type=int, default=3, help="runs per figure; the median is shown")
    args = ap.parse_args(argv)
    load_before = " ".join(f"{x:.2f}" for x in os.getloadavg())
    print(f"load average before: {load_before} ({os.cpu_count()} cores)")
    print(f"edge_core, 640x480 active, 800x525 timing (420,000 clocks a frame), frame counts {args.frames}, "
          f"median of {args.repeats} runs; (a) runs {args.per_clock_fraction:g} of the clocks")
    table: list[str] = []
    with tempfile.TemporaryDirectory(prefix="vkit_bench_") as tmp:
        for sim in args.sims:
            info = find(sim)
            if not info.available:
                print(f"{sim}: skipped ({info.reason}; install: {info.install_hint})")
                continue
            activate(info)
            for n in args.frames:
                lines, ratios = _measure(sim, Path(tmp) / f"{sim}_{n}", n, args)
                print("\n".join(lines), flush=True)
                table.append(f"{sim:<10} {n:>6}  " + "  ".join(f"{k} = {v:5.2f}" for k, v in ratios.items()))
    print(f"ratios side by side (targets: {'; '.join(f'{k} {v}' for k, v in _TARGETS.items())}):")
    print("\n".join(["simulator  frames  ratios", *table]))
    print(f"load average before: {load_before}; after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
