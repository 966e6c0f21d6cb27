"""Backward compatibility: the module paths of earlier releases, and a starter kit an earlier release wrote.

The old paths are served by one alias table (``vkit._legacy.MOVED``); each must import as the very
module object of its new home and say where that is with a DeprecationWarning. The kit under
``tests/data/scaffold_prev`` was written by ``vkit init`` of the release before the layer packages
(see its README) and must still run unchanged through cocotb's Makefile flow.
"""

from __future__ import annotations

import importlib
import json
import shutil
import subprocess
import sys
import warnings
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from conftest import REPO, SAMPLE_RTL, simulator_available, make_env
from vkit._legacy import MOVED

PREV_KIT = REPO / "tests" / "data" / "scaffold_prev"

# The public names of the flat ``vkit/report.py`` of the previous release (its ``__all__``).
OLD_REPORT_NAMES = ("MISSING_COLOUR", "XZ_COLOUR", "UNCHECKED_COLOUR", "safe_name", "case_entry",
                    "write_case_report", "write_run_report", "format_summary", "merge_reports")


def _fresh_import(name: str) -> tuple[object, list[warnings.WarningMessage]]:
    """Import ``name`` as a first import would (its alias entry dropped from sys.modules), recording warnings."""
    saved = {k: sys.modules.pop(k) for k in list(sys.modules) if k == name}
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            module = importlib.import_module(name)
    finally:
        for key, mod in saved.items():
            sys.modules.setdefault(key, mod)
    return module, caught


@pytest.mark.parametrize("old", sorted(MOVED))
def test_old_path_is_the_new_module_and_warns(old: str) -> None:
    module, caught = _fresh_import(old)
    new = importlib.import_module(MOVED[old])
    assert module is new
    messages = [str(w.message) for w in caught if issubclass(w.category, DeprecationWarning)]
    assert any(m.startswith(f"{old} moved to {MOVED[old]}") for m in messages), messages


def test_old_from_imports_of_the_generated_test_resolve() -> None:
    """The names the previous release's generated test module imports, from the paths it imports them."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        from vkit.config import Case, expand_matrix, load_config, select_cases  # noqa: F401
        from vkit.pipeline import run_model_frames  # noqa: F401
        from vkit.runner import make_frames  # noqa: F401
        from vkit.scoreboard import score  # noqa: F401
        from vkit.tb.case import SimCase  # noqa: F401
        from vkit.tb.entry import run_case  # noqa: F401
    from vkit.run import make_frames as new_make_frames

    assert make_frames is new_make_frames


def test_old_report_names_resolve_on_the_report_package() -> None:
    import vkit.report
    from vkit.report import writers

    for name in OLD_REPORT_NAMES:
        assert getattr(vkit.report, name) is getattr(writers, name), name


def test_pytest_plugin_loads_by_its_public_name(tmp_path: Path) -> None:
    """``pytest -p vkit.pytest_plugin`` registers the plugin (its options appear in --help)."""
    (tmp_path / "test_nothing.py").write_text("def test_one():\n    assert True\n")
    proc = subprocess.run(
        [sys.executable, "-m", "pytest", "-p", "vkit.pytest_plugin", "-p", "no:cacheprovider", "--help"],
        cwd=tmp_path, capture_output=True, text=True, timeout=120, check=False,
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "--vkit-sim" in proc.stdout and "--vkit-out" in proc.stdout


@pytest.mark.sim
@pytest.mark.skipif(shutil.which("make") is None, reason="make not found: apt-get install make")
def test_a_kit_written_by_the_previous_release_still_runs(tmp_path: Path) -> None:
    simulator_available("icarus")
    kit = tmp_path / "kit"
    shutil.copytree(PREV_KIT, kit)
    (kit / "rtl").mkdir()
    for name in ("window3x3.v", "blur_core.v"):
        shutil.copy(SAMPLE_RTL / name, kit / "rtl" / name)
    proc = subprocess.run(["make", "-f", "Makefile.vkit", "SIM=icarus", "VKIT_ONLY=impulse"], cwd=kit, env=make_env(),
                          capture_output=True, text=True, timeout=900, check=False)
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    cases = {tc.get("name"): tc for tc in ET.parse(kit / "results.xml").getroot().iter("testcase")}
    # the config's impulse cases on the tiny timing: without and with stalls
    assert sorted(cases) == ["vkit/impulse-s1/tiny32x24/nostall", "vkit/impulse-s1/tiny32x24/stall0.1m3"]
    for name, tc in cases.items():
        assert tc.find("failure") is None and tc.find("error") is None and tc.find("skipped") is None, name
    verdicts = sorted((kit / "vkit-out" / "make" / "icarus").glob("*/verdict.json"))
    assert len(verdicts) == 2
    assert all(json.loads(v.read_text())["verdict"]["passed"] for v in verdicts)
    # the kit files are as the previous release wrote them
    for name in ("vkit.toml", "test_vkit_blur_core.py", "Makefile.vkit"):
        assert (kit / name).read_bytes() == (PREV_KIT / name).read_bytes()
