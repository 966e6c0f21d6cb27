"""Offline passive scoring reaches the verdict of a vkit-driven run of the same frames, on every sample design.

For each sample design (video and stream, one, two or four pixels a clock (96-bit words), 8- and 10-bit grey, RGB and Y'CbCr
4:2:2, active-low pins, a clock enable, an output without vsync, per-lane valid masks) and each of its seeded-bug variants, every case of a small matrix (the conveyor scene and the box pattern, 32x24,
stalls or back-pressure on) runs twice: once as ``vkit run`` runs it (the driven verdict), once clock by
clock with the whole run dumped to a waveform file (FST from Icarus and Verilator, VCD from GHDL), which
``vkit score-dump`` then scores knowing nothing of the stimulus. Both must agree on the status and on
the failure class. The reference each side is scored against is the spec's bit-exact model, whose parts
are checked against OpenCV, SciPy and math.isqrt in test_model*.py; the seeded bugs come from the sample
manifests (our own demo faults).
"""

from __future__ import annotations

import json
import shutil
import sys
from pathlib import Path

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.run.builds import build_design, build_request, build_wave_design
from vkit.run.case import run_one_case
from vkit.run.config import Case, load_config, expand_matrix
from vkit.run.inputs import make_frames
from vkit.run.options import RunOptions
from vkit.run.passive import score_dump
from vkit.run.simulate import WaveDump, simulate
from vkit.sim.buildcache import BuildCache
from vkit.sim.simulators import TIMESCALE, activate, require

pytestmark = [pytest.mark.sim, pytest.mark.slow]

MANIFEST = SAMPLE_RTL / "designs.toml"
FOREIGN = SAMPLE_RTL / "foreign" / "designs.toml"

DESIGNS = [
    (MANIFEST, "edge_core", "icarus"), (MANIFEST, "edge_core_vhdl", "ghdl"), (MANIFEST, "blur_core", "icarus"),
    (MANIFEST, "median_core", "icarus"), (MANIFEST, "stream_core", "icarus"), (MANIFEST, "belt_sharpen_x2", "icarus"),
    (MANIFEST, "belt_smooth10", "icarus"), (MANIFEST, "belt_luma422", "icarus"),
    (MANIFEST, "sortcam_dilate_q4", "icarus"), (MANIFEST, "lidscan_sharpen_k4", "icarus"),
    (FOREIGN, "nsync_sharpen", "icarus"), (FOREIGN, "rowmax_htotal", "icarus"), (FOREIGN, "smooth_ce", "ghdl"),
    (MANIFEST, "lidscan_sharpen_k4", "verilator"),
]
"""(manifest, design, simulator) of the sample designs of both manifests (the SystemVerilog top with interface
ports, belt_smooth_top.sv, runs on Verilator only and is not in a manifest); a stream design with lane masks also
dumped by Verilator as FST (the belt chain's Verilator dumps are in test_passive.py)."""

NOT_COVERED: dict[str, str] = {}
"""Sample designs the passive scoreboard cannot read yet, and why (none: every sample design is compared)."""


def test_every_manifest_design_is_compared_or_named():
    names = {n for m in (MANIFEST, FOREIGN) for n in tomllib.loads(m.read_text())["designs"]}
    assert names == {d for _, d, _ in DESIGNS} | set(NOT_COVERED)
    assert not NOT_COVERED

_CONFIG = """\
[run]
simulators = ["{sim}"]
waves = "off"

[[import]]
manifest = "{manifest}"
use = ["{design}"]
bugs = true

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}, "box"{extra}]
timings = ["tiny32x24"]
frames = 2
stalls = [{{ probability = 0.1, max_length = 3 }}]
backpressure = [{{ probability = 0.2, max_length = 3 }}]
"""


