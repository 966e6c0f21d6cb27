"""The signal map: which DUT port plays which role of an interface family, checked against the design."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from vkit.core.errors import ConfigError
from vkit.core.validate import suggest
from vkit.video.formats import PIXEL_FORMAT_BITS, pixel_bits

__all__ = [
    "FAMILY_ROLES",
    "KEEP_ROLES",
    "CONTROL_ROLES",
    "POLARITY_GROUPS",
    "SYNC_ROLES",
    "PIXEL_FORMAT_BITS",
    "SignalMap",
    "dut_port_names",
    "pixel_bits",
]

FAMILY_ROLES: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "video": (
        ("clock", "in_vsync", "in_hsync", "in_de", "in_data", "out_de", "out_data"),
        ("reset", "in_valid", "out_valid", "out_vsync", "out_hsync", "in_enable", "out_enable"),
    ),
    "stream": (
        (
            "clock",
            "in_valid",
            "in_ready",
            "in_data",
            "in_sof",
            "in_eol",
            "out_valid",
            "out_ready",
            "out_data",
            "out_sof",
            "out_eol",
        ),
        ("reset", "in_keep", "out_keep"),
    ),
}
"""Per family: (required roles, optional roles). Optional roles are used only when mapped, never guessed.

``in_keep`` / ``out_keep`` (stream family) are per-lane valid masks, one bit a lane (AXI4-Stream's TKEEP):
bit ``k`` sits beside lane ``k`` of the data word under the same lane order, and a set bit marks a lane that
holds a pixel. With them a line need not be a whole number of beats (:mod:`vkit.video.bus`)."""

KEEP_ROLES: tuple[str, ...] = ("in_keep", "out_keep")
"""The per-lane valid masks of the stream family (one bit a lane of the data word)."""

CONTROL_ROLES = frozenset(
    {
        "clock",
        "reset",
        "in_vsync",
        "in_hsync",
        "in_de",
        "in_valid",
        "in_ready",
        "in_sof",
        "in_eol",
        "out_vsync",
        "out_hsync",
        "out_de",
        "out_valid",
        "out_ready",
        "out_sof",
        "out_eol",
        "in_enable",
        "out_enable",
    }
)
"""Roles that must be 1-bit ports."""

SYNC_ROLES: tuple[str, ...] = ("in_hsync", "in_vsync", "out_hsync", "out_vsync")
"""Sync pins: unless their polarity is given, they follow the video timing's sync polarity."""

POLARITY_GROUPS: dict[str, tuple[str, ...]] = {
    "syncs": SYNC_ROLES,
    "in_syncs": ("in_hsync", "in_vsync"),
    "out_syncs": ("out_hsync", "out_vsync"),
    "de": ("in_de", "out_de"),
    "valid": ("in_valid", "out_valid"),
    "enable": ("in_enable", "out_enable"),
    "reset": ("reset",),
}
"""Words of a design's ``port_polarity`` table that name several pins at once (each role name works too)."""

def _is_value_handle(handle: Any) -> bool:
    """True for handles that carry a value (nets, regs, ports), False for scopes and instances."""
    return hasattr(handle, "value") and not hasattr(handle, "_discover_all")


def dut_port_names(dut: Any) -> list[str]:
    """Names of the value-carrying objects directly inside ``dut`` (ports and top-level nets), sorted.

    Iterating a cocotb hierarchy handle discovers every child once; scopes and sub-instances are left out.
    """
    names = []
    for child in dut:
        if _is_value_handle(child):
            names.append(child._name)
    return sorted(set(names), key=str.lower)


def _width(handle: Any) -> int:
    try:
        return len(handle)
    except TypeError:
        return 1


@dataclass
class SignalMap:
    """A named set of DUT ports: role -> port name, for one interface family.

    Args:
        roles: role -> the DUT's port name, e.g. ``{"clock": "clk", "in_de": "de_i", ...}``.
            Every required role of the family must be mapped; optional roles are used only when mapped.
        family: "video" or "stream" (see :data:`FAMILY_ROLES`).
        case_insensitive: match port names ignoring case when the exact name is absent.

    Raises:
        ConfigError: unknown family, unknown role, or a required role missing (one line each).
    """

    roles: dict[str, str]
    family: str = "video"
    case_insensitive: bool = True
    _handles: dict[str, Any] = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.family not in FAMILY_ROLES:
            raise ConfigError(
                f"interface family {self.family!r} is not known; use one of {', '.join(FAMILY_ROLES)}"
            )
        required, optional = FAMILY_ROLES[self.family]
        known = set(required) | set(optional)
        self.roles = {str(k): str(v) for k, v in dict(self.roles).items() if v not in (None, "")}
        unknown = sorted(set(self.roles) - known)
        if unknown:
            raise ConfigError(
                f"signal map for family {self.family!r} has unknown role(s) {', '.join(unknown)}; "
                f"known roles: {', '.join(required + optional)}"
            )
        missing = [r for r in required if r not in self.roles]
        if missing:
            raise ConfigError(
                f"signal map for family {self.family!r} is missing required role(s) {', '.join(missing)}; "
                f"map each to the DUT's port name"
            )

    @classmethod
    def coerce(cls, signals: SignalMap | Mapping[str, str], family: str) -> SignalMap:
        """Return ``signals`` as a :class:`SignalMap` of ``family`` (a dict is wrapped; a map is checked)."""
        if isinstance(signals, SignalMap):
            if signals.family != family:
                raise ConfigError(
                    f"signal map is for family {signals.family!r} but a {family!r} component needs it; "
                    f"build a SignalMap with family={family!r}"
                )
            return signals
        return cls(dict(signals), family)

    def to_dict(self) -> dict[str, str]:
        """role -> port name (a copy)."""
        return dict(self.roles)

    def has(self, role: str) -> bool:
        """True when ``role`` is mapped."""
        return role in self.roles

    def _lookup(self, dut: Any, role: str, name: str, ports: list[str] | None) -> tuple[Any, list[str] | None]:
        handle = dut._get(name) if hasattr(dut, "_get") else getattr(dut, name, None)
        if handle is not None and _is_value_handle(handle):
            return handle, ports
        if ports is None:
            ports = dut_port_names(dut)
        if self.case_insensitive:
            for p in ports:
                if p.lower() == name.lower():
                    return dut._get(p) if hasattr(dut, "_get") else getattr(dut, p), ports
        hint = suggest(name, ports) if ports else "the DUT has no ports"
        dut_name = getattr(dut, "_name", "dut")
        raise ConfigError(
            f"role {role!r} -> port {name!r} not found in DUT {dut_name!r}; {hint}; "
            f"DUT ports: {', '.join(ports)}; fix the name in the signal map"
        )

    def resolve(self, dut: Any, data_bits: Mapping[str, int] | None = None) -> dict[str, Any]:
        """Find every mapped role's handle in ``dut``.

        Args:
            dut: the cocotb handle of the top level.
            data_bits: role -> minimum width in bits, e.g. ``{"in_data": 24}`` for rgb888.

        Returns:
            role -> cocotb handle (also kept on the map, see :meth:`handle`).

        Raises:
            ConfigError: a port is missing or misnamed (names the role, the name tried, the closest port and
                lists the DUT's ports), a data port is too narrow, or a control role sits on a multi-bit port.
        """
        ports: list[str] | None = None
        handles: dict[str, Any] = {}
        for role, name in self.roles.items():
            handle, ports = self._lookup(dut, role, name, ports)
            width = _width(handle)
            if role in CONTROL_ROLES and width != 1:
                raise ConfigError(
                    f"role {role!r} -> port {name!r} is {width} bits wide, a control role needs a 1-bit port; "
                    f"map {role!r} to the 1-bit port"
                )
            need = (data_bits or {}).get(role)
            if need is not None and width < need:
                raise ConfigError(
                    f"role {role!r} -> port {name!r} is {width} bits wide but the pixel format needs {need} bits; "
                    f"widen the port or pick a narrower pixel_format"
                )
            handles[role] = handle
        self._handles = handles
        return dict(handles)

    def handle(self, role: str) -> Any:
        """The handle resolved for ``role`` by :meth:`resolve`, or None when the role is not mapped."""
        return self._handles.get(role)
