"""Clock-enable patterns: on which clocks a clock-enabled design takes a raster sample, given as data.

A design behind a clock enable runs on a fast system clock and takes one raster sample (a pixel, or
a blanking sample: every clock of the timing, blanking included) only on the clocks its enable is
high. The source holds every level of a sample from the clock after the previous enable up to and
including the clock of its own enable, as a clock-enabled source register does. Three shapes:

- every Nth clock (``every = 2``: one sample every 2 clocks, the enable high on every second clock);
- seeded random with a duty (the share of enabled clocks) and a longest gap (disabled clocks in a row);
- a user file of ``0``/``1`` characters (one clock each, other characters ignored), repeated.

Pure numpy; no simulator.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.validate import check_keys, fail, want_int, want_number, want_str

__all__ = ["EnablePattern", "ENABLE_KEYS"]

ENABLE_KEYS = ("every", "duty", "max_gap", "seed", "file")
"""The keys of an enable pattern table (``seed`` is filled from the case when left out)."""


@dataclass(frozen=True)
class EnablePattern:
    """On which clocks the input enable is high: every Nth clock, seeded random, or a user file.

    Exactly one of ``every``, ``duty`` and ``file`` is given.

    Attributes:
        every: one enabled clock in every ``every`` clocks (1 = every clock), >= 1.
        duty: share of enabled clocks, 0 < duty <= 1 (seeded random; each clock is enabled with this
            chance, and a clock after ``max_gap`` disabled clocks always is).
        max_gap: longest run of disabled clocks, >= 0 (random patterns only; default 8).
        seed: seed of the random pattern (numpy PCG64), >= 0.
        file: a text file of ``0``/``1`` characters, one per clock, repeated from its start when it ends;
            it needs at least one ``1``.
    """

    every: int | None = None
    duty: float | None = None
    max_gap: int = 8
    seed: int = 0
    file: str | None = None

    def __post_init__(self) -> None:
        where = "enable pattern"
        given = [k for k in ("every", "duty", "file") if getattr(self, k) is not None]
        if len(given) != 1:
            raise ConfigError(f"{where}: {' and '.join(given) or 'no shape'} given; give exactly one of "
                              "every = N, duty = 0.5 (with max_gap) or file = \"enable.txt\"")
        if self.every is not None:
            want_int(where, "every", self.every, 1)
        if self.duty is not None:
            duty = want_number(where, "duty", self.duty, 0, 1)
            if duty <= 0:
                raise fail(where, "duty", self.duty, "not above 0", "give a share of enabled clocks in (0, 1]")
        want_int(where, "max_gap", self.max_gap, 0)
        want_int(where, "seed", self.seed, 0)
        if self.file is not None:
            self._file_levels()

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], where: str = "enable pattern") -> EnablePattern:
        """Build a pattern from its table (``{every = 2}``, ``{duty = 0.5, max_gap = 3}``, ``{file = "..."}``)."""
        check_keys(where, data, ENABLE_KEYS)
        values = dict(data)
        if "file" in values:
            values["file"] = want_str(where, "file", values["file"])
        return cls(**values)

    def to_dict(self) -> dict[str, Any]:
        """The table :meth:`from_dict` reads (only the keys that matter for the shape)."""
        if self.every is not None:
            return {"every": int(self.every)}
        if self.duty is not None:
            return {"duty": float(self.duty), "max_gap": int(self.max_gap), "seed": int(self.seed)}
        return {"file": str(self.file)}

    def label(self) -> str:
        """Short case-id text: ``en2``, ``en0.5g3``, ``en-NAME`` (file stem)."""
        if self.every is not None:
            return f"en{self.every}"
        if self.duty is not None:
            return f"en{self.duty:g}g{self.max_gap}"
        return f"en-{Path(str(self.file)).stem}"

    def _file_levels(self) -> np.ndarray:
        path = Path(str(self.file))
        try:
            text = path.read_text(errors="replace")
        except OSError:
            raise fail("enable pattern", "file", str(self.file), "not readable",
                       "give a text file of 0/1 characters, one per clock") from None
        levels = np.array([c == "1" for c in text if c in "01"], bool)
        if not levels.any():
            raise fail("enable pattern", "file", str(self.file), "without a single 1",
                       "write at least one enabled clock (a 1) into the file")
        return levels

    def gaps(self, samples: int) -> np.ndarray:
        """Disabled clocks before each of ``samples`` samples, int64 (0 = the sample's clock is enabled at once)."""
        n = int(samples)
        if self.every is not None:
            return np.full(n, int(self.every) - 1, np.int64)
        if self.duty is not None:
            if self.duty >= 1:
                return np.zeros(n, np.int64)
            rng = np.random.default_rng(int(self.seed))
            # failures before the first success of a per-clock coin with chance `duty`, cut at max_gap
            return np.minimum(rng.geometric(float(self.duty), size=n) - 1, int(self.max_gap)).astype(np.int64)
        return _cyclic_gaps(self._file_levels(), n)

    def mean_clocks_per_sample(self) -> float:
        """Average clocks per sample (for timeouts): ``every``, ~``1/duty``, or the file's clocks per 1."""
        if self.every is not None:
            return float(self.every)
        if self.duty is not None:
            return min(1.0 / float(self.duty), float(self.max_gap) + 1.0)
        levels = self._file_levels()
        return levels.size / float(levels.sum())


def _cyclic_gaps(levels: np.ndarray, samples: int) -> np.ndarray:
    """Gaps before each enabled clock of ``levels`` repeated end to end, for ``samples`` samples."""
    ones = np.flatnonzero(levels)
    period = int(levels.size)
    first = int(ones[0])
    within = np.diff(ones) - 1
    wrap = period - int(ones[-1]) - 1 + first
    cycle = np.concatenate((within, [wrap])).astype(np.int64)
    reps = samples // cycle.size + 2
    out = np.concatenate(([first], np.tile(cycle, reps)))[:samples]
    return out.astype(np.int64)
