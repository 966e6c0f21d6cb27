"""VHDL entity ports and generics: GHDL's own analysis and elaboration, the light entity reader as fallback.

With GHDL on the machine the sources are analysed by GHDL (its first error becomes one ConfigError line
naming file:line) and the entity is elaborated with a probe architecture that reports each generic's
value and each array port's ``'length``, so widths are GHDL's own (any expression, package constants,
functions). The light reader of the entity header gives the port names and modes, and stands in for
the widths when GHDL is absent.
"""

from __future__ import annotations

import ast
import math
import re
from collections.abc import Mapping
from pathlib import Path

from vkit.core.errors import ConfigError
from vkit.sim.hdldesign import HdlDesign, Port

__all__ = ["eval_int", "vhdl_entities"]

_MAX_POW_EXPONENT = 1024

_VHDL_BASED = re.compile(r"\b(\d+)#([0-9a-fA-F_]+)#")

def _eval_node(node: ast.AST, names: Mapping[str, int | None]) -> int:
    if isinstance(node, ast.Expression):
        return _eval_node(node.body, names)
    if isinstance(node, ast.Constant) and isinstance(node.value, int) and not isinstance(node.value, bool):
        return node.value
    if isinstance(node, ast.Name):
        value = names.get(node.id)
        if value is None:
            raise ValueError(node.id)
        return value
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        v = _eval_node(node.operand, names)
        return -v if isinstance(node.op, ast.USub) else v
    if isinstance(node, ast.BinOp):
        a = _eval_node(node.left, names)
        b = _eval_node(node.right, names)
        op = node.op
        if isinstance(op, ast.Add):
            return a + b
        if isinstance(op, ast.Sub):
            return a - b
        if isinstance(op, ast.Mult):
            return a * b
        if isinstance(op, ast.FloorDiv):
            # VHDL integer division truncates toward zero (IEEE 1076-2008 9.2.7).
            return int(a / b) if b else _raise_zero()
        if isinstance(op, ast.Mod):
            return int(math.fmod(a, b)) if b else _raise_zero()  # rem; mod is read as rem
        if isinstance(op, ast.Pow):
            if b < 0 or b > _MAX_POW_EXPONENT:
                raise ValueError("exponent")
            return a**b
    raise ValueError(type(node).__name__)


def _raise_zero() -> int:
    raise ValueError("division by zero")


def eval_int(expr: str, names: Mapping[str, int | None] | None = None) -> int | None:
    """Evaluate a constant VHDL integer expression of a port range or generic default (the fallback reader).

    Understands decimal and based literals (``16#FF#``), ``+ - * / mod rem **``, parentheses and
    generic names from ``names`` (case-insensitive). Division truncates toward zero.

    Returns:
        The value, or None when the expression uses anything else (an unknown name, a function call,
        an attribute).
    """
    text = _VHDL_BASED.sub(lambda m: str(int(m.group(2).replace("_", ""), int(m.group(1)))), expr.strip())
    text = re.sub(r"\b(mod|rem)\b", "%", text, flags=re.I)
    text = re.sub(r"(?<=\d)_(?=\d)", "", text)
    if not text or re.search(r"[?:'\"$\[\]{}=<>!&|^~]", text):
        return None
    text = re.sub(r"[A-Za-z_]\w*", lambda m: m.group(0).lower(), text.replace("/", "//"))
    try:
        return _eval_node(ast.parse(text, mode="eval"), {k.lower(): v for k, v in (names or {}).items()})
    except (SyntaxError, ValueError, RecursionError, OverflowError, TypeError):
        return None


def _split_top(text: str, sep: str) -> list[str]:
    """Split at ``sep`` outside (), [], {} (``sep`` is one character)."""
    parts: list[str] = []
    depth = 0
    start = 0
    for i, ch in enumerate(text):
        if ch in "([{":
            depth += 1
        elif ch in ")]}":
            depth -= 1
        elif ch == sep and depth == 0:
            parts.append(text[start:i])
            start = i + 1
    parts.append(text[start:])
    return parts


