"""A plain cocotb test of the conveyor camera chain (belt_cam_top): clock, reset, let the generator run
a few frames, park it. It checks nothing itself; the three lines marked ``vkit`` watch the edge filter
inside the chain (u_edge) and fail the test when a frame it emitted is wrong.

Environment: BELT_FRAMES (frames to run, default 3), BELT_VKIT_CONFIG (default: belt_cam.toml beside
this file), BELT_FAIL_FAST (1: fail at the first failing frame).
"""

from __future__ import annotations

import os
from pathlib import Path

import cocotb
from cocotb.clock import Clock
from cocotb.triggers import ClockCycles

import vkit.run.attach as vkit_attach  # vkit


@cocotb.test()
async def belt_runs_frames(dut):
    """Run BELT_FRAMES frames through the chain and stop in vertical sync."""
    frames = int(os.environ.get("BELT_FRAMES", "3"))
    config = os.environ.get("BELT_VKIT_CONFIG", str(Path(__file__).with_name("belt_cam.toml")))
    cocotb.start_soon(Clock(dut.cam_clk, 10, unit="ns").start())
    board = vkit_attach.attach(dut.u_edge, config=config, fail_fast=os.environ.get("BELT_FAIL_FAST") == "1")  # vkit
    dut.cam_rst_n.value = 0
    dut.cam_run.value = 0
    await ClockCycles(dut.cam_clk, 4)
    dut.cam_rst_n.value = 1
    dut.cam_run.value = 1
    while int(dut.frames_made.value) < frames:
        await dut.frames_made.value_change
    dut.cam_run.value = 0  # the generator parks in vertical sync; the last line leaves the filter
    await ClockCycles(dut.cam_clk, 200)
    dut._log.info("belt_cam: %d frames, %d marked pixels in the last", frames, int(dut.marks_last.value))
    await board.check()  # vkit
