"""Waveform dumps (VCD, FST, GHW) read back as per-clock levels, the way a monitor samples a live design.

The dump is opened with pywellen (a compiled reader from PyPI); each signal is sampled just before every
rising edge of the clock, which is what a flip-flop (and a cocotb monitor woken on ``RisingEdge``) sees:
a value that changes at the edge itself belongs to the next clock.
"""

from __future__ import annotations

import itertools
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.validate import suggest
from vkit.video.bus import MAX_WORD_BITS
from vkit.video.capture import UNKNOWN
from vkit.video.observe import Levels

__all__ = ["Dump", "open_dump", "CHUNK_CLOCKS"]

CHUNK_CLOCKS = 1 << 20
"""Clocks sampled per chunk: about 1 M clocks keeps a 1080p run's working set to tens of MB."""

_SUFFIXES = (".vcd", ".fst", ".ghw")


def _values(values: list[Any], width: int = 1) -> np.ndarray:
    """A signal's change values as int64, or Python ints in an object array for a signal wider than
    :data:`~vkit.video.bus.MAX_WORD_BITS` (a wide bus word); X/Z (a string from the reader) as :data:`UNKNOWN`."""
    if width > MAX_WORD_BITS:
        out = np.empty(len(values), object)
        out[:] = [v if type(v) is int else UNKNOWN for v in values]
    else:
        out = np.fromiter((v if type(v) is int else UNKNOWN for v in values), np.int64, len(values))
    for k in np.flatnonzero(out == UNKNOWN):  # weak levels (GHDL's H and L) resolve as a simulator would
        text = str(values[k]).upper()
        if text and set(text) <= {"0", "1", "H", "L"}:
            out[k] = int(text.replace("H", "1").replace("L", "0"), 2)
    return out


@dataclass
class _Signal:
    """One signal's change times and values."""

    name: str
    width: int
    times: np.ndarray
    values: np.ndarray

    def before(self, edges: np.ndarray) -> np.ndarray:
        """The value just before each time in ``edges`` (:data:`UNKNOWN` before the first change)."""
        k = np.searchsorted(self.times, edges, side="left") - 1
        out = self.values[np.maximum(k, 0)]
        return np.where(k < 0, UNKNOWN, out)


