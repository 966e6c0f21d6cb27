"""The fast path: the HDL harness plays whole runs from memory and the capture text comes back as a Capture."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from vkit.capture import UNKNOWN, Capture
from vkit.capture_text import parse_capture_text
from vkit.errors import ConfigError
from vkit.harness import fast_build_plan, fast_test_args, scan_port_widths, verilog_harness
from vkit.stimulus import write_hex
from vkit.tb.case import CASE_ENV, SimCase

HDL = Path(__file__).parent / "hdl_fast"
VIDEO_SIGNALS = {r: r for r in ("in_vsync", "in_hsync", "in_de", "in_valid", "in_data",
                                "out_vsync", "out_hsync", "out_de", "out_valid", "out_data")}
VIDEO_SIGNALS.update(clock="clk", reset="rst")
STREAM_SIGNALS = {"clock": "clk", "reset": "rst", "in_valid": "s_valid", "in_ready": "s_ready", "in_data": "s_data",
                  "in_sof": "s_sof", "in_eol": "s_eol", "out_valid": "m_valid", "out_ready": "m_ready",
                  "out_data": "m_data", "out_sof": "m_sof", "out_eol": "m_eol"}


def _frames(tmp: Path, n: int = 2, h: int = 24, w: int = 32, seed: int = 5) -> Path:
    tmp.mkdir(parents=True, exist_ok=True)
    arr = np.random.default_rng(seed).integers(0, 256, (n, h, w), dtype=np.uint8)
    path = tmp / "frames.npy"
    np.save(path, arr)
    return path


def _video_case(tmp: Path, **kw: Any) -> SimCase:
    return SimCase("video", dict(VIDEO_SIGNALS), str(_frames(tmp)), str(tmp / "out" / "cap.npz"), 32, 24, **kw)


def _stream_case(tmp: Path, **kw: Any) -> SimCase:
    return SimCase("stream", dict(STREAM_SIGNALS), str(_frames(tmp)), str(tmp / "out" / "cap.npz"), 32, 24, **kw)


def _require(sim: str) -> None:
    from vkit.simulators import find

    info = find(sim)
    if not info.available:
        pytest.skip(f"{sim} is not usable here ({info.reason}); install it: {info.install_hint}")


def run_fast(sim: str, case: SimCase, top: str, sources: list[Path], work: Path, *,
             parameters: dict[str, Any] | None = None, defines: dict[str, Any] | None = None,
             build_dir: Path | None = None) -> Capture:
    """Build the harness around ``top`` (unless ``build_dir`` already holds it) and run ``case`` on it."""
    from cocotb_tools.runner import get_runner

    from vkit.simulators import activate, find

    activate(find(sim))
    language = "vhdl" if sim == "ghdl" else "verilog"
    plan = fast_build_plan(top, sources, language, parameters, defines, case.family, case.signals,
                           out_dir=work / "harness", pixel_format=case.pixel_format)
    runner = get_runner(sim)
    if build_dir is None:
        build_dir = work / f"build_{sim}"
        runner.build(build_dir=build_dir, **plan.build_kwargs(sim))
    runner.test(build_dir=build_dir, **fast_test_args(case, sim))
    return Capture.load(case.capture_file)


def _assert_same_frames(cap: Capture, frames: np.ndarray) -> None:
    views = cap.frames(frames.shape[1], frames.shape[2])
    assert len(views) == frames.shape[0]
    for view, want in zip(views, frames):
        assert view.present.all()
        assert view.line_lengths == [frames.shape[2]] * frames.shape[1]
        np.testing.assert_array_equal(view.pixels, want)


# ---------------------------------------------------------------------------------------------- no simulator


def test_capture_text_rebuilds_frames_lines_and_events() -> None:
    text = "\n".join([
        "# vkit capture 1 video",
        "3 P 0a", "4 P U", "5 L -", "6 X out_de", "7 P 0b", "8 L -",
        "9 H -", "10 F -", "10 B -", "11 P ff", "12 L -", "20 E -", "",
    ])
    cap = parse_capture_text(text, meta={"first_input_clock": 1})
    assert cap.values.tolist() == [10, UNKNOWN, 11, 255]
    assert cap.frame.tolist() == [0, 0, 0, 1] and cap.line.tolist() == [0, 0, 1, 0]
    assert cap.column.tolist() == [0, 1, 0, 0]
    m = cap.meta
    assert m["xz_data_count"] == 1 and m["xz_control"] == [[6, "out_de"]] and m["de_in_blanking"] == [10]
    assert m["output_vsync_count"] == 1 and m["output_hsync_per_frame"] == [1]
    assert m["latency_clocks"] == 2 and m["clocks_run"] == 20 and m["timed_out"] is False


def test_capture_text_without_end_line_is_a_partial_timed_out_run() -> None:
    cap = parse_capture_text("# vkit capture 1 stream\n5 F -\n5 P 01\n6 P 02")
    assert len(cap) == 2 and cap.meta["timed_out"] is True and cap.meta["clocks_run"] == 7
    with pytest.raises(ConfigError):
        parse_capture_text("not a capture\n")


def test_hex_file_matches_python_formatting(tmp_path: Path) -> None:
    words = np.array([0, 1, 0x1ABCDEF, (1 << 29) - 1], np.uint64)
    path = write_hex(tmp_path / "w.hex", words, 29)
    # Reference: Python's own format(value, "08x"), the $readmemh hex digits.
    assert path.read_text().split() == [format(int(v), "08x") for v in words]


def test_port_widths_are_read_from_verilog_and_vhdl() -> None:
    v = scan_port_widths([HDL / "fast_video_pass.v"], "fast_video_pass")
    assert v["in_data"] == 8 and v["out_data"] == 8 and v["out_de"] == 1
    h = scan_port_widths([HDL / "fast_video_pass.vhd"], "fast_video_pass_vhd")
    assert h["in_data"] == 8 and h["out_vsync"] == 1


def test_stimulus_data_matches_the_per_clock_source(tmp_path: Path) -> None:
    # The same seed must put the same garbage words on the bus as the per-clock source.
    pytest.importorskip("cocotb")
    from vkit.stimulus import video_schedule_and_words
    from vkit.tb.video import VideoSource

    case = _video_case(tmp_path, stalls={"probability": 0.2, "max_length": 3, "seed": 4}, seed=9)
    sched, words = video_schedule_and_words(case)
    src = VideoSource.__new__(VideoSource)  # only prepare(), which needs no simulator
    src.pixel_format, src.timing, src.stalls = "gray8", case.video_timing(), case.stall_pattern()
    src.blanking, src.blanking_value, src.seed = "random", 0, 9
    ref_sched, ref_words = src.prepare(case.load_frames())
    np.testing.assert_array_equal(words, ref_words)
    np.testing.assert_array_equal(sched.valid, ref_sched.valid)


# ---------------------------------------------------------------------------------------------- simulators


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_fast_video_passthrough_returns_the_input(sim: str, tmp_path: Path) -> None:
    _require(sim)
    case = _video_case(tmp_path, stalls={"probability": 0.1, "max_length": 3, "seed": 2}, simulator=sim)
    cap = run_fast(sim, case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path)
    _assert_same_frames(cap, case.load_frames())
    m = cap.meta
    assert m["timed_out"] is False and m["path"] == "fast"
    assert m["latency_clocks"] == 1  # one register stage in fast_video_pass.v
    assert m["output_vsync_count"] == m["input_vsync_count"] == 2
    assert m["output_hsync_per_frame"] == m["input_hsync_per_frame"]
    assert m["xz_control"] == [] and m["de_in_blanking"] == []
    assert len(m["stall_pixels"]) > 0


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_fast_stream_passthrough_with_gaps_and_backpressure(sim: str, tmp_path: Path) -> None:
    _require(sim)
    case = _stream_case(tmp_path, stream_gaps={"probability": 0.3, "max_length": 4, "seed": 1},
                        backpressure={"probability": 0.3, "max_length": 5, "seed": 2})
    cap = run_fast(sim, case, "fast_stream_pass", [HDL / "fast_stream_pass.v"], tmp_path)
    _assert_same_frames(cap, case.load_frames())
    assert cap.meta["timed_out"] is False
    assert len(cap.meta["backpressure_pixels"]) > 0 and len(cap.meta["stall_pixels"]) > 0
    # Every listed back-pressure pixel arrived right after a clock with ready low: a stall seen as a gap.
    clocks = np.sort(cap.clock)
    assert np.all(np.diff(clocks) >= 1)


@pytest.mark.sim
def test_fast_path_timeout_saves_a_partial_capture(tmp_path: Path) -> None:
    _require("icarus")
    case = _video_case(tmp_path, timeout_clocks=900)
    cap = run_fast("icarus", case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path)
    assert cap.meta["timed_out"] is True
    assert 0 < len(cap) < 2 * 32 * 24
    assert cap.meta["clocks_run"] == 900  # first input pixel is clock 0, so the harness stops at 900


@pytest.mark.sim
def test_fast_path_on_ghdl_with_the_vhdl_harness(tmp_path: Path) -> None:
    _require("ghdl")
    case = _video_case(tmp_path)
    try:
        cap = run_fast("ghdl", case, "fast_video_pass_vhd", [HDL / "fast_video_pass.vhd"], tmp_path)
    except SystemExit as exc:  # pragma: no cover - reported by the runner on a build failure
        raise AssertionError(f"GHDL run failed: {exc}") from None
    _assert_same_frames(cap, case.load_frames())
    assert cap.meta["latency_clocks"] == 1


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_fast_path_matches_the_per_clock_path(sim: str, tmp_path: Path) -> None:
    entry = pytest.importorskip("vkit.tb.entry")
    _require(sim)
    del entry
    case = _video_case(tmp_path / "fast", stalls={"probability": 0.1, "max_length": 2, "seed": 3})
    fast = run_fast(sim, case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path / "fast")
    slow_case = _video_case(tmp_path / "slow", stalls={"probability": 0.1, "max_length": 2, "seed": 3})
    slow = _run_per_clock(sim, slow_case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path / "slow")
    for key in ("values", "frame", "line", "column", "clock"):
        np.testing.assert_array_equal(getattr(fast, key), getattr(slow, key), err_msg=key)
    for key in ("latency_clocks", "output_vsync_count", "output_hsync_per_frame", "first_input_clock"):
        assert fast.meta[key] == slow.meta[key], key


def _run_per_clock(sim: str, case: SimCase, top: str, sources: list[Path], work: Path) -> Capture:
    from cocotb_tools.runner import get_runner

    from vkit.simulators import activate, find

    activate(find(sim))
    case_json = case.to_json(work / "case.json")
    runner = get_runner(sim)
    runner.build(sources=sources, hdl_toplevel=top, build_dir=work / f"build_{sim}", always=True,
                 timescale=("1ns", "1ps") if sim == "icarus" else None)
    runner.test(hdl_toplevel=top, test_module="vkit.tb.entry", build_dir=work / f"build_{sim}", test_dir=work,
                extra_env={CASE_ENV: str(case_json)})
    return Capture.load(case.capture_file)


def test_harness_text_names_the_real_ports() -> None:
    from vkit.harness import HarnessSpec

    roles = dict(VIDEO_SIGNALS, in_data="pix_in", out_data="pix_out")
    text = verilog_harness(HarnessSpec("video", "my_core", roles, 24, 8))
    assert ".pix_in(d_in_data)" in text and ".pix_out(d_out_data)" in text and "my_core dut" in text
    with pytest.raises(ConfigError):
        HarnessSpec("video", "my core", roles, 24, 8)
