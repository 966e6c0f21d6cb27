"""Shared fixtures: simulator availability with install hints, and one build cache per test session.

Tests marked ``slow`` are deselected unless ``-m`` is given (``pytest -m slow`` runs the long suite).
``simulator_available(name)`` returns the :class:`vkit.sim.simulators.SimulatorInfo` or skips the test
with the install hint. ``build_cache_dir`` is a session-scoped folder under pytest's temporary
directory (a few MB of Icarus/GHDL builds, one Verilator build is about 10 MB); tests that run real
simulations share it so each design is built once per session.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np
import pytest

from vkit.sim.simulators import SimulatorInfo, find
from vkit.video.capture import Capture, CaptureBuilder, RunFacts

REPO = Path(__file__).resolve().parents[1]
SAMPLE_RTL = REPO / "sample_rtl"

# Test data, not tests: tests/data/scaffold_prev holds a generated cocotb module that only runs in a simulator.
collect_ignore = ["data"]


def simulator_available(name: str) -> SimulatorInfo:
    """The simulator's info, or skip the calling test with its install hint."""
    info = find(name)
    if not info.available:
        pytest.skip(f"{name} not usable here: {info.reason}")
    return info


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Leave ``slow`` tests out unless a marker expression is given (``pytest -m slow`` runs them)."""
    if config.getoption("markexpr", ""):
        return
    slow = [item for item in items if item.get_closest_marker("slow") is not None]
    if slow:
        config.hook.pytest_deselected(items=slow)
        items[:] = [item for item in items if item.get_closest_marker("slow") is None]


@pytest.fixture(scope="session")
def build_cache_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One build cache for the whole session (see the module docstring)."""
    return tmp_path_factory.mktemp("vkit-builds")


def pack_capture(frames, meta=None, rows=None) -> Capture:
    """A capture of ``frames`` as a monitor would build it (5 idle clocks after each line); ``rows`` replaces
    line y's pixels by ``rows[y]``, ``meta`` adds run facts."""
    b = CaptureBuilder(RunFacts(frames_sent=len(frames), first_input_clock=0, **(meta or {})))
    clk = 17
    for f in frames:
        b.new_frame()
        for y, row in enumerate(np.asarray(f)):
            b.new_line()
            for v in (rows or {}).get(y, row):
                b.add(int(v), clk)
                clk += 1
            clk += 5
    return b.build()


def make_env() -> dict[str, str]:
    """The environment for a make or cocotb run started from a test: this venv first on PATH, none of the
    calling pytest's or simulator's settings."""
    env = dict(os.environ)
    env["PATH"] = str(Path(sys.executable).parent) + os.pathsep + env.get("PATH", "")
    for key in ("VERILATOR_ROOT", "PYTEST_CURRENT_TEST", "PYTEST_ADDOPTS", "COCOTB_TEST_MODULES", "COCOTB_TOPLEVEL",
                "PYTHONWARNINGS"):
        env.pop(key, None)
    return env