def _balanced(text: str, open_at: int) -> int:
    """Index just past the parenthesis matching the one at ``open_at``; -1 when unbalanced."""
    depth = 0
    for i in range(open_at, len(text)):
        ch = text[i]
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
            if depth == 0:
                return i + 1
    return -1


_ENTITY = re.compile(r"\bentity\s+([A-Za-z]\w*)\s+is\b", re.I)
_VHDL_MODES = {"in": "input", "out": "output", "inout": "inout", "buffer": "output", "linkage": "inout"}
_VHDL_SCALARS = {"std_logic": 1, "std_ulogic": 1, "bit": 1, "boolean": 1}
_VHDL_VECTORS = {"std_logic_vector": False, "std_ulogic_vector": False, "bit_vector": False, "unsigned": False, "signed": True, "u_unsigned": False, "u_signed": True}


def _strip_vhdl_comments(text: str) -> str:
    text = re.sub(r"/\*.*?\*/", lambda m: "\n" * m.group(0).count("\n"), text, flags=re.S)
    out = []
    for line in text.split("\n"):
        # a '--' inside a string literal is rare in port clauses; cut at the first one outside quotes
        cut = len(line)
        inq = False
        for i, ch in enumerate(line):
            if ch == '"':
                inq = not inq
            elif not inq and line.startswith("--", i):
                cut = i
                break
        out.append(line[:cut])
    return "\n".join(out)


def _clause(text: str, keyword: str) -> str | None:
    m = re.search(r"\b" + keyword + r"\s*\(", text, re.I)
    if not m:
        return None
    open_at = m.end() - 1
    end = _balanced(text, open_at)
    return None if end < 0 else text[open_at + 1 : end - 1]


def _vhdl_range_width(rng: str, params: Mapping[str, int | None]) -> int | None:
    m = re.match(r"(.*?)\s+(downto|to)\s+(.*)$", rng.strip(), re.I | re.S)
    if not m:
        return None
    lv, rv = eval_int(m.group(1), params), eval_int(m.group(3), params)
    if lv is None or rv is None:
        return None
    return abs(lv - rv) + 1


def _vhdl_type(subtype: str, params: Mapping[str, int | None]) -> tuple[int | None, bool]:
    text = " ".join(subtype.split())
    m = re.match(r"(?:\w+\.)*(\w+)\s*(.*)$", text, re.S)
    if not m:
        return None, False
    mark, constraint = m.group(1).lower(), m.group(2).strip()
    if mark in _VHDL_SCALARS and not constraint:
        return 1, False
    if mark in _VHDL_VECTORS:
        if constraint.startswith("(") and constraint.endswith(")"):
            return _vhdl_range_width(constraint[1:-1], params), _VHDL_VECTORS[mark]
        return None, _VHDL_VECTORS[mark]
    if mark in ("integer", "natural", "positive"):
        rm = re.match(r"range\s+(.*?)\s+(to|downto)\s+(.*)$", constraint, re.I)
        if rm:
            a, b = eval_int(rm.group(1), params), eval_int(rm.group(3), params)
            if a is not None and b is not None:
                lo, hi = min(a, b), max(a, b)
                if lo >= 0:
                    return max(1, hi.bit_length()), False
                return max((-lo - 1).bit_length(), hi.bit_length()) + 1, True
            return None, mark == "integer"
        return 32, mark == "integer"
    return None, False


_INTEGER_MARKS = ("integer", "natural", "positive")


def _entity_decl(text: str, start: int) -> str:
    """The entity declaration from ``start`` up to its own ``begin`` or ``end`` (the clauses sit there)."""
    depth = 0
    for i in range(start, len(text)):
        ch = text[i]
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
        elif depth == 0 and re.match(r"\b(end|begin)\b", text[i : i + 6], re.I) and not re.match(r"\w", text[i - 1]):
            return text[start:i]
    return text[start:]


