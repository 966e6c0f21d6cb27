"""The bottom layer: error types with their exit codes, value checks, the shared vocabularies."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.core.errors": "ConfigError DutError EXIT_CONFIG EXIT_DUT EXIT_PASS ToolError VkitError",
    "vkit.core.lazy": "lazy_facade",
})