_EXTRA = {
    "rowmax_htotal": ', { name = "box", label = "box64", timings = ["tiny64x48"] }',
    "lidscan_sharpen_k4": ', { name = "box", label = "box30", timings = [{ name = "tiny30x24", h_active = 30, '
                          'h_front_porch = 2, h_sync = 3, h_back_porch = 3, v_active = 24, v_front_porch = 1, '
                          'v_sync = 1, v_back_porch = 1 }] }',
}
"""A second frame size for designs whose seeded bug only shows off tiny32x24: a line length in whole beats of
another size (rowmax_htotal), or 30 pixels, whose last beat of 4 lanes keeps 2 (lidscan's lane masks)."""


def _config(tmp: Path, manifest: Path, design: str, sim: str):
    """A config of the design and all its seeded bugs, with the design's second frame size (:data:`_EXTRA`)."""
    extra = _EXTRA.get(design, "")
    path = tmp / "passive_eq.toml"
    path.write_text(_CONFIG.format(sim=sim, manifest=manifest, design=design, extra=extra))
    return load_config(path)


def _verilator_traced(case: Case, folder: Path) -> Path:
    """A Verilator build of the case's design that writes FST (cocotb's Verilator main: ``--trace-fst`` at build,
    ``--trace`` at run, the file ``dump.fst`` in the run folder), built as vkit builds it otherwise."""
    from cocotb_tools.runner import get_runner

    info = require("verilator")
    activate(info)
    d = case.design
    params = case.build_parameters()
    build_dir = folder.parent / f"vl-{d.name}-{abs(hash(repr(sorted(params.items()))))}"  # one build serves its cases
    if build_dir.is_dir():
        return build_dir
    get_runner("verilator").build(
        sources=[str(p) for p in d.sources], hdl_toplevel=d.top, build_dir=str(build_dir), waves=True,
        build_args=[*build_request(case, info.version).build_args, "--trace-fst"], parameters=params,
        defines=dict(d.defines), timescale=TIMESCALE, log_file=str(folder.parent / f"{build_dir.name}.log"))
    return build_dir


def _dump(case: Case, cache: BuildCache, folder: Path) -> Path:
    """Run the case clock by clock with the whole run dumped: FST on Icarus (the wave build) and Verilator, VCD on
    GHDL."""
    folder.mkdir(parents=True, exist_ok=True)
    frames = make_frames(case)
    if case.simulator == "ghdl":
        wave, build_dir = folder / "run.vcd", build_design(case, cache).build_dir
    elif case.simulator == "verilator":
        wave, build_dir = folder / "dump.fst", _verilator_traced(case, folder)
    else:
        wave, build_dir = folder / "run.fst", build_wave_design(case, cache).build_dir
    simulate(case, build_dir, folder, frames, 300.0, wave=WaveDump(wave, 0, 1 << 46))
    assert wave.is_file(), f"{case.simulator} wrote no {wave.name}"
    return wave


def _kind(verdict: dict) -> str | None:
    return verdict["findings"][0]["kind"] if verdict["findings"] else None


@pytest.mark.parametrize("manifest,design,sim", DESIGNS, ids=[f"{d}-{s}" for _, d, s in DESIGNS])
def test_offline_passive_verdict_equals_the_driven_run(tmp_path, build_cache_dir, manifest, design, sim):
    simulator_available(sim)
    config = _config(tmp_path, manifest, design, sim)
    options = RunOptions.make(tmp_path / "driven", cache_dir=build_cache_dir, waves="off")
    cache = BuildCache(build_cache_dir)
    differ = []
    cases = expand_matrix(config)
    for case in cases:
        driven = run_one_case(case, options).entry["verdict"]
        wave = _dump(case, cache, tmp_path / "waves" / str(case.index))
        passive = score_dump(config, wave, design=case.design.name, scope=case.design.top,
                             out_dir=tmp_path / "passive" / str(case.index))
        # a frame the run ended inside is named, not scored: only a failing design may leave one
        assert not passive.problems or driven["status"] != "pass", (case.id, passive.problems)
        got = (passive.verdict.status, passive.verdict.diagnosis.kind if passive.verdict.diagnosis else None)
        want = (driven["status"], _kind(driven))
        if got != want:
            differ.append(f"{case.id}: driven {want}, passive {got}")
    assert not differ, "\n".join(differ)
    bugs = {c.design.name for c in cases if c.design.bug}
    manifest_bugs = tomllib.loads(manifest.read_text())["designs"][design].get("bugs", {})
    assert len(bugs) == len(manifest_bugs)  # every seeded bug of the design was compared


