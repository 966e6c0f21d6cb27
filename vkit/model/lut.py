"""Lookup-table contents and writers for $readmemh / $readmemb files and VHDL constant packages."""

from __future__ import annotations

import math
import re
from fractions import Fraction
from numbers import Real
from pathlib import Path
from typing import Any, Callable, Union

import numpy as np

from vkit.core.errors import ConfigError
from vkit.model.fixedpoint import check_rounding
from vkit.model.magnitude import table_dtype

__all__ = [
    "table_from_function",
    "write_readmemh",
    "write_readmemb",
    "read_readmemh",
    "read_readmemb",
    "write_vhdl_package",
]

PathLike = Union[str, Path]

# IEEE 1076-2008 reserved words (a VHDL identifier may not be one of them).
_VHDL_RESERVED = frozenset(
    """abs access after alias all and architecture array assert assume assume_guarantee attribute begin block
    body buffer bus case component configuration constant context cover default disconnect downto else elsif
    end entity exit fairness file for force function generate generic group guarded if impure in inertial
    inout is label library linkage literal loop map mod nand new next nor not null of on open or others out
    package parameter port postponed procedure process property protected pure range record register reject
    release rem report restrict restrict_guarantee return rol ror select sequence severity shared signal sla
    sll sra srl strong subtype then to transport type unaffected units until use variable vmode vprop vunit
    wait when while with xnor xor""".split()
)
_VHDL_IDENTIFIER = re.compile(r"^[A-Za-z](?:_?[A-Za-z0-9])*$")


