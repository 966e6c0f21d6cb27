"""The fast path: the HDL harness plays whole runs from memory and the capture text comes back as a Capture."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pytest

from vkit.video.capture import UNKNOWN, Capture, RunFacts
from vkit.sim.fast.capture_file import parse_capture_text
from vkit.core.errors import ConfigError
from vkit.sim.fast.build import fast_build_plan, fast_test_args
from vkit.sim.fast.harness import verilog_harness
from vkit.sim.hdlports import parse_ports
from vkit.sim.fast.stimulus import write_hex
from vkit.sim.case import CASE_ENV, SimCase

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
    from vkit.sim.simulators import find

    info = find(sim)
    if not info.available:
        pytest.skip(f"{sim} is not usable here ({info.reason}); install it: {info.install_hint}")


def run_fast(sim: str, case: SimCase, top: str, sources: list[Path], work: Path, *,
             parameters: dict[str, Any] | None = None, defines: dict[str, Any] | None = None,
             build_dir: Path | None = None) -> Capture:
    """Build the harness around ``top`` (unless ``build_dir`` already holds it) and run ``case`` on it."""
    from cocotb_tools.runner import get_runner

    from vkit.sim.simulators import activate, find

    activate(find(sim))
    language = "vhdl" if sim == "ghdl" else "verilog"
    plan = fast_build_plan(top, sources, language, parameters, defines, case.family, case.signals,
                           out_dir=work / "harness", pixel_format=case.pixel_format,
                           reset_active_high=case.reset_active_high, lanes=case.pixels_per_clock)
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
        "# vkit capture 1 video 8",  # the harness names its output data width
        "3 P 0a", "4 P U", "5 L -", "6 X out_de", "7 P 0b", "8 L -",
        "9 H -", "10 F -", "10 B -", "11 P ff", "12 L -", "20 E -", "",
    ])
    cap = parse_capture_text(text, facts=RunFacts(first_input_clock=1))
    assert cap.values.tolist() == [10, UNKNOWN, 11, 255]
    assert cap.frame.tolist() == [0, 0, 0, 1] and cap.line.tolist() == [0, 0, 1, 0]
    assert cap.column.tolist() == [0, 1, 0, 0]
    m = cap.facts
    assert m.xz_data_count == 1 and m.xz_control == [[6, "out_de"]] and m.de_in_blanking == [10]
    assert m.output_vsync_count == 1 and m.output_hsync_per_frame == [1]
    assert m.latency_clocks == 2 and m.clocks_run == 20 and m.timed_out is False


def test_capture_text_without_end_line_is_a_partial_timed_out_run() -> None:
    cap = parse_capture_text("# vkit capture 1 stream\n5 F -\n5 P 01\n6 P 02")
    assert len(cap) == 2 and cap.facts.timed_out is True and cap.facts.clocks_run == 7
    with pytest.raises(ConfigError):
        parse_capture_text("not a capture\n")


def _binary_records(events: list[tuple[int, str, int, int]], family: int, width: int) -> bytes:
    """Binary capture bytes built with Python's struct module (little-endian 32-bit words, as Verilog %u writes)."""
    import struct

    from vkit.sim.fast.wire import CAPTURE_MAGIC, capture_data_words

    nw = capture_data_words(width)
    out = struct.pack("<4I", CAPTURE_MAGIC, 1, family, width)
    for clock, kind, code, value in events:
        out += struct.pack("<2I", clock, ord(kind) | code << 8)
        out += b"".join(struct.pack("<I", (value >> (32 * j)) & 0xFFFFFFFF) for j in range(nw))
    return out