class Dump:
    """An open waveform dump: find signals by hierarchical path and sample them on a clock.

    Args:
        path: the dump file (``.vcd``, ``.fst`` or ``.ghw``).

    Raises:
        ConfigError: the file is missing or not a waveform the reader understands.
    """

    def __init__(self, path: str | Path) -> None:
        import pywellen

        self.path = Path(path)
        if not self.path.is_file():
            raise ConfigError(f"waveform dump {str(self.path)!r} does not exist; give the .vcd or .fst file the "
                              "simulator wrote")
        try:
            self._wave = pywellen.Waveform(str(self.path))
        except BaseException as exc:  # the reader panics (a BaseException) on a file it cannot parse
            if isinstance(exc, (KeyboardInterrupt, SystemExit)):
                raise
            first = (str(exc).splitlines() or [type(exc).__name__])[0]
            raise ConfigError(f"waveform dump {str(self.path)!r} cannot be read ({first}); give a VCD, FST or GHW "
                              "file the simulator finished writing") from None
        self._vars = {v.full_name: v for v in self._wave.all_vars()}
        self._lower: dict[str, list[str]] = {}
        for name in self._vars:
            self._lower.setdefault(name.lower(), []).append(name)

    @property
    def names(self) -> list[str]:
        """Every signal's full hierarchical name, as the dump spells it."""
        return sorted(self._vars)

    def find(self, path: str, what: str) -> str:
        """The dump's full name of ``path``: exact, else the one name ending in ``.path`` (any case).

        Raises:
            ConfigError: no signal or several signals match (names the closest ones).
        """
        if path in self._vars:
            return path
        low = path.lower()
        hits = [n for lname, names in self._lower.items() for n in names
                if lname == low or lname.endswith("." + low)]
        if len(hits) == 1:
            return hits[0]
        if hits:
            raise ConfigError(f"{what}: signal {path!r} matches {len(hits)} signals in {self.path.name} "
                              f"({', '.join(sorted(hits)[:4])}); give a longer path")
        leaf = path.rsplit(".", 1)[-1].lower()
        near = [n for n in self._vars if n.lower().rsplit(".", 1)[-1] == leaf][:4]
        hint = (f"signals of that name: {', '.join(near)}" if near else
                suggest(path, sorted(self._vars)))
        raise ConfigError(f"{what}: signal {path!r} is not in {self.path.name}; {hint}; fix the path (or the "
                          "scope) or dump that signal")

    def width(self, name: str) -> int:
        """Bits of signal ``name`` (a full name from :meth:`find`)."""
        return int(self._vars[name].bitwidth or 1)

    def signal(self, name: str) -> _Signal:
        """Load signal ``name`` (a full name from :meth:`find`)."""
        var = self._vars[name]
        sig = var.signal
        n = len(sig)
        width = int(var.bitwidth or 1)
        try:  # all values known: each (time, value) pair read and flattened into one array as it comes, never a
            # list of them (a 1080p clock has 5 M changes: no 5 M tuples held at once, and no slower than a slice)
            flat = np.fromiter(itertools.chain.from_iterable(map(sig.__getitem__, range(n))), np.int64, 2 * n)
            return _Signal(name, width, flat[0::2].copy(), flat[1::2].copy())
        except (TypeError, ValueError, OverflowError):
            changes = sig[0:n]
            times = np.fromiter((t for t, _ in changes), np.int64, n)
            return _Signal(name, width, times, _values([v for _, v in changes], width))

    def rising_edges(self, clock: str) -> np.ndarray:
        """Times of the clock's rising edges (0 or X/Z -> 1 counts only from a known 0)."""
        sig = self.signal(clock)
        if sig.width != 1:
            raise ConfigError(f"clock signal {clock!r} is {sig.width} bits wide; give the 1-bit clock")
        prev = np.concatenate(([UNKNOWN], sig.values[:-1]))
        return sig.times[(sig.values == 1) & (prev == 0)]

    def time_unit_ps(self) -> float:
        """Picoseconds per tick of the dump's time (its timescale)."""
        ts = self._wave.timescale
        exponent = ts.unit.to_exponent() if ts is not None else -12
        return float(ts.factor if ts is not None else 1) * 10.0 ** (exponent + 12)

    def levels(self, clock: str, sides: Mapping[str, Mapping[str, str]], start_after: tuple[str, int] | None = None,
               chunk: int = CHUNK_CLOCKS) -> Iterator[dict[str, Levels]]:
        """Per-clock levels of each side, chunk by chunk.

        Args:
            clock: full name of the clock.
            sides: side name -> (role -> full signal name).
            start_after: ``(reset signal, active level)``: clock 0 is the first rising edge where the reset
                reads inactive (as a monitor starts after reset); None starts at the first edge.
            chunk: clocks per chunk.

        Yields:
            side name -> :class:`~vkit.video.observe.Levels` of the same clocks.
        """
        edges = self.rising_edges(clock)
        if start_after is not None:
            rst = self.signal(start_after[0]).before(edges)
            active = np.flatnonzero((rst == start_after[1]) | (rst == UNKNOWN))
            edges = edges[int(active[-1]) + 1:] if active.size else edges
        loaded = {side: {role: self.signal(name) for role, name in roles.items()} for side, roles in sides.items()}
        for lo in range(0, edges.size, chunk):
            part = edges[lo:lo + chunk]
            yield {side: Levels(lo, {role: s.before(part) for role, s in roles.items()})
                   for side, roles in loaded.items()}


def open_dump(path: str | Path) -> Dump:
    """Open a waveform dump (see :class:`Dump`)."""
    p = Path(path)
    if p.suffix.lower() not in _SUFFIXES and p.is_file():
        raise ConfigError(f"waveform dump {str(p)!r} has suffix {p.suffix or '(none)'!r}; give a "
                          f"{', '.join(_SUFFIXES)} file")
    return Dump(p)
