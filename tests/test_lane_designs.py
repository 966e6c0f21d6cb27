"""The sample designs that carry two pixels a clock, 10-bit samples with a pass-through border, and Y'CbCr
4:2:2 with its chroma passed through: the good designs pass and each seeded bug fails with its diagnosis
kind, on every drive path and simulator."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.run.config import load_config
from vkit.run.runner import run

pytestmark = pytest.mark.sim

MANIFEST = SAMPLE_RTL / "designs.toml"
DESIGNS = ("belt_sharpen_x2", "belt_smooth10", "belt_luma422")

_CONFIG = """
[run]
simulators = ["{sim}"]
jobs = 2
cache_dir = "{cache}"
path = "{path}"

[[import]]
manifest = "{manifest}"
use = ["belt_sharpen_x2", "belt_smooth10", "belt_luma422"]
bugs = true

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}]
timings = ["tiny32x24"]
stalls = [{{ probability = 0.1, max_length = 3 }}]
seeds = [1]
"""


def _expected() -> dict[str, str | None]:
    """``design`` -> None (must pass) and ``design@bug`` -> the manifest's expected kind."""
    body = tomllib.loads(MANIFEST.read_text())["designs"]
    out: dict[str, str | None] = {}
    for name in DESIGNS:
        out[name] = None
        out.update({f"{name}@{bug}": b["expect"] for bug, b in body[name].get("bugs", {}).items()})
    return out


@pytest.mark.parametrize("sim, path", [("icarus", "clock"), ("icarus", "fast"), ("icarus", "native"),
                                       ("verilator", "native")])
def test_lane_designs_pass_and_their_bugs_fail_with_their_kind(tmp_path: Path, build_cache_dir: Path,
                                                               sim: str, path: str) -> None:
    simulator_available(sim)
    cfg = tmp_path / "lanes.toml"
    cfg.write_text(_CONFIG.format(sim=sim, cache=build_cache_dir.as_posix(), path=path, manifest=MANIFEST.as_posix()))
    result = run(load_config(cfg), jobs=2, progress=False, out_dir=tmp_path / "out")
    by_name = {c.id.split("/")[0]: c for c in result.cases}
    assert set(by_name) == set(_expected())
    for name, kind in _expected().items():
        case = by_name[name]
        if kind is None:
            assert case.status == "pass", (name, case.diagnosis)
        else:
            assert case.status == "fail", name
            assert case.diagnosis_kind == kind, (name, case.diagnosis)


def test_two_lane_report_gives_latency_in_clocks_and_pixels(tmp_path: Path, build_cache_dir: Path) -> None:
    simulator_available("icarus")
    cfg = tmp_path / "lanes.toml"
    text = _CONFIG.format(sim="icarus", cache=build_cache_dir.as_posix(), path="native", manifest=MANIFEST.as_posix())
    cfg.write_text(text.replace('use = ["belt_sharpen_x2", "belt_smooth10", "belt_luma422"]\nbugs = true',
                                'use = ["belt_sharpen_x2"]\nbugs = false').replace("stalls = [{ probability = 0.1, max_length = 3 }]", "stalls = [0]"))
    run(load_config(cfg), jobs=1, progress=False, out_dir=tmp_path / "out")
    (row,) = json.loads((tmp_path / "out" / "report.json").read_text())["cases"]
    # tiny32x24 at 2 pixels a clock: h_total = (32 + 8 * 2) / 2 = 24 clocks; + 1 + 3 pipeline clocks
    assert row["latency_clocks"] == 28 and row["latency_pixels"] == 56
    assert row["meta"]["bus"]["pixels_per_clock"] == 2
    assert "pixel 1 in bits 15..8" in row["meta"]["bus"]["layout"]
