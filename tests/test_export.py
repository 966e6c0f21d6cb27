"""Exported plain-HDL testbenches run without Python, check every pixel, and their capture reads back."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import numpy as np
import pytest

from vkit.run.export import export_case, read_capture
from vkit.sim.simulators import find, subprocess_env
from vkit.sim.case import SimCase

HDL = Path(__file__).parent / "hdl_fast"
SIGNALS = {r: r for r in ("in_vsync", "in_hsync", "in_de", "in_valid", "in_data",
                          "out_vsync", "out_hsync", "out_de", "out_valid", "out_data")}
SIGNALS.update(clock="clk", reset="rst")


def _case(tmp: Path) -> SimCase:
    frames = np.random.default_rng(11).integers(0, 256, (2, 24, 32), dtype=np.uint8)
    np.save(tmp / "frames.npy", frames)
    return SimCase("video", dict(SIGNALS), str(tmp / "frames.npy"), str(tmp / "cap.npz"), 32, 24,
                   stalls={"probability": 0.1, "max_length": 2, "seed": 1})


def _run(sim: str, commands: list[list[str]], cwd: Path) -> str:
    info = find(sim)
    if not info.available:
        pytest.skip(f"{sim} is not usable here ({info.reason}); install it: {info.install_hint}")
    out = ""
    for cmd in commands:
        res = subprocess.run(cmd, cwd=cwd, env=subprocess_env(info), capture_output=True, text=True, timeout=600)
        out += res.stdout + res.stderr
        assert res.returncode == 0, out[-2000:]
    return out


def _counts(log: str) -> tuple[int, int]:
    m = re.search(r"vkit: (\d+) mismatches in (\d+) pixels", log)
    assert m, log[-2000:]
    return int(m.group(1)), int(m.group(2))


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_exported_verilog_testbench_passes_and_reads_back(sim: str, tmp_path: Path) -> None:
    case = _case(tmp_path)
    frames = case.load_frames()
    res = export_case(case, tmp_path / "exp", "fast_video_pass", [HDL / "fast_video_pass.v"], frames)
    log = _run(sim, res.commands[sim], res.out_dir)
    # A pass-through design returns its input: every pixel checked, none wrong.
    assert _counts(log) == (0, frames.size) and "vkit: PASS" in log
    cap = read_capture(res.capture, case)
    views = cap.frames(24, 32)
    assert len(views) == 2
    for view, want in zip(views, frames):
        np.testing.assert_array_equal(view.pixels, want)
    assert cap.facts.latency_clocks == 1 and cap.facts.timed_out is False
    assert cap.facts.output_hsync_per_frame == cap.facts.input_hsync_per_frame


_STREAM_SIGNALS = {"clock": "clk_i", "reset": "rst_i", "in_valid": "din_vld", "in_ready": "din_rdy", "in_data": "din_pix",
                   "in_sof": "din_first", "in_eol": "din_last", "out_valid": "dout_vld", "out_ready": "dout_rdy",
                   "out_data": "dout_pix", "out_sof": "dout_first", "out_eol": "dout_last"}


@pytest.mark.sim
def test_exported_vhdl_stream_testbench_plays_gaps_and_backpressure_on_ghdl(tmp_path: Path) -> None:
    # The VHDL stream harness takes its own generics (ready pattern, expected pixel count): the testbench maps them.
    frames = np.random.default_rng(5).integers(0, 256, (2, 24, 32), dtype=np.uint8)
    np.save(tmp_path / "frames.npy", frames)
    case = SimCase("stream", dict(_STREAM_SIGNALS), str(tmp_path / "frames.npy"), str(tmp_path / "cap.npz"), 32, 24,
                   stream_gaps={"probability": 0.2, "max_length": 3, "seed": 2},
                   backpressure={"probability": 0.3, "max_length": 4, "seed": 3})
    src = [HDL / "fast_stream_pass.vhd"]
    res = export_case(case, tmp_path / "exp", "fast_stream_pass_vhd", src, frames)
    log = _run("ghdl", res.commands["ghdl"], res.out_dir)
    assert _counts(log) == (0, frames.size) and "vkit: PASS" in log
    views = read_capture(res.capture, case).frames(24, 32)
    for view, want in zip(views, frames):
        np.testing.assert_array_equal(view.pixels, want)
    wrong = frames.copy()
    wrong[1, 23, 31] ^= 0x80
    res = export_case(case, tmp_path / "exp2", "fast_stream_pass_vhd", src, wrong)
    log = _run("ghdl", res.commands["ghdl"], res.out_dir)
    assert _counts(log) == (1, frames.size) and "vkit: FAIL" in log


@pytest.mark.sim
def test_exported_testbench_counts_corrupted_expected_pixels(tmp_path: Path) -> None:
    case = _case(tmp_path)
    frames = case.load_frames().copy()
    mask = np.ones((24, 32), bool)
    mask[0, :] = False  # an unchecked border row: corruption there must not count
    wrong = frames.copy()
    wrong[0, 5, 7] ^= 0x10
    wrong[1, 10, 3] ^= 0x01
    wrong[1, 0, 4] ^= 0xFF  # in the unchecked row
    res = export_case(case, tmp_path / "exp", "fast_video_pass", [HDL / "fast_video_pass.v"], wrong, mask=mask)
    log = _run("icarus", res.commands["icarus"], res.out_dir)
    assert _counts(log) == (2, frames.size - 2 * 32) and "vkit: FAIL" in log


@pytest.mark.sim
def test_exported_vhdl_testbench_on_ghdl(tmp_path: Path) -> None:
    case = _case(tmp_path)
    frames = case.load_frames()
    src = [HDL / "fast_video_pass.vhd"]
    res = export_case(case, tmp_path / "exp", "fast_video_pass_vhd", src, frames)
    assert res.testbench.name == "tb_vkit.vhd"
    log = _run("ghdl", res.commands["ghdl"], res.out_dir)
    assert _counts(log) == (0, frames.size) and "vkit: PASS" in log
    wrong = frames.copy()
    wrong[0, 1, 1] ^= 0x80
    res = export_case(case, tmp_path / "exp2", "fast_video_pass_vhd", src, wrong)
    log = _run("ghdl", res.commands["ghdl"], res.out_dir)
    assert _counts(log) == (1, frames.size) and "vkit: FAIL" in log
    cap = read_capture(res.capture, case)
    np.testing.assert_array_equal(cap.frames(24, 32)[1].pixels, frames[1])


def _lane_case(tmp: Path, lanes: int, lane_order: str) -> SimCase:
    frames = np.random.default_rng(12).integers(0, 256, (2, 24, 32), dtype=np.uint8)
    np.save(tmp / "frames.npy", frames)
    return SimCase("video", dict(SIGNALS), str(tmp / "frames.npy"), str(tmp / "cap.npz"), 32, 24,
                   pixels_per_clock=lanes, lane_order=lane_order)


@pytest.mark.sim
@pytest.mark.parametrize("sim, lanes, lane_order", [("icarus", 4, "first_high"), ("verilator", 8, "first_low"),
                                                    ("ghdl", 2, "first_high")])
def test_exported_testbench_checks_each_lane_of_a_word(sim: str, lanes: int, lane_order: str, tmp_path: Path) -> None:
    # A pass-through of N gray8 pixels a word: the testbench checks every lane as a pixel, and names the one
    # corrupted pixel by its place in the frame whatever lane it rides in.
    case = _lane_case(tmp_path, lanes, lane_order)
    frames = case.load_frames()
    top, src = ("fast_video_pass_vhd", HDL / "fast_video_pass.vhd") if sim == "ghdl" else ("fast_video_pass",
                                                                                          HDL / "fast_video_pass.v")
    params = {"WIDTH": 8 * lanes}
    res = export_case(case, tmp_path / "exp", top, [src], frames, parameters=params)
    log = _run(sim, res.commands[sim], res.out_dir)
    assert _counts(log) == (0, frames.size) and "vkit: PASS" in log
    cap = read_capture(res.capture, case)
    np.testing.assert_array_equal(cap.frames(24, 32)[1].pixels, frames[1])
    wrong = frames.copy()
    wrong[0, 2, 5] ^= 0x40  # pixel 2 * 32 + 5 = 69 of frame 0
    mask = np.ones((24, 32), bool)
    mask[:, 0] = False  # an unchecked column: one lane of the first word of every line
    res = export_case(case, tmp_path / "exp2", top, [src], wrong, mask=mask, parameters=params)
    log = _run(sim, res.commands[sim], res.out_dir)
    assert _counts(log) == (1, frames.size - 2 * 24) and "vkit: FAIL" in log
    assert re.search(r"vkit: pixel 69: got 0*([0-9a-f]{2}), expected", log), log[-1500:]
