"""Verilog and SystemVerilog port lists as a compiler front end elaborates them (pyslang).

pyslang (the slang SystemVerilog compiler's Python binding) preprocesses the sources with the user's
defines and include folders, parses them as one compilation unit (as Icarus and Verilator do: a macro
defined in one file is seen by the next), and elaborates the top level with the parameter overrides;
widths are then the compiler's own (packed structs and arrays, package constants, ``$clog2``,
parameters computed from parameters). Any error of the front end becomes one ConfigError line naming
``file:line``, the compiler's message and the fix.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path

import pyslang

from vkit.core.errors import ConfigError
from vkit.sim.hdldesign import INTERFACE, HdlDesign, Port
from vkit.sim.simulators import TIMESCALE

__all__ = ["read_verilog"]

_DIRECTIONS = {"In": "input", "Out": "output", "InOut": "inout", "Ref": "inout"}

_FIXES = {
    "CouldNotOpenIncludeFile": "add the folder that holds it to include_dirs in the config (vkit init: --include-dir)",
    "UnknownModule": "add the file that defines it to the sources",
    "UnknownPackage": "add the file that defines the package to the sources, before the files that import it",
    "UnknownInterface": "add the file that defines the interface to the sources",
    "UndeclaredIdentifier": "define it, add the file (or package) that declares it to the sources, or pass the define",
    "UnknownDirective": "define the macro (defines in the config, vkit init: -D NAME=VALUE) or add its include folder",
    "ParamHasNoValue": "give the parameter a value in the config's parameters (vkit init: -P NAME=VALUE)",
}
_DEFAULT_FIX = "fix the source (a simulator would reject it too)"


def _bag(defines: Mapping[str, str], include_dirs: Sequence[Path], tops: Sequence[str],
         parameters: Mapping[str, int | str]) -> pyslang.Bag:
    pre = pyslang.parsing.PreprocessorOptions()
    pre.predefines = [f"{k}={v}" if str(v) != "" else k for k, v in defines.items()]
    pre.additionalIncludePaths = [str(p) for p in include_dirs]
    comp = pyslang.ast.CompilationOptions()
    comp.topModules = set(tops)
    comp.paramOverrides = [f"{k}={_sv_value(v)}" for k, v in parameters.items()]
    # A top level with interface ports is what the scaffold's wrapper is for: let it elaborate.
    comp.flags = pyslang.ast.CompilationFlags.AllowTopLevelIfacePorts
    # Builds give the simulators a default timescale, so a file without `timescale next to one with it is fine.
    comp.defaultTimeScale = pyslang.TimeScale.fromString("/".join(TIMESCALE))
    return pyslang.Bag([pre, comp])


def _sv_value(value: int | str) -> str:
    """A parameter override as SystemVerilog source text (a string becomes a string literal)."""
    if isinstance(value, bool):
        return str(int(value))
    if isinstance(value, int):
        return str(value)
    text = str(value)
    return text if text.lstrip("-").isdigit() or text.startswith('"') else '"' + text + '"'


def _raise_errors(diagnostics: object, manager: pyslang.SourceManager) -> None:
    """One ConfigError line for the first error of the front end (file:line, message, fix)."""
    errors = [d for d in diagnostics if d.isError()]  # type: ignore[attr-defined]
    if not errors:
        return
    first = errors[0]
    engine = pyslang.DiagnosticEngine(manager)
    where = "HDL sources"
    if first.location.buffer.id:
        where = f"{Path(manager.getFileName(first.location)).name}:{manager.getLineNumber(first.location)}"
    code = str(first.code).removeprefix("DiagCode(").removesuffix(")")
    more = f" (and {len(errors) - 1} more error(s))" if len(errors) > 1 else ""
    raise ConfigError(f"{where}: {engine.formatMessage(first)}{more}; {_FIXES.get(code, _DEFAULT_FIX)}")


def _trees(paths: Sequence[Path], manager: pyslang.SourceManager, bag: pyslang.Bag) -> pyslang.syntax.SyntaxTree:
    try:
        return pyslang.syntax.SyntaxTree.fromFiles([str(p) for p in paths], manager, bag)
    except (OSError, RuntimeError) as exc:  # the binding raises when a file cannot be read
        raise ConfigError(f"HDL sources: cannot read {', '.join(p.name for p in paths)} ({exc}); check the paths") from None


def _module_names(paths: Sequence[Path], defines: Mapping[str, str], include_dirs: Sequence[Path]) -> list[tuple[str, Path]]:
    """``(module name, file)`` of every module in the sources, in file order (not interfaces or packages)."""
    manager = pyslang.SourceManager()
    bag = _bag(defines, include_dirs, (), {})
    tree = _trees(paths, manager, bag)
    _raise_errors(tree.diagnostics, manager)
    comp = pyslang.ast.Compilation(bag)
    comp.addSyntaxTree(tree)
    found = []
    for d in comp.getDefinitions():
        if d.kind == pyslang.ast.SymbolKind.Definition and d.definitionKind == pyslang.ast.DefinitionKind.Module:
            found.append((manager.getFullPath(d.location.buffer).as_posix(), d.location.offset, d.name))
    given = {p.resolve().as_posix(): (i, p) for i, p in enumerate(paths)}
    found.sort(key=lambda f: (given.get(f[0], (len(given),))[0], f[1]))
    return [(name, given[file][1] if file in given else Path(file)) for file, _, name in found]


def _type_port(name: str, direction: str, dtype: object) -> Port:
    """A port (or modport member) of an elaborated type: its bits, sign and the type's text."""
    text = str(dtype)
    if dtype.isUnpackedArray or not dtype.isIntegral:  # type: ignore[attr-defined]
        return Port(name, direction, None, False, f"{text} (not a packed bit vector)")
    width = int(dtype.bitWidth)  # type: ignore[attr-defined]
    expr = "" if width == 1 and not dtype.isPackedArray and "::" not in text else text  # type: ignore[attr-defined]
    return Port(name, direction, width, bool(dtype.isSigned), expr)  # type: ignore[attr-defined]


