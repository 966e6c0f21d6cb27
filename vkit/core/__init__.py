"""The bottom layer: error types with their exit codes, value checks, the shared vocabularies."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

_HOME = {
    "ConfigError": "vkit.core.errors",
    "DutError": "vkit.core.errors",
    "EXIT_CONFIG": "vkit.core.errors",
    "EXIT_DUT": "vkit.core.errors",
    "EXIT_PASS": "vkit.core.errors",
    "ToolError": "vkit.core.errors",
    "VkitError": "vkit.core.errors",
    "lazy_facade": "vkit.core.lazy",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
