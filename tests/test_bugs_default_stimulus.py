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

MANIFESTS = (SAMPLE_RTL / "designs.toml", SAMPLE_RTL / "foreign" / "designs.toml")

MODELLED = {
    "belt_smooth10@path8": "input.top8",
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

def _designs() -> dict[str, tuple[Path, dict]]:
    """Every sample design with seeded bugs that Icarus runs -> (its manifest, its table). The VHDL
    clock-enable design runs on GHDL only, where the bundled bug regression covers it (test_bug_variants)."""
    out = {}
    for manifest in MANIFESTS:
        for name, d in tomllib.loads(manifest.read_text())["designs"].items():
            if d.get("bugs") and "icarus" in d.get("simulators", []):
                out[name] = (manifest, d)
    return out


DESIGNS = sorted(_designs())

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


def _scaffolded_stimulus(tmp: Path, name: str) -> str:
    """The ``[stimulus]`` section of the config `vkit init` writes for sample design ``name``."""
    manifest, body = _designs()[name]
    sources = [manifest.parent / s for s in body["sources"]]
    scaffold(body["top"], sources, tmp / name, simulators=["icarus"])
    text = (tmp / name / "vkit.toml").read_text()
    return text[text.index("[stimulus]"):]


@pytest.fixture(scope="module")
def default_runs(tmp_path_factory: pytest.TempPathFactory, build_cache_dir: Path) -> dict[str, dict]:
    if not simulator_available("icarus"):
        pytest.skip("Icarus Verilog not installed (apt-get install iverilog)")
    tmp = tmp_path_factory.mktemp("default_stimulus")
    reports = {}
    for name in DESIGNS:
        cfg = tmp / f"{name}.toml"
        cfg.write_text(_CONFIG.format(cache=build_cache_dir.as_posix(), manifest=_designs()[name][0].as_posix(),
                                      use=f'"{name}"')
                       + _scaffolded_stimulus(tmp, name))
        run(load_config(cfg), jobs=2, progress=False, out_dir=tmp / name)
        reports[name] = json.loads((tmp / name / "report.json").read_text())
    return reports


def _cases_by_bug(reports: dict[str, dict]) -> dict[str, list[dict]]:
    out: dict[str, list[dict]] = {}
    for report in reports.values():
        for case in report["cases"]:
            out.setdefault(case["id"].split("/")[0], []).append(case)
    return out


def test_every_bug_is_caught_and_named(default_runs: dict[str, dict]) -> None:
    by_bug = _cases_by_bug(default_runs)
    bugs = {f"{d}@{bug}": b["expect"] for d in DESIGNS for bug, b in _designs()[d][1]["bugs"].items()}
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
