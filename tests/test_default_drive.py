"""The default drive ("auto"): each case runs on the fastest path that can run it, every path gives the same
capture and verdict, and the report says which path ran."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from conftest import simulator_available
from vkit.cli import main
from vkit.core.vocab import DRIVE_DEFAULT
from vkit.report.schema import report_schema
from vkit.run.builds import pick_drive
from vkit.run.config import load_config, expand_matrix
from vkit.sim.case import SimCase, per_clock_start_ps
from vkit.video.capture import Capture

HDL = Path(__file__).parent / "hdl_fast"
MANIFEST = Path(__file__).resolve().parents[1] / "sample_rtl" / "designs.toml"
VHDL_STREAM_PORTS = {"clock": "clk_i", "reset": "rst_i", "in_valid": "din_vld", "in_ready": "din_rdy",
                     "in_data": "din_pix", "in_sof": "din_first", "in_eol": "din_last", "out_valid": "dout_vld",
                     "out_ready": "dout_rdy", "out_data": "dout_pix", "out_sof": "dout_first", "out_eol": "dout_last"}


def _config(tmp: Path, body: str, cache: Path) -> Path:
    cfg = tmp / "vkit.toml"
    cfg.write_text(f'[run]\nout_dir = "out"\ncache_dir = "{cache}"\n' + body)
    return cfg


def _sample_cases(tmp: Path, use: str, sims: str) -> list:
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["{use}"]\n'
            f'[stimulus]\npatterns = ["impulse"]\ntimings = ["tiny32x24"]\n')
    return expand_matrix(load_config(_config(tmp, body, tmp / "cache")), [sims])


def test_auto_picks_native_for_verilog_and_fast_for_vhdl_on_ghdl(tmp_path: Path) -> None:
    (icarus,) = _sample_cases(tmp_path, "edge_core", "icarus")
    (verilator,) = _sample_cases(tmp_path, "edge_core", "verilator")
    (ghdl,) = _sample_cases(tmp_path, "edge_core_vhdl", "ghdl")
    assert pick_drive(icarus) == pick_drive(verilator) == "native"
    assert pick_drive(ghdl, DRIVE_DEFAULT) == "fast"  # GHDL runs the VHDL harness under cocotb
    for path in ("clock", "fast", "native"):
        assert pick_drive(icarus, path) == path  # an explicit setting is kept


def test_auto_falls_back_to_clock_where_no_harness_can_wrap_the_design(tmp_path: Path) -> None:
    # a 400-bit input bus: wider than the widest word the player carries (MAX_IN_WIDTH, 8 x 48 bits), cocotb can
    # still drive it
    passthrough = Path(__file__).parent / "hdl" / "video_passthrough.v"
    ports = "".join(f'{r} = "{r}"\n' for r in ("in_vsync", "in_hsync", "in_de", "in_valid", "in_data", "out_vsync",
                                              "out_hsync", "out_de", "out_valid", "out_data"))
    body = (f'[designs.wide]\ntop = "video_passthrough"\nsources = ["{passthrough}"]\nspec = "identity"\n'
            f'parameters = {{ WIDTH = 400 }}\npixel_format = "rgb888"\n[designs.wide.ports]\nclock = "clk"\n'
            f'reset = "rst"\n{ports}[stimulus]\npatterns = ["impulse"]\ntimings = ["tiny32x24"]\n')
    (case,) = expand_matrix(load_config(_config(tmp_path, body, tmp_path / "cache")), ["icarus"])
    assert pick_drive(case) == "clock"
    narrow = dataclasses.replace(case, design=dataclasses.replace(case.design, parameters={"WIDTH": 24}))
    assert pick_drive(narrow) == "native"


@pytest.mark.sim
def test_default_run_says_which_path_ran(tmp_path: Path, build_cache_dir: Path, capsys) -> None:
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\n'
            '[stimulus]\npatterns = ["impulse"]\ntimings = ["tiny32x24"]\n')
    assert main(["run", str(_config(tmp_path, body, build_cache_dir)), "--sim", "icarus"]) == 0
    out = capsys.readouterr().out
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    jsonschema.validate(report, report_schema())
    (case,) = report["cases"]
    assert case["drive"] == "native" and case["meta"]["path"] == "native" and case["meta"]["asked_path"] == "auto"
    assert "drive paths: native 1" in out.splitlines()
    summary = (tmp_path / "out" / "summary.txt").read_text().splitlines()
    assert summary[0].split()[2] == "path" and summary[2].split()[2] == "native"


@pytest.mark.sim
def test_per_clock_start_time_is_what_the_simulator_reports(tmp_path: Path, build_cache_dir: Path, capsys) -> None:
    # The wave window of a capture made on any path is placed with per_clock_start_ps: hold it to the
    # time the per-clock monitor reads from the simulator (cocotb's get_sim_time).
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\n'
            '[stimulus]\npatterns = ["impulse"]\ntimings = ["tiny32x24"]\n')
    cfg = _config(tmp_path, body, build_cache_dir)
    assert main(["run", str(cfg), "--sim", "icarus", "--path", "clock", "--no-waves"]) == 0, capsys.readouterr().out
    (case,) = json.loads((tmp_path / "out" / "report.json").read_text())["cases"]
    cap = Capture.load(tmp_path / "out" / case["files"]["capture"])
    d = load_config(cfg).designs["blur_core"]
    assert cap.facts.start_time_ps == per_clock_start_ps(d.clock_period_ns, d.reset_cycles) == 30_000


@pytest.mark.sim
def test_wave_window_of_a_native_run_equals_that_of_a_per_clock_run(tmp_path: Path, build_cache_dir: Path,
                                                                       capsys) -> None:
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = "only"\n'
            '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\n')
    cfg = _config(tmp_path, body, build_cache_dir)
    waves = {}
    for path in ("native", "clock"):
        out = tmp_path / path
        code = main(["run", str(cfg), "--sim", "icarus", "--only", "*blur_truncate*", "--path", path, "--out", str(out)])
        assert code == 1, capsys.readouterr().out
        (case,) = json.loads((out / "report.json").read_text())["cases"]
        assert not [w for w in case["meta"]["warnings"] if w.startswith("no waves")]
        assert (out / case["files"]["waves"]).is_file()
        waves[path] = {k: v for k, v in case["meta"]["waves"].items() if k != "file"}
    assert waves["native"] == waves["clock"]


def _ghdl_per_clock(case: SimCase, top: str, sources: list[Path], work: Path) -> Capture:
    """``case`` on GHDL clock by clock (vkit.sim.tb.entry), built and run as vkit.run.simulate does."""
    from cocotb_tools.runner import get_runner

    from vkit.sim.case import CASE_ENV
    from vkit.sim.simulators import activate, find

    activate(find("ghdl"))
    build = work / "build_ghdl"
    runner = get_runner("ghdl")
    runner.build(sources=sources, hdl_toplevel=top, build_dir=build, always=True, build_args=["--std=08"])
    runner.test(hdl_toplevel=top, test_module="vkit.sim.tb.entry", build_dir=build, test_dir=work,
                extra_env={CASE_ENV: str(case.to_json(work / "case.json"))},
                test_args=["--std=08", f"--workdir={build}"])
    return Capture.load(case.capture_file)


def _stream_case(work: Path, frames: np.ndarray, **kw) -> SimCase:
    work.mkdir(parents=True, exist_ok=True)
    np.save(work / "frames.npy", frames)
    return SimCase("stream", dict(VHDL_STREAM_PORTS), str(work / "frames.npy"), str(work / "out" / "cap.npz"),
                   frames.shape[2], frames.shape[1], **kw)


@pytest.mark.sim
def test_vhdl_stream_harness_gives_the_per_clock_capture(tmp_path: Path) -> None:
    # The VHDL stream harness on GHDL plays the same transfers, gaps and ready pattern as the per-clock
    # source and sink: the captures agree clock for clock.
    simulator_available("ghdl")
    from test_fastpath import run_fast

    frames = np.random.default_rng(8).integers(0, 256, (2, 6, 16), dtype=np.uint8)
    kw = dict(stream_gaps={"probability": 0.2, "max_length": 3, "seed": 2},
              backpressure={"probability": 0.3, "max_length": 4, "seed": 5}, seed=4)
    sources = [HDL / "fast_stream_pass.vhd"]
    fast = run_fast("ghdl", _stream_case(tmp_path / "fast", frames, **kw), "fast_stream_pass_vhd", sources,
                    tmp_path / "fast")
    slow = _ghdl_per_clock(_stream_case(tmp_path / "slow", frames, **kw), "fast_stream_pass_vhd", sources,
                           tmp_path / "slow")
    assert fast.facts.path == "fast" and len(fast) == frames.size
    for key in ("values", "frame", "line", "column", "clock"):
        np.testing.assert_array_equal(getattr(fast, key), getattr(slow, key), err_msg=key)
    for key in ("latency_clocks", "backpressure_pixels", "stall_pixels"):
        assert getattr(fast.facts, key) == getattr(slow.facts, key), key
    views = fast.frames(frames.shape[1], frames.shape[2])
    for view, want in zip(views, frames):
        np.testing.assert_array_equal(view.pixels, want)
