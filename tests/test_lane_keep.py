"""Per-lane valid masks on the stream family (``in_keep`` / ``out_keep``): a line that is not a whole number
of beats ends in a partly filled beat whose mask marks the lanes holding pixels.

Outside references:
- AMBA 4 AXI4-Stream Protocol Specification (ARM IHI 0051A), TKEEP: bit ``n`` of TKEEP qualifies byte ``n``
  of TDATA (bits ``8n+7 .. 8n``); a clear bit marks a null byte that carries nothing (from memory of the
  spec's signal table). With gray8 lanes a pixel is a byte, so the mask of a beat holding its first ``k``
  pixels, first pixel in byte 0, is ``2**k - 1``.
- Words are checked against Python's own integers (a word is the sum of its bytes shifted to their lanes).
- The sharpen model the sample design is scored against is checked against SciPy's ``ndimage.correlate``
  in test_window_kernels.py.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import numpy as np
import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.core.errors import ConfigError
from vkit.run.config import expand_matrix, load_config
from vkit.run.runner import run
from vkit.video.bus import BusLayout
from vkit.video.words import stream_transfers

MANIFEST = SAMPLE_RTL / "designs.toml"
_LIDSCAN = ["window3x3.v", "stream_core.v", "lidscan_sharpen_k4.v"]


def _tkeep(kept_bytes: int) -> int:
    """TKEEP of a beat whose bytes 0 .. kept_bytes-1 hold data (AXI4-Stream: bit n qualifies byte n)."""
    return (1 << kept_bytes) - 1


def test_keep_mask_follows_the_bytes_it_qualifies() -> None:
    low = BusLayout("gray8", lanes=4)
    # a 30-pixel line at 4 pixels a beat: 7 full beats and a last one holding 2 pixels (30 = 7 * 4 + 2)
    assert low.line_keeps(30).tolist() == [_tkeep(4)] * 7 + [_tkeep(2)]
    assert low.line_keeps(32).tolist() == [_tkeep(4)] * 8
    assert low.kept_lanes(_tkeep(3)) == [0, 1, 2]
    # first pixel in the top lane: the mask is mirrored with the lanes, bit k beside lane k
    high = BusLayout("gray8", lanes=4, lane_order="first_high")
    assert high.keep_mask(2) == 0b1100 and high.kept_lanes(0b1100) == [0, 1]
    assert BusLayout("gray10", lanes=2).keep_mask(1) == 0b01


def test_partly_filled_beats_carry_the_line_end_and_the_kept_pixels() -> None:
    frames = np.random.default_rng(7).integers(0, 256, (2, 3, 30)).astype(np.uint8)
    bus = BusLayout("gray8", lanes=4)
    t = stream_transfers(frames, bus, keep=True, seed=3)
    assert t.keep is not None and len(t.data) == len(t.keep) == 2 * 3 * 8
    assert t.eol.reshape(2, 3, 8)[..., -1].all() and not t.eol.reshape(2, 3, 8)[..., :-1].any()
    assert t.sof.nonzero()[0].tolist() == [0, 24]
    for index, (word, keep) in enumerate(zip(t.data.tolist(), t.keep.tolist())):
        f, y, beat = index // 24, index // 8 % 3, index % 8
        pixels = frames[f, y, 4 * beat:4 * beat + 4].tolist()
        assert keep == _tkeep(len(pixels))
        # the kept bytes are the pixels, byte 0 first (Python integers as the reference)
        assert word & keep_bits(keep) == sum(p << (8 * k) for k, p in enumerate(pixels))


def keep_bits(tkeep: int) -> int:
    """The TDATA bits a TKEEP value qualifies, as a mask (bytes whose keep bit is set)."""
    return sum(0xFF << (8 * n) for n in range(4) if tkeep >> n & 1)


def test_without_a_mask_a_short_beat_stays_a_config_error() -> None:
    frames = np.zeros((1, 2, 30), np.uint8)
    with pytest.raises(ConfigError, match=r"pixels_per_clock = 4 is not a divisor of the active width 30 .*in_keep"):
        stream_transfers(frames, BusLayout("gray8", lanes=4))


_CONFIG = """
[run]
simulators = ["{sim}"]
jobs = 2
cache_dir = "{cache}"
path = "{path}"
waves = "off"