# -- live: the board attached inside the same simulation that vkit's per-clock source drives ----------------

_WATCH = '''
import os

import cocotb

from vkit.run.attach import PassiveFailure, attach
from vkit.sim.case import CASE_ENV, SimCase
from vkit.sim.tb.entry import run_case


@cocotb.test()
async def driven_and_watched(dut):
    """vkit's own source and monitor play the case; a passive board watches the same ports and drives nothing."""
    board = attach(dut, config=os.environ["WATCH_CONFIG"], design=os.environ["WATCH_DESIGN"],
                   out_dir=os.environ["WATCH_OUT"])
    await run_case(dut, SimCase.from_json(os.environ[CASE_ENV]))
    try:
        await board.check()
    except PassiveFailure:
        pass  # the verdict is read from the board's report.json
'''

LIVE = [
    ("icarus", MANIFEST, "edge_core", ("edge_core/", "edge_core@de_late/", "edge_core@stall_repeat/")),
    ("icarus", MANIFEST, "stream_core", ("stream_core@sharpen_wrap/",)),
    ("verilator", MANIFEST, "edge_core", ("edge_core@sobel_tap_sign/", "edge_core@vsync_not_held/")),
    ("verilator", MANIFEST, "belt_sharpen_x2", ("belt_sharpen_x2@lanes_swapped/",)),
    ("icarus", MANIFEST, "sortcam_dilate_q4", ("sortcam_dilate_q4/", "sortcam_dilate_q4@out_first_low/")),
    ("verilator", FOREIGN, "nsync_sharpen", ("nsync_sharpen@den_polarity_slip/",)),
    ("ghdl", MANIFEST, "edge_core_vhdl", ("edge_core_vhdl/",)),
    ("ghdl", FOREIGN, "smooth_ce", ("smooth_ce@enable_ignored_in_blanking/",)),
    ("icarus", MANIFEST, "lidscan_sharpen_k4", ("lidscan_sharpen_k4/", "lidscan_sharpen_k4@tkeep_all/")),
    ("verilator", MANIFEST, "lidscan_sharpen_k4", ("lidscan_sharpen_k4/", "lidscan_sharpen_k4@tkeep_all/")),
]
"""(simulator, manifest, design, case id prefixes): a subset per simulator, good designs and seeded bugs of each
kind of check (values, timing, stalls, lanes, words wider than 64 bits, pin polarity, clock enable, per-lane valid
masks). Each runs its conveyor case, and a design with a second frame size (:data:`_EXTRA`) that one too."""

LIVE_LABELS = ("conveyor-", "box30-", "box64-")
"""The stimulus labels the live subset runs (the conveyor scene; the frame sizes a seeded bug needs)."""


def _live(case: Case, config, cache: BuildCache, folder: Path) -> dict:
    """The verdict of a passive board attached inside the simulation vkit's per-clock source drives."""
    folder.mkdir(parents=True)
    (folder / "watch_tb.py").write_text(_WATCH)  # the simulator's working folder is on its module path
    env = {"WATCH_CONFIG": str(config.path), "WATCH_DESIGN": case.design.name, "WATCH_OUT": str(folder / "passive")}
    simulate(case, build_design(case, cache).build_dir, folder, make_frames(case), 300.0, test_module="watch_tb",
             extra_env=env)
    report = folder / "passive" / "report.json"
    assert report.is_file(), (folder / "sim.log").read_text()[-3000:]
    return json.loads(report.read_text())["cases"][0]["verdict"]


