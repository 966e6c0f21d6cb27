"""The pytest plugin (``-p vkit.pytest_plugin`` or ``pytest_plugins = ["vkit.pytest_plugin"]``): every
``vkit.toml`` case becomes a pytest item. The hooks live in :mod:`vkit.run.pytest_plugin`."""

from __future__ import annotations

from vkit.run.pytest_plugin import *  # noqa: F401,F403  (pytest reads the hooks off this module)
from vkit.run.pytest_plugin import __all__  # noqa: F401