[designs.lidscan]
top = "lidscan_sharpen_k4"
sources = {sources}
family = "stream"
spec = "sharpen"
pixel_format = "gray8"
pixels_per_clock = 4
reset_active_high = false
parameters = {{ LINE_MAX = 1024, LINES = 24 }}
frame_parameters = {{ height = "LINES" }}

[designs.lidscan.ports]
{ports}{keeps}

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}]
size = [30, 24]
gaps = [{{ probability = 0.1, max_length = 2 }}]
backpressure = [{{ probability = 0.2, max_length = 3 }}]
seeds = [1]
"""
_KEEPS = 'in_keep = "s_axis_tkeep"\nout_keep = "m_axis_tkeep"'
_AXIS_PORTS = "".join(f'{role} = "{port}"\n' for role, port in (
    ("clock", "aclk"), ("reset", "aresetn"), ("in_valid", "s_axis_tvalid"), ("in_ready", "s_axis_tready"),
    ("in_data", "s_axis_tdata"), ("in_sof", "s_axis_tuser"), ("in_eol", "s_axis_tlast"), ("out_valid", "m_axis_tvalid"),
    ("out_ready", "m_axis_tready"), ("out_data", "m_axis_tdata"), ("out_sof", "m_axis_tuser"), ("out_eol", "m_axis_tlast")))
"""The AXI4-Stream port names of the sample and of the VHDL register slice, as the config's ``ports`` lines."""


def _config(tmp_path: Path, sim: str = "icarus", path: str = "auto", keeps: str = _KEEPS,
            cache: Path | None = None) -> Path:
    sources = json.dumps([(SAMPLE_RTL / s).as_posix() for s in _LIDSCAN])
    cfg = tmp_path / "lidscan.toml"
    cfg.write_text(_CONFIG.format(sim=sim, path=path, sources=sources, ports=_AXIS_PORTS, keeps=keeps,
                                  cache=(cache or tmp_path / "cache").as_posix()))
    return cfg


def test_a_30_pixel_line_without_the_masks_is_refused_before_any_simulation(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="map the stream's per-lane valid masks"):
        expand_matrix(load_config(_config(tmp_path, keeps="")))
    # with both masks mapped the same matrix expands
    assert len(expand_matrix(load_config(_config(tmp_path)))) == 1


def test_auto_drive_takes_the_native_harness_and_callers_without_lanes_are_refused(tmp_path: Path) -> None:
    from vkit.run.builds import pick_drive
    from vkit.sim.fast.build import fast_build_plan

    case = expand_matrix(load_config(_config(tmp_path)))[0]
    assert pick_drive(case, "auto") == "native"
    roles = dict(case.design.ports)
    # a caller that gives no lane count cannot size the masks: refused
    with pytest.raises(ConfigError, match="the harness needs the lane count"):
        fast_build_plan("lidscan", [tmp_path / "lidscan.v"], "verilog", None, None, "stream", roles, 32, 32)
    del roles["out_keep"]
    with pytest.raises(ConfigError, match="both in_keep and out_keep must be mapped"):
        fast_build_plan("lidscan", [tmp_path / "lidscan.v"], "verilog", None, None, "stream", roles, 32, 32, lanes=4)


def test_harness_capture_keeps_only_the_marked_lanes() -> None:
    # a capture as the Verilog harness writes it: a P record per output word, then an M record with its mask
    from vkit.sim.fast.capture_file import parse_capture_binary
    from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_VERSION, FAMILY_CODES

    words = [0x04030201, 0x00000605, 0x0C0B0A09]  # line 0: pixels 1..6 (last beat keeps 2); line 1 starts 9
    masks = [_tkeep(4), _tkeep(2), _tkeep(4)]
    rec = [CAPTURE_MAGIC, CAPTURE_VERSION, FAMILY_CODES["stream"], 32]
    for clock, (w, m) in enumerate(zip(words, masks)):
        rec += [clock, ord("P"), w, clock, ord("M"), m]
        if clock == 1:
            rec += [clock, ord("L"), 0]
    cap = parse_capture_binary(np.array(rec, "<u4").tobytes(), family="stream", height=2, bus=BusLayout("gray8", lanes=4))
    assert cap.values.tolist() == [1, 2, 3, 4, 5, 6, 9, 10, 11, 12]
    assert cap.line.tolist() == [0] * 6 + [1] * 4 and cap.column.tolist() == [0, 1, 2, 3, 4, 5, 0, 1, 2, 3]


