"""Bad input, one case at a time: the exact line `vkit run` prints, its exit code, and what is kept.

Exit code 1 means the design did something wrong (the verdict is the design's); exit code 2 means the
config, an input file or a tool is wrong and nothing could be judged. Every simulated case uses Icarus
and a 32x24 frame. The broken designs are `tests/hdl_errors/blur_mangle.v`, the sample blur core with
its output mangled one way per MODE parameter.
"""

from __future__ import annotations

import json
import re
import shlex
import struct
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from conftest import REPO, SAMPLE_RTL, simulator_available
from vkit.cli import main
from vkit.report.writers import safe_name

MANIFEST = SAMPLE_RTL / "designs.toml"
MANGLE_SOURCES = [SAMPLE_RTL / "window3x3.v", SAMPLE_RTL / "blur_core.v", REPO / "tests" / "hdl_errors" / "blur_mangle.v"]
PORTS = {
    "clock": "clk", "reset": "rst", "in_vsync": "in_vsync", "in_hsync": "in_hsync", "in_de": "in_de",
    "in_valid": "in_valid", "in_data": "in_data", "out_vsync": "out_vsync", "out_hsync": "out_hsync",
    "out_de": "out_de", "out_valid": "out_valid", "out_data": "out_data",
}
IMPULSE = 'patterns = ["impulse"]\ntimings = ["tiny32x24"]\n'
CASE = "impulse-s1/tiny32x24/nostall"


def _toml_table(d: dict[str, object]) -> str:
    return "{ " + ", ".join(f"{k} = {json.dumps(v)}" for k, v in d.items()) + " }"


def _mangle(mode: int, name: str | None = None, ports: dict[str, str] | None = None, extra: str = "") -> str:
    sources = ", ".join(json.dumps(str(s)) for s in MANGLE_SOURCES)
    return (f"[designs.{name or f'mangle{mode}'}]\ntop = \"blur_mangle\"\nsources = [{sources}]\nspec = \"blur\"\n"
            f"parameters = {{ MODE = {mode} }}\nports = {_toml_table(ports or PORTS)}\n{extra}")


def _config(tmp_path: Path, designs: str, stimulus: str = IMPULSE, run: str = "", cache: Path | None = None) -> Path:
    p = tmp_path / "vkit.toml"
    cache_line = f'cache_dir = "{cache}"\n' if cache is not None else ""
    p.write_text(f'[run]\nsimulators = ["icarus"]\nout_dir = "out"\n{cache_line}{run}\n{designs}\n[stimulus]\n{stimulus}')
    return p


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, list[str], str]:
    code = main(["run", *argv])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.out + captured.err
    problems = [ln for ln in captured.out.splitlines() if ln.startswith(("FAIL ", "ERROR "))]
    return code, problems, captured.err.strip()


def _report(tmp_path: Path) -> dict:
    return json.loads((tmp_path / "out" / "report.json").read_text())


def _case_dir(tmp_path: Path, case_id: str) -> Path:
    return tmp_path / "out" / safe_name(case_id)


# ------------------------------------------------------------------------------------------ ports


