"""The passive scoreboard's costs: live overhead per clock, and offline scoring speed on a 1080p dump.

(a) Live: the conveyor camera chain (sample_rtl/belt_cam_top.v at ``--size``, default 64x48) runs
    ``--frames`` frames (default 20) in two cocotb tests of one simulator run
    (benchmarks/passive_cocotb.py): ``plain`` (nothing watching) and ``attached`` (vkit.run.attach on
    u_edge, every frame rebuilt, modelled and scored). The overhead per clock is the difference of the two
    tests' wall-clock times (cocotb's own per-test real time from results.xml) divided by the clocks run.
    Builds are not timed. Median of ``--repeats`` runs (default 3), per simulator.
(b) Offline: a dump of one 1920x1080 RGB frame on the CTA-861 1080p timing (2200x1125 clocks; the
    conveyor scene in, the edge model's output 40 clocks later out; the 12 signals the scoreboard reads),
    written as VCD by this script (not timed), then ``vkit.run.passive.score_dump`` timed end to end:
    reading the dump, sampling on the clock, rebuilding, the model, the scoreboard, the report. Median
    of ``--repeats`` runs; also Mpixel/s and clocks/s.

    python benchmarks/bench_passive.py [--sims icarus verilator] [--frames 20] [--repeats 3] [--skip-live] [--skip-offline]

The machine load (``os.getloadavg``) is printed before and after, since all figures are wall clock.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

import numpy as np

from vkit.model.pipeline import preset as spec_preset
from vkit.model.pipeline import run_model
from vkit.run.config import load_config
from vkit.run.passive import score_dump
from vkit.sim.simulators import find, subprocess_env
from vkit.video.formats import pack_rgb
from vkit.video.patterns import conveyor
from vkit.video.timing import preset, schedule

__all__ = ["main"]

HERE = Path(__file__).resolve().parent
RTL = HERE.parent / "sample_rtl"
SOURCES = [RTL / n for n in ("belt_pattern_gen.v", "belt_edge_marker.v", "window3x3.v", "edge_core.v", "belt_cam_top.v")]
CONFIG = RTL / "belt_cam.toml"
OUT_DELAY_CLOCKS = 40
"""Clocks between an input pixel and its output pixel in the synthetic 1080p dump."""


def _live_once(sim: str, build: Path, frames: int, work: Path) -> dict[str, tuple[float, float]]:
    """One simulator run of both tests; test name -> (real seconds, simulated ns)."""
    env = {**subprocess_env(find(sim)), "PYTHONPATH": os.pathsep.join([str(HERE), str(HERE.parent)]), "BENCH_FRAMES": str(frames),
           "BENCH_OUT": str(work / "vkit-passive")}
    script = (f"from cocotb_tools.runner import get_runner\nr = get_runner({sim!r})\n"
              f"r.test(test_module='passive_cocotb', hdl_toplevel='belt_cam_top', hdl_toplevel_lang='verilog', build_dir={str(build)!r}, "
              f"test_dir={str(work)!r})\n")
    subprocess.run([sys.executable, "-c", script], env=env, cwd=work, capture_output=True, check=False, timeout=3600)
    out = {}
    for case in ET.parse(work / "results.xml").getroot().iter("testcase"):
        if case.find("failure") is not None:
            raise RuntimeError(f"{sim}: test {case.get('name')} failed: {case.find('failure').get('message')}")
        props = {p.get("name"): p.get("value") for p in case.iter("property")}
        out[case.get("name")] = (float(case.get("time")), float(props["sim_time_duration"]))
    return out


def _build(sim: str, build: Path, size: tuple[int, int]) -> None:
    script = (f"from cocotb_tools.runner import get_runner\nr = get_runner({sim!r})\n"
              f"r.build(sources={[str(s) for s in SOURCES]!r}, hdl_toplevel='belt_cam_top', build_dir={str(build)!r}, "
              f"parameters={{'H_ACT': {size[0]}, 'V_ACT': {size[1]}, 'ROOT_TABLE': '\"{RTL / 'edge_root_table.hex'}\"'}}, "
              f"timescale=('1ns', '1ps'), build_args={['-Wno-fatal'] if sim == 'verilator' else []!r})\n")
    subprocess.run([sys.executable, "-c", script], env=subprocess_env(find(sim)), check=True, capture_output=True, timeout=3600)


def bench_live(sims: list[str], frames: int, repeats: int, size: tuple[int, int]) -> None:
    for sim in sims:
        info = find(sim)
        if not info.available:
            print(f"live {sim}: skipped ({info.reason})")
            continue
        with tempfile.TemporaryDirectory(prefix="vkit-bench-passive-") as tmp:
            build = Path(tmp) / "build"
            _build(sim, build, size)
            rows = [_live_once(sim, build, frames, Path(tmp)) for _ in range(repeats)]
        plain = statistics.median(r["plain"][0] for r in rows)
        attached = statistics.median(r["attached"][0] for r in rows)
        clocks = statistics.median(r["attached"][1] for r in rows) / 10.0
        per_clock_us = (attached - plain) / clocks * 1e6
        print(f"live {sim} {size[0]}x{size[1]} x {frames} frames ({clocks:.0f} clocks): plain {plain:.2f} s "
              f"({plain / clocks * 1e6:.1f} us/clock), attached {attached:.2f} s ({attached / clocks * 1e6:.1f} "
              f"us/clock); passive overhead {per_clock_us:.1f} us/clock (median of {repeats})")


_IDS = {"clk": "!", "rst": '"', "in_vsync": "#", "in_hsync": "$", "in_de": "%", "in_valid": "&", "in_data": "'",
        "out_vsync": "(", "out_hsync": ")", "out_de": "*", "out_valid": "+", "out_data": ","}


def _write_vcd(path: Path) -> int:
    """A VCD of one 1080p frame through the edge model; returns the active pixels."""
    t = replace(preset("fhd1920x1080p60"), hsync_active_high=True, vsync_active_high=True)
    image = conveyor(t.v_active, t.h_active, seed=1)
    out = run_model(spec_preset("edge"), image).output
    sched = schedule(t, 1)
    n = sched.n_clocks + OUT_DELAY_CLOCKS + t.h_total * 2
    pad = lambda a, d=0: np.concatenate((np.zeros(d, np.int64), np.asarray(a, np.int64), np.zeros(n - d - len(a), np.int64)))  # noqa: E731
    in_words = np.zeros(sched.n_clocks, np.int64)
    act = sched.de & sched.valid
    in_words[act] = pack_rgb(image).reshape(-1)
    out_words = np.zeros(sched.n_clocks, np.int64)
    out_words[act] = out.reshape(-1)
    trail = np.zeros(n, np.int64)
    trail[sched.n_clocks + OUT_DELAY_CLOCKS:] = 1  # a vsync after the frame on both sides closes it
    levels = {"rst": np.zeros(n, np.int64), "in_vsync": pad(sched.vsync) | trail, "in_hsync": pad(sched.hsync),
              "in_de": pad(sched.de), "in_valid": pad(sched.valid), "in_data": pad(in_words),
              "out_vsync": pad(sched.vsync, OUT_DELAY_CLOCKS) | trail, "out_hsync": pad(sched.hsync, OUT_DELAY_CLOCKS),
              "out_de": pad(sched.de, OUT_DELAY_CLOCKS), "out_valid": pad(sched.valid, OUT_DELAY_CLOCKS),
              "out_data": pad(out_words, OUT_DELAY_CLOCKS)}
    widths = {"in_data": 24, "out_data": 8}
    with open(path, "w") as fh:
        fh.write("$timescale 1ns $end\n$scope module tb $end\n$scope module u_edge $end\n")
        names = {"clk": "clk", "rst": "rst", **{k: k for k in levels if k != "rst"}}
        for role, vid in _IDS.items():
            fh.write(f"$var wire {widths.get(role, 1)} {vid} {names[role]} $end\n")
        fh.write("$upscope $end\n$upscope $end\n$enddefinitions $end\n")
        changed = {k: np.flatnonzero(np.diff(v, prepend=-1)) for k, v in levels.items()}
        per_clock: dict[int, list[str]] = {}
        for role, idx in changed.items():
            vals = levels[role][idx].tolist()
            w = widths.get(role)
            vid = _IDS[role]
            for k, v in zip(idx.tolist(), vals):
                per_clock.setdefault(k, []).append(f"b{v:b} {vid}" if w else f"{v}{vid}")
        for k in range(n):  # level k is set half a period before rising edge k
            fh.write(f"#{10 * k + 5}\n0!\n" + "".join(s + "\n" for s in per_clock.get(k, ())) + f"#{10 * k + 10}\n1!\n")
    return int(act.sum())


def bench_offline(repeats: int) -> None:
    with tempfile.TemporaryDirectory(prefix="vkit-bench-dump-") as tmp:
        dump = Path(tmp) / "fhd.vcd"
        t0 = time.monotonic()
        pixels = _write_vcd(dump)
        clocks = 2200 * 1125
        print(f"offline: wrote a 1080p dump ({dump.stat().st_size / 1e6:.0f} MB) in {time.monotonic() - t0:.1f} s (not timed)")
        config = load_config(CONFIG)
        times, cpu = [], []
        for k in range(repeats):
            t0, c0 = time.monotonic(), time.process_time()
            done = score_dump(config, dump, scope="tb.u_edge", out_dir=Path(tmp) / f"r{k}")
            times.append(time.monotonic() - t0)
            cpu.append(time.process_time() - c0)
            assert done.verdict.passed and done.verdict.frames_checked == 1, done.verdict.timing_errors
        s = statistics.median(times)
        print(f"offline 1920x1080 (1 frame, {clocks} clocks): {s:.2f} s per frame, {pixels / s / 1e6:.2f} Mpixel/s, "
              f"{clocks / s / 1e6:.2f} M clocks/s, CPU {statistics.median(cpu):.2f} s (median of {repeats}; read + sample + "
              "rebuild + model + score + report)")


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sims", nargs="+", default=["icarus", "verilator"])
    p.add_argument("--frames", type=int, default=20)
    p.add_argument("--size", default="64x48")
    p.add_argument("--repeats", type=int, default=3)
    p.add_argument("--skip-live", action="store_true")
    p.add_argument("--skip-offline", action="store_true")
    args = p.parse_args(argv)
    size = tuple(int(v) for v in args.size.split("x"))
    print(f"load average before: {os.getloadavg()}")
    if not args.skip_live:
        bench_live(args.sims, args.frames, args.repeats, size)
    if not args.skip_offline:
        bench_offline(args.repeats)
    print(f"load average after: {os.getloadavg()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
