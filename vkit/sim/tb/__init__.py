"""The simulator side: signal map, video and stream sources, sinks and monitors, the cocotb test entry."""

from __future__ import annotations

import importlib
from typing import Any

__all__ = [
    "SignalMap",
    "SimCase",
    "VideoSource",
    "VideoMonitor",
    "StreamSource",
    "StreamSink",
    "StreamMonitor",
    "run_case",
]

# Lazy on purpose: the runner imports vkit.sim.case and vkit.sim.signals, which must work without cocotb
# being importable in a live simulator; the components load only when asked for.
_HOME = {
    "SignalMap": "vkit.sim.signals",
    "SimCase": "vkit.sim.case",
    "VideoSource": "vkit.sim.tb.video",
    "VideoMonitor": "vkit.sim.tb.video",
    "StreamSource": "vkit.sim.tb.stream",
    "StreamSink": "vkit.sim.tb.stream",
    "StreamMonitor": "vkit.sim.tb.stream",
    "run_case": "vkit.sim.tb.entry",
}


def __getattr__(name: str) -> Any:
    if name in _HOME:
        return getattr(importlib.import_module(_HOME[name]), name)
    raise AttributeError(f"module 'vkit.tb' has no attribute {name!r}")