@pytest.mark.parametrize("sim,manifest,design,prefixes", LIVE, ids=[f"{s}-{d}" for s, _, d, _ in LIVE])
def test_live_passive_verdict_equals_the_driven_run(tmp_path, build_cache_dir, sim, manifest, design, prefixes):
    simulator_available(sim)
    config = _config(tmp_path, manifest, design, sim)
    options = RunOptions.make(tmp_path / "driven", cache_dir=build_cache_dir, waves="off")
    cache = BuildCache(build_cache_dir)
    cases = [c for c in expand_matrix(config) if c.id.startswith(prefixes) and any(k in c.id for k in LIVE_LABELS)]
    assert cases
    differ = []
    for case in cases:
        driven = run_one_case(case, options).entry["verdict"]
        live = _live(case, config, cache, tmp_path / "live" / str(case.index))
        assert live["frames_checked"] == case.frames
        if (live["status"], _kind(live)) != (driven["status"], _kind(driven)):
            differ.append(f"{case.id}: driven {(driven['status'], _kind(driven))}, live {(live['status'], _kind(live))}")
    assert not differ, "\n".join(differ)


# -- a declared latency: checked passively as the driven run checks it ------------------------------------------

LATENCY = [("smooth_ce", "ghdl", "latency_samples = 43", 43), ("nsync_sharpen", "icarus", "latency_clocks = 43", 43)]
"""(design, simulator, the manifest line declaring its latency, the latency it has): a design behind a clock enable
(one in two clocks: the latency is declared in input samples) and one declaring it in clocks, both steady (no
pixel-valid port, so no stalls)."""

_LATENCY_CONFIG = """\
[run]
simulators = ["{sim}"]
waves = "off"

[[import]]
manifest = "{manifest}"
use = ["{design}"]
bugs = false

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}]
timings = ["tiny32x24"]
frames = 2
enables = [{{ every = 2 }}]
"""
"""One design, no seeded bug, the conveyor scene; the enable one in two clocks (smooth_ce names its own enables)."""


@pytest.mark.parametrize("design,sim,line,true", LATENCY, ids=[d for d, *_ in LATENCY])
@pytest.mark.parametrize("off", [0, 2], ids=["declared_right", "declared_wrong"])
def test_a_declared_latency_gets_the_driven_verdict_offline_and_live(tmp_path, build_cache_dir, design, sim, line,
                                                                     true, off):
    """The manifest's declared latency (sample_rtl/foreign/designs.toml; measured there on a driven run) is taken
    as is, then 2 too high: the driven run passes, then fails on the latency; offline and live must do the same."""
    simulator_available(sim)
    manifests = shutil.copytree(FOREIGN.parent, tmp_path / "foreign")
    key = line.split(" = ")[0]
    text = (manifests / "designs.toml").read_text()
    assert text.count(line) == 1
    (manifests / "designs.toml").write_text(text.replace(line, f"{key} = {true + off}"))
    path = tmp_path / "latency.toml"
    path.write_text(_LATENCY_CONFIG.format(sim=sim, manifest=manifests / "designs.toml", design=design))
    config = load_config(path)
    cache = BuildCache(build_cache_dir)
    unit = "samples" if key == "latency_samples" else "clocks"
    want = f"latency: declared {true + off} {unit}, measured {true} {unit}"
    for case in expand_matrix(config):  # smooth_ce: its own enables, one in two clocks and a seeded random one
        driven = run_one_case(case, RunOptions.make(tmp_path / "driven", cache_dir=build_cache_dir, waves="off")
                              ).entry["verdict"]
        wave = _dump(case, cache, tmp_path / "wave" / str(case.index))
        offline = score_dump(config, wave, design=design, scope=case.design.top,
                             out_dir=tmp_path / "offline" / str(case.index))
        live = _live(case, config, cache, tmp_path / "live" / str(case.index))
        assert driven["status"] == ("pass" if off == 0 else "fail"), (case.id, driven["timing_errors"])
        assert any(e.startswith(want) for e in driven["timing_errors"]) is bool(off), driven["timing_errors"]
        for name, got in (("offline", offline.verdict.to_dict()), ("live", live)):
            assert (got["status"], _kind(got)) == (driven["status"], _kind(driven)), (case.id, name, got["timing_errors"])
            assert any(e.startswith(want) for e in got["timing_errors"]) is bool(off), (case.id, name, got["timing_errors"])
