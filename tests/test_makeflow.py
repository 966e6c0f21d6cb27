"""The Makefile flow reads the config: `vkit make-vars`, the built-parameter check, three flows agreeing, kit upgrades.

A throw-away repo is scaffolded with `vkit init`; the parameter, define and source list then change only in
``vkit.toml``, and ``vkit run``, ``make -f Makefile.vkit`` and ``pytest -p vkit.pytest_plugin`` must give the
same verdict and the same diagnosis kind for every case.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from conftest import REPO, SAMPLE_RTL, make_env
from vkit.run.makeflow import write_make_vars
from vkit.run.scaffold import scaffold
from vkit.sim.simulators import find

PREV_KIT = REPO / "tests" / "data" / "scaffold_prev"
needs_make = pytest.mark.skipif(shutil.which("make") is None, reason="make not found: apt-get install make")


def _run(cmd: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    env = make_env()
    env["VKIT_CACHE_DIR"] = str(cwd / ".vkit-cache")  # the throw-away repo's own: tests leave ~/.cache alone
    return subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True, timeout=1200, check=False)


def _vkit(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    return _run([sys.executable, "-m", "vkit", *args], cwd)


def _need(sim: str) -> None:
    info = find(sim)
    if not info.available:
        pytest.skip(f"{sim}: {info.reason}")


# -- a throw-away repo whose config then changes ------------------------------------------------------------


def _blur_repo(tmp_path: Path, sims: list[str]) -> Path:
    """blur_core scaffolded, then moved to rtl/filters/ with MAX_WIDTH, the truncation bug and two patterns set
    in the config only (flat stays exact under truncation, an impulse does not)."""
    repo = tmp_path / "blurrepo"
    (repo / "rtl").mkdir(parents=True)
    for name in ("window3x3.v", "blur_core.v"):
        shutil.copy(SAMPLE_RTL / name, repo / "rtl" / name)
    scaffold("blur_core", [repo / "rtl" / "window3x3.v", repo / "rtl" / "blur_core.v"], repo, simulators=sims)
    (repo / "rtl" / "filters").mkdir()
    (repo / "rtl" / "blur_core.v").rename(repo / "rtl" / "filters" / "blur_core.v")
    _edit_config(repo, 'sources = ["rtl/window3x3.v", "rtl/filters/blur_core.v"]',
                 "parameters = { MAX_WIDTH = 64 }\ndefines = { BUG_BLUR_TRUNCATE = 1 }")
    return repo


def _edge_repo(tmp_path: Path) -> Path:
    """The VHDL edge core scaffolded, then moved to hdl/filters/ with MAX_WIDTH set in the config only."""
    repo = tmp_path / "edgerepo"
    (repo / "hdl").mkdir(parents=True)
    names = ("edge_root_table_pkg.vhd", "edge_core.vhd")
    for name in names:
        shutil.copy(SAMPLE_RTL / name, repo / "hdl" / name)
    scaffold("edge_core", [repo / "hdl" / n for n in names], repo)
    (repo / "hdl" / "filters").mkdir()
    for name in names:
        (repo / "hdl" / name).rename(repo / "hdl" / "filters" / name)
    _edit_config(repo, 'sources = ["hdl/filters/edge_root_table_pkg.vhd", "hdl/filters/edge_core.vhd"]',
                 "parameters = { MAX_WIDTH = 64 }")
    return repo


def _edit_config(repo: Path, sources_line: str, build_lines: str) -> None:
    path = repo / "vkit.toml"
    text = re.sub(r"^sources = .*$", sources_line, path.read_text(), count=1, flags=re.M)
    text = re.sub(r"^(tolerance_lsb = .*)$", lambda m: m.group(1) + "\n" + build_lines, text, count=1, flags=re.M)
    text = re.sub(r"^patterns = .*$", 'patterns = ["flat", "impulse"]', text, count=1, flags=re.M)
    text = re.sub(r"^frames = .*$", "frames = 1", text, count=1, flags=re.M)
    text = re.sub(r"^stalls = .*$", "stalls = [0]", text, count=1, flags=re.M)
    path.write_text(text)


def _verdicts(folder: Path) -> dict[str, tuple[str, str | None]]:
    """Case id -> (status, diagnosis kind) from every verdict.json a flow wrote under ``folder``."""
    out = {}
    for path in folder.rglob("verdict.json"):
        data = json.loads(path.read_text())
        v = data["verdict"]
        first = v.get("diagnosis") or (v["findings"][0] if v.get("findings") else None)
        out[data["id"]] = (v["status"], first.get("kind") if first else None)
    return out


def _three_flows(repo: Path, sims: list[str]) -> dict[str, dict[str, tuple[str, str | None]]]:
    """Each flow's verdicts on ``sims``: vkit run, make (one run per simulator), the pytest plugin.

    Each flow's output tail is printed, so a flow that wrote no verdicts says why in the failure report.
    """
    procs = [_vkit("run", "vkit.toml", "--sim", *sims, "--out", "out-run", cwd=repo)]
    procs += [_run(["make", "-f", "Makefile.vkit", f"SIM={sim}"], repo) for sim in sims]
    plugin = [sys.executable, "-m", "pytest", "-p", "vkit.pytest_plugin", "-p", "no:cacheprovider", "-q",
              "--vkit-out", "out-pytest", *[a for s in sims for a in ("--vkit-sim", s)], "vkit.toml"]
    procs.append(_run(plugin, repo))
    for proc in procs:
        print(" ".join(proc.args[-4:]), "-> exit", proc.returncode, proc.stdout[-1500:], proc.stderr[-1500:])
    return {"run": _verdicts(repo / "out-run"), "make": _verdicts(repo / "vkit-out" / "make"),
            "pytest": _verdicts(repo / "out-pytest")}


def _table(flows: dict[str, dict[str, tuple[str, str | None]]]) -> str:
    """The agreement table: one row per case, one column per flow (printed with -s, and on failure)."""
    ids = sorted(set().union(*flows.values()))
    rows = [f"{cid:55s} " + "  ".join(f"{f}={flows[f].get(cid)}" for f in flows) for cid in ids]
    return "\n".join(rows)


@pytest.mark.sim
@needs_make
@pytest.mark.parametrize("sim", ["icarus", "verilator"])
def test_three_flows_agree_on_a_verilog_design_changed_only_in_the_config(tmp_path: Path, sim: str) -> None:
    _need(sim)
    repo = _blur_repo(tmp_path, [sim])
    flows = _three_flows(repo, [sim])
    print(_table(flows))
    expected_ids = {f"blur_core/{sim}/flat-s1/tiny32x24/nostall", f"blur_core/{sim}/impulse-s1/tiny32x24/nostall"}
    assert set(flows["run"]) == expected_ids, _table(flows)
    assert flows["make"] == flows["run"] == flows["pytest"], _table(flows)
    # the define reached every build: truncating instead of rounding keeps a flat frame exact and
    # breaks the impulse (1/16 of 255 is 15.94: rounded 16, truncated 15; common practice, no source)
    assert flows["run"][f"blur_core/{sim}/flat-s1/tiny32x24/nostall"][0] == "pass"
    assert flows["run"][f"blur_core/{sim}/impulse-s1/tiny32x24/nostall"][0] == "fail"


@pytest.mark.sim
@needs_make
def test_three_flows_agree_on_a_vhdl_design_on_ghdl(tmp_path: Path) -> None:
    _need("ghdl")
    repo = _edge_repo(tmp_path)
    flows = _three_flows(repo, ["ghdl"])
    print(_table(flows))
    assert set(flows["run"]) == {"edge_core/ghdl/flat-s1/tiny32x24/nostall", "edge_core/ghdl/impulse-s1/tiny32x24/nostall"}
    assert flows["make"] == flows["run"] == flows["pytest"], _table(flows)
    assert {status for status, _ in flows["run"].values()} == {"pass"}
    assert "-gMAX_WIDTH=64" in (repo / ".vkit-make" / "edge_core-ghdl.mk").read_text()  # GHDL -g<generic>=<value> at run time


# -- the built design against its config ----------------------------------------------------------------------


@pytest.mark.sim
@needs_make
def test_a_design_built_with_another_parameter_stops_with_one_line(tmp_path: Path) -> None:
    _need("icarus")
    repo = _blur_repo(tmp_path, ["icarus"])
    # the user's own Makefile appends a setting of its own after the config's (iverilog: the last -P wins)
    (repo / "Makefile").write_text("include Makefile.vkit\nCOMPILE_ARGS += -Pblur_core.MAX_WIDTH=32\n")
    proc = _run(["make", "SIM=icarus", "VKIT_ONLY=flat"], repo)
    assert proc.returncode != 0
    failures = list(ET.parse(repo / "results.xml").getroot().iter("failure"))
    assert len(failures) == 1
    message = failures[0].get("message", "")
    assert message.startswith("design blur_core was built with MAX_WIDTH = 32 but the config sets MAX_WIDTH = 64; ")
    assert "\n" not in message


# -- make-vars: one build, one copy, kept fast ----------------------------------------------------------------


def test_make_vars_follow_the_config_and_rebuild_only_for_build_inputs(tmp_path: Path) -> None:
    repo = _blur_repo(tmp_path, ["icarus"])
    mk = write_make_vars(repo / "vkit.toml", "blur_core", "icarus")
    build = mk.with_name("blur_core-icarus.build.json")
    text = mk.read_text()
    assert f"VKIT_SOURCES := {repo / 'rtl' / 'window3x3.v'} {repo / 'rtl' / 'filters' / 'blur_core.v'}" in text
    assert "-Pblur_core.MAX_WIDTH=64" in text and "-DBUG_BLUR_TRUNCATE=1" in text
    stamp = build.stat().st_mtime_ns
    time.sleep(0.05)
    config = repo / "vkit.toml"
    config.write_text(config.read_text().replace('patterns = ["flat", "impulse"]', 'patterns = ["flat"]'))
    write_make_vars(config, "blur_core", "icarus")
    assert build.stat().st_mtime_ns == stamp  # a stimulus edit does not rebuild the model
    config.write_text(config.read_text().replace("MAX_WIDTH = 64", "MAX_WIDTH = 128"))
    write_make_vars(config, "blur_core", "icarus")
    assert "-Pblur_core.MAX_WIDTH=128" in build.read_text() and build.stat().st_mtime_ns != stamp


def test_make_vars_errors_are_one_line(tmp_path: Path) -> None:
    repo = _blur_repo(tmp_path, ["icarus"])
    proc = _vkit("make-vars", "vkit.toml", "--design", "blur_cor", "--sim", "icarus", cwd=repo)
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1
    assert "'blur_cor' is not a design of the config; did you mean 'blur_core'?" in proc.stderr
    proc = _vkit("make-vars", "vkit.toml", "--design", "blur_core", "--sim", "ghdl", cwd=repo)
    assert proc.returncode == 2 and "does not build verilog" in proc.stderr


# -- a kit of the previous release, upgraded in place ------------------------------------------------------


@pytest.mark.sim
@needs_make
def test_init_force_upgrades_a_previous_kit_keeping_its_config(tmp_path: Path) -> None:
    _need("icarus")
    kit = tmp_path / "kit"
    shutil.copytree(PREV_KIT, kit)
    (kit / "rtl").mkdir()
    for name in ("window3x3.v", "blur_core.v"):
        shutil.copy(SAMPLE_RTL / name, kit / "rtl" / name)
    proc = _vkit("init", "blur_core", "rtl/window3x3.v", "rtl/blur_core.v", "--force", cwd=kit)
    assert proc.returncode == 0, proc.stderr
    assert "kept vkit.toml (as you left it)" in proc.stdout
    assert "rewrote Makefile.vkit" in proc.stdout and "rewrote test_vkit_blur_core.py" in proc.stdout
    assert (kit / "vkit.toml").read_bytes() == (PREV_KIT / "vkit.toml").read_bytes()
    for name in ("Makefile.vkit", "test_vkit_blur_core.py"):
        assert (kit / name).read_bytes() != (PREV_KIT / name).read_bytes()
    config = kit / "vkit.toml"
    config.write_text(config.read_text().replace("# parameters = { MAX_WIDTH = 1024, BORDER = 0 }",
                                                 "parameters = { MAX_WIDTH = 64 }"))
    run = _run(["make", "-f", "Makefile.vkit", "SIM=icarus", "VKIT_ONLY=impulse"], kit)
    assert run.returncode == 0, run.stdout[-3000:] + run.stderr[-2000:]
    cases = [tc.get("name") for tc in ET.parse(kit / "results.xml").getroot().iter("testcase")]
    assert sorted(cases) == ["vkit/impulse-s1/tiny32x24/nostall", "vkit/impulse-s1/tiny32x24/stall0.1m3"]
    assert "-Pblur_core.MAX_WIDTH=64" in (kit / ".vkit-make" / "blur_core-icarus.mk").read_text()