def _round_real(value: Any, rounding: str, address: int) -> int:
    """Round a non-negative real exactly: floor, or floor(value + 1/2)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (Real, np.integer, np.floating)):
        raise ConfigError(f"table function returned {value!r} at address {address}; it must return a real number")
    if isinstance(value, (int, np.integer)):
        exact: Any = int(value)
    elif isinstance(value, (float, np.floating)):
        if not math.isfinite(value):
            raise ConfigError(f"table function returned {value!r} at address {address}; it must be finite")
        exact = Fraction(float(value))  # exact binary value: no double rounding when adding 1/2
    else:
        exact = Fraction(value)
    if exact < 0:
        raise ConfigError(f"table function returned {value!r} at address {address}; table words are unsigned (>= 0)")
    if rounding == "half_even":
        return round(exact)  # Fraction.__round__ sends ties to even (Python language reference)
    if rounding == "half_up":
        exact = exact + Fraction(1, 2)
    return math.floor(exact)


def table_from_function(
    fn: Callable[[int], Any], address_bits: int, data_bits: int, rounding: str = "truncate"
) -> np.ndarray:
    """Table of ``fn(a)`` for every address ``a`` in ``0 .. 2**address_bits - 1``.

    Args:
        fn: maps an int address to a non-negative real (int, float, Fraction).
        address_bits: table depth is ``2**address_bits`` words, 1..20.
        data_bits: word width, 1..64; larger values saturate to ``2**data_bits - 1``.
        rounding: ``"truncate"`` floors, ``"half_up"`` rounds halves up (both exact, also for floats).

    Returns:
        uint array (uint8/16/32/64 by ``data_bits``).
    """
    check_rounding(rounding)
    dtype = table_dtype(data_bits)
    if isinstance(address_bits, bool) or not isinstance(address_bits, (int, np.integer)) or not 1 <= address_bits <= 20:
        raise ConfigError(f"address_bits={address_bits!r} must be an integer in 1..20 for a computed table")
    top = (1 << data_bits) - 1
    words = [min(_round_real(fn(a), rounding, a), top) for a in range(1 << address_bits)]
    return np.array(words, dtype=dtype)


def _check_table(table: Any, data_bits: int) -> list[int]:
    arr = np.asarray(table)
    table_dtype(data_bits)
    if arr.ndim != 1 or arr.size == 0:
        raise ConfigError(f"table has shape {arr.shape}; expected a non-empty 1-D array of words")
    if arr.dtype.kind not in "iu":
        raise ConfigError(f"table has dtype {arr.dtype}; expected unsigned integer words")
    words = [int(v) for v in arr.tolist()]
    low, high = min(words), max(words)
    if low < 0 or high >= (1 << data_bits):
        bad = low if low < 0 else high
        raise ConfigError(f"table word {bad} does not fit {data_bits} unsigned bits; saturate it or widen data_bits")
    return words


def _comment_lines(comment: str, prefix: str) -> list[str]:
    return [f"{prefix} {line}".rstrip() for line in comment.splitlines()] if comment else []


def _write_text(path: PathLike, text: str) -> Path:
    target = Path(path)
    try:
        target.write_text(text, encoding="ascii")
    except OSError as exc:
        raise ConfigError(f"cannot write table file {target}: {exc.strerror}; check the directory exists and is writable") from None
    return target


def write_readmemh(table: Any, path: PathLike, data_bits: int, comment: str = "") -> Path:
    """Write a table as IEEE 1364 ``$readmemh`` text: one word per line, ``ceil(data_bits/4)`` hex digits.

    Args:
        table: 1-D array of unsigned words, each below ``2**data_bits``.
        path: output file.
        data_bits: word width (sets the digit count).
        comment: optional text, written as ``//`` lines at the top.
    """
    words = _check_table(table, data_bits)
    digits = (data_bits + 3) // 4
    lines = _comment_lines(comment, "//") + [f"{w:0{digits}x}" for w in words]
    return _write_text(path, "\n".join(lines) + "\n")


def write_readmemb(table: Any, path: PathLike, data_bits: int, comment: str = "") -> Path:
    """Write a table as IEEE 1364 ``$readmemb`` text: one word per line, ``data_bits`` binary digits."""
    words = _check_table(table, data_bits)
    lines = _comment_lines(comment, "//") + [f"{w:0{data_bits}b}" for w in words]
    return _write_text(path, "\n".join(lines) + "\n")


def _read_readmem(path: PathLike, base: int) -> np.ndarray:
    source = Path(path)
    try:
        text = source.read_text(encoding="ascii")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot read memory file {source}: {exc}; check the path") from None
    text = re.sub(r"/\*.*?\*/", " ", text, flags=re.S)
    text = re.sub(r"//[^\n]*", " ", text)
    values: dict[int, int] = {}
    address = 0
    for token in text.split():
        clean = token.replace("_", "")
        try:
            if clean.startswith("@"):
                address = int(clean[1:], 16)
                continue
            values[address] = int(clean, base)
        except ValueError:
            raise ConfigError(
                f"memory file {source}: word {token!r} is not a base-{base} number (x/z digits are not supported)"
            ) from None
        address += 1
    if not values:
        raise ConfigError(f"memory file {source} holds no words")
    depth = max(values) + 1
    if len(values) != depth:
        missing = next(a for a in range(depth) if a not in values)
        raise ConfigError(f"memory file {source}: address {missing} is never written; write every word from 0")
    words = [values[a] for a in range(depth)]
    return np.array(words, dtype=table_dtype(max(1, max(words).bit_length())))


def read_readmemh(path: PathLike) -> np.ndarray:
    """Read ``$readmemh`` text (``//`` and ``/* */`` comments, ``@address`` lines, ``_`` separators) into a uint array."""
    return _read_readmem(path, 16)


def read_readmemb(path: PathLike) -> np.ndarray:
    """Read ``$readmemb`` text into a uint array (same syntax as :func:`read_readmemh`, binary words)."""
    return _read_readmem(path, 2)


def _check_vhdl_identifier(name: str, what: str) -> str:
    if not isinstance(name, str) or not _VHDL_IDENTIFIER.match(name) or name.lower() in _VHDL_RESERVED:
        raise ConfigError(
            f"{what} {name!r} is not a VHDL basic identifier; use a letter then letters, digits and single underscores"
        )
    return name


def write_vhdl_package(
    table: Any, path: PathLike, package_name: str, data_bits: int, constant_name: str = "TABLE", comment: str = ""
) -> Path:
    """Write a VHDL-93 package holding the table as one constant array of ``std_logic_vector`` words.

    The package declares ``<constant>_word_t`` (``std_logic_vector(data_bits-1 downto 0)``),
    ``<constant>_array_t`` (``array (0 to depth-1)``) and the constant itself. Words are hex bit-string
    literals when ``data_bits`` is a multiple of 4, binary strings otherwise (VHDL-93 has no sized hex).

    Args:
        table: 1-D array of unsigned words below ``2**data_bits``.
        path: output ``.vhd`` file.
        package_name: VHDL identifier of the package.
        data_bits: word width.
        constant_name: VHDL identifier of the constant.
        comment: optional text, written as ``--`` lines at the top.
    """
    words = _check_table(table, data_bits)
    _check_vhdl_identifier(package_name, "package name")
    _check_vhdl_identifier(constant_name, "constant name")
    stem = constant_name.lower()
    word_t, array_t = f"{stem}_word_t", f"{stem}_array_t"
    if data_bits % 4 == 0:
        literals = [f'x"{w:0{data_bits // 4}X}"' for w in words]
    else:
        literals = [f'"{w:0{data_bits}b}"' for w in words]
    per_line = max(1, 96 // (len(literals[0]) + 2))
    if len(literals) == 1:
        body = [f"    0 => {literals[0]}"]
    else:
        body = [
            "    " + ", ".join(literals[i : i + per_line]) + ("," if i + per_line < len(literals) else "")
            for i in range(0, len(literals), per_line)
        ]
    lines = _comment_lines(comment, "--") + [
        "library ieee;",
        "use ieee.std_logic_1164.all;",
        "",
        f"package {package_name} is",
        f"  constant {constant_name}_DEPTH : natural := {len(words)};",
        f"  constant {constant_name}_WIDTH : natural := {data_bits};",
        f"  subtype {word_t} is std_logic_vector({data_bits - 1} downto 0);",
        f"  type {array_t} is array (0 to {len(words) - 1}) of {word_t};",
        f"  constant {constant_name} : {array_t} := (",
        *body,
        "  );",
        f"end package {package_name};",
    ]
    return _write_text(path, "\n".join(lines) + "\n")
