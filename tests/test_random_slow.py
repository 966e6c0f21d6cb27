"""The long randomised suite: the good sample designs on Icarus at random sizes, stalls, back-pressure,
patterns and seeds must never fail (zero false failures). Marked ``slow``: ``pytest -m slow``.

Each of the four sample designs gets 13 random cases (52 in all): a frame of 1..64 pixels by 2..48
lines, a random verification pattern or the conveyor scene, a random seed, and random input stalls
(video cores) or source gaps and sink back-pressure (stream core). The draw comes from one master
seed, printed on failure; set ``VKIT_RANDOM_SEED`` to replay a run or to explore other draws.
"""

from __future__ import annotations

import io
import json
import os
from pathlib import Path

import numpy as np
import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.cli import problem_line
from vkit.run.config import load_config
from vkit.video.patterns import PATTERNS
from vkit.run.runner import run
from vkit.video.timing import tiny

pytestmark = [pytest.mark.slow, pytest.mark.sim]

MASTER_SEED = int(os.environ.get("VKIT_RANDOM_SEED", "20250611"))
CASES_PER_DESIGN = 13
DESIGNS = ["edge_core", "blur_core", "median_core", "stream_core"]
# common practice, no source: the sample video cores need at least one pixel per line and two lines
# (sample_rtl/README.md: frames at least 1x1; the conveyor scene needs two lines to draw a belt)
MAX_W, MAX_H = 64, 48


def _flow(rng: np.random.Generator) -> dict[str, float | int]:
    """No flow control in a quarter of the cases, else a probability 0.02..0.4 and runs of 1..6 clocks."""
    if rng.random() < 0.25:
        return {"probability": 0.0, "max_length": 4}
    return {"probability": round(float(rng.uniform(0.02, 0.4)), 3), "max_length": int(rng.integers(1, 7))}


def _entries(design: str, rng: np.random.Generator) -> list[dict]:
    names = [n for n in PATTERNS if n != "conveyor"]
    out = []
    for i in range(CASES_PER_DESIGN):
        w = int(rng.integers(1, MAX_W + 1))
        h = int(rng.integers(2, MAX_H + 1))
        name = "conveyor" if rng.random() < 0.4 else str(rng.choice(names))
        entry = {"name": name, "label": f"r{i:02d}-{name}", "seeds": [int(rng.integers(0, 2**31 - 1))],
                 "timings": [tiny(w, h).to_dict()]}
        if design == "stream_core":
            entry["gaps"] = [_flow(rng)]
            entry["backpressure"] = [_flow(rng)]
        else:
            entry["stalls"] = [_flow(rng)]
        out.append(entry)
    return out


def _toml(value: object) -> str:
    """TOML text of plain data (strings, numbers, lists, tables) as inline values."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml(v)}" for k, v in value.items()) + " }"
    raise TypeError(type(value).__name__)


def _write_config(path: Path, data: dict) -> Path:
    """Write the config as a file, so each failing case's rerun command works as printed."""
    lines = []
    for table, body in data.items():
        if isinstance(body, list):
            for item in body:
                lines.append(f"[[{table}]]")
                lines += [f"{k} = {_toml(v)}" for k, v in item.items()]
        else:
            lines.append(f"[{table}]")
            lines += [f"{k} = {_toml(v)}" for k, v in body.items()]
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.mark.parametrize("design", DESIGNS)
def test_random_good_runs_never_fail(design, tmp_path, build_cache_dir):
    simulator_available("icarus")
    rng = np.random.default_rng([MASTER_SEED, DESIGNS.index(design)])
    data = {
        "run": {"simulators": ["icarus"], "out_dir": "out", "cache_dir": str(build_cache_dir), "jobs": 2,
                "waves": "failing"},
        "import": [{"manifest": str(SAMPLE_RTL / "designs.toml"), "use": [design]}],
        "stimulus": {"patterns": _entries(design, rng)},
    }
    config = load_config(_write_config(tmp_path / "random.toml", data))
    result = run(config, stream=io.StringIO())
    assert len(result.cases) == CASES_PER_DESIGN
    assert any(c.entry["meta"].get("stalls") or c.entry["meta"].get("backpressure") for c in result.cases)
    bad = [problem_line(c) + (f"\n  rerun: {c.rerun}" if c.rerun else "") for c in result.cases if c.status != "pass"]
    assert not bad, f"VKIT_RANDOM_SEED={MASTER_SEED}: {len(bad)} false failure(s):\n" + "\n".join(bad)
