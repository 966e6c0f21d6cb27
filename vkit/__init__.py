"""vkit: a verification kit for streaming 3x3 video-filter RTL."""

from __future__ import annotations

__all__ = ["__version__"]

__version__ = "0.1.0"
