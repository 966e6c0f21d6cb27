"""The cocotb test of the fast path: the harness makes its clock, plays and captures in HDL; Python waits for done.

Run with ``test_module="vkit.sim.tb.fast"`` and toplevel ``vkit_fast_top`` (see
:func:`vkit.sim.fast.build.fast_build_plan`), with the keyword arguments of
:func:`vkit.sim.fast.build.fast_test_args` (the case JSON named by ``VKIT_CASE``, and the harness's
plusargs or generics). The clock is generated inside the simulator by the harness, so no Python
runs per clock: the test waits once for ``done`` (bounded by a timer) and reads the capture file
(binary records from the Verilog harness, text from the VHDL one).
The capture ``.npz`` is always written, partial on timeout; a failure leaves its one-line reason in
the ``.error.txt`` file beside it.
"""

from __future__ import annotations

import os
import time
import traceback
from pathlib import Path
from typing import Any

import cocotb
from cocotb.triggers import First, RisingEdge, Timer

from vkit.video.capture import Capture, RunFacts
from vkit.core.errors import ConfigError, VkitError
from vkit.sim.case import CASE_ENV, SimCase, error_file_for
from vkit.sim.fast.capture_file import read_capture
from vkit.sim.fast.stimulus import StimulusFiles, fast_run_dir, prepare_fast_run, read_fast_run
from vkit.sim.fast.wire import CAPTURE_SPILL_NAME, capture_file_name

__all__ = ["run_fast_case"]

_SLACK_CLOCKS = 1000


def _bound_clocks(stim: StimulusFiles, reset_cycles: int) -> int:
    """Clocks after which Python stops waiting even if the harness never raised ``done``."""
    if stim.timeout:
        return stim.timeout + reset_cycles + _SLACK_CLOCKS
    return 4 * (stim.words + stim.drain) + reset_cycles + _SLACK_CLOCKS


async def run_fast_case(dut: Any, case: SimCase) -> Capture:
    """Wait for the self-clocked harness ``dut`` to finish ``case``; return the capture (also saved)."""
    stim = read_fast_run(case)
    if stim is None:
        # Started by hand, without vkit.sim.fast.fast_test_args: the plusargs must still name these files.
        stim = prepare_fast_run(case)
    cap_text = fast_run_dir(case) / capture_file_name(stim.language)
    period = float(case.clock_period_ns)
    bound = _bound_clocks(stim, int(case.reset_cycles))
    python_timeout = False
    t0 = time.perf_counter()
    if str(dut.done.value) != "1":
        deadline = Timer(bound * period, unit="ns")
        hit = await First(RisingEdge(dut.done), deadline)
        python_timeout = hit is deadline
    t1 = time.perf_counter()
    cap = read_capture(cap_text, case, stim, spill=fast_run_dir(case) / CAPTURE_SPILL_NAME)  # kept on disk
    t2 = time.perf_counter()
    if python_timeout:
        cap.facts.timed_out = True
        cap.facts.timeout_clocks = bound
        cap.facts.notes.append(
            f"the harness did not finish within {bound} clocks; the capture is partial"
        )
    if case.simulator:
        cap.facts.simulator = case.simulator
    cap.facts.path = "fast"
    # Plain, not compressed: compressing a 640x480 frame's capture takes as long as simulating it.
    cap.save(case.capture_file, compress=False)
    dut._log.info("vkit fast path: simulation %.2f s, capture read %.2f s, saved %.2f s (wall clock)",
                  t1 - t0, t2 - t1, time.perf_counter() - t2)
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
            Capture(facts=RunFacts(family=case.family, timed_out=False, notes=[str(exc)])).save(case.capture_file)
        raise
    except Exception as exc:  # noqa: BLE001 - the reason must reach the runner even for unexpected errors
        Path(err).parent.mkdir(parents=True, exist_ok=True)
        Path(err).write_text(f"fast path: {type(exc).__name__}: {exc}\n{traceback.format_exc()}")
        raise
