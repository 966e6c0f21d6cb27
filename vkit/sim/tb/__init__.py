"""The simulator side: signal map, video and stream sources, sinks and monitors, the cocotb test entry."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

# Lazy on purpose: the runner imports vkit.sim.case and vkit.sim.signals, which must work without cocotb
# being importable in a live simulator; the components load only when asked for.
__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.sim.case": "SimCase",
    "vkit.sim.signals": "SignalMap",
    "vkit.sim.tb.entry": "run_case",
    "vkit.sim.tb.stream": "StreamMonitor StreamSink StreamSource",
    "vkit.sim.tb.video": "VideoMonitor VideoSource",
})
