"""vkit: a verification kit for streaming 3x3 video-filter RTL.

The layers, bottom to top, each importing only the ones below it: ``core`` (errors, checks, vocabularies),
``model`` (bit-exact model), ``video`` (timing, images, patterns, captures), ``sim`` (simulator side) and
``check`` (verdicts) side by side, ``report``, ``run`` (configs, runner, scaffold), and ``cli`` on top.
"""

from __future__ import annotations

from vkit import _legacy

__all__ = ["__version__"]

__version__ = "0.1.0"

_legacy.install()
