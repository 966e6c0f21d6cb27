"""Seeded bugs picked by name, stimuli aimed at some designs, and a run judged by its expectations."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import REPO, simulator_available
from vkit.core.errors import ConfigError
from vkit.run.config import expand_matrix, load_config
from vkit.run.results import CaseResult, RunResult, met_expectation

MANIFEST = REPO / "sample_rtl" / "designs.toml"


def _config(tmp_path: Path, bugs: str, stimulus: str = 'patterns = ["impulse"]') -> Path:
    p = tmp_path / "vkit.toml"
    p.write_text(f'[run]\nsimulators = ["icarus"]\n\n[[import]]\nmanifest = "{MANIFEST}"\n'
                 f'use = ["edge_core", "blur_core"]\nbugs = {bugs}\n\n[stimulus]\ntimings = ["tiny32x24"]\n{stimulus}\n')
    return p


def test_bugs_by_name_take_only_those_variants(tmp_path: Path) -> None:
    cases = expand_matrix(load_config(_config(tmp_path, '["stall_drop", "blur_truncate"]')))
    assert sorted(c.design.name for c in cases) == ["blur_core@blur_truncate", "edge_core@stall_drop"]
    assert all(c.design.expect == "fail" for c in cases)


def test_an_unknown_bug_name_is_one_line_with_the_closest(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match=r"bugs = 'stall_drp' is not a seeded bug of the designs used; "
                                          r"did you mean 'stall_drop'\?"):
        load_config(_config(tmp_path, '["stall_drp"]'))


def test_stimulus_designs_globs_and_exclusions(tmp_path: Path) -> None:
    stimulus = ('designs = ["!*@*"]\npatterns = ["impulse", { name = "columns", designs = ["*@*"] },'
                ' { name = "box", designs = ["edge_core*", "!*@*"] }]')
    cases = expand_matrix(load_config(_config(tmp_path, "true", stimulus)))
    by_design: dict[str, set[str]] = {}
    for c in cases:
        by_design.setdefault(c.design.name, set()).add(c.stimulus_name)
    assert by_design["edge_core"] == {"impulse", "box"}
    assert by_design["blur_core"] == {"impulse"}
    assert by_design["edge_core@stall_drop"] == {"columns"}
    assert by_design["blur_core@blur_truncate"] == {"columns"}


def _case(status: str, expect: str) -> CaseResult:
    return CaseResult(id=f"{status}-{expect}", status=status, simulator="icarus", seconds=0.0, expect=expect)


@pytest.mark.parametrize(("status", "expect", "met"), [
    ("pass", "pass", "pass"), ("fail", "pass", "fail"), ("fail", "fail", "pass"),
    ("no_output", "fail", "pass"), ("pass", "fail", "fail"), ("error", "fail", "error"),
])
def test_a_case_is_judged_against_its_expectation(status: str, expect: str, met: str) -> None:
    assert met_expectation(_case(status, expect)) == met


def test_exit_code_from_verdicts_or_expectations() -> None:
    cases = [_case("pass", "pass"), _case("fail", "fail")]
    assert RunResult(Path("."), cases, {}, [], 0.0).exit_code == 1
    assert RunResult(Path("."), cases, {}, [], 0.0, exit_from="expectations").exit_code == 0
    slipped = RunResult(Path("."), [_case("pass", "pass"), _case("pass", "fail")], {}, [], 0.0,
                        exit_from="expectations")
    assert slipped.exit_code == 1


@pytest.mark.sim
def test_the_demo_shows_its_seeded_bugs_failing_and_exits_0(tmp_path: Path) -> None:
    simulator_available("icarus")
    out = tmp_path / "demo"
    done = subprocess.run([sys.executable, "-m", "vkit", "demo", "--sim", "icarus", "--out",
                           str(out)], capture_output=True, text=True, timeout=600, cwd=tmp_path)
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-3000:]
    lines = done.stdout.strip().splitlines()
    assert "expected-to-fail cases: 2/2 failed, 2 diagnosed as the expected kind" in lines
    assert lines[-1] == f"open this page: {out / 'index.html'}"
    page = (out / "index.html").read_text()
    assert page.index('id="failures"') < page.index('id="table"'), "the page opens with the failures"
    assert "edge_core@stall_drop" in page and "blur_core@blur_truncate" in page
    # as a person sees it: headless Chromium runs the page's script; one row per case, the failing pictures decoded
    from test_page_browser import _browse, _Dom

    report = json.loads((out / "report.json").read_text())
    dom = _Dom(_browse((out / "index.html").as_uri(), tmp_path / "profile", "--dump-dom").stdout)
    assert len(dom.rows) == len(report["cases"]) == 41
    decoded = [i for i in dom.images if (i.get("alt") or "").endswith(("stall0.1m3",)) and i.get("data-decoded")]
    assert any("edge_core@stall_drop" in (i.get("alt") or "") for i in decoded), "the failure's picture is shown"
