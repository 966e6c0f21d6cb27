"""Cocotb tests timed by bench_passive.py: the conveyor camera chain run for BENCH_FRAMES frames, once
without and once with the passive scoreboard attached to its edge filter (same clocks, same frames)."""

from __future__ import annotations

import os
from pathlib import Path

import cocotb
from cocotb.clock import Clock
from cocotb.triggers import ClockCycles

CONFIG = Path(__file__).resolve().parent.parent / "sample_rtl" / "belt_cam.toml"


async def _run_frames(dut, frames: int) -> None:
    dut.cam_rst_n.value = 0
    dut.cam_run.value = 0
    await ClockCycles(dut.cam_clk, 4)
    dut.cam_rst_n.value = 1
    dut.cam_run.value = 1
    start = int(dut.frames_made.value)
    while int(dut.frames_made.value) < start + frames:
        await dut.frames_made.value_change
    dut.cam_run.value = 0
    await ClockCycles(dut.cam_clk, 400)


@cocotb.test()
async def plain(dut):
    """The chain alone: the clock, the generator and nothing watching."""
    cocotb.start_soon(Clock(dut.cam_clk, 10, unit="ns").start())
    await _run_frames(dut, int(os.environ.get("BENCH_FRAMES", "20")))


@cocotb.test()
async def attached(dut):
    """The same run with the passive scoreboard watching u_edge (scores every frame)."""
    import vkit.run.attach as vkit_attach

    cocotb.start_soon(Clock(dut.cam_clk, 10, unit="ns").start())
    board = vkit_attach.attach(dut.u_edge, config=CONFIG, out_dir=os.environ.get("BENCH_OUT", "vkit-passive"))
    await _run_frames(dut, int(os.environ.get("BENCH_FRAMES", "20")))
    await board.check()