@pytest.mark.sim
def test_misnamed_port_lists_ports_and_suggests_the_closest(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    cfg = _config(tmp_path, _mangle(0, ports={**PORTS, "out_de": "out_den"}), cache=build_cache_dir)
    code, problems, _ = _run(capsys, str(cfg))
    assert code == 2
    assert problems == [
        f"ERROR mangle0/icarus/{CASE}: design mangle0: ports.out_de = 'out_den' is not a port of blur_mangle (its "
        "ports: clk, rst, in_vsync, in_hsync, in_de, in_valid, in_data, out_vsync, out_hsync, out_de, out_valid, "
        "out_data); did you mean 'out_de'?"
    ]
    (case,) = _report(tmp_path)["cases"]
    assert case["status"] == "error" and "'out_den'" in case["diagnosis"]["message"]


@pytest.mark.sim
def test_missing_port_is_caught_by_the_simulator_side_too(tmp_path, build_cache_dir, capsys):
    """A port the HDL reader cannot check (a name the design lacks entirely): cocotb's own check, capture kept."""
    simulator_available("icarus")
    from vkit.run.config import expand_matrix, load_config
    from vkit.run.builds import build_design
    from vkit.run.inputs import make_frames
    from vkit.run.simulate import simulate
    from vkit.sim.buildcache import BuildCache

    cfg = load_config(_config(tmp_path, _mangle(0, ports={**PORTS, "out_de": "frame_de"}), cache=build_cache_dir))
    (case,) = expand_matrix(cfg)
    sim_dir = tmp_path / "sim"
    outcome = build_design(case, BuildCache(build_cache_dir))
    capture_file = simulate(case, outcome.build_dir, sim_dir, make_frames(case), 60)
    from vkit.video.capture import Capture

    meta = Capture.load(capture_file).facts
    assert meta.error.startswith("ConfigError: role 'out_de' -> port 'frame_de' not found in DUT 'blur_mangle'; ")
    assert (sim_dir / "capture.error.txt").read_text().strip() == meta.error


@pytest.mark.sim
def test_port_too_narrow_for_the_pixel_format(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    design = _mangle(0).replace('spec = "blur"', 'spec = "edge"\npixel_format = "rgb888"')
    code, problems, _ = _run(capsys, str(_config(tmp_path, design, cache=build_cache_dir)))
    assert code == 2
    assert problems == [
        f"ERROR mangle0/icarus/{CASE}: design mangle0: ports.in_data = 'in_data' is 8 bits wide but "
        "pixel_format rgb888 needs 24 bits; widen the port or use a narrower pixel_format"
    ]


# ------------------------------------------------------------------------------------------ what the DUT does


@pytest.mark.sim
def test_x_on_outputs(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    code, problems, _ = _run(capsys, str(_config(tmp_path, _mangle(1), cache=build_cache_dir)))
    assert code == 1
    assert problems == [
        f"FAIL mangle1/icarus/{CASE}: xz: 768 output pixels carried X/Z, first at frame 0 (x=0, y=0) clock 47; "
        "reset or initialise the registers on the output data path; 768 of 768 pixels arrived"
    ]
    (case,) = _report(tmp_path)["cases"]
    assert case["counts"]["xz_pixels"] == 768
    assert (tmp_path / "out" / case["files"]["capture"]).is_file()
    assert (tmp_path / "out" / case["files"]["waves"]).is_file()  # a failing case gets its waves


@pytest.mark.sim
@pytest.mark.parametrize("path", ["clock", "native"])
def test_silent_design_times_out_and_keeps_the_partial_capture(tmp_path, build_cache_dir, capsys, path):
    # clock by clock the monitor waits for the frame until timeout_clocks; the harness (the default, native)
    # stops once the stimulus has played and drained: the same verdict, each saying how its run ended
    simulator_available("icarus")
    cfg = _config(tmp_path, _mangle(2, extra="timeout_clocks = 3000\n"), cache=build_cache_dir, run='waves = "off"\n')
    code, problems, _ = _run(capsys, str(cfg), "--path", path)
    assert code == 1
    ended = "the run timed out after 3000 clocks" if path == "clock" else "the run ended"
    assert problems == [
        f"FAIL mangle2/icarus/{CASE}: missing: no output: 0 of 768 pixels arrived ({ended}); check output "
        "data-enable/valid and reset; 0 of 768 pixels arrived"
    ]
    (case,) = _report(tmp_path)["cases"]
    assert case["status"] == "no_output" and case["drive"] == path
    from vkit.video.capture import Capture

    cap = Capture.load(tmp_path / "out" / case["files"]["capture"])
    assert len(cap) == 0
    if path == "clock":
        assert cap.facts.timed_out and cap.facts.clocks_run >= 3000
    else:
        assert not cap.facts.timed_out and 0 < cap.facts.clocks_run < 3000
    assert "waves" not in case["files"]  # waves = "off"


@pytest.mark.sim
@pytest.mark.parametrize(
    ("mode", "line"),
    [
        (3, "timing: data-enable lags the pixel data by 1 clock: 3 of 3 lines carry 31 pixels, each the expected "
            "line shifted by one with one pixel lost or added at the start (the first pixel of each line falls "
            "outside data-enable); delay the data-enable by one less clock so it matches the data path; 744 of 768 "
            "pixels arrived; first timing error: frame 0: 24 line(s) do not carry 32 pixels (line 0: 31, line 1: "
            "31, line 2: 31, line 3: 31, line 4: 31 (+19 more))"),
        (4, "timing: 2 frame(s) came out, 1 were sent: frame count wrong: check vsync generation and the "
            "end-of-frame flush; 792 of 768 pixels arrived; first timing error: frame 0: 23 line(s) do not carry "
            "32 pixels (line 0: 33, line 1: 33, line 2: 33, line 3: 33, line 4: 33 (+18 more))"),
        (5, "shift: output is the expected image shifted right by 0 pixels and up by 1 line: line offset off by one "
            "(line-buffer tap or the line that is emitted first); 736 of 768 pixels arrived; first timing error: "
            "frame 0: 23 lines arrived, expected 24"),
        (6, "timing: frame 0: 25 lines arrived, expected 24; 800 of 768 pixels arrived"),
    ],
    ids=["too-few-pixels", "too-many-pixels", "too-few-lines", "too-many-lines"],
)
def test_wrong_pixel_and_line_counts(tmp_path, build_cache_dir, capsys, mode, line):
    simulator_available("icarus")
    cfg = _config(tmp_path, _mangle(mode), cache=build_cache_dir, run='waves = "off"\n')
    code, problems, _ = _run(capsys, str(cfg))
    assert code == 1
    assert problems == [f"FAIL mangle{mode}/icarus/{CASE}: {line}"]


@pytest.mark.sim
def test_frame_size_unlike_the_config(tmp_path, build_cache_dir, capsys):
    """The stream core counts lines itself (HEIGHT): built for 16 lines, fed 24-line frames."""
    simulator_available("icarus")
    sources = ", ".join(json.dumps(str(SAMPLE_RTL / f)) for f in ("window3x3.v", "stream_core.v"))
    ports = {"clock": "clk", "reset": "rst", "in_valid": "s_valid", "in_ready": "s_ready", "in_data": "s_data",
             "in_sof": "s_sof", "in_eol": "s_eol", "out_valid": "m_valid", "out_ready": "m_ready",
             "out_data": "m_data", "out_sof": "m_sof", "out_eol": "m_eol"}
    design = (f'[designs.stream16]\ntop = "stream_core"\nsources = [{sources}]\nfamily = "stream"\nspec = "sharpen"\n'
              f'parameters = {{ HEIGHT = 16 }}\ntimeout_clocks = 8000\nports = {_toml_table(ports)}\n')
    code, problems, _ = _run(capsys, str(_config(tmp_path, design, cache=build_cache_dir, run='waves = "off"\n')))
    assert code == 1
    assert len(problems) == 1
    assert problems[0].startswith("FAIL stream16/icarus/impulse-s1/32x24/nogap-nobp: ")
    assert "768 pixels arrived" in problems[0]


@pytest.mark.sim
def test_declared_latency_contradicts_the_measured_one(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    cfg = _config(tmp_path, _mangle(0, extra='latency_clocks = 40\nlatency_timing = "tiny32x24"\n'),
                  cache=build_cache_dir, run='waves = "off"\n')
    code, problems, _ = _run(capsys, str(cfg))
    assert code == 1
    # blur_core: h_total 40 + 1 + 5 pipeline clocks = 46 (sample_rtl/designs.toml), +1 output register
    assert problems == [
        f"FAIL mangle0/icarus/{CASE}: timing: latency: declared 40 clocks, measured 47 clocks (tolerance +-0): "
        "update the declared latency or fix the pipeline depth; 768 of 768 pixels arrived"
    ]


# ------------------------------------------------------------------------------------------ images


def _image_config(tmp_path: Path, image: Path, cache: Path | None = None, timings: str = '["tiny"]') -> Path:
    design = f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\n'
    return _config(tmp_path, design, f'images = ["{image}"]\ntimings = {timings}\n', cache=cache)


@pytest.mark.sim
def test_image_of_the_wrong_mode(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    img = tmp_path / "belt.png"
    Image.fromarray(np.full((24, 32, 3), [10, 200, 30], np.uint8), "RGB").save(img)
    code, problems, _ = _run(capsys, str(_image_config(tmp_path, img, build_cache_dir)))
    assert code == 2
    assert problems == [
        f"ERROR blur_core/icarus/belt-s1/tiny32x24/nostall: image {img}: is RGB but gray8 was asked; "
        "pass --convert / convert=True for ITU-R 601-2 luma, or load rgb888 and use vkit.model.luma "
        "(in a vkit config: convert = true under [stimulus])"
    ]


@pytest.mark.sim
def test_image_of_the_wrong_bit_depth(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    img = tmp_path / "deep.png"
    Image.fromarray(np.full((24, 32), 40000, np.uint16)).save(img)  # 16-bit gray PNG (mode I;16)
    code, problems, _ = _run(capsys, str(_image_config(tmp_path, img, build_cache_dir)))
    assert code == 2
    assert problems == [
        f"ERROR blur_core/icarus/deep-s1/tiny32x24/nostall: image {img}: mode is I;16 (16-bit gray), vkit reads "
        "8-bit gray or RGB; pass --convert / convert=True to keep the top 8 bits, or re-save it as 8-bit gray or RGB "
        "(in a vkit config: convert = true under [stimulus])"
    ]


def test_image_smaller_than_the_timing(tmp_path, capsys):
    img = tmp_path / "small.png"
    Image.fromarray(np.zeros((16, 16), np.uint8)).save(img)
    code, problems, err = _run(capsys, str(_image_config(tmp_path, img, timings='["tiny32x24"]')))
    assert code == 2
    assert err == (f"vkit: error: image {img} is 16x16, smaller than timing tiny32x24 (32x24); "
                   "use a larger image or a smaller timing")


def _png_header_only(path: Path, width: int, height: int) -> None:
    """A PNG whose header claims width x height 8-bit gray pixels (no pixel data follows)."""
    import zlib

    def chunk(kind: bytes, body: bytes) -> bytes:
        return struct.pack(">I", len(body)) + kind + body + struct.pack(">I", zlib.crc32(kind + body))

    ihdr = struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0)
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IEND", b""))


def test_decompression_bomb_is_refused_before_decoding(tmp_path, capsys):
    img = tmp_path / "bomb.png"
    _png_header_only(img, 100_000, 100_000)
    code, _, err = _run(capsys, str(_image_config(tmp_path, img)))
    assert code == 2
    assert err == (f"vkit: error: image {img}: claims 10000000000 pixels, over the limit of 40000000 "
                   "(decompression-bomb guard); raise [stimulus] max_image_pixels (now 40000000) if you trust the file")


# ------------------------------------------------------------------------------------------ config and tools


def test_malformed_toml_names_file_line_and_column(tmp_path, capsys):
    p = tmp_path / "vkit.toml"
    p.write_text('[run]\nsimulators = ["icarus"\nout_dir = "out"\n')
    code, _, err = _run(capsys, str(p))
    assert code == 2
    assert err == f"vkit: error: {p}:3:1: Unclosed array (TOML syntax); fix that line"


def test_unknown_key_suggests_the_closest(tmp_path, capsys):
    code, _, err = _run(capsys, str(_config(tmp_path, _mangle(0), run='simulater = "icarus"\n')))
    assert code == 2
    assert err == "vkit: error: vkit.toml [run]: unknown key 'simulater'; did you mean 'simulators'?"
    code, _, err = _run(capsys, str(_config(tmp_path, _mangle(0).replace("spec =", "spek ="))))
    assert code == 2
    assert err == "vkit: error: vkit.toml [designs.mangle0]: unknown key 'spek'; did you mean 'spec'?"


def test_unknown_simulator_suggests_the_closest(tmp_path, capsys):
    cfg = str(_config(tmp_path, _mangle(0)))
    code, _, err = _run(capsys, cfg, "--sim", "icarsu")
    assert code == 2
    assert err == "vkit: error: command line: --sim = 'icarsu' is not a simulator vkit drives; did you mean 'icarus'?"
    code, _, err = _run(capsys, cfg, "--sim", "questa")
    assert code == 2
    assert err == ("vkit: error: command line: --sim = 'questa' is not a simulator vkit drives; "
                   "use one of verilator, icarus, ghdl")


def test_simulator_not_installed_gives_the_install_hint(tmp_path, capsys, monkeypatch):
    from vkit.sim import simulators

    cfg = str(_config(tmp_path, _mangle(0)))
    empty = tmp_path / "empty-bin"
    empty.mkdir()
    monkeypatch.setenv("PATH", str(empty))
    simulators._find_cached.cache_clear()
    try:
        code, _, err = _run(capsys, cfg)
    finally:
        monkeypatch.undo()
        simulators._find_cached.cache_clear()
    assert code == 2
    assert err == "vkit: error: simulator icarus is not usable: iverilog not found on PATH: apt-get install iverilog"


@pytest.mark.sim
def test_hdl_compile_error_shows_the_simulators_line(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    bad = tmp_path / "bad.v"
    bad.write_text("module bad(input clk);\n  wire x = ;\nendmodule\n")
    design = f'[designs.bad]\ntop = "bad"\nsources = ["{bad}"]\nspec = "blur"\nports = {_toml_table(PORTS)}\n'
    code, problems, _ = _run(capsys, str(_config(tmp_path, design, cache=build_cache_dir)))
    assert code == 2
    assert len(problems) == 1
    m = re.fullmatch(rf"ERROR bad/icarus/{CASE}: icarus could not build bad \(top bad\): {re.escape(str(bad))}:2: "
                     r"syntax error \(full log: (\S+build\.log)\)", problems[0])
    assert m, problems[0]
    assert "syntax error" in Path(m.group(1)).read_text()  # the tool's own log is kept


def test_unwritable_output_folder(tmp_path, capsys):
    simulator_available("icarus")
    blocker = tmp_path / "blocker"
    blocker.write_text("a file where the report folder should go\n")
    code, _, err = _run(capsys, str(_config(tmp_path, _mangle(0))), "--out", str(blocker / "out"))
    assert code == 2
    assert err == (f"vkit: error: output folder {blocker / 'out'} cannot be written (Not a directory); "
                   "pick a writable folder with --out or [run] out_dir")


def test_no_subprocess_call_uses_a_shell():
    """Every subprocess call takes an argument list; nothing goes through /bin/sh."""
    offenders = []
    for path in sorted((REPO / "vkit").rglob("*.py")):
        text = path.read_text()
        for pattern in (r"shell\s*=\s*True", r"os\.system\(", r"os\.popen\(", r"commands\.getoutput"):
            if re.search(pattern, text):
                offenders.append(f"{path.relative_to(REPO)}: {pattern}")
    assert offenders == []


@pytest.mark.sim
def test_case_ids_cannot_escape_the_output_folder(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    # a manifest whose design name and a pattern label both try to climb out of the report folder
    manifest = tmp_path / "rtl" / "designs.toml"
    manifest.parent.mkdir()
    text = MANIFEST.read_text()
    start = text.index("[designs.blur_core]")
    block = text[start:text.index("[designs.blur_core.bugs", start)]
    block = block.replace('sources = ["window3x3.v", "blur_core.v"]',
                          f'sources = ["{SAMPLE_RTL / "window3x3.v"}", "{SAMPLE_RTL / "blur_core.v"}"]')
    manifest.write_text(block.replace("[designs.blur_core]", '[designs."../../up"]')
                        .replace("[designs.blur_core.ports]", '[designs."../../up".ports]'))
    design = f'[[import]]\nmanifest = "{manifest}"\n'
    stim = 'patterns = [{ name = "impulse", label = "../../../escape" }]\ntimings = ["tiny32x24"]\n'
    before = {p for p in tmp_path.parent.iterdir()}
    code, problems, _ = _run(capsys, str(_config(tmp_path, design, stim, cache=build_cache_dir)))
    assert code == 0, problems
    assert {p for p in tmp_path.parent.iterdir()} == before
    out = (tmp_path / "out").resolve()
    written = [p.resolve() for p in (tmp_path / "out").rglob("*")]
    assert written and all(out in p.parents for p in written)
    (case,) = _report(tmp_path)["cases"]
    assert case["id"] == "../../up/icarus/../../../escape-s1/tiny32x24/nostall"
    assert not any(".." in part for part in Path(case["files"]["verdict"]).parts)


# ------------------------------------------------------------------------------------------ waves and reruns


def _fst_times(path: Path) -> tuple[int, int, int]:
    """Start time, end time and variable count from an FST header block.

    FST layout (GTKWave's fstapi.h, from memory): block type byte 0 (header), 8-byte section length,
    then big-endian u64 start time, u64 end time, f64 endian test, u64 writer memory, u64 scope count,
    u64 variable count.
    """
    data = path.read_bytes()
    assert data[0] == 0, "FST files start with the header block"
    start, end = struct.unpack(">QQ", data[9:25])
    nvars = struct.unpack(">Q", data[49:57])[0]
    return start, end, nvars


@pytest.mark.sim
def test_failing_case_gets_a_limited_wave_file_and_a_rerun_command(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    design = f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = "only"\n'
    cfg = _config(tmp_path, design, 'patterns = [{ name = "conveyor", seeds = [3] }]\ntimings = ["tiny32x24"]\n'
                  'stalls = [{ probability = 0.1, max_length = 3 }]\n', cache=build_cache_dir)
    code = main(["run", str(cfg), "--only", "blur_truncate"])
    out_text = capsys.readouterr().out
    assert code == 1, out_text
    (case,) = _report(tmp_path)["cases"]
    cid = case["id"]
    assert cid == "blur_core@blur_truncate/icarus/conveyor-s3/tiny32x24/stall0.1m3"
    verdict_file = tmp_path / "out" / case["files"]["verdict"]
    waves_meta = json.loads(verdict_file.read_text())["meta"]["waves"]
    wave = tmp_path / "out" / case["files"]["waves"]
    assert wave.is_file() and waves_meta["file"] == case["files"]["waves"]
    assert f"  waves: {wave.resolve()}" in out_text.splitlines()

    # the window: two lines of 40 clocks either side of the first mismatching pixel's clock
    first_clock = case["verdict"]["first_mismatches"][0]["clock"]
    assert waves_meta["anchor_clock"] == first_clock
    assert waves_meta["first_clock"] == max(0, first_clock - 80) and waves_meta["last_clock"] == first_clock + 80
    start, end, nvars = _fst_times(wave)
    assert (start, end) == (waves_meta["from_ps"], waves_meta["to_ps"])
    clocks_run = case["verdict"]["pixels_arrived"]  # at least one clock per pixel
    run_ps = clocks_run * 10_000
    assert end - start <= 163 * 10_000 < run_ps  # limited: 163 clocks of a run of more than 768
    assert nvars >= 12  # non-trivial: at least the 12 ports, plus the core's internals
    assert wave.stat().st_size > 1000

    # the rerun command reruns exactly this case, with the same seeds, to the same verdict
    rerun = case["verdict"] and json.loads(verdict_file.read_text())["meta"]["rerun"]
    assert f"  rerun: {rerun}" in out_text.splitlines()
    words = shlex.split(rerun)
    assert words[:2] == ["vkit", "run"] and words[words.index("--only") + 1] == cid
    proc = subprocess.run([sys.executable, "-m", "vkit", *words[1:], "--no-waves"], capture_output=True,
                          text=True, check=False, timeout=300)
    assert proc.returncode == 1, proc.stdout + proc.stderr
    again = json.loads((Path(words[words.index("--out") + 1]) / "report.json").read_text())
    (case2,) = again["cases"]
    assert case2["id"] == cid
    for key in ("status", "mismatches", "max_abs_error"):
        assert case2["counts"].get(key, case2.get(key)) == case["counts"].get(key, case.get(key))
    assert case2["verdict"]["first_mismatches"] == case["verdict"]["first_mismatches"]
    assert case2["diagnosis"]["message"] == case["diagnosis"]["message"]


@pytest.mark.sim
def test_waves_on_request_for_a_passing_case(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    code = main(["run", str(_config(tmp_path, _mangle(0), cache=build_cache_dir)), "--waves"])
    capsys.readouterr()
    assert code == 0
    (case,) = _report(tmp_path)["cases"]
    start, end, nvars = _fst_times(tmp_path / "out" / case["files"]["waves"])
    assert end > start and nvars >= 12


# ------------------------------------------------------------------------------------------ vkit init


def test_init_writes_a_starter_kit_and_refuses_to_overwrite(tmp_path, capsys):
    sources = [str(SAMPLE_RTL / "window3x3.v"), str(SAMPLE_RTL / "blur_core.v")]
    assert main(["init", "blur_core", *sources, "--out", str(tmp_path / "kit"), "--sim", "icarus"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("vkit init: blur_core (verilog, family video, spec blur)")
    from vkit.run.config import load_config

    cfg = load_config(tmp_path / "kit" / "vkit.toml")
    assert cfg.designs["blur_core"].ports["out_de"] == "out_de"
    assert main(["init", "blur_core", *sources, "--out", str(tmp_path / "kit")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("vkit: error: vkit init: ") and err.endswith("nothing was written; pass --force to overwrite")


# ------------------------------------------------------------------------------------------ vkit merge


_OK_CASE = {"id": "a", "status": "pass", "passed": True, "verdict": {"status": "pass", "passed": True}}


@pytest.mark.parametrize(("body", "line"), [
    ({}, "report: 'totals' is a required property"),
    ([], "report: [] is not of type 'object'"),
    ({"totals": {"cases": 1, "passed": 1, "failed": 0, "errors": 0},
      "cases": [{"id": "a", "status": "pass", "passed": True}]}, "report.cases[0]: 'verdict' is a required property"),
])
def test_merge_refuses_what_is_not_a_report(tmp_path, capsys, body, line):
    shard = tmp_path / "shard.json"
    shard.write_text(json.dumps(body))
    assert main(["merge", str(tmp_path / "all"), str(shard)]) == 2
    out, err = capsys.readouterr()
    assert out == "" and "Traceback" not in err
    assert err.strip() == (f"vkit: error: merge: {shard}: not a vkit report: {line}; pass the report.json that a vkit "
                           "run or vkit merge wrote")
    assert not (tmp_path / "all").exists()  # nothing written


def test_merge_refuses_shards_without_cases_and_a_file_as_output(tmp_path, capsys):
    empty = tmp_path / "empty.json"
    empty.write_text(json.dumps({"totals": {"cases": 0, "passed": 0, "failed": 0, "errors": 0}, "cases": []}))
    assert main(["merge", str(tmp_path / "all"), str(empty), str(empty)]) == 2
    assert capsys.readouterr().err.strip() == ("vkit: error: merge: the 2 report(s) hold no case; a shard that ran "
                                               "nothing is a broken shard: check each shard's run")
    good, blocker = tmp_path / "good.json", tmp_path / "blocker"
    good.write_text(json.dumps({"totals": {"cases": 1, "passed": 1, "failed": 0, "errors": 0}, "cases": [_OK_CASE]}))
    blocker.write_text("x")
    assert main(["merge", str(blocker), str(good)]) == 2
    assert capsys.readouterr().err.strip() == (f"vkit: error: merge: output folder {blocker} is a file; give a folder "
                                               "(new or existing) for the merged report")
    assert main(["merge", str(tmp_path / "all"), str(good)]) == 0


# ------------------------------------------------------------------------------------------ verdicts that say what happened


@pytest.mark.sim
@pytest.mark.parametrize("drive", ["clock", "fast"])
def test_x_on_the_output_data_enable_is_named_with_its_clock(tmp_path, build_cache_dir, capsys, drive):
    """MODE 7 never resets out_de/out_valid: not just "no output", but which control held X/Z, from which clock."""
    simulator_available("icarus")
    cfg = _config(tmp_path, _mangle(7), cache=build_cache_dir)
    code, problems, _ = _run(capsys, str(cfg), "--no-waves", "--path", drive)
    assert code == 1
    first = {"clock": 0, "fast": 1}[drive]  # the harness counts the first clock after reset as 1
    assert problems == [
        f"FAIL mangle7/icarus/{CASE}: xz: no output: 0 of 768 pixels arrived: control output out_de held X/Z on "
        f"1000+ clock(s) (read as low), first at clock {first}; reset every output control register (data-enable, "
        "valid, syncs); 0 of 768 pixels arrived"
    ]


@pytest.mark.sim
def test_data_enable_held_high_is_named_first(tmp_path, build_cache_dir, capsys):
    """MODE 8 holds out_de high every clock: the stuck data-enable leads, not "last line not flushed"."""
    simulator_available("icarus")
    code, problems, _ = _run(capsys, str(_config(tmp_path, _mangle(8), cache=build_cache_dir)), "--no-waves")
    assert code == 1
    (line,) = problems
    # 1039 clock by clock, 1038 on the harness (the default): the design raises data-enable on its first clock
    # out of reset, and cocotb's reset release on Icarus reaches the design one edge before the harness's does
    assert re.match(f"FAIL mangle8/icarus/{re.escape(CASE)}: timing: frame 0: data-enable never goes low between "
                    "lines: line 0 is 103[89] pixels long, expected 32; drive data-enable low in horizontal blanking, "
                    "between the lines; ", line), line
    assert "flushed" not in line


def _port_case(tmp_path: Path, out_bits: int):  # noqa: ANN202 - vkit.run.config.Case
    """blur_mangle's ports with out_data ``out_bits`` wide (only the header is read: no simulator)."""
    from vkit.run.config import expand_matrix, load_config

    top = tmp_path / "narrow.v"
    top.write_text("module narrow(input clk, input rst, input in_vsync, input in_hsync, input in_de, input in_valid,\n"
                   f"  input [7:0] in_data, output out_vsync, output out_hsync, output out_de, output out_valid,\n"
                   f"  output [{out_bits - 1}:0] out_data);\nendmodule\n")
    design = f'[designs.n]\ntop = "narrow"\nsources = ["{top}"]\nspec = "blur"\nports = {_toml_table(PORTS)}\n'
    (case,) = expand_matrix(load_config(_config(tmp_path, design)))
    return case


@pytest.mark.parametrize(("bits", "side"), [(4, "narrower"), (12, "wider")])
def test_output_port_width_is_checked_like_the_input(tmp_path, bits, side):
    from vkit.core.errors import ConfigError
    from vkit.run.inputs import check_ports

    with pytest.raises(ConfigError) as err:
        check_ports(_port_case(tmp_path, bits))
    assert str(err.value) == (f"design n: ports.out_data = 'out_data' is {bits} bits wide, {side} than the 8-bit output "
                              f"pixel of spec blur; make the port 8 bits wide or set [output] bits = {bits} in the spec")
    check_ports(_port_case(tmp_path, 8))
