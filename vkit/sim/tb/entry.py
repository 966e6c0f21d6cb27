"""The cocotb test the runner runs, and ``run_case`` for your own cocotb tests.

The runner writes a :class:`~vkit.sim.case.SimCase` as JSON, points the environment variable ``VKIT_CASE``
at it and runs this module (``test_module="vkit.sim.tb.entry"``). The test drives every frame, captures the
output and always saves the capture, partial on timeout or error; scoring happens outside the simulator.

Your own cocotb test can do the same in one call::

    import cocotb
    from vkit.sim.case import SimCase
    from vkit.sim.tb.entry import run_case

    @cocotb.test()
    async def edge_frames(dut):
        case = SimCase(
            family="video",
            signals={"clock": "clk", "reset": "rst", "in_vsync": "in_vsync", "in_hsync": "in_hsync",
                     "in_de": "in_de", "in_valid": "in_valid", "in_data": "in_data",
                     "out_vsync": "out_vsync", "out_hsync": "out_hsync", "out_de": "out_de",
                     "out_valid": "out_valid", "out_data": "out_data"},
            frames_file="frames.npy", capture_file="capture.npz", width=32, height=24,
            pixel_format="rgb888", stalls={"probability": 0.1, "max_length": 3, "seed": 7},
        )
        capture = await run_case(dut, case)      # also saved to capture.npz
        assert not capture.facts.timed_out
        frames = capture.frames(case.height, case.width)
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import cocotb
from cocotb.clock import Clock
from cocotb.triggers import ClockCycles, First, ReadWrite
from cocotb.utils import get_sim_time

from vkit.video.capture import Capture, RunFacts, lines_file_for
from vkit.core.errors import ConfigError
from vkit.sim.case import CASE_ENV, SimCase, error_file_for
from vkit.video.bus import unpack_capture
from vkit.sim.tb.built import check_built_parameters
from vkit.sim.tb.stream import StreamMonitor, StreamSink, StreamSource
from vkit.sim.tb.video import VideoMonitor, VideoSource
from vkit.video.words import INPUT_LEVEL_ROLES, samples_between

__all__ = ["run_case", "vkit_case", "DRAIN_LINES"]

DRAIN_LINES = 2
"""Video lines watched after the last input clock, so trailing output syncs are seen."""


def _error_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _save(capture: Capture, case_capture_file: str | Path, error: str | None) -> None:
    path = Path(case_capture_file)
    sidecar = error_file_for(path)
    if error:
        capture.facts.error = error
        capture.facts.notes.append(error)
    capture.save(path)
    lines_file_for(path).unlink(missing_ok=True)  # the whole capture is saved: the lines file has done its job
    if error:
        sidecar.write_text(error + "\n")


def _components(dut: Any, case: SimCase, facts: RunFacts) -> tuple[Any, Any, StreamSink | None, Any, Any]:
    """The monitor, source and (stream) sink of ``case`` on ``dut``, and the clock and reset handles."""
    smap = case.signal_map()
    bus = case.bus_layout()
    handles = smap.resolve(dut, {"in_data": bus.word_bits})
    clock, reset = handles["clock"], handles.get("reset")
    common = dict(expected_height=case.height, expected_width=case.width, reset_active_high=case.reset_active_high,
                  facts=facts, bus=bus)
    source_options = dict(bus=bus, blanking=case.blanking, blanking_value=case.blanking_value,
                          seed=case.seed, reset_active_high=case.reset_active_high)
    if case.family == "video":
        monitor: VideoMonitor | StreamMonitor = VideoMonitor(
            dut, smap, clock, reset, vsync_active_high=case.active_high("out_vsync"),
            hsync_active_high=case.active_high("out_hsync"),
            active_high=case.pin_polarity(("out_de", "out_valid", "out_enable")), **common,
        )
        source: VideoSource | StreamSource = VideoSource(
            dut, smap, clock, reset, timing=case.pixel_timing(), stalls=case.stall_pattern(), stats=monitor.facts,
            enable=case.enable_pattern(), active_high=case.pin_polarity(INPUT_LEVEL_ROLES), **source_options,
        )
        return monitor, source, None, clock, reset
    monitor = StreamMonitor(dut, smap, clock, reset, **common)
    source = StreamSource(dut, smap, clock, reset, gaps=case.gap_pattern(), stats=monitor.facts, **source_options)
    sink = StreamSink(dut, smap, clock, reset, backpressure=case.backpressure_pattern())
    return monitor, source, sink, clock, reset


async def _clock_and_reset(case: SimCase, clock: Any, reset: Any) -> None:
    """Start the clock and hold reset (if any) for ``case.reset_cycles`` rising edges."""
    Clock(clock, case.clock_period_ns, unit="ns").start()
    if reset is not None:
        reset.value = 1 if case.reset_active_high else 0
    await ClockCycles(clock, case.reset_cycles)
    if reset is not None:
        reset.value = 0 if case.reset_active_high else 1
    # Let the release reach the design before the components read it, so they all count from here.
    await ReadWrite()


async def _watch(case: SimCase, monitor: VideoMonitor | StreamMonitor, send_task: Any, n_frames: int,
                 timeout: int) -> None:
    """Wait for every output frame (bounded by ``timeout`` clocks), then for the input side and the trailing syncs."""
    done = await monitor.wait_frames(n_frames, timeout)
    if not done:
        if not send_task.done():
            monitor.facts.notes.append("the source had not sent every frame when the timeout hit")
        return
    # Keep watching until the input side has finished its last frame's blanking and a little
    # after, so the output's trailing syncs are counted too (still bounded by the timeout).
    remaining = max(1, timeout - monitor.clocks)
    if not send_task.done():
        waiter = cocotb.start_soon(monitor.wait_clocks(remaining))
        await First(send_task, waiter)
        waiter.cancel()
    if case.family == "video":
        await monitor.wait_clocks(DRAIN_LINES * case.video_timing().h_total)


async def run_case(dut: Any, case: SimCase, *, save: bool = True) -> Capture:
    """Run one :class:`SimCase` on ``dut``: clock, reset, drive all frames, capture, wait (bounded).

    Args:
        dut: the cocotb top-level handle.
        case: what to run.
        save: write the capture to ``case.capture_file`` (always, also when this raises); on an error the
            capture's ``facts.error`` gets a line and the same line goes to a ``.error.txt`` file beside it.

    Returns:
        The capture (``facts.timed_out`` is True when not every frame came out within the timeout).

    Raises:
        ConfigError: the case does not fit the DUT (misnamed port, narrow data bus, bad frames file), or
            the DUT was built with other parameter values than ``case.parameters`` (checked first).
    """
    facts = RunFacts(family=case.family, simulator=case.simulator or cocotb.SIM_NAME,
                     clock_period_ns=case.clock_period_ns)
    if save:
        error_file_for(case.capture_file).unlink(missing_ok=True)
    monitor: VideoMonitor | StreamMonitor | None = None
    source: VideoSource | StreamSource | None = None
    send_task = None
    sink: StreamSink | None = None
    error: str | None = None
    try:
        unseen = check_built_parameters(dut, case.parameters, f"design {dut._name}")
        facts.notes += [f"parameter {name} is not visible in the simulator; not checked" for name in unseen]
        frames = case.load_frames()
        n_frames = int(frames.shape[0])
        facts.frames_sent = n_frames
        timeout = case.effective_timeout_clocks(n_frames)
        facts.timeout_clocks = timeout
        monitor, source, sink, clock, reset = _components(dut, case, facts)
        if save:
            monitor.spill_lines_to(lines_file_for(case.capture_file))
        await _clock_and_reset(case, clock, reset)
        # capture clock k is the (k+1)-th rising edge after this time (the runner's wave window needs it)
        monitor.facts.start_time_ps = int(get_sim_time("ps"))
        monitor.start()
        if sink is not None:
            sink.start()
        send_task = cocotb.start_soon(source.send(frames))
        await _watch(case, monitor, send_task, n_frames, timeout)
    except Exception as exc:
        error = _error_line(exc)
        raise
    finally:
        if send_task is not None and not send_task.done():
            send_task.cancel()
        if sink is not None:
            sink.stop()
        if monitor is not None:
            monitor.stop()
        capture = Capture(facts=facts)
        if monitor is not None:
            monitor.facts.out_data_bits = monitor.data_bits
            if case.pixels_per_clock > 1:
                monitor.facts.pixels_per_clock = case.pixels_per_clock
            capture = monitor.capture()
            if not monitor.splits_lanes:  # a word over 62 bits was split as it was sampled
                capture = unpack_capture(capture, case.bus_layout(), monitor.data_bits)
        sched = getattr(source, "schedule", None) if monitor is not None else None
        if sched is not None:
            capture.facts.latency_samples = samples_between(sched.enable, capture.facts.first_input_clock,
                                                            capture.facts.first_output_clock)
        if save:
            _save(capture, case.capture_file, error)
    return capture


def _capture_file_from_raw(path: str) -> str | None:
    """Best effort: the capture_file of a case JSON that did not load as a SimCase."""
    try:
        data = json.loads(Path(path).read_text())
        value = data.get("capture_file") if isinstance(data, dict) else None
        return str(value) if value else None
    except (OSError, ValueError):
        return None


@cocotb.test()
async def vkit_case(dut: Any) -> None:
    """Run the SimCase named by the ``VKIT_CASE`` environment variable and save its capture."""
    path = os.environ.get(CASE_ENV)
    if not path:
        raise ConfigError(f"environment variable {CASE_ENV} is not set; point it at a case JSON written by SimCase.to_json")
    try:
        case = SimCase.from_json(path)
    except Exception as exc:
        target = _capture_file_from_raw(path)
        if target:
            _save(Capture(), target, _error_line(exc))
        raise
    await run_case(dut, case)
