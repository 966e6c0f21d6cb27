"""Cost of words wider than 62 bits next to the int64 words, measured in one run.

For each bus layout, the median time to turn one frame into the per-clock words
(:func:`vkit.video.words.video_data_words`) and write them as the native harness's binary stimulus
(:func:`vkit.sim.fast.stimulus.write_words`), in ns per clock. Layouts up to 62 bits travel as int64
words; wider ones (rgb888 x4 = 96 bits, gray8 x8 = 64 bits) as their pixel fields. The target: the
int64 layouts cost what they cost before wide words existed, and a wide clock costs at most
``--max-ratio`` times the narrow clock of the same format (a frame at 4 pixels a clock has 4 times
fewer clocks, so a frame costs about the same).
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from vkit.sim.fast.stimulus import write_words  # noqa: E402
from vkit.sim.fast.wire import video_word_fields  # noqa: E402
from vkit.video.bus import BusLayout  # noqa: E402
from vkit.video.timing import schedule, tiny  # noqa: E402
from vkit.video.words import video_data_words  # noqa: E402

__all__ = ["main"]

LAYOUTS = (("gray8", 1), ("gray8", 4), ("gray8", 8), ("rgb888", 1), ("rgb888", 2), ("rgb888", 4))
"""(pixel format, pixels a clock) measured; gray8 x8 and rgb888 x4 are the wide ones."""


def _ns_per_clock(fmt: str, lanes: int, width: int, height: int, runs: int, out: Path) -> tuple[float, bool]:
    """Median ns per clock of words + binary stimulus for one frame, and whether the layout is wide."""
    bus = BusLayout(fmt, lanes=lanes)
    shape = (1, height, width, 3) if fmt.startswith("rgb") else (1, height, width)
    frames = np.random.default_rng(1).integers(0, 256, shape).astype(np.uint8)
    sched = schedule(tiny(width // lanes, height), 1, None)

    def once() -> None:
        words = video_data_words(sched, frames, bus, seed=1)
        write_words(out / "stim.bin", video_word_fields(sched, words, bus.word_bits, None, bus))

    once()
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        once()
        times.append(time.perf_counter() - start)
    return statistics.median(times) / sched.n_clocks * 1e9, bus.wide


def main(argv: list[str] | None = None) -> int:
    """Print ns per clock for every layout; exit 1 when a wide layout costs over ``--max-ratio`` times its narrow one."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--size", default="640x480", help="frame WxH, pixels (width a multiple of 8)")
    ap.add_argument("--runs", type=int, default=9)
    ap.add_argument("--max-ratio", type=float, default=8.0, help="wide ns/clock over the same format's 1-lane ns/clock")
    args = ap.parse_args(argv)
    width, height = (int(v) for v in args.size.split("x"))
    results: dict[tuple[str, int], float] = {}
    with tempfile.TemporaryDirectory(prefix="vkit_bench_wide_") as tmp:
        for fmt, lanes in LAYOUTS:
            ns, wide = _ns_per_clock(fmt, lanes, width, height, args.runs, Path(tmp))
            results[(fmt, lanes)] = ns
            print(f"{fmt} x{lanes}: {ns:7.0f} ns/clock ({'pixel fields' if wide else 'int64 words'})")
    bad = [(f, n) for (f, n) in LAYOUTS if BusLayout(f, lanes=n).wide
           and results[(f, n)] > args.max_ratio * results[(f, 1)]]
    for fmt, lanes in bad:
        print(f"over target: {fmt} x{lanes} costs {results[(fmt, lanes)] / results[(fmt, 1)]:.1f} times {fmt} x1 a clock")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