def test_scaffold_maps_tkeep_ports_as_the_lane_masks_and_says_so(tmp_path: Path) -> None:
    from vkit.run.scaffold import scaffold

    result = scaffold("lidscan_sharpen_k4", [SAMPLE_RTL / s for s in _LIDSCAN], tmp_path / "kit", simulators=["icarus"])
    design = tomllib.loads(result.config.read_text())["designs"]["lidscan_sharpen_k4"]
    assert design["ports"]["in_keep"] == "s_axis_tkeep" and design["ports"]["out_keep"] == "m_axis_tkeep"
    assert (design["family"], design["pixel_format"], design["pixels_per_clock"]) == ("stream", "gray8", 4)
    assert any("s_axis_tkeep (4 bits) is a per-lane valid mask" in n for n in result.notes), result.notes
    # the stimulus has a line length that leaves a partly filled last beat, for 2, 3, 4 or 8 lanes alike
    widths = [t["h_active"] for t in tomllib.loads(result.config.read_text())["stimulus"]["timings"]]
    assert all(any(w % lanes for w in widths) for lanes in (2, 3, 4, 8)), widths


@pytest.mark.sim
@pytest.mark.parametrize("sim, path", [("icarus", "clock"), ("verilator", "clock"), ("icarus", "native"),
                                       ("verilator", "native"), ("icarus", "fast")])
def test_30_pixel_lines_pass_and_the_all_lanes_kept_bug_is_caught(tmp_path: Path, build_cache_dir: Path,
                                                                    sim: str, path: str) -> None:
    simulator_available(sim)
    cfg = tmp_path / "bugs.toml"
    cfg.write_text(f"""
[run]
simulators = ["{sim}"]
jobs = 2
cache_dir = "{build_cache_dir.as_posix()}"
waves = "off"
path = "{path}"

[[import]]
manifest = "{MANIFEST.as_posix()}"
use = ["lidscan_sharpen_k4"]
bugs = true

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}, "box"]
size = [30, 24]
gaps = [{{ probability = 0.1, max_length = 2 }}]
backpressure = [0, {{ probability = 0.2, max_length = 3 }}]
seeds = [1]
""")
    result = run(load_config(cfg), jobs=2, progress=False, out_dir=tmp_path / "out")
    good = [c for c in result.cases if c.id.startswith("lidscan_sharpen_k4/")]
    bad = [c for c in result.cases if c.id.startswith("lidscan_sharpen_k4@tkeep_all/")]
    assert len(good) == len(bad) == 4
    assert all(c.status == "pass" and c.entry.get("drive") == path for c in good), [c.diagnosis for c in good]
    want = tomllib.loads(MANIFEST.read_text())["designs"]["lidscan_sharpen_k4"]["bugs"]["tkeep_all"]["expect"]
    for c in bad:
        # every line of 30 pixels comes out as 32: the two null lanes of each last beat were taken as pixels
        assert c.status == "fail" and c.diagnosis_kind == want, c.diagnosis
        assert "do not carry 30 pixels" in c.diagnosis and "line 0: 32" in c.diagnosis
        assert "rounded up to whole beats of 4: the last beat's per-lane valid mask (out_keep) marks 2" in c.diagnosis




_SLICE = """
[run]
simulators = ["ghdl"]
jobs = 2
cache_dir = "{cache}"
waves = "off"

[designs.slice]
top = "quad_keep_slice"
sources = ["{source}"]
family = "stream"
pixel_format = "gray8"
pixels_per_clock = 4
reset_active_high = false
parameters = {{ FORCE_KEEP_ALL = {force} }}

[designs.slice.spec]
name = "centre_tap"
input = "gray8"
filter = {{ kind = "custom", taps = [[0, 0, 0], [0, 1, 0], [0, 0, 0]] }}

[designs.slice.ports]
{ports}{keeps}

[stimulus]
patterns = ["noise"]
size = [30, 6]
frames = 2
gaps = [{{ probability = 0.2, max_length = 2 }}]
backpressure = [{{ probability = 0.3, max_length = 3 }}]
seeds = [1]
"""