def _generics(decl: str, overrides: Mapping[str, int]) -> tuple[dict[str, int | None], dict[str, int | None], set[str]]:
    """(generics by lower-case name, generics as written -> value, the integer-typed generics as written)."""
    low_over = {k.lower(): int(v) for k, v in overrides.items()}
    params: dict[str, int | None] = {}
    written: dict[str, int | None] = {}
    integers: set[str] = set()
    for item in _split_top(_clause(decl, "generic") or "", ";"):
        if ":" not in item:
            continue
        names_part, rest = item.split(":", 1)
        default = rest.split(":=", 1)[1] if ":=" in rest else ""
        mark = rest.split(":=", 1)[0].strip().split(" ")[0].lower()
        for gname in (n.strip() for n in names_part.split(",")):
            if gname:
                key = gname.lower()
                params[key] = low_over[key] if key in low_over else eval_int(default, params)
                written[gname] = params[key]
                if mark in _INTEGER_MARKS:
                    integers.add(gname)
    return params, written, integers


def _entity_ports(decl: str, params: Mapping[str, int | None]) -> list[Port]:
    gm = re.search(r"\bgeneric\s*\(", decl, re.I)
    after_generic = decl[_balanced(decl, gm.end() - 1) :] if gm and _balanced(decl, gm.end() - 1) > 0 else decl
    ports: list[Port] = []
    for item in _split_top(_clause(after_generic, "port") or "", ";"):
        if ":" not in item:
            continue
        names_part, rest = item.split(":", 1)
        rest = rest.split(":=", 1)[0].strip()
        mm = re.match(r"(in|out|inout|buffer|linkage)\b\s*(.*)$", rest, re.I | re.S)
        mode, subtype = (mm.group(1).lower(), mm.group(2)) if mm else ("in", rest)
        width, signed = _vhdl_type(subtype, params)
        expr = " ".join(subtype.split())
        for pname in (n.strip() for n in names_part.split(",")):
            if pname:
                ports.append(Port(pname, _VHDL_MODES[mode], width, signed, "" if width == 1 and "(" not in expr else expr))
    return ports


def _light_entities(path: Path, text: str, overrides: Mapping[str, int]) -> list[tuple[HdlDesign, set[str]]]:
    """Every entity of one file as the light reader sees it, with its integer-typed generics."""
    text = _strip_vhdl_comments(text)
    out = []
    for m in _ENTITY.finditer(text):
        decl = _entity_decl(text, m.end())
        params, written, integers = _generics(decl, overrides)
        out.append((HdlDesign(m.group(1), "vhdl", path, _entity_ports(decl, params), written, "vkit"), integers))
    return out


# -- GHDL ------------------------------------------------------------------------------------------

_PROBE = "vkit-probe"
_GHDL_MESSAGE = re.compile(r"^(?P<file>[^:\s]+):(?P<line>\d+):(?:\d+:)?\s*(?P<text>.*)$")


def _is_vector(port: Port) -> bool:
    """A port whose type is a one-dimensional array GHDL can report the ``'length`` of."""
    mark = port.width_expr.split("(", 1)[0].strip().lower().rsplit(".", 1)[-1]
    return mark in _VHDL_VECTORS or (port.width is None and "(" in port.width_expr and "range" not in mark)


def _probe_text(design: HdlDesign, integers: set[str]) -> str:
    """An architecture of the entity that reports each integer generic and each vector port's length."""
    reports = [f'report "{_PROBE} generic {g} " & integer\'image({g});' for g in design.parameters if g in integers]
    reports += [f'report "{_PROBE} port {p.name} " & integer\'image({p.name}\'length);'
                for p in design.ports if _is_vector(p)]
    body = "\n".join(f"    {r}" for r in reports)
    return f"architecture vkit_probe of {design.name} is\nbegin\n  process begin\n{body}\n    wait;\n  end process;\nend architecture;\n"


