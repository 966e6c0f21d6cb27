"""Every bundled seeded bug is caught by the stimulus `vkit init` writes, with its cause named.

The stimulus is taken from a config the scaffold writes for the sample design, exactly as a user would
get it; the seeded bugs come from the sample manifest. A bug counts as caught when a case fails, and as
named when some failing case is diagnosed as the manifest's kind; where a spec mutant models the bug
(:data:`MODELLED`), the diagnosis by mutants must name that mutant too. The seeded bugs are our own
demo faults; what makes each check external is the model they are scored against (the spec, whose parts
are checked against OpenCV, SciPy and math.isqrt in test_model*.py).
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.run.config import load_config
from vkit.run.runner import run
from vkit.run.scaffold import scaffold

pytestmark = [pytest.mark.sim, pytest.mark.slow]

MANIFEST = SAMPLE_RTL / "designs.toml"

MODELLED = {
    "blur_core@blur_truncate": "filter.truncate",
    "blur_core@right_border_zero": "window.right_zero",
    "edge_core@addr_wrap": "address.wrap",
    "edge_core@gradient_narrow": "gx+gy.wrap14",
    "edge_core@linebuf_off_by_one": "window.row0_late",
    "median_core@linebuf_off_by_one": "window.row0_late",
    "edge_core@luma_rb_swap": "luma.perm_BGR",
    "edge_core@sobel_tap_sign": "gx.tap10",
    "edge_core@sumsq_narrow": "sum_sq.wrap28",
    "stream_core@sharpen_wrap": "output.wrap",
}
"""bug -> the spec mutant that reproduces it (the others are timing, stall or window faults no spec
mutant models)."""

_FAMILIES = {"video": ("edge_core", "edge", ["edge_core", "blur_core", "median_core"]),
             "stream": ("stream_core", "sharpen", ["stream_core"])}

_CONFIG = """\
[run]
simulators = ["icarus"]
jobs = 2
path = "native"
cache_dir = "{cache}"
waves = "off"

[[import]]
manifest = "{manifest}"
bugs = "only"
use = [{use}]

"""


def _scaffolded_stimulus(tmp: Path, top: str, spec: str) -> str:
    """The ``[stimulus]`` section of the config `vkit init` writes for sample design ``top``."""
    body = tomllib.loads(MANIFEST.read_text())["designs"][top]
    sources = [SAMPLE_RTL / s for s in body["sources"]]
    scaffold(top, sources, tmp / top, spec=spec, simulators=["icarus"])
    text = (tmp / top / "vkit.toml").read_text()
    return text[text.index("[stimulus]"):]


def _bugs(designs: list[str]) -> dict[str, str]:
    body = tomllib.loads(MANIFEST.read_text())["designs"]
    return {f"{d}@{bug}": b["expect"] for d in designs for bug, b in body[d].get("bugs", {}).items()}


@pytest.fixture(scope="module")
def default_runs(tmp_path_factory: pytest.TempPathFactory, build_cache_dir: Path) -> dict[str, dict]:
    if not simulator_available("icarus"):
        pytest.skip("Icarus Verilog not installed (apt-get install iverilog)")
    tmp = tmp_path_factory.mktemp("default_stimulus")
    reports = {}
    for family, (top, spec, designs) in _FAMILIES.items():
        cfg = tmp / f"{family}.toml"
        use = ", ".join(f'"{d}"' for d in designs)
        cfg.write_text(_CONFIG.format(cache=build_cache_dir.as_posix(), manifest=MANIFEST.as_posix(), use=use)
                       + _scaffolded_stimulus(tmp, top, spec))
        run(load_config(cfg), jobs=2, progress=False, out_dir=tmp / family)
        reports[family] = json.loads((tmp / family / "report.json").read_text())
    return reports


def _cases_by_bug(reports: dict[str, dict]) -> dict[str, list[dict]]:
    out: dict[str, list[dict]] = {}
    for report in reports.values():
        for case in report["cases"]:
            out.setdefault(case["id"].split("/")[0], []).append(case)
    return out


def test_every_bug_is_caught_and_named(default_runs: dict[str, dict]) -> None:
    by_bug = _cases_by_bug(default_runs)
    bugs = {**_bugs(_FAMILIES["video"][2]), **_bugs(_FAMILIES["stream"][2])}
    missed, unnamed = [], []
    for bug, kind in sorted(bugs.items()):
        failed = [c for c in by_bug.get(bug, []) if c["verdict"]["status"] == "fail"]
        if not failed:
            missed.append(bug)
            continue
        kinds = {(c["verdict"].get("diagnosis") or {}).get("kind") for c in failed}
        if kind not in kinds and not (bug in MODELLED and "variant" in kinds):
            unnamed.append(f"{bug}: expected {kind}, got {sorted(k or '-' for k in kinds)}")
    assert not missed, f"passed the scaffold's default stimulus: {missed}"
    assert not unnamed, "\n".join(unnamed)


@pytest.mark.parametrize("bug", sorted(MODELLED))
def test_modelled_bug_is_named_by_its_mutant(default_runs: dict[str, dict], bug: str) -> None:
    named = [c.get("diagnosis_by_mutant", {}).get("mutant") or {} for c in _cases_by_bug(default_runs)[bug]
             if c["verdict"]["status"] == "fail"]
    hits = [m for m in named if m.get("mutant") == MODELLED[bug]]
    assert hits, f"{bug}: mutants named {sorted({m.get('mutant', '-') for m in named})}"