def test_binary_capture_gives_the_same_capture_as_text() -> None:
    from vkit.sim.fast.capture_file import parse_capture_binary
    from vkit.sim.fast.wire import CAPTURE_ROLES

    text = "\n".join([
        "# vkit capture 1 video 8",  # the harness names its output data width
        "3 P 0a", "4 P U", "5 L -", "6 X out_de", "7 P 0b", "8 L -",
        "9 H -", "10 F -", "10 B -", "11 P ff", "12 L -", "20 E -", "",
    ])
    events = [(3, "P", 0, 10), (4, "P", 1, 0), (5, "L", 0, 0), (6, "X", CAPTURE_ROLES.index("out_de"), 0),
              (7, "P", 0, 11), (8, "L", 0, 0), (9, "H", 0, 0), (10, "F", 0, 0), (10, "B", 0, 0), (11, "P", 0, 255),
              (12, "L", 0, 0), (20, "E", 0, 0)]
    a = parse_capture_text(text, facts=RunFacts(first_input_clock=1))
    b = parse_capture_binary(_binary_records(events, 0, 8), facts=RunFacts(first_input_clock=1))
    _assert_same_capture(a, b)
    # A 40-bit bus spans two data words; a cut-off last record is dropped, as a cut-off text line is.
    wide = _binary_records([(1, "F", 0, 0), (2, "P", 0, 0xAB_CDEF_0123), (3, "P", 0, 5)], 1, 40)
    c = parse_capture_binary(wide[:-3])
    d = parse_capture_text("# vkit capture 1 stream 40\n1 F -\n2 P abcdef0123\n3 P")  # the text run cut mid-line
    _assert_same_capture(c, d)
    assert c.values.tolist() == [0xAB_CDEF_0123] and c.facts.timed_out is True
    with pytest.raises(ConfigError):
        parse_capture_binary(b"# vkit capture 1 video\n")


def _assert_same_capture(a: Capture, b: Capture) -> None:
    for key in ("values", "clock", "frame", "line", "column"):
        x, y = getattr(a, key), getattr(b, key)
        assert x.dtype.kind == y.dtype.kind == "i", key  # int32 or int64: the smallest that holds them
        np.testing.assert_array_equal(x, y, err_msg=key)
    assert a.facts == b.facts


def test_hex_file_matches_python_formatting(tmp_path: Path) -> None:
    words = np.array([0, 1, 0x1ABCDEF, (1 << 29) - 1], np.uint64)
    path = write_hex(tmp_path / "w.hex", words, 29)
    # Reference: Python's own format(value, "08x"), the $readmemh hex digits.
    assert path.read_text().split() == [format(int(v), "08x") for v in words]


def test_port_widths_are_read_from_verilog_and_vhdl() -> None:
    # The harness takes its bus widths from the one HDL port reader (vkit.sim.hdlports).
    v = {p.name: p.width for p in parse_ports([HDL / "fast_video_pass.v"], "fast_video_pass")}
    assert v["in_data"] == 8 and v["out_data"] == 8 and v["out_de"] == 1
    h = {p.name: p.width for p in parse_ports([HDL / "fast_video_pass.vhd"], "fast_video_pass_vhd")}
    assert h["in_data"] == 8 and h["out_vsync"] == 1


def test_stimulus_data_matches_the_per_clock_source(tmp_path: Path) -> None:
    # The same seed must put the same garbage words on the bus as the per-clock source.
    pytest.importorskip("cocotb")
    from vkit.sim.fast.stimulus import video_schedule_and_words
    from vkit.sim.tb.video import VideoSource

    case = _video_case(tmp_path, stalls={"probability": 0.2, "max_length": 3, "seed": 4}, seed=9)
    sched, words = video_schedule_and_words(case)
    src = VideoSource.__new__(VideoSource)  # only prepare(), which needs no simulator
    src.pixel_format, src.timing, src.stalls = "gray8", case.video_timing(), case.stall_pattern()
    src.blanking, src.blanking_value, src.seed, src.bus = "random", 0, 9, None
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
    m = cap.facts
    assert m.timed_out is False and m.path == "fast"
    assert m.latency_clocks == 1  # one register stage in fast_video_pass.v
    assert m.output_vsync_count == m.input_vsync_count == 2
    assert m.output_hsync_per_frame == m.input_hsync_per_frame
    assert m.xz_control == [] and m.de_in_blanking == []
    assert len(m.stall_pixels) > 0


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_fast_stream_passthrough_with_gaps_and_backpressure(sim: str, tmp_path: Path) -> None:
    _require(sim)
    case = _stream_case(tmp_path, stream_gaps={"probability": 0.3, "max_length": 4, "seed": 1},
                        backpressure={"probability": 0.3, "max_length": 5, "seed": 2})
    cap = run_fast(sim, case, "fast_stream_pass", [HDL / "fast_stream_pass.v"], tmp_path)
    _assert_same_frames(cap, case.load_frames())
    assert cap.facts.timed_out is False
    assert len(cap.facts.backpressure_pixels) > 0 and len(cap.facts.stall_pixels) > 0
    # Every listed back-pressure pixel arrived right after a clock with ready low: a stall seen as a gap.
    clocks = np.sort(cap.clock)
    assert np.all(np.diff(clocks) >= 1)


