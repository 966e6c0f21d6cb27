"""Waveforms of a case: the clock window around its first mismatch, dumped by a rerun on a wave build."""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.errors import ToolError
from vkit.report.writers import case_folder
from vkit.run.builds import build_design, build_wave_design
from vkit.run.config import Case
from vkit.run.simulate import WaveDump, simulate
from vkit.sim.buildcache import BuildCache
from vkit.sim.case import per_clock_start_ps
from vkit.sim.simulators import find
from vkit.sim.vcd import cut_vcd

__all__ = ["WAVE_LINES", "wave_window", "wave_rerun"]

WAVE_LINES = 2
"""Video lines of waveform kept on each side of the first mismatch."""


def _anchor_clock(capture: Any, verdict: Any) -> int:
    """The clock of the first listed mismatch, else the first output clock, else the first input clock, else 0."""
    for m in (verdict.first_mismatches if verdict is not None else []) or []:
        if m.get("clock") is not None:
            return int(m["clock"])
    facts = capture.facts
    for clock in (facts.first_output_clock, facts.first_input_clock):
        if clock is not None:
            return int(clock)
    return 0


def wave_window(case: Case, capture: Any, verdict: Any) -> tuple[int, int, int]:
    """The clock window to dump for a case: ``(anchor_clock, first_clock, last_clock)``.

    The anchor is the clock of the first mismatching pixel the scoreboard listed; when that has no
    clock (missing pixels, no output) it is the first output clock, else the first input clock, else 0.
    The window spans :data:`WAVE_LINES` video lines (``h_total`` clocks each; stream: ``width + 2``
    beats) on each side of the anchor, never before clock 0.
    """
    anchor = _anchor_clock(capture, verdict)
    if case.timing is not None:
        t = case.timing
        line = int(t["h_active"]) + int(t["h_front_porch"]) + int(t["h_sync"]) + int(t["h_back_porch"])
    else:
        line = case.width + 2
    span = WAVE_LINES * line
    return anchor, max(0, anchor - span), anchor + span


def _dump(case: Case, cache: BuildCache, wave_dir: Path, frames: np.ndarray, timeout_s: float,
          from_ps: int, to_ps: int) -> tuple[Path, str]:
    """Rerun the case with a dump of the window; returns the wave file and its format."""
    if case.simulator == "ghdl":
        # GHDL cannot start and stop a dump at run time: dump the run, keep the window, drop the rest
        full, wave_file = wave_dir / "whole_run.vcd", wave_dir / "waves.vcd"
        outcome = build_design(case, cache)
        simulate(case, outcome.build_dir, wave_dir, frames, timeout_s, wave=WaveDump(full, from_ps, to_ps))
        cut_vcd(full, wave_file, from_ps, to_ps)
        full.unlink(missing_ok=True)
        return wave_file, "vcd"
    wave_file = wave_dir / "waves.fst"
    wave_file.unlink(missing_ok=True)
    outcome = build_wave_design(case, cache)
    simulate(case, outcome.build_dir, wave_dir, frames, timeout_s, wave=WaveDump(wave_file, from_ps, to_ps))
    return wave_file, "fst"


def wave_rerun(case: Case, out: Path, cache: BuildCache, frames: np.ndarray, capture: Any, verdict: Any,
               timeout_s: float) -> dict[str, Any]:
    """Rerun the case on a wave build with a dump limited to its window; returns the report's wave facts.

    Raises:
        ToolError: the simulator wrote no wave file.
    """
    if case.simulator != "icarus" and case.design.language == "verilog" and find("icarus").available:
        # Windowed dumps are made on Icarus: the same stimulus replays clock for clock there (the
        # simulators agree on every capture, a tested fact), so the window found here still holds.
        case = dataclasses.replace(case, simulator="icarus")
    anchor, first, last = wave_window(case, capture, verdict)
    # the rerun drives clock by clock whatever path made the capture: its clocks start where that path's do
    start_ps = per_clock_start_ps(case.design.clock_period_ns, case.design.reset_cycles)
    period_ps = int(round(case.design.clock_period_ns * 1000))
    # clock k of the capture is the (k+1)-th rising edge after the monitor started (vkit.sim.tb.entry)
    from_ps = int(start_ps) + first * period_ps
    to_ps = int(start_ps) + (last + 2) * period_ps
    wave_dir = case_folder(out, case.id, "waves")
    wave_file, fmt = _dump(case, cache, wave_dir, frames, timeout_s, from_ps, to_ps)
    if not wave_file.is_file():
        raise ToolError(f"waves: {case.simulator} wrote no {wave_file.name}; see {wave_dir / 'sim.log'}")
    return {"file": os.path.relpath(wave_file, out), "anchor_clock": anchor, "first_clock": first,
            "last_clock": last, "from_ps": from_ps, "to_ps": to_ps, "format": fmt,
            "simulator": case.simulator}
