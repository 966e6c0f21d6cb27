"""Old import paths from before the layer packages: each still imports, as the new module, with a warning.

Generated user tests (``vkit init`` of earlier releases) import ``vkit.config``, ``vkit.pipeline``, ...;
cocotb loads ``vkit.tb.entry`` and ``vkit.tb.fast`` by name. One table maps every old module to its home.
"""

from __future__ import annotations

import importlib
import importlib.abc
import importlib.machinery
import sys
import warnings
from types import ModuleType

__all__ = ["MOVED", "install"]

MOVED: dict[str, str] = {
    "vkit.errors": "vkit.core.errors",
    "vkit.fixedpoint": "vkit.model.fixedpoint",
    "vkit.luma": "vkit.model.luma",
    "vkit.window": "vkit.model.window",
    "vkit.kernels": "vkit.model.kernels",
    "vkit.magnitude": "vkit.model.magnitude",
    "vkit.lut": "vkit.model.lut",
    "vkit.widths": "vkit.model.widths",
    "vkit.quality": "vkit.report.quality",  # with the file-writing half; the figures are re-exported
    "vkit.pipeline": "vkit.model.pipeline",
    "vkit.timing": "vkit.video.timing",
    "vkit.images": "vkit.video.images",
    "vkit.patterns": "vkit.video.patterns",
    "vkit.capture": "vkit.video.capture",
    "vkit.tb": "vkit.sim.tb",
    "vkit.tb.signals": "vkit.sim.signals",
    "vkit.tb.case": "vkit.sim.case",
    "vkit.tb.video": "vkit.sim.tb.video",
    "vkit.tb.stream": "vkit.sim.tb.stream",
    "vkit.tb.entry": "vkit.sim.tb.entry",
    "vkit.tb.fast": "vkit.sim.tb.fast",
    "vkit.simulators": "vkit.sim.simulators",
    "vkit.buildcache": "vkit.sim.buildcache",
    "vkit.vcd": "vkit.sim.vcd",
    "vkit.hdlports": "vkit.sim.hdlports",
    "vkit.harness": "vkit.sim.fast",
    "vkit.stimulus": "vkit.sim.fast",
    "vkit.capture_text": "vkit.sim.fast",
    "vkit.align": "vkit.check.align",
    "vkit.scoreboard": "vkit.check.scoreboard",
    "vkit.diagnose": "vkit.check.diagnose",
    "vkit.config": "vkit.run.config",
    "vkit.runner": "vkit.run.runner",
    "vkit.export": "vkit.run.export",
    "vkit.vectors": "vkit.run.vectors",
    "vkit.scaffold": "vkit.run.scaffold",
}
"""Old module path -> the module that holds its names now (``vkit.report`` is a package with the same names)."""


class _Alias(importlib.abc.MetaPathFinder, importlib.abc.Loader):
    """Finds an old path and hands back the new module itself, so both names share one module object."""

    def find_spec(self, fullname: str, path: object = None, target: object = None) -> importlib.machinery.ModuleSpec | None:
        if fullname not in MOVED:
            return None
        return importlib.machinery.ModuleSpec(fullname, self, is_package=fullname == "vkit.tb")

    def create_module(self, spec: importlib.machinery.ModuleSpec) -> ModuleType:
        new = MOVED[spec.name]
        warnings.warn(
            f"{spec.name} moved to {new}; import it from there (the old path will go in a later release)",
            DeprecationWarning,
            stacklevel=4,
        )
        return importlib.import_module(new)

    def exec_module(self, module: ModuleType) -> None:
        """The new module is already executed."""


def install() -> None:
    """Put the old-path finder first on ``sys.meta_path``, once.

    First, because ``vkit.tb`` is the package ``vkit.sim.tb`` itself: the path finder would otherwise load
    ``vkit.tb.entry`` from that package's folder as a second copy of ``vkit.sim.tb.entry``.
    """
    if not any(isinstance(f, _Alias) for f in sys.meta_path):
        sys.meta_path.insert(0, _Alias())