@pytest.mark.sim
@pytest.mark.parametrize("family", ["video", "stream"])
def test_binary_and_text_captures_of_one_run_are_identical(family: str, tmp_path: Path) -> None:
    _require("icarus")
    from cocotb_tools.runner import get_runner

    from vkit.run.export import read_capture
    from vkit.sim.fast.stimulus import fast_run_dir

    if family == "video":
        case = _video_case(tmp_path, stalls={"probability": 0.2, "max_length": 3, "seed": 7})
        top, src = "fast_video_pass", [HDL / "fast_video_pass.v"]
    else:
        case = _stream_case(tmp_path, stream_gaps={"probability": 0.3, "max_length": 4, "seed": 1},
                            backpressure={"probability": 0.3, "max_length": 5, "seed": 2})
        top, src = "fast_stream_pass", [HDL / "fast_stream_pass.v"]
    plan = fast_build_plan(top, src, None, None, None, family, case.signals, out_dir=tmp_path / "h")
    runner = get_runner("icarus")
    runner.build(build_dir=tmp_path / "b", **plan.build_kwargs("icarus"))
    caps = []
    for binary in (1, 0):
        args = fast_test_args(case, "icarus")
        name = "capture.bin" if binary else "capture.txt"
        args["plusargs"] = [a for a in args["plusargs"] if not a.startswith("+vkit_capture=")]
        args["plusargs"] += [f"+vkit_capture={fast_run_dir(case) / name}", f"+vkit_capture_bin={binary}"]
        runner.test(build_dir=tmp_path / "b", **args)
        path = fast_run_dir(case) / name
        assert path.read_bytes()[:4] == (b"VKCB" if binary else b"# vk")
        caps.append(read_capture(path, case))
    _assert_same_capture(*caps)
    assert len(caps[0]) == 2 * 24 * 32


@pytest.mark.sim
def test_fast_path_timeout_saves_a_partial_capture(tmp_path: Path) -> None:
    _require("icarus")
    case = _video_case(tmp_path, timeout_clocks=900)
    cap = run_fast("icarus", case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path)
    assert cap.facts.timed_out is True
    assert 0 < len(cap) < 2 * 32 * 24
    assert cap.facts.clocks_run == 900  # first input pixel is clock 0, so the harness stops at 900


@pytest.mark.sim
def test_fast_path_on_ghdl_with_the_vhdl_harness(tmp_path: Path) -> None:
    _require("ghdl")
    case = _video_case(tmp_path)
    try:
        cap = run_fast("ghdl", case, "fast_video_pass_vhd", [HDL / "fast_video_pass.vhd"], tmp_path)
    except SystemExit as exc:  # pragma: no cover - reported by the runner on a build failure
        raise AssertionError(f"GHDL run failed: {exc}") from None
    _assert_same_frames(cap, case.load_frames())
    assert cap.facts.latency_clocks == 1


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_fast_path_matches_the_per_clock_path(sim: str, tmp_path: Path) -> None:
    entry = pytest.importorskip("vkit.sim.tb.entry")
    _require(sim)
    del entry
    case = _video_case(tmp_path / "fast", stalls={"probability": 0.1, "max_length": 2, "seed": 3})
    fast = run_fast(sim, case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path / "fast")
    slow_case = _video_case(tmp_path / "slow", stalls={"probability": 0.1, "max_length": 2, "seed": 3})
    slow = _run_per_clock(sim, slow_case, "fast_video_pass", [HDL / "fast_video_pass.v"], tmp_path / "slow")
    for key in ("values", "frame", "line", "column", "clock"):
        np.testing.assert_array_equal(getattr(fast, key), getattr(slow, key), err_msg=key)
    for key in ("latency_clocks", "output_vsync_count", "output_hsync_per_frame", "first_input_clock"):
        assert getattr(fast.facts, key) == getattr(slow.facts, key), key


def _run_per_clock(sim: str, case: SimCase, top: str, sources: list[Path], work: Path, *,
                   parameters: dict[str, Any] | None = None, defines: dict[str, Any] | None = None) -> Capture:
    from cocotb_tools.runner import get_runner

    from vkit.sim.simulators import activate, find

    activate(find(sim))
    case_json = case.to_json(work / "case.json")
    runner = get_runner(sim)
    runner.build(sources=sources, hdl_toplevel=top, build_dir=work / f"build_{sim}", always=True,
                 timescale=("1ns", "1ps") if sim == "icarus" else None, parameters=parameters or {},
                 defines=defines or {})
    runner.test(hdl_toplevel=top, test_module="vkit.sim.tb.entry", build_dir=work / f"build_{sim}", test_dir=work,
                extra_env={CASE_ENV: str(case_json)}, parameters=parameters or {})
    return Capture.load(case.capture_file)


