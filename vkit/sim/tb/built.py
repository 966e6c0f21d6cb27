"""What a design was built with: its parameters read back through the simulator, against what a case expects."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from vkit.core.errors import ConfigError

__all__ = ["check_built_parameters"]


def _built_value(handle: Any) -> tuple[int, int] | None:
    """(value, bits) of a parameter handle (bits 0 when the simulator gives a plain integer), or None."""
    value = handle.value
    if isinstance(value, bool):
        return int(value), 1
    if isinstance(value, int):
        return value, 0
    try:
        return value.to_unsigned(), len(value)
    except (AttributeError, ValueError, TypeError):  # not an integer, or X/Z bits
        return None


def _same(configured: int, built: int, bits: int) -> bool:
    """Equal as the design holds it: a ``bits``-wide parameter keeps the configured value modulo 2**bits."""
    return configured == built if bits == 0 else configured % (1 << bits) == built


def check_built_parameters(dut: Any, expected: Mapping[str, Any], design: str = "the design") -> list[str]:
    """Check that ``dut`` was built with the integer parameters in ``expected``; the names it does not show.

    Icarus and Verilator (through cocotb's ``--public-flat-rw``) show a top level's parameters as
    handles, GHDL its generics; a parameter that is not shown, or is not an integer, is not checked.

    Args:
        dut: the cocotb top-level handle.
        expected: parameter name -> configured value (only ``int`` values are compared).
        design: the design's name, for the message.

    Raises:
        ConfigError: a parameter's built value differs from the configured one (one line naming both).
    """
    unseen: list[str] = []
    for name, configured in expected.items():
        if isinstance(configured, bool) or not isinstance(configured, int):
            continue
        try:
            built = _built_value(getattr(dut, name))
        except AttributeError:
            built = None
        if built is None:
            unseen.append(name)
            continue
        value, bits = built
        if not _same(configured, value, bits):
            shown = value - (1 << bits) if configured < 0 and bits else value
            raise ConfigError(
                f"{design} was built with {name} = {shown} but the config sets {name} = {configured}; "
                f"rebuild it from the config (drop any other setting of {name} in the build) or change the config"
            )
    return unseen
