"""Data words wider than 62 bits (4 RGB888 pixels a clock = 96 bits, 8 gray8 pixels = 64 bits): packed by the
bus layout, written by the stimulus writers, split back by the capture reader, and driven end to end
through a design on every drive path.

Every word is checked against Python's own arbitrary-size integers (the reference: a word is the sum of
its pixel fields shifted to their lanes, as the layout's docstring states); the sample designs are
scored against the model, whose luma is checked against ITU-R BT.601 in test_luma.py and whose 3x3
maximum is checked against SciPy in test_window_kernels.py.
"""

from __future__ import annotations

import json
import tempfile
import tomllib
from pathlib import Path

import numpy as np
import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.core.errors import ConfigError
from vkit.run.config import load_config
from vkit.run.runner import run
from vkit.sim.fast.capture_file import parse_capture_binary, parse_capture_text
from vkit.sim.fast.stimulus import write_words, write_words_hex
from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_VERSION, FAMILY_CODES, video_bit, video_word_fields
from vkit.video.bus import BusLayout
from vkit.video.capture import UNKNOWN
from vkit.video.timing import schedule, tiny
from vkit.video.words import stream_transfers, video_data_words


def _reference_word(pixels: list[tuple[int, int, int]], lane_order: str) -> int:
    """A 4-lane RGB888 word as a Python integer: R in the pixel's top byte, the first pixel lowest (first_low)
    or highest (first_high)."""
    fields = [(r << 16) | (g << 8) | b for r, g, b in pixels]
    if lane_order == "first_high":
        fields = fields[::-1]
    return sum(f << (24 * k) for k, f in enumerate(fields))


@pytest.mark.parametrize("lane_order", ["first_low", "first_high"])
def test_96_bit_words_are_the_python_integer_of_their_pixels(lane_order: str) -> None:
    frames = np.random.default_rng(4).integers(0, 256, (1, 2, 8, 3)).astype(np.uint8)
    bus = BusLayout("rgb888", lanes=4, lane_order=lane_order)
    assert bus.wide and bus.word_bits == 96
    words = bus.bus_words(frames)
    assert words.shape == (1, 2, 2, 4)  # (frames, lines, clocks a line, pixel fields)
    got = bus.word_list(words.reshape(-1, 4))
    want = [_reference_word([tuple(int(c) for c in frames[0, y, 4 * g + k]) for k in range(4)], lane_order)
            for y in range(2) for g in range(2)]
    assert got == want


def test_schedule_words_and_stream_transfers_carry_wide_words() -> None:
    frames = np.random.default_rng(5).integers(0, 256, (2, 3, 8, 3)).astype(np.uint8)
    bus = BusLayout("rgb888", lanes=4, lane_order="first_high")
    sched = schedule(tiny(2, 3), 2, None)
    words = video_data_words(sched, frames, bus, blanking="constant", blanking_value=(1 << 90) | 5)
    ints = bus.word_list(words)
    pix = np.flatnonzero(sched.x >= 0)
    ref = bus.word_list(bus.bus_words(frames).reshape(-1, 4))
    assert [ints[i] for i in pix] == ref  # every active clock carries its group, in raster order
    blank = int(np.flatnonzero(sched.x < 0)[0])
    assert ints[blank] == (1 << 90) | 5  # blanking: the constant word, all 96 bits of it
    t = stream_transfers(frames, bus, blanking="random", seed=3)
    assert bus.word_list(t.data) == ref
    assert max(bus.word_list(t.idle)) >= 1 << 62  # random idle words use the whole 96 bits


