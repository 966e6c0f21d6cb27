"""Every seeded-bug variant of the sample RTL fails on Icarus with the diagnosis its manifest expects."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.run.config import load_config
from vkit.check.diagnose import KINDS
from vkit.run.runner import run

pytestmark = pytest.mark.sim

MANIFEST = SAMPLE_RTL / "designs.toml"

# The stimulus that shows each bug (its manifest `needs`): box corners drive both gradients to the top
# of their range; the conveyor scene has colour (R != B) and a right border that is not black.
# Every other bug shows on either; the box run keeps this test near 50 s on 2 cores.
_SHOWN_BY = {
    "luma_rb_swap": "conveyor",
    "right_border_zero": "conveyor",
    "linebuf_off_by_one": "conveyor",
    "median_swap": "conveyor",
    "sobel_tap_sign": "conveyor",
    "stream_ready": "conveyor",
    "de_late": "conveyor",
    "ring_from_filter": "conveyor",
    "lanes_swapped": "conveyor",
    "chroma_slip_odd": "conveyor",
    "path8": "conveyor",
    "tkeep_all": "box30",  # a line that ends in a partly filled beat: 30 pixels at 4 a beat
}

_CONFIG = """
[run]
simulators = ["icarus"]
jobs = 2
cache_dir = "{cache}"

[[import]]
manifest = "{manifest}"
bugs = "only"

[[import]]
manifest = "{manifest}"
use = ["edge_core"]

[stimulus]
patterns = [{{ name = "conveyor", seeds = [1] }}, "box",
            {{ name = "box", label = "box30", designs = ["lidscan_sharpen_k4@*"], timings = [{{ name = "tiny30x24", h_active = 30, h_front_porch = 2, h_sync = 3, h_back_porch = 3, v_active = 24, v_front_porch = 1, v_sync = 1, v_back_porch = 1 }}] }}]
timings = ["tiny32x24"]
stalls = [{{ probability = 0.1, max_length = 3 }}]
backpressure = [{{ probability = 0.2, max_length = 3 }}]
seeds = [1]
"""


def _bugs() -> dict[str, str]:
    """bug id ``design@bug`` -> expected kind, from the manifest."""
    body = tomllib.loads(MANIFEST.read_text())
    out = {}
    for name, d in body["designs"].items():
        if "icarus" not in d.get("simulators", []):
            continue
        for bug, b in d.get("bugs", {}).items():
            out[f"{name}@{bug}"] = b["expect"]
    return out


@pytest.fixture(scope="module")
def bug_run(tmp_path_factory: pytest.TempPathFactory, build_cache_dir: Path):
    simulator_available("icarus")
    tmp = tmp_path_factory.mktemp("bugs")
    cfg = tmp / "bugs.toml"
    cfg.write_text(_CONFIG.format(cache=build_cache_dir.as_posix(), manifest=MANIFEST.as_posix()))
    only = [f"{b}/*/{_SHOWN_BY.get(b.split('@')[1], 'box')}-*" for b in _bugs()]
    only += ["edge_core/*/box-*", "edge_core/*/conveyor-*"]  # the good design on both stimuli
    result = run(load_config(cfg), jobs=2, only=only, progress=False, out_dir=tmp / "out")
    return result, tmp / "out"


def test_manifest_kinds_are_the_fixed_vocabulary() -> None:
    assert set(_bugs().values()) <= set(KINDS)


def test_every_bug_fails_with_the_expected_kind(bug_run) -> None:
    result, out = bug_run
    assert result.exit_code == 1  # a design failed, nothing errored
    by_bug: dict[str, list] = {}
    for c in result.cases:
        by_bug.setdefault(c.id.split("/")[0], []).append(c)
    wrong = []
    for bug, kind in _bugs().items():
        cases = by_bug.get(bug, [])
        assert cases, f"{bug}: no case ran"
        failed = [c for c in cases if c.status == "fail"]
        assert failed, f"{bug}: passed on {[c.id for c in cases]}"
        if not any(c.diagnosis_kind == kind for c in failed):
            wrong.append(f"{bug}: expected {kind}, got {[c.diagnosis for c in failed]}")
        for c in failed:
            frames = c.entry["files"]["frames"]
            assert frames, f"{c.id}: no frame images"
            for f in frames.values():
                assert (out / f["diff"]).is_file(), f"{c.id}: diff PNG missing"
    assert not wrong, "\n".join(wrong)


def test_stall_bugs_name_the_line_column_and_stall(bug_run) -> None:
    result, _ = bug_run
    for c in result.cases:
        bug = c.id.split("/")[0]
        if bug in ("edge_core@stall_repeat", "edge_core@stall_drop"):
            assert c.diagnosis_kind == "stall", c.diagnosis
            assert "after an input stall at (" in c.diagnosis and " line " in c.diagnosis and "x=" in c.diagnosis
        if bug == "stream_core@stream_ready":
            assert "after back-pressure at output (" in c.diagnosis


def test_data_enable_timing_bugs_say_lead_or_lag(bug_run) -> None:
    result, _ = bug_run
    said = {c.id.split("/")[0]: c.diagnosis or "" for c in result.cases}
    assert "data-enable leads the pixel data by 1 clock" in said["edge_core@de_early"]
    assert "data-enable lags the pixel data by 1 clock" in said["edge_core@de_late"]


def test_good_design_passes_on_the_same_stimuli(bug_run) -> None:
    result, _ = bug_run
    good = [c for c in result.cases if c.id.startswith("edge_core/")]
    assert len(good) == 2
    assert all(c.status == "pass" for c in good), [c.diagnosis for c in good]