@pytest.mark.sim
@pytest.mark.parametrize("force", [False, True])
def test_vhdl_harness_drives_and_reads_the_masks_on_ghdl(tmp_path: Path, build_cache_dir: Path, force: bool) -> None:
    # A VHDL register slice (tests/hdl_fast/quad_keep_slice.vhd) behind the centre-tap filter: 30-pixel lines
    # at 4 pixels a beat end in a beat of 2 (AXI4-Stream TKEEP 0b0011); drive = "auto" takes the VHDL harness.
    simulator_available("ghdl")
    cfg = tmp_path / "slice.toml"
    source = Path(__file__).parent / "hdl_fast" / "quad_keep_slice.vhd"
    cfg.write_text(_SLICE.format(cache=build_cache_dir.as_posix(), source=source.as_posix(),
                                 force="true" if force else "false", ports=_AXIS_PORTS,
                                 keeps=_KEEPS))
    result = run(load_config(cfg), jobs=1, progress=False, out_dir=tmp_path / "out")
    [case] = result.cases
    assert case.entry.get("drive") == "fast", case.entry.get("drive")
    if not force:
        assert case.status == "pass", case.diagnosis
        return
    # the seeded fault marks every lane of the last beat: 32 pixels a line instead of 30
    assert case.status == "fail" and case.diagnosis_kind == "timing", case.diagnosis
    assert "do not carry 30 pixels" in case.diagnosis and "line 0: 32" in case.diagnosis


def _run_exported(sim: str, commands: list[list[str]], cwd: Path) -> str:
    import subprocess

    from vkit.sim.simulators import find, subprocess_env

    log = ""
    for cmd in commands:
        res = subprocess.run(cmd, cwd=cwd, env=subprocess_env(find(sim)), capture_output=True, text=True, timeout=600)
        log += res.stdout + res.stderr
        assert res.returncode == 0, log[-2000:]
    return log


@pytest.mark.sim
@pytest.mark.parametrize("sim", ["icarus", "verilator", "ghdl"])
def test_exported_testbench_checks_the_masks_and_replays(tmp_path: Path, sim: str) -> None:
    # vkit export of a TKEEP design: the plain-HDL testbench compares each word's per-lane valid mask with the
    # expected one (AXI4-Stream TKEEP 0b0011 on the last beat of a 30-pixel line) and only the kept lanes as pixels.
    from vkit.run.vectors import export_vectors, find_case, replay

    simulator_available(sim)
    if sim == "ghdl":
        source = Path(__file__).parent / "hdl_fast" / "quad_keep_slice.vhd"
        configs = {name: _SLICE.format(cache=(tmp_path / "cache").as_posix(), source=source.as_posix(), force=force,
                                       ports=_AXIS_PORTS, keeps=_KEEPS) for name, force in (("good", "false"), ("bad", "true"))}
    else:
        text = _config(tmp_path, sim=sim).read_text()  # the seeded bug is an `ifdef in the sample
        configs = {"good": text, "bad": text.replace(_KEEPS, _KEEPS + "\n\n[designs.lidscan.defines]\nLIDSCAN_TKEEP_ALL = 1")}
    for name, text in configs.items():
        cfg = tmp_path / f"{name}.toml"
        cfg.write_text(text)
        case = expand_matrix(load_config(cfg))[0]
        done = export_vectors(find_case(load_config(cfg), case.id), tmp_path / name)
        log = _run_exported(sim, done.commands[sim], done.out_dir)
        verdict, _ = replay(done.out_dir)
        if name == "good":
            assert "vkit: 0 mismatches" in log and "vkit: PASS" in log, log[-1500:]
            assert verdict.passed, verdict.findings
        else:
            # all lanes marked on every last beat: the testbench names the mask, the replay the line lengths
            assert "per-lane valid mask got 1111, expected 0011" in log and "vkit: FAIL" in log, log[-1500:]
            assert not verdict.passed and verdict.diagnosis.kind == "timing"
            assert "do not carry 30 pixels" in verdict.diagnosis.message, verdict.diagnosis.message