def _ghdl_run(cmd: list[str], cwd: Path, env: Mapping[str, str], sources: list[Path], strict: bool = True) -> str | None:
    """Run one GHDL step; its output, or its first error as one ConfigError line naming file:line.

    With ``strict`` False a failure outside the user's sources (in vkit's probe) returns None instead:
    the light reader's view then stands.
    """
    import subprocess

    proc = subprocess.run(cmd, capture_output=True, text=True, cwd=cwd, env=dict(env), timeout=120, check=False)
    if proc.returncode == 0:
        return proc.stdout + proc.stderr
    lines = (proc.stderr or proc.stdout).splitlines()
    first = next((m for ln in lines if (m := _GHDL_MESSAGE.match(ln.strip()))), None)
    names = {p.name for p in sources}
    if first is not None and Path(first["file"]).name in names:
        raise ConfigError(f"{Path(first['file']).name}:{first['line']}: {first['text']}; fix the source (GHDL rejects it)")
    if not strict:
        return None
    detail = first["text"] if first is not None else (lines[0] if lines else f"exit {proc.returncode}")
    raise ConfigError(f"GHDL could not read the VHDL sources ({detail}); fix the sources or the top name")


def _ghdl_elaborate(paths: list[Path], design: HdlDesign, integers: set[str], overrides: Mapping[str, int]) -> HdlDesign:
    """``design`` with GHDL's own generic values and vector port widths (analysis, then a probe run)."""
    import tempfile

    from vkit.sim.simulators import find, subprocess_env

    env = subprocess_env(find("ghdl"))
    with tempfile.TemporaryDirectory(prefix="vkit-ghdl-") as tmp:
        work = Path(tmp)
        (work / "vkit_probe.vhd").write_text(_probe_text(design, integers))
        common = ["--std=08", f"--workdir={work}"]  # as vkit builds VHDL
        _ghdl_run(["ghdl", "-a", *common, *(str(p.resolve()) for p in paths)], work, env, paths)
        known = {g.lower(): g for g in design.parameters}
        generics = [f"-g{known[k.lower()]}={int(v)}" for k, v in overrides.items() if k.lower() in known]
        out = _ghdl_run(["ghdl", "-a", *common, str(work / "vkit_probe.vhd")], work, env, paths, strict=False)
        if out is not None:
            out = _ghdl_run(["ghdl", "--elab-run", *common, design.name.lower(), "vkit_probe", *generics], work, env,
                            paths, strict=False)
    if out is None:  # vkit's probe did not fit this entity (a port type it misread): keep the light reader's view
        return design
    found = {(m[1], m[2].lower()): int(m[3]) for m in re.finditer(rf"{_PROBE} (generic|port) (\w+) (-?\d+)", out)}
    parameters = {g: found.get(("generic", g.lower()), v) for g, v in design.parameters.items()}
    ports = [Port(p.name, p.direction, found.get(("port", p.name.lower()), p.width), p.signed, p.width_expr)
             for p in design.ports]
    return HdlDesign(design.name, "vhdl", design.path, ports, parameters, "ghdl")


def _ghdl_available() -> bool:
    from vkit.sim.simulators import find

    return find("ghdl").available


def vhdl_entities(paths: list[Path], top: str | None = None, *, parameters: Mapping[str, int] | None = None,
                  use_ghdl: bool = True) -> list[HdlDesign]:
    """Every entity of ``paths``; the one named ``top`` (case-insensitive) elaborated by GHDL when it is there.

    Args:
        paths: VHDL sources in compile order.
        top: the entity to elaborate; None reads every entity with the light reader only.
        parameters: generic overrides (name -> integer).
        use_ghdl: False keeps to the light reader (GHDL absent, or a caller that wants no subprocess).

    Raises:
        ConfigError: a file cannot be read, or GHDL rejects the sources (one line: file:line and the fix).
    """
    overrides = dict(parameters or {})
    found: list[tuple[HdlDesign, set[str]]] = []
    for path in paths:
        found += _light_entities(path, _read(path), overrides)
    if top is None or not use_ghdl or not _ghdl_available():
        return [d for d, _ in found]
    return [_ghdl_elaborate(paths, d, ints, overrides) if d.name.lower() == top.lower() else d for d, ints in found]


def _read(path: Path) -> str:
    try:
        return path.read_text(errors="replace")
    except FileNotFoundError:
        raise ConfigError(f"HDL source {str(path)!r} does not exist; check the path (relative paths are from the current folder)") from None
    except IsADirectoryError:
        raise ConfigError(f"HDL source {str(path)!r} is a folder; list the files in it instead") from None
