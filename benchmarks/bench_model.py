"""Speed of the bit-exact edge model next to OpenCV's float edge magnitude, measured in one run."""

from __future__ import annotations

import os

# One core for everything, set before NumPy/OpenCV load their thread pools.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from typing import Callable  # noqa: E402

import numpy as np  # noqa: E402

__all__ = ["main"]


def _frame(height: int, width: int, seed: int) -> np.ndarray:
    """The conveyor-belt demo scene when vkit.video.patterns has it, else seeded uniform noise (RGB uint8)."""
    try:
        from vkit.video.patterns import conveyor

        return conveyor(height, width, seed=seed, rgb=True)
    except ImportError:  # pragma: no cover - older trees
        return np.random.default_rng(seed).integers(0, 256, (height, width, 3), dtype=np.uint8)


def _median_seconds(func: Callable[[], object], runs: int, warmup: int = 2) -> float:
    for _ in range(warmup):
        func()
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print one line per measure and a final ratio line."""
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--width", type=int, default=1920, help="frame width, pixels (default 1920)")
    parser.add_argument("--height", type=int, default=1080, help="frame height, lines (default 1080)")
    parser.add_argument("--runs", type=int, default=15, help="timed runs per measure; the median is reported")
    parser.add_argument("--band-rows", type=int, default=None, help="rows per band for run_model (default: its own)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the test frame")
    args = parser.parse_args(argv)

    from vkit.model.pipeline import preset, run_model

    spec = preset("edge")
    frame = _frame(args.height, args.width, args.seed)
    mpix = args.width * args.height / 1e6
    band = {} if args.band_rows is None else {"band_rows": args.band_rows}
    print(f"frame {args.width}x{args.height} RGB ({mpix:.3f} Mpix), median of {args.runs} runs, 1 thread")

    results: dict[str, float] = {}
    results["run_model edge (stages kept)"] = _median_seconds(lambda: run_model(spec, frame, **band), args.runs)
    results["run_model edge (keep_stages=False)"] = _median_seconds(
        lambda: run_model(spec, frame, keep_stages=False, **band), args.runs
    )
    have_cv2 = True
    try:
        import cv2
    except ImportError:
        have_cv2 = False
    if have_cv2:
        cv2.setNumThreads(1)

        def opencv_edge() -> np.ndarray:
            gray = cv2.cvtColor(frame, cv2.COLOR_RGB2GRAY)
            gx = cv2.Sobel(gray, cv2.CV_32F, 1, 0, ksize=3, borderType=cv2.BORDER_REPLICATE)
            gy = cv2.Sobel(gray, cv2.CV_32F, 0, 1, ksize=3, borderType=cv2.BORDER_REPLICATE)
            return cv2.magnitude(gx, gy)

        results["OpenCV float (cvtColor, Sobel CV_32F x/y, magnitude)"] = _median_seconds(opencv_edge, args.runs)

    name_w = max(len(k) for k in results)
    for name, seconds in results.items():
        print(f"{name.ljust(name_w)}  {seconds * 1e3:8.2f} ms/frame  {mpix / seconds:8.1f} Mpix/s")
    if have_cv2:
        cv_s = results["OpenCV float (cvtColor, Sobel CV_32F x/y, magnitude)"]
        kept = results["run_model edge (stages kept)"]
        lean = results["run_model edge (keep_stages=False)"]
        print(
            f"ratio OpenCV/run_model speed: {kept / cv_s:.2f}x (stages kept), {lean / cv_s:.2f}x (keep_stages=False)"
        )
    else:
        print("ratio: OpenCV not installed (pip install opencv-python-headless) - no ratio")
    return 0


if __name__ == "__main__":
    sys.exit(main())
