"""A plain-port wrapper for a top level with SystemVerilog interface ports (the scaffold writes it).

vkit's sources and monitors drive and watch plain ports. A top whose ports are SystemVerilog interfaces
with modports (``belt_if.sink up``) is wrapped in a generated module that instantiates each interface,
exposes each signal its modport lists as a plain port ``<port>_<signal>`` with the modport's direction,
and connects the interface instance to the top. Verilator builds such a wrapper; Icarus 11 cannot parse
the interface ports of the design inside it (:data:`vkit.sim.simulators.INTERFACE_SIMULATORS`).
"""

from __future__ import annotations

from dataclasses import dataclass

from vkit.core.errors import ConfigError
from vkit.sim.hdldesign import INTERFACE, HdlDesign, Port
from vkit.sim.hdltext import render

__all__ = ["FlatWrapper", "flat_wrapper"]


@dataclass(frozen=True)
class FlatWrapper:
    """The wrapper of one top level.

    Attributes:
        name: the wrapper module's name (``<top>_flat``).
        text: its SystemVerilog source.
        design: the wrapper as a design: its plain ports (the top's plain ports, then each interface
            signal as ``<port>_<signal>``) and the top's integer parameters, passed on to the top.
        skipped_parameters: the top's parameters the wrapper does not pass on (not integers).
    """

    name: str
    text: str
    design: HdlDesign
    skipped_parameters: tuple[str, ...] = ()


def _flat_ports(design: HdlDesign) -> tuple[list[Port], list[dict[str, object]]]:
    """The wrapper's plain ports and, per interface port, its instance and member wiring."""
    ports: list[Port] = []
    instances: list[dict[str, object]] = []
    for port in design.ports:
        if port.direction != INTERFACE:
            if port.width is None or port.direction not in ("input", "output", "inout"):
                raise ConfigError(f"{design.name}: port {port.name} ({port.width_expr}) is not a packed bit vector; "
                                  "the interface wrapper passes only plain ports and interface signals; wrap it by hand")
            ports.append(port)
            continue
        if not port.members:
            raise ConfigError(f"{design.name}: interface port {port.name} ({port.width_expr}) names no modport, so its "
                              "signals have no direction; declare it as iface.modport in the design")
        members = []
        for m in port.members:
            if m.width is None:
                raise ConfigError(f"{design.name}: {port.name}.{m.name} ({m.width_expr}) is not a packed bit vector; "
                                  "the wrapper cannot flatten it; wrap the design by hand")
            flat = Port(f"{port.name}_{m.name}", m.direction, m.width, m.signed, m.width_expr)
            ports.append(flat)
            members.append({"name": flat.name, "signal": m.name, "direction": m.direction})
        instances.append({"interface": port.interface, "instance": f"{port.name}_if", "port": port.name, "members": members})
    return ports, instances


def flat_wrapper(design: HdlDesign) -> FlatWrapper:
    """The plain-port wrapper of ``design`` (a Verilog top with at least one interface port).

    Raises:
        ConfigError: an interface port names no modport, a signal is not a packed bit vector, or two
            wrapper ports would get the same name.
    """
    ports, instances = _flat_ports(design)
    names = [p.name for p in ports]
    clash = sorted({n for n in names if names.count(n) > 1})
    if clash:
        raise ConfigError(f"{design.name}: wrapper port name(s) {', '.join(clash)} clash with a port of the design; "
                          "rename the port or wrap the design by hand")
    name = f"{design.name}_flat"
    params = [(k, v) for k, v in design.parameters.items() if v is not None]
    plain = [{"port": p.name, "signal": p.name} for p in design.ports if p.direction != INTERFACE]
    links = [{"port": i["port"], "signal": i["instance"]} for i in instances]
    text = render("iface_flat.sv.j2", wrapper=name, top=design.name, parameters=params, ports=ports,
                  instances=instances, connections=plain + links,
                  interfaces=", ".join(f"{p.name}: {p.width_expr}" for p in design.interface_ports))
    flat = HdlDesign(name, "verilog", design.path, ports, dict(params), design.reader)
    skipped = tuple(k for k, v in design.parameters.items() if v is None)
    return FlatWrapper(name, text, flat, skipped)
