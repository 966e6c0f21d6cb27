"""The cocotb test of the fast path: the harness plays and captures in HDL; Python wakes once per frame.

Run with ``test_module="vkit.tb.fast"`` and toplevel ``vkit_harness`` (see
:func:`vkit.harness.harness_sources`), the case JSON named by the ``VKIT_CASE`` environment variable
and the harness's plusargs (Verilog) or generics (VHDL) from
:func:`vkit.stimulus.prepare_fast_run`. The clock runs in the simulator (cocotb's GPI clock), so no
Python runs per clock. The capture ``.npz`` is always written, partial on timeout; a failure
leaves its one-line reason in the ``.error.txt`` file beside it.
"""

from __future__ import annotations

import os
import traceback
from pathlib import Path
from typing import Any

import cocotb
from cocotb.clock import Clock
from cocotb.triggers import ClockCycles, First, RisingEdge, Timer

from vkit.capture import Capture
from vkit.errors import ConfigError, VkitError
from vkit.export import read_capture
from vkit.stimulus import StimulusFiles, fast_run_dir, prepare_fast_run
from vkit.tb.case import CASE_ENV, SimCase, error_file_for

__all__ = ["run_fast_case", "CAPTURE_TEXT_NAME"]

CAPTURE_TEXT_NAME = "capture.txt"
"""Name of the harness's capture text file inside :func:`vkit.stimulus.fast_run_dir`."""

_SLACK_CLOCKS = 1000


def _in_width(dut: Any) -> int | None:
    try:
        return len(dut.d_in_data)
    except (AttributeError, TypeError):
        return None


def _bound_clocks(stim: StimulusFiles) -> int:
    """Clocks after which Python stops waiting even if the harness never raised ``done``."""
    if stim.timeout:
        return stim.timeout + _SLACK_CLOCKS
    return 4 * (stim.words + stim.drain) + _SLACK_CLOCKS


async def run_fast_case(dut: Any, case: SimCase) -> Capture:
    """Run ``case`` on the harness ``dut``; return the capture (also saved to ``case.capture_file``)."""
    stim = prepare_fast_run(case, _in_width(dut))
    cap_text = fast_run_dir(case) / CAPTURE_TEXT_NAME
    period = float(case.clock_period_ns)
    dut.rst.value = 1
    dut.load.value = 0
    Clock(dut.clk, period, unit="ns", impl="gpi").start(start_high=False)
    await Timer(period / 4, unit="ns")
    dut.load.value = 1
    await ClockCycles(dut.clk, int(case.reset_cycles))
    dut.rst.value = 0

    done = RisingEdge(dut.done)
    frame = RisingEdge(dut.frame_pulse)
    bound = _bound_clocks(stim)
    deadline = Timer(bound * period, unit="ns")
    frames_seen = 0
    python_timeout = False
    while not int(dut.done.value):
        hit = await First(done, frame, deadline)
        if hit is deadline:
            python_timeout = True
            break
        if hit is frame:
            frames_seen += 1
            dut._log.debug("vkit fast path: input frame %d started", frames_seen)
    cap = read_capture(cap_text, case, stim)
    if python_timeout:
        cap.meta["timed_out"] = True
        cap.meta["timeout_clocks"] = bound
        cap.meta.setdefault("notes", []).append(
            f"the harness did not finish within {bound} clocks; the capture is partial"
        )
    if case.simulator:
        cap.meta["simulator"] = case.simulator
    cap.meta["path"] = "fast"
    cap.save(case.capture_file)
    return cap


@cocotb.test()
async def fast_case(dut: Any) -> None:
    """Run the case named by ``VKIT_CASE`` through the fast-path harness and save its capture."""
    path = os.environ.get(CASE_ENV)
    if not path:
        raise ConfigError(f"{CASE_ENV} is not set; the runner sets it to the case JSON file")
    case = SimCase.from_json(path)
    err = error_file_for(case.capture_file)
    try:
        await run_fast_case(dut, case)
    except VkitError as exc:
        Path(err).parent.mkdir(parents=True, exist_ok=True)
        Path(err).write_text(f"{exc}\n")
        if not Path(case.capture_file).exists():
            Capture(meta={"family": case.family, "timed_out": False, "notes": [str(exc)]}).save(case.capture_file)
        raise
    except Exception as exc:  # noqa: BLE001 - the reason must reach the runner even for unexpected errors
        Path(err).parent.mkdir(parents=True, exist_ok=True)
        Path(err).write_text(f"fast path: {type(exc).__name__}: {exc}\n{traceback.format_exc()}")
        raise
