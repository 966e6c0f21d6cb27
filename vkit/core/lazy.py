"""Lazy package facades: a layer's public names, each imported from its home module on first use."""

from __future__ import annotations

import importlib
from typing import Any, Callable, Mapping

__all__ = ["lazy_facade"]


def lazy_facade(package: str, home: Mapping[str, str]) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """``__getattr__`` and ``__dir__`` for ``package`` whose public ``name`` lives in module ``home[name]``.

    Lazy on purpose: a facade must not import the whole layer (the simulator side would pull in cocotb,
    the model side its tables) just because one name of it was asked for.
    """

    def __getattr__(name: str) -> Any:
        if name in home:
            return getattr(importlib.import_module(home[name]), name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return sorted(home)

    return __getattr__, __dir__
