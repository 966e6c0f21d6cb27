"""The simulator side: signal maps, cocotb sources and monitors, simulators and builds.

The fast path (generated HDL harness, stimulus files, capture file reader, native runs) has its own
facade, :mod:`vkit.sim.fast`."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.sim.buildcache": (
        "BUILD_FORMAT build_key BuildCache BuildOutcome BuildRequest "
        "default_cache_dir STAMP_NAME"
    ),
    "vkit.sim.case": "CASE_ENV error_file_for SimCase TIMEOUT_FACTOR TIMEOUT_MARGIN_CLOCKS",
    "vkit.sim.hdlports": (
        "eval_int find_design HdlDesign INTERFACE language_of list_designs parse_ports Port "
        "ports_from_verilator"
    ),
    "vkit.sim.ifwrap": "FlatWrapper flat_wrapper",
    "vkit.sim.signals": "CONTROL_ROLES dut_port_names FAMILY_ROLES SignalMap",
    "vkit.sim.simulators": (
        "activate find LANGUAGES MIN_VERILATOR require SimulatorInfo "
        "subprocess_env"
    ),
    "vkit.sim.vcd": "cut_vcd",
})
