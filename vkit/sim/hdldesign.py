"""What a port reader finds in HDL sources: modules and entities with their ports and parameters."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from vkit.core.errors import ConfigError
from vkit.core.vocab import HDL_SUFFIXES, VERILOG_SUFFIXES, VHDL_SUFFIXES

__all__ = ["Port", "HdlDesign", "language_of", "INTERFACE"]

INTERFACE = "interface"
"""The direction of a SystemVerilog interface port (its signals and their directions are in ``members``)."""


@dataclass(frozen=True)
class Port:
    """One port of a module or entity.

    Attributes:
        name: the port name as written in the source.
        direction: "input", "output", "inout" or "interface" (a SystemVerilog interface port).
        width: bits (1 for scalars; a packed struct or array counts all its bits), or None when it is
            not a plain bit vector (an unpacked array, an interface port, a width the reader could not
            work out; ``width_expr`` says what it is).
        signed: True for ``signed`` / ``int`` / ``integer`` / VHDL ``signed`` ports.
        width_expr: the type as the reader shows it (``"logic[9:0]"``, ``"pkg::pix_t"``,
            ``"unsigned(N-1 downto 0)"``, ``"belt_if.sink"``); ``""`` for a plain 1-bit port.
        members: for an interface port, the signals its modport lists, each with the direction the
            modport gives it as seen from the module (an ``input`` member is driven into the module).
    """

    name: str
    direction: str
    width: int | None
    signed: bool = False
    width_expr: str = ""
    members: tuple[Port, ...] = ()

    @property
    def interface(self) -> str:
        """``"iface"`` of an interface port written ``iface.modport``; ``""`` for other ports."""
        return self.width_expr.split(".", 1)[0] if self.direction == INTERFACE else ""

    @property
    def modport(self) -> str:
        """The modport an interface port names; ``""`` when it names none (a generic interface port)."""
        return self.width_expr.partition(".")[2] if self.direction == INTERFACE else ""


@dataclass
class HdlDesign:
    """A module or entity found in a source file.

    Attributes:
        name: module/entity name.
        language: "verilog" or "vhdl".
        path: the file it was found in.
        ports: ports in declaration order.
        parameters: overridable parameter/generic name -> value (the default, or the override given to
            the reader), None when it is not an integer (a string, a real, a type).
        reader: which front end read it: "slang" (pyslang), "ghdl" (GHDL's analysis and elaboration)
            or "vkit" (the light VHDL entity reader, used when GHDL is absent).
    """

    name: str
    language: str
    path: Path
    ports: list[Port] = field(default_factory=list)
    parameters: dict[str, int | None] = field(default_factory=dict)
    reader: str = "vkit"

    @property
    def interface_ports(self) -> list[Port]:
        """The SystemVerilog interface ports (a simulator without interface support cannot take them)."""
        return [p for p in self.ports if p.direction == INTERFACE]


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
