"""A sampler that watches both sides of a design every clock and drives nothing: the passive scoreboard's eyes.

It reads the roles of a signal map (the same map, families and checks as the sources and monitors) on
every rising edge through the clock's shared :func:`~vkit.sim.tb._common.ticker`, keeps the levels of a
chunk of clocks, and hands each chunk on as :class:`~vkit.video.observe.Levels`; what the chunk means
(frames, verdicts) is decided elsewhere.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np

from vkit.sim.signals import SignalMap
from cocotb.triggers import RisingEdge

from vkit.sim.tb._common import bit_reader, resolve_component, ticker, word_reader
from vkit.video.observe import WORD_ROLES, Levels

__all__ = ["LevelSampler", "CHUNK_CLOCKS", "find_instance"]

CHUNK_CLOCKS = 4096
"""Clocks sampled before the chunk is handed on: small enough that a frame is scored soon after it ends,
large enough that the hand-over costs little per clock."""


def find_instance(top: Any, path: str) -> Any:
    """The handle of ``path`` (dot-separated instance names) below ``top``.

    Raises:
        AttributeError: names the first part of the path that does not exist and what is there instead.
    """
    handle = top
    for part in [p for p in path.split(".") if p]:
        child = handle._get(part) if hasattr(handle, "_get") else getattr(handle, part, None)
        if child is None:
            names = sorted(getattr(c, "_name", "?") for c in handle)[:12]
            raise AttributeError(f"instance {part!r} not found in {getattr(handle, '_name', 'top')!r} (path {path!r}); "
                                 f"it holds {', '.join(names)}; fix `instance` in the config (Verilator: build with "
                                 "--public-flat-rw so inner instances are visible)")
        handle = child
    return handle


class LevelSampler:
    """Samples the input and output roles of a design on every rising clock edge; never drives a signal.

    Args:
        instance: the cocotb handle of the design's instance (the toplevel or any level below it).
        signals: role -> port name of the instance (``SignalMap`` or dict) of ``family``.
        family: "video" or "stream".
        sides: side ("in", "out") -> roles (without the side prefix) to sample.
        on_chunk: called with ``{"in": Levels, "out": Levels}`` for every chunk of clocks.
        reset_active_high: reset polarity; sampling starts on the first edge with the reset inactive (a reset
            still X/Z, not yet driven, counts as active).
        chunk_clocks: clocks per chunk.
    """

    def __init__(self, instance: Any, signals: SignalMap | Mapping[str, str], family: str,
                 sides: Mapping[str, tuple[str, ...]], on_chunk: Callable[[dict[str, Levels]], None], *,
                 reset_active_high: bool = True, chunk_clocks: int = CHUNK_CLOCKS) -> None:
        smap, handles, self._clock, self._reset = resolve_component(instance, signals, family, None, None)
        self.signals = smap
        self._order = [(side, role) for side, roles in sides.items() for role in roles]
        self._readers = [word_reader(handles[f"{side}_{role}"]) if role in WORD_ROLES else
                         bit_reader(handles[f"{side}_{role}"]) for side, role in self._order]
        self._on_chunk = on_chunk
        self.reset_active_high = reset_active_high
        self.chunk_clocks = int(chunk_clocks)
        self.clocks = 0
        """Rising edges sampled so far."""
        self._rows: list[list[int]] = []
        self._first = 0
        self._step: Callable[[], None] | None = None
        self._task: Any = None

    def start(self) -> None:
        """Start sampling once the reset is released (idempotent)."""
        import cocotb

        if self._task is None:
            self._task = cocotb.start_soon(self._run())

    async def _run(self) -> None:
        if self._reset is not None:  # X/Z before the testbench drives the reset counts as in reset
            inactive = 0 if self.reset_active_high else 1
            read = bit_reader(self._reset)
            while read() != inactive:
                await RisingEdge(self._clock)
        self._step = self._make_step()
        ticker(self._clock).add(self._step)

    def _make_step(self) -> Callable[[], None]:
        readers = tuple(self._readers)
        rows = self._rows
        append = rows.append
        chunk = self.chunk_clocks

        def step() -> None:
            append([r() for r in readers])
            if len(rows) >= chunk:
                self.flush()

        return step

    def flush(self) -> None:
        """Hand the clocks sampled since the last chunk on (nothing when there are none)."""
        if not self._rows:
            return
        table = _table(self._rows)
        self._rows.clear()
        n = table.shape[0]
        sides: dict[str, dict[str, np.ndarray]] = {}
        for k, (side, role) in enumerate(self._order):
            column = table[:, k]
            sides.setdefault(side, {})[role] = column if role == "data" else column.astype(np.int64)
        first = self._first
        self._first += n
        self.clocks = self._first
        self._on_chunk({side: Levels(first, roles) for side, roles in sides.items()})

    def stop(self) -> None:
        """Stop sampling and hand on the last chunk."""
        if self._task is not None and not self._task.done():
            self._task.cancel()
        if self._step is not None:
            ticker(self._clock).remove(self._step)
            self._step = None
        self.flush()


def _table(rows: list[list[int]]) -> np.ndarray:
    """The sampled rows as int64, or as Python ints (an object array) when a data word is wider than int64."""
    try:
        return np.array(rows, np.int64)
    except OverflowError:
        return np.array(rows, object)