def test_harness_text_names_the_real_ports() -> None:
    from vkit.sim.fast.harness import HarnessSpec

    roles = dict(VIDEO_SIGNALS, in_data="pix_in", out_data="pix_out")
    text = verilog_harness(HarnessSpec("video", "my_core", roles, 24, 8))
    assert ".pix_in(d_in_data)" in text and ".pix_out(d_out_data)" in text and "my_core dut" in text
    with pytest.raises(ConfigError):
        HarnessSpec("video", "my core", roles, 24, 8)


# ---------------------------------------------------------------------------------------------- one build, sample RTL

RTL = Path(__file__).resolve().parent.parent / "sample_rtl"


def _sample_design(name: str) -> dict[str, Any]:
    import tomllib

    return tomllib.loads((RTL / "designs.toml").read_text())["designs"][name]


def _design_parameters(d: dict[str, Any], height: int) -> dict[str, Any]:
    """The manifest's parameters as a run needs them: file parameters as quoted absolute paths, frame parameters set."""
    params: dict[str, Any] = dict(d.get("parameters", {}))
    for name, file in d.get("file_parameters", {}).items():
        params[name] = f'"{RTL / file}"'
    for what, name in d.get("frame_parameters", {}).items():
        assert what == "height", what
        params[name] = height
    return params


