"""Shared fixtures: simulator availability with install hints, and one build cache per test session.

Tests marked ``slow`` are deselected unless ``-m`` is given (``pytest -m slow`` runs the long suite).
``simulator_available(name)`` returns the :class:`vkit.sim.simulators.SimulatorInfo` or skips the test
with the install hint. ``build_cache_dir`` is a session-scoped folder under pytest's temporary
directory (a few MB of Icarus/GHDL builds, one Verilator build is about 10 MB); tests that run real
simulations share it so each design is built once per session.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from vkit.sim.simulators import SimulatorInfo, find

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