def test_stimulus_records_hold_the_whole_word() -> None:
    frames = np.random.default_rng(6).integers(0, 256, (1, 2, 8, 3)).astype(np.uint8)
    bus = BusLayout("rgb888", lanes=4)
    sched = schedule(tiny(2, 2), 1, None)
    words = video_data_words(sched, frames, bus, seed=9)
    fields = video_word_fields(sched, words, 96, None, bus)
    with tempfile.TemporaryDirectory() as tmp:
        nbytes = (96 + 6 + 7) // 8
        raw = write_words(Path(tmp) / "stim.bin", fields).read_bytes()
        hex_lines = write_words_hex(Path(tmp) / "stim.hex", fields, digits=(96 + 6 + 3) // 4).read_text().split()
    # Reference: Python's int.from_bytes of each big-endian record (what $fread fills a reg with).
    records = [int.from_bytes(raw[i:i + nbytes], "big") for i in range(0, len(raw), nbytes)]
    assert [r & ((1 << 96) - 1) for r in records] == bus.word_list(words)
    assert [(r >> video_bit("de", 96)) & 1 for r in records] == sched.de.astype(int).tolist()
    assert [int(h, 16) for h in hex_lines] == records and len(hex_lines[0]) == 26


def _binary_capture(width: int, words: list[int | None]) -> bytes:
    """A binary capture file as the Verilog harness writes it: one pixel record per word (None: X/Z), then the end."""
    nw = (width + 31) // 32
    out = [CAPTURE_MAGIC, CAPTURE_VERSION, FAMILY_CODES["stream"], width]
    for clock, w in enumerate(words):
        out += [clock, ord("P") | ((1 if w is None else 0) << 8)]
        out += [((w or 0) >> (32 * j)) & 0xFFFFFFFF for j in range(nw)]
    out += [len(words), ord("E")] + [0] * nw
    return np.array(out, "<u4").tobytes()


def test_capture_of_a_64_bit_output_bus_splits_into_eight_lanes() -> None:
    rng = np.random.default_rng(7)
    px = rng.integers(0, 256, (3, 8)).tolist()
    px[1][7] = 255  # the top bit of the word set: a negative int64 if the word were kept whole
    bus = BusLayout("gray8", lanes=8, lane_order="first_high")
    # Reference: Python integers, first pixel in bits 63..56.
    words = [sum(v << (8 * (7 - k)) for k, v in enumerate(row)) for row in px]
    want = [v for row in px for v in row] + [UNKNOWN] * 8
    cap = parse_capture_binary(_binary_capture(64, words + [None]), bus=bus)
    assert cap.values.tolist() == want and cap.column.tolist()[:9] == list(range(9))
    text = "# vkit capture 1 stream 64\n" + "".join(f"{i} P {w:x}\n" for i, w in enumerate(words)) + "3 P U\n4 E -\n"
    assert parse_capture_text(text, bus=bus).values.tolist() == want
    with pytest.raises(ConfigError, match="64 bits, wider than the 62 bits one sample holds; give pixels_per_clock"):
        parse_capture_binary(_binary_capture(64, words))


# ------------------------------------------------------------------------------------------------ simulations

MANIFEST = SAMPLE_RTL / "designs.toml"

_SORTCAM = """
[run]
simulators = ["{sim}"]
jobs = 2
cache_dir = "{cache}"
path = "{path}"
waves = "off"

[[import]]
manifest = "{manifest}"
use = ["sortcam_dilate_q4"]
bugs = true

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}]
timings = ["tiny32x24"]
backpressure = [{{ probability = 0.2, max_length = 3 }}]
gaps = [{{ probability = 0.1, max_length = 2 }}]
seeds = [1]
"""


@pytest.mark.sim
@pytest.mark.parametrize("sim, path", [("icarus", "clock"), ("icarus", "fast"), ("icarus", "native"),
                                       ("verilator", "native")])
def test_four_rgb_pixels_a_beat_pass_and_the_reversed_lanes_are_named(tmp_path: Path, build_cache_dir: Path,
                                                                      sim: str, path: str) -> None:
    simulator_available(sim)
    cfg = tmp_path / "sortcam.toml"
    cfg.write_text(_SORTCAM.format(sim=sim, cache=build_cache_dir.as_posix(), path=path, manifest=MANIFEST.as_posix()))
    result = run(load_config(cfg), jobs=2, progress=False, out_dir=tmp_path / "out")
    by_name = {c.id.split("/")[0]: c for c in result.cases}
    bugs = tomllib.loads(MANIFEST.read_text())["designs"]["sortcam_dilate_q4"]["bugs"]
    assert set(by_name) == {"sortcam_dilate_q4"} | {f"sortcam_dilate_q4@{b}" for b in bugs}
    assert by_name["sortcam_dilate_q4"].status == "pass", by_name["sortcam_dilate_q4"].diagnosis
    for bug, body in bugs.items():
        case = by_name[f"sortcam_dilate_q4@{bug}"]
        assert case.status == "fail" and case.diagnosis_kind == body["expect"], (bug, case.diagnosis)


_PASSTHROUGH = """
[run]
simulators = ["{sim}"]
jobs = 1
cache_dir = "{cache}"
path = "{path}"
waves = "off"

[designs.wide8]
top = "{top}"
sources = ["{source}"]
family = "{family}"
pixel_format = "gray8"
pixels_per_clock = 8
lane_order = "{order}"
parameters = {{ {width} = 64 }}

[designs.wide8.spec]
name = "centre_tap"
input = "gray8"
filter = {{ kind = "custom", taps = [[0, 0, 0], [0, 1, 0], [0, 0, 0]] }}

[designs.wide8.ports]
{ports}
[stimulus]
patterns = ["noise", "ramp_h"]
size = [64, 8]
frames = 2
seeds = [1]
"""

_VIDEO_PORTS = {"clock": "clk", "reset": "rst", **{r: r for r in (
    "in_vsync", "in_hsync", "in_de", "in_valid", "in_data", "out_vsync", "out_hsync", "out_de", "out_valid", "out_data")}}
_STREAM_PORTS = {"clock": "clk_i", "reset": "rst_i", "in_valid": "din_vld", "in_ready": "din_rdy", "in_data": "din_pix",
                 "in_sof": "din_first", "in_eol": "din_last", "out_valid": "dout_vld", "out_ready": "dout_rdy",
                 "out_data": "dout_pix", "out_sof": "dout_first", "out_eol": "dout_last"}
_PASS_DESIGNS = {  # family, language -> top, source, width parameter, ports
    ("video", "verilog"): ("video_passthrough", Path(__file__).parent / "hdl" / "video_passthrough.v", "WIDTH",
                           _VIDEO_PORTS),
    ("video", "vhdl"): ("fast_video_pass_vhd", Path(__file__).parent / "hdl_fast" / "fast_video_pass.vhd", "WIDTH",
                        _VIDEO_PORTS),
    ("stream", "vhdl"): ("fast_stream_pass_vhd", Path(__file__).parent / "hdl_fast" / "fast_stream_pass.vhd",
                         "PIX_BITS", _STREAM_PORTS),
}


@pytest.mark.sim
@pytest.mark.parametrize("sim, path, family, order", [
    ("icarus", "clock", "video", "first_high"), ("icarus", "native", "video", "first_low"),
    ("verilator", "native", "video", "first_high"), ("ghdl", "fast", "video", "first_low"),
    ("ghdl", "fast", "stream", "first_high")])
def test_eight_gray_pixels_a_clock_come_back_through_a_64_bit_output(tmp_path: Path, build_cache_dir: Path, sim: str,
                                                                     path: str, family: str, order: str) -> None:
    # A pass-through design behind the centre-tap filter: 64-bit words in and out on every drive path.
    simulator_available(sim)
    top, source, width, ports = _PASS_DESIGNS[(family, "vhdl" if sim == "ghdl" else "verilog")]
    cfg = tmp_path / "wide8.toml"
    cfg.write_text(_PASSTHROUGH.format(sim=sim, cache=build_cache_dir.as_posix(), path=path, order=order, top=top,
                                       source=source.as_posix(), family=family, width=width,
                                       ports="".join(f'{r} = "{p}"\n' for r, p in ports.items())))
    result = run(load_config(cfg), jobs=1, progress=False, out_dir=tmp_path / "out")
    assert [c.status for c in result.cases] == ["pass", "pass"], [c.diagnosis for c in result.cases]


def test_widths_json_gives_the_lane_layout(capsys: pytest.CaptureFixture[str]) -> None:
    from vkit.cli import main

    assert main(["widths", "edge", "--json", "--pixels-per-clock", "4", "--lane-order", "first_high"]) == 0
    out = json.loads(capsys.readouterr().out)
    bus = out["bus"]
    # 4 RGB888 pixels: 4 x 3 x 8 = 96 bits, the first pixel in the top 24 (bits 95..72) with first_high.
    assert (bus["pixels_per_clock"], bus["lane_order"], bus["word_bits"], bus["sample_bits"]) == (4, "first_high", 96, 8)
    assert bus["component_order"] == "RGB" and "pixel 0 in bits 95..72" in bus["layout"]
    assert bus["output_word_bits"] == 32 and [s["name"] for s in out["stages"]][0] == "input"


@pytest.mark.sim
def test_export_of_the_four_pixel_design_runs_without_python_and_replays(tmp_path: Path, capsys) -> None:
    import subprocess

    from vkit.cli import main
    from vkit.sim.simulators import find, subprocess_env

    simulator_available("icarus")
    cfg = tmp_path / "sortcam.toml"
    cfg.write_text(_SORTCAM.format(sim="icarus", cache=(tmp_path / "cache").as_posix(), path="native",
                                   manifest=MANIFEST.as_posix()).replace("gaps = [", "# gaps = ["))
    for name, verdict in (("sortcam_dilate_q4", "vkit: PASS"), ("sortcam_dilate_q4@out_first_low", "vkit: FAIL")):
        out = tmp_path / name
        assert main(["export", str(cfg), f"{name}/icarus/conveyor-s1/32x24/nogap-bp0.2m3", "--out", str(out)]) == 0
        log = ""
        for cmd in ("iverilog -g2012 -s tb_vkit -o tb_vkit.vvp tb_vkit.v vkit_harness.v".split()
                    + [str(SAMPLE_RTL / "sortcam_dilate_q4.v")] + (["-DSORTCAM_OUT_FIRST_LOW=1"] if "@" in name else []),
                    ["vvp", "-n", "tb_vkit.vvp"]):
            res = subprocess.run(cmd, cwd=out, env=subprocess_env(find("icarus")), capture_output=True, text=True)
            log += res.stdout + res.stderr
        assert verdict in log, log[-1500:]
        capsys.readouterr()
        code = main(["replay", str(out)])
        printed = capsys.readouterr().out
        if "@" in name:
            assert code != 0 and "lanes:" in printed and "lane 0 carries pixel 3" in printed, printed
        else:
            assert code == 0, printed


def test_scaffold_reads_the_96_bit_stream_as_four_rgb_pixels(tmp_path: Path) -> None:
    # vkit init on the sample as a user would run it: the stream family from the AXI4-Stream names, the
    # active-low reset from its name, and 4 pixels a clock of rgb888 from the 96-bit data port.
    from vkit.run.scaffold import scaffold

    scaffold("sortcam_dilate_q4", [SAMPLE_RTL / "sortcam_dilate_q4.v"], tmp_path / "kit", simulators=["icarus"])
    design = tomllib.loads((tmp_path / "kit" / "vkit.toml").read_text())["designs"]["sortcam_dilate_q4"]
    assert (design["family"], design["pixel_format"], design["pixels_per_clock"]) == ("stream", "rgb888", 4)
    assert design["reset_active_high"] is False and design["ports"]["in_data"] == "s_axis_tdata"
    # the lane order cannot be read from ports: the scaffold writes the default and the user sets first_high
    assert design["lane_order"] == "first_low"