@pytest.mark.sim
def test_one_build_runs_different_timing_stalls_seeds_and_frame_counts(tmp_path: Path) -> None:
    _require("icarus")
    from cocotb_tools.runner import get_runner

    src = [HDL / "fast_video_pass.v"]
    a = _video_case(tmp_path / "a", seed=1)
    b = SimCase("video", dict(VIDEO_SIGNALS), str(_frames(tmp_path / "b", n=3, seed=8)), str(tmp_path / "b" / "cap.npz"),
                32, 24, timing={"h_active": 32, "h_front_porch": 5, "h_sync": 3, "h_back_porch": 7, "v_active": 24,
                                "v_front_porch": 2, "v_sync": 2, "v_back_porch": 1,
                                "hsync_active_high": False, "vsync_active_high": False},
                stalls={"probability": 0.3, "max_length": 4, "seed": 6}, seed=9)
    plan_a = fast_build_plan("fast_video_pass", src, None, None, None, "video", a.signals, out_dir=tmp_path / "h")
    plan_b = fast_build_plan("fast_video_pass", src, None, None, None, "video", b.signals, out_dir=tmp_path / "h")
    assert plan_a.key == plan_b.key  # the build knows nothing of either stimulus
    runner = get_runner("icarus")
    build_dir = tmp_path / "build"
    runner.build(build_dir=build_dir, **plan_a.build_kwargs("icarus"))
    stamp = (build_dir / "sim.vvp").stat().st_mtime_ns
    caps = [run_fast("icarus", c, "fast_video_pass", src, tmp_path / n, build_dir=build_dir) for c, n in ((a, "a"), (b, "b"))]
    assert (build_dir / "sim.vvp").stat().st_mtime_ns == stamp
    for cap, case in zip(caps, (a, b)):
        # A pass-through design returns its input (fast_video_pass.v: out_data = in_data, 1 clock).
        _assert_same_frames(cap, case.load_frames())
        assert cap.facts.latency_clocks == 1 and cap.facts.timed_out is False
    assert caps[0].facts.output_hsync_per_frame == caps[0].facts.input_hsync_per_frame
    # Active-low syncs given at run time: the pass-through resets its outputs to 0 (= active), so it
    # shows one extra sync edge out of reset; every input frame's hsyncs come out after it.
    assert caps[1].facts.output_hsync_per_frame[-2:] == caps[1].facts.input_hsync_per_frame[-2:]
    assert len(caps[1].facts.stall_pixels) > 0


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
@pytest.mark.parametrize("design", ["edge_core", "blur_core"])
def test_sample_cores_fast_path_equals_per_clock_path(design: str, sim: str, tmp_path: Path) -> None:
    pytest.importorskip("vkit.sim.tb.entry")
    _require(sim)
    from vkit.model.pipeline import preset, run_model

    d = _sample_design(design)
    sources = [RTL / f for f in d["sources"]]
    params = _design_parameters(d, 24)
    rng = np.random.default_rng(21)
    shape = (2, 24, 32, 3) if d["pixel_format"] == "rgb888" else (2, 24, 32)
    stalls = {"probability": 0.15, "max_length": 3, "seed": 4}
    caps = []
    for path in ("fast", "slow"):
        work = tmp_path / path
        work.mkdir()
        np.save(work / "frames.npy", rng.integers(0, 256, shape, dtype=np.uint8) if path == "fast" else
                np.load(tmp_path / "fast" / "frames.npy"))
        case = SimCase("video", dict(d["ports"]), str(work / "frames.npy"), str(work / "out" / "cap.npz"), 32, 24,
                       pixel_format=d["pixel_format"], stalls=stalls, seed=3)
        if path == "fast":
            caps.append(run_fast(sim, case, d["top"], sources, work, parameters=params))
        else:
            caps.append(_run_per_clock(sim, case, d["top"], sources, work, parameters=params))
    fast, slow = caps
    for key in ("values", "frame", "line", "column", "clock"):
        np.testing.assert_array_equal(getattr(fast, key), getattr(slow, key), err_msg=key)
    for key in ("latency_clocks", "output_vsync_count", "output_hsync_per_frame", "first_input_clock",
                "xz_data_count", "de_in_blanking"):
        assert getattr(fast.facts, key) == getattr(slow.facts, key), key
    if design == "edge_core":
        # The native run (same vkit_fast_top as a plain executable, no cocotb) gives the identical Capture.
        from vkit.sim.fast.native import native_build, run_native

        work = tmp_path / "fast"
        case = SimCase("video", dict(d["ports"]), str(work / "frames.npy"), str(tmp_path / "native" / "cap.npz"), 32,
                       24, pixel_format=d["pixel_format"], stalls=stalls, seed=3)
        plan = fast_build_plan(d["top"], sources, "verilog", params, None, "video", case.signals,
                               out_dir=work / "harness", pixel_format=case.pixel_format)
        native_build(plan, sim, tmp_path / "native_build")
        native = run_native(case, sim, tmp_path / "native_build", timeout_s=120)
        assert Capture.load(case.capture_file).facts.path == "native" and native.facts.path == "native"
        for cap in (fast, native):
            cap.facts.path = None
            cap.facts.simulator = None
        _assert_same_capture(fast, native)
    # Both equal the bit-exact model on every checked pixel (the model is tested against SciPy/OpenCV).
    frames = np.load(tmp_path / "fast" / "frames.npy")
    spec = preset(d["spec"])
    for view, frame in zip(fast.frames(24, 32), frames):
        want = run_model(spec, frame, keep_stages=False)
        np.testing.assert_array_equal(view.pixels[want.valid_mask], want.output[want.valid_mask])
    # latency_clocks in designs.toml is measured without stalls on tiny32x24; the first line has no stall
    # before its first output pixel only by chance, so check the declared figure on the pipeline instead.
    assert fast.facts.latency_clocks >= d["latency_clocks"]


def _variants() -> list[tuple[str, str | None]]:
    import tomllib

    out: list[tuple[str, str | None]] = []
    for name, d in tomllib.loads((RTL / "designs.toml").read_text())["designs"].items():
        if d.get("language") != "verilog" or "icarus" not in d.get("simulators", []):
            continue
        out.append((name, None))
        out += [(name, bug) for bug in d.get("bugs", {})]
    return out


def _scene_frames(pixel_format: str) -> np.ndarray:
    """Two conveyor frames, 32x24, at ``pixel_format``'s sample width (Y'CbCr converted from RGB)."""
    from vkit.core.vocab import is_rgb, is_ycbcr, sample_bits
    from vkit.video.patterns import make_pattern, ycbcr_frame

    bits, colour = sample_bits(pixel_format), is_rgb(pixel_format) or is_ycbcr(pixel_format)
    out = [make_pattern("conveyor", 24, 32, seed=k + 1, rgb=colour, bits=max(8, bits) if is_ycbcr(pixel_format) else bits)
           for k in range(2)]
    return np.stack([ycbcr_frame(f, pixel_format) if is_ycbcr(pixel_format) else f for f in out])


