"""Helpers shared by the sources, sinks and monitors: fast signal reads, reset, the clock handle."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import cocotb
from cocotb.triggers import ClockCycles, RisingEdge

from vkit.capture import UNKNOWN
from vkit.errors import ConfigError
from vkit.tb.signals import SignalMap

__all__ = [
    "MAX_EVENTS",
    "apply_reset",
    "bit_reader",
    "word_reader",
    "resolve_component",
    "wait_reset_released",
    "ticker",
]

MAX_EVENTS = 1000
"""At most this many entries are kept in an event list (xz_control, de_in_blanking); the rest are counted."""

_BIT = {"0": 0, "1": 1, "L": 0, "H": 1, "l": 0, "h": 1}


def bit_reader(handle: Any) -> Callable[[], int]:
    """A function returning the current level of a 1-bit ``handle``: 0, 1, or -1 for X/Z/U/W/-.

    Reads the simulator's bit string directly: about twice as fast per call as ``handle.value``
    (no Logic/LogicArray object is built), which matters in per-clock loops.
    """
    raw = handle._handle.get_signal_val_binstr
    get = _BIT.get

    def read() -> int:
        return get(raw(), -1)

    return read


def word_reader(handle: Any) -> Callable[[], int]:
    """A function returning the unsigned value of ``handle``, or :data:`~vkit.capture.UNKNOWN` on any X/Z bit."""
    raw = handle._handle.get_signal_val_binstr

    def read() -> int:
        s = raw()
        try:
            return int(s, 2)
        except ValueError:
            # Weak values resolve as a simulator would; anything else is unknown.
            s = s.upper()
            if set(s) <= {"0", "1", "L", "H"}:
                return int(s.replace("L", "0").replace("H", "1"), 2)
            return UNKNOWN

    return read


def resolve_component(
    dut: Any,
    signals: SignalMap | Mapping[str, str],
    family: str,
    clock: Any,
    reset: Any,
    data_bits: Mapping[str, int] | None = None,
) -> tuple[SignalMap, dict[str, Any], Any, Any]:
    """Resolve a component's signal map; return (map, role -> handle, clock handle, reset handle or None).

    ``clock`` and ``reset`` may be handles, or None to take the map's ``clock`` / ``reset`` roles.
    """
    smap = SignalMap.coerce(signals, family)
    handles = smap.resolve(dut, data_bits)
    clk = clock if clock is not None else handles.get("clock")
    if clk is None:
        raise ConfigError("no clock given and the signal map has no 'clock' role; map 'clock' to the DUT's clock port")
    rst = reset if reset is not None else handles.get("reset")
    return smap, handles, clk, rst


async def wait_reset_released(clock: Any, reset: Any, active_high: bool = True) -> None:
    """Wait on rising clock edges until ``reset`` (if any) is inactive."""
    if reset is None:
        return
    active = 1 if active_high else 0
    read = bit_reader(reset)
    while read() == active:
        await RisingEdge(clock)


async def apply_reset(clock: Any, reset: Any, cycles: int = 4, active_high: bool = True) -> None:
    """Drive ``reset`` active for ``cycles`` rising edges, then inactive; returns right after the release edge.

    Args:
        clock: the clock handle (must already toggle).
        reset: the reset handle, or None (then only ``cycles`` edges pass).
        cycles: rising edges with reset active, >= 1.
        active_high: True for an active-high reset.
    """
    if cycles < 1:
        raise ConfigError(f"reset_cycles = {cycles}, need >= 1 rising edge with reset active")
    if reset is not None:
        reset.value = 1 if active_high else 0
    await ClockCycles(clock, cycles)
    if reset is not None:
        reset.value = 0 if active_high else 1


class _Ticker:
    """One coroutine per clock that calls every registered step function on each rising edge.

    Waking one coroutine per edge and calling plain functions costs about half of what one coroutine per
    component costs (the per-edge wake-up dominates a lean Python loop).
    """

    def __init__(self, clock: Any) -> None:
        self._clock = clock
        self._steps: list[Callable[[], None]] = []
        self._snapshot: tuple[Callable[[], None], ...] = ()
        self._task: Any = None

    def add(self, step: Callable[[], None]) -> None:
        """Call ``step()`` on every rising edge from the next one on."""
        self._steps.append(step)
        self._snapshot = tuple(self._steps)
        if self._task is None or self._task.done():
            self._task = cocotb.start_soon(self._run())

    def remove(self, step: Callable[[], None]) -> None:
        """Stop calling ``step`` (no error when it is not registered)."""
        if step in self._steps:
            self._steps.remove(step)
            self._snapshot = tuple(self._steps)

    async def _run(self) -> None:
        edge = RisingEdge(self._clock)
        while self._snapshot:
            await edge
            for step in self._snapshot:
                step()


_TICKERS: dict[int, tuple[Any, _Ticker]] = {}


def ticker(clock: Any) -> _Ticker:
    """The shared per-edge caller of ``clock`` (one per clock handle)."""
    entry = _TICKERS.get(id(clock))
    if entry is None or entry[0] is not clock:
        entry = (clock, _Ticker(clock))
        _TICKERS[id(clock)] = entry
    return entry[1]
