"""The simulator side: signal maps, cocotb sources and monitors, simulators and builds.

The fast path (generated HDL harness, stimulus files, capture file reader, native runs) has its own
facade, :mod:`vkit.sim.fast`.
"""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

_HOME = {
    "BUILD_FORMAT": "vkit.sim.buildcache",
    "BuildCache": "vkit.sim.buildcache",
    "BuildOutcome": "vkit.sim.buildcache",
    "BuildRequest": "vkit.sim.buildcache",
    "CASE_ENV": "vkit.sim.case",
    "CONTROL_ROLES": "vkit.sim.signals",
    "FAMILY_ROLES": "vkit.sim.signals",
    "HdlDesign": "vkit.sim.hdlports",
    "LANGUAGES": "vkit.sim.simulators",
    "MIN_VERILATOR": "vkit.sim.simulators",
    "Port": "vkit.sim.hdlports",
    "STAMP_NAME": "vkit.sim.buildcache",
    "SignalMap": "vkit.sim.signals",
    "SimCase": "vkit.sim.case",
    "SimulatorInfo": "vkit.sim.simulators",
    "TIMEOUT_FACTOR": "vkit.sim.case",
    "TIMEOUT_MARGIN_CLOCKS": "vkit.sim.case",
    "activate": "vkit.sim.simulators",
    "build_key": "vkit.sim.buildcache",
    "cut_vcd": "vkit.sim.vcd",
    "default_cache_dir": "vkit.sim.buildcache",
    "dut_port_names": "vkit.sim.signals",
    "error_file_for": "vkit.sim.case",
    "eval_int": "vkit.sim.hdlports",
    "find": "vkit.sim.simulators",
    "find_design": "vkit.sim.hdlports",
    "language_of": "vkit.sim.hdlports",
    "list_designs": "vkit.sim.hdlports",
    "parse_ports": "vkit.sim.hdlports",
    "ports_from_verilator": "vkit.sim.hdlports",
    "require": "vkit.sim.simulators",
    "subprocess_env": "vkit.sim.simulators",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