@pytest.mark.sim
@pytest.mark.parametrize("design,bug", _variants(), ids=[f"{d}-{b or 'good'}" for d, b in _variants()])
def test_fast_and_per_clock_paths_give_the_same_verdict(design: str, bug: str | None, tmp_path: Path) -> None:
    pytest.importorskip("vkit.sim.tb.entry")
    _require("icarus")
    from vkit.video.patterns import box, to_rgb
    from vkit.model.pipeline import preset, run_model
    from vkit.model.spec import PipelineSpec
    from vkit.check.scoreboard import score

    d = _sample_design(design)
    sources = [RTL / f for f in d["sources"]]
    params = _design_parameters(d, 24)
    b = d.get("bugs", {}).get(bug, {}) if bug else {}
    defines = {b["define"]: 1} if bug else {}
    needs = str(b.get("needs", "")).lower()
    if "box" in needs:
        gray = np.stack([box(24, 32, low=10, high=250), box(24, 32, low=0, high=255, margin=5)])
    else:
        gray = np.random.default_rng(17).integers(0, 256, (2, 24, 32), dtype=np.uint8)
    frames = np.stack([to_rgb(g) for g in gray]) if d["pixel_format"] == "rgb888" else gray
    if d["pixel_format"] == "rgb888" and "box" not in needs:
        frames = np.random.default_rng(18).integers(0, 256, (2, 24, 32, 3), dtype=np.uint8)
    extra: dict[str, Any] = {}
    if d["family"] == "video" and "stall" in needs:
        extra["stalls"] = {"probability": 0.15, "max_length": 3, "seed": 2}
    if d["family"] == "stream" and "back-pressure" in needs:
        extra["backpressure"] = {"probability": 0.3, "max_length": 3, "seed": 2}
        extra["stream_gaps"] = {"probability": 0.2, "max_length": 2, "seed": 3}
    if d["pixel_format"] not in ("gray8", "rgb888"):  # wider samples, Y'CbCr: the conveyor scene at the design's format
        frames = _scene_frames(d["pixel_format"])
    spec = preset(d["spec"]) if isinstance(d["spec"], str) else PipelineSpec.from_dict(d["spec"])
    expected = [run_model(spec, f) for f in frames]
    verdicts = []
    for path in ("fast", "slow"):
        work = tmp_path / path
        work.mkdir()
        np.save(work / "frames.npy", frames)
        case = SimCase(d["family"], dict(d["ports"]), str(work / "frames.npy"), str(work / "out" / "cap.npz"), 32, 24,
                       pixel_format=d["pixel_format"], seed=5, pixels_per_clock=d.get("pixels_per_clock", 1),
                       lane_order=d.get("lane_order", "first_low"), reset_active_high=d.get("reset_active_high", True),
                       **extra)
        run = run_fast if path == "fast" else _run_per_clock
        cap = run("icarus", case, d["top"], sources, work, parameters=params, defines=defines)
        verdicts.append(score(expected, cap))
    fast, slow = verdicts
    assert fast.status == slow.status
    kinds = [v.diagnosis.kind if v.diagnosis else None for v in verdicts]
    assert kinds[0] == kinds[1], (kinds, fast.to_dict().get("findings"), slow.to_dict().get("findings"))
    if d["family"] == "video":  # stream back-pressure is not yet clock-aligned between the paths (same draw, offset start)
        assert (fast.mismatches, fast.missing_pixels, fast.extra_pixels) == (slow.mismatches, slow.missing_pixels,
                                                                            slow.extra_pixels)
    if bug is None:
        assert fast.passed, fast.to_dict()


def test_native_build_plan_commands_and_refusals(tmp_path: Path) -> None:
    from vkit.sim.fast.native import native_build_plan, run_native

    plan = fast_build_plan("fast_video_pass", [HDL / "fast_video_pass.v"], None, None, {"BUG_X": 1}, "video",
                           VIDEO_SIGNALS, out_dir=tmp_path / "h")
    icarus = native_build_plan(plan, "icarus", tmp_path / "b")
    assert icarus.commands[0][:2] == ["iverilog", "-g2012"] and "-DBUG_X=1" in icarus.commands[0]
    assert icarus.run[:2] == ["vvp", "-n"] and icarus.key != native_build_plan(plan, "verilator", tmp_path / "b").key
    vhdl = fast_build_plan("fast_video_pass_vhd", [HDL / "fast_video_pass.vhd"], None, None, None, "video",
                           VIDEO_SIGNALS, out_dir=tmp_path / "hv")
    with pytest.raises(ConfigError, match="no native build"):
        native_build_plan(vhdl, "ghdl", tmp_path / "bv")
    with pytest.raises(ConfigError, match="native_build first"):
        run_native(_video_case(tmp_path), "icarus", tmp_path / "empty")
