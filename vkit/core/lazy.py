"""Lazy package facades: a layer's public names, each imported from its home module on first use."""

from __future__ import annotations

import importlib
from typing import Any, Callable, Mapping

__all__ = ["lazy_facade"]


def lazy_facade(package: str, homes: Mapping[str, str]
                ) -> tuple[Callable[[str], Any], Callable[[], list[str]], list[str]]:
    """``__getattr__``, ``__dir__`` and ``__all__`` for ``package``.

    Args:
        package: the package's ``__name__``.
        homes: module -> its public names, white-space separated (``{"vkit.check.scoreboard": "score"}``).

    Lazy on purpose: a facade must not import the whole layer (the simulator side would pull in cocotb,
    the model side its tables) just because one name of it was asked for.
    """
    home = {name: module for module, names in homes.items() for name in names.split()}

    def __getattr__(name: str) -> Any:
        if name in home:
            return getattr(importlib.import_module(home[name]), name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return sorted(home)

    return __getattr__, __dir__, sorted(home)