def _interface_port(port: object) -> Port:
    """An interface port with the signals of its modport, each with the modport's direction."""
    iface = port.interfaceDef.name if port.interfaceDef else "?"  # type: ignore[attr-defined]
    modport_name = str(port.modport or "")  # type: ignore[attr-defined]
    members: list[Port] = []
    connection = port.connection  # type: ignore[attr-defined]
    modport = connection[1] if connection else None
    if modport is not None:
        for member in modport:
            if member.kind == pyslang.ast.SymbolKind.ModportPort:
                members.append(_type_port(member.name, _DIRECTIONS.get(member.direction.name, "inout"), member.type))
    expr = f"{iface}.{modport_name}" if modport_name else iface
    return Port(port.name, INTERFACE, None, False, expr, tuple(members))  # type: ignore[attr-defined]


def _ports(body: object) -> list[Port]:
    ports = []
    for p in body.portList:  # type: ignore[attr-defined]
        if p.kind == pyslang.ast.SymbolKind.InterfacePort:
            ports.append(_interface_port(p))
        elif p.kind == pyslang.ast.SymbolKind.Port:
            ports.append(_type_port(p.name, _DIRECTIONS.get(p.direction.name, "inout"), p.type))
        else:  # a multi-port (.a({x, y})): its parts have no single type
            ports.append(Port(p.name, "inout", None, False, "multi-port"))
    return ports


def _parameters(body: object) -> dict[str, int | None]:
    """Overridable parameters -> elaborated integer value (None for strings, reals).

    An untyped parameter whose default is a string literal (``parameter TABLE = "t.hex"``) elaborates to
    the string's bits; it is a file name to the user, so it counts as not an integer.
    """
    out: dict[str, int | None] = {}
    for prm in body.parameters:  # type: ignore[attr-defined]
        if prm.kind != pyslang.ast.SymbolKind.Parameter or prm.isLocalParam:
            continue
        value = prm.value.value
        if prm.initializer is not None and prm.initializer.isImplicitString:
            value = None
        out[prm.name] = int(value) if isinstance(value, pyslang.SVInt) and not value.hasUnknown else None
    return out


def read_verilog(paths: Sequence[Path], top: str | None = None, *, parameters: Mapping[str, int | str] | None = None,
                 defines: Mapping[str, str] | None = None, include_dirs: Sequence[Path] = ()) -> list[HdlDesign]:
    """Every module of Verilog/SystemVerilog ``paths`` in file order, ``top`` (or, when None, each) elaborated.

    Args:
        paths: the sources in compile order (one compilation unit).
        top: the module to elaborate as the top level; None elaborates every module, each as a top.
            Modules not elaborated (and every module when ``top`` is not among them) come without ports.
        parameters: overrides of top-level parameters (name -> integer or string).
        defines: macros (name -> text; ``""`` defines a name with no text).
        include_dirs: folders searched by `include (after the including file's own folder).

    Raises:
        ConfigError: a source cannot be read, or the front end reports an error (one line: file:line,
            its message and the fix).
    """
    defines = dict(defines or {})
    modules = _module_names(paths, defines, include_dirs)
    wanted = [m for m, _ in modules if top is None or m == top]
    bodies = {}
    if wanted:
        manager = pyslang.SourceManager()
        bag = _bag(defines, include_dirs, wanted, dict(parameters or {}))
        comp = pyslang.ast.Compilation(bag)
        comp.addSyntaxTree(_trees(paths, manager, bag))
        root = comp.getRoot()
        _raise_errors(comp.getAllDiagnostics(), manager)
        bodies = {inst.body.definition.name: inst.body for inst in root.topInstances}
    return [HdlDesign(name, "verilog", path, _ports(bodies[name]), _parameters(bodies[name]), "slang")
            if name in bodies else HdlDesign(name, "verilog", path, reader="slang") for name, path in modules]
