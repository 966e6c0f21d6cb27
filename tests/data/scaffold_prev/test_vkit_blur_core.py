"""cocotb tests of blur_core, written by `vkit init`: each case of vkit.toml for this simulator, scored against the vkit model.

Run through cocotb's Makefile flow (``make -f Makefile.vkit SIM=icarus``) or let ``vkit run vkit.toml``
run the same cases. Environment: VKIT_CONFIG (config file), VKIT_DESIGN (design name in it), VKIT_SIM
(simulator name: icarus, verilator, ghdl), VKIT_ONLY (substring or glob of the case ids to run).
Reports (verdict.json and, for failing frames, expected/actual/diff PNGs) go under <out_dir>/make/<sim>/.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import cocotb
import numpy as np

from vkit.config import Case, expand_matrix, load_config, select_cases
from vkit.pipeline import run_model_frames
from vkit.report import write_case_report
from vkit.runner import make_frames
from vkit.scoreboard import score
from vkit.tb.case import SimCase
from vkit.tb.entry import run_case

CONFIG = Path(os.environ.get("VKIT_CONFIG") or Path(__file__).with_name("vkit.toml")).resolve()
DESIGN = os.environ.get("VKIT_DESIGN", "blur_core")
SIMULATOR = os.environ.get("VKIT_SIM", "icarus")


def _cases() -> list[Case]:
    """This design's cases for SIMULATOR (the config's own simulator list is ignored here)."""
    config = load_config(CONFIG)
    cases = [c for c in expand_matrix(config, [SIMULATOR]) if c.design.name == DESIGN]
    if not cases:
        # the design names its own simulators: run their cases' stimuli on this one
        config.designs[DESIGN].simulators = [SIMULATOR]
        cases = [c for c in expand_matrix(config, [SIMULATOR]) if c.design.name == DESIGN]
    return select_cases(cases, os.environ.get("VKIT_ONLY") or None)


def _sim_case(case: Case, work: Path) -> SimCase:
    """The SimCase `vkit run` would simulate for ``case`` (same frames, seeds and flow patterns)."""
    d = case.design
    frames_file = work / "frames.npy"
    np.save(frames_file, make_frames(case))
    return SimCase(
        family=d.family,
        signals=dict(d.ports),
        frames_file=str(frames_file),
        capture_file=str(work / "capture.npz"),
        width=case.width,
        height=case.height,
        pixel_format=d.pixel_format,
        timing=case.timing if d.family == "video" else None,
        stalls=case.stalls.as_pattern(case.seed) if d.family == "video" else None,
        stream_gaps=case.gaps.as_pattern(case.seed) if d.family == "stream" else None,
        backpressure=case.backpressure.as_pattern(case.seed + 7919) if d.family == "stream" else None,
        blanking=case.blanking,
        blanking_value=case.blanking_value,
        seed=case.seed,
        clock_period_ns=d.clock_period_ns,
        reset_active_high=d.reset_active_high,
        reset_cycles=d.reset_cycles,
        timeout_clocks=d.timeout_clocks,
        simulator=SIMULATOR,
        label=case.id,
    )


async def _run(dut: Any, case: Case) -> None:
    """Drive one case's frames through the design, score every pixel and the timing, write the report."""
    config = load_config(CONFIG)
    out_dir = config.run.out_dir / "make" / SIMULATOR
    work = out_dir / "work" / case.id.replace("/", "__")
    work.mkdir(parents=True, exist_ok=True)
    sim_case = _sim_case(case, work)
    capture = await run_case(dut, sim_case)
    images = list(sim_case.load_frames())
    spec = case.design.pipeline_spec()
    expected = run_model_frames(spec, images)
    verdict = score(
        expected,
        capture,
        tolerance_lsb=case.design.tolerance_lsb,
        declared_latency_clocks=case.declared_latency_clocks(),
        align=case.design.align,
        spec=spec,
        images=images,
    )
    files = write_case_report(case.id, verdict, expected, capture, out_dir, meta={"seeds": case.seeds(), "simulator": SIMULATOR})
    where = out_dir / files["verdict"]
    if not verdict.passed:
        first = verdict.findings[0].message if verdict.findings else verdict.status
        raise AssertionError(f"{case.id}: {verdict.status}: {first} (report: {where})")
    dut._log.info("%s: pass, %d pixels checked, latency %s clocks (report: %s)", case.id, verdict.pixels_checked, verdict.latency_clocks, where)


def _test_for(case: Case) -> Any:
    async def vkit_case(dut: Any) -> None:
        await _run(dut, case)

    vkit_case.__doc__ = f"vkit case {case.id}"
    # the test name is the case id without the design and simulator parts
    return cocotb.test(name="vkit/" + case.id.split("/", 2)[-1])(vkit_case)


# One cocotb test per case. Outside a simulator (pytest collecting this file, an editor) there is nothing to run.
if getattr(cocotb, "SIM_NAME", None):
    _CASES = _cases()
    for _index, _case in enumerate(_CASES):
        globals()[f"vkit_case_{_index:03d}"] = _test_for(_case)
