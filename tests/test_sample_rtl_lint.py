"""Lint checks of the bundled sample RTL: every design and seeded-bug define compiles cleanly, tables are exact."""

from __future__ import annotations

import math
import re
import subprocess
import sys
from pathlib import Path

import pytest

from vkit.check.results import KINDS

from vkit.sim import simulators

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__: list[str] = []

RTL = Path(__file__).resolve().parent.parent / "sample_rtl"
MANIFEST = tomllib.loads((RTL / "designs.toml").read_text(encoding="utf-8"))["designs"]
VERILOG = {name: d for name, d in MANIFEST.items() if d["language"] == "verilog"}
VHDL = {name: d for name, d in MANIFEST.items() if d["language"] == "vhdl"}
# (design, define or None) for the good design and every seeded bug of every Verilog design
VARIANTS = [(name, None) for name in VERILOG] + [
    (name, bug["define"]) for name, d in VERILOG.items() for bug in d.get("bugs", {}).values()
]
ROLES_VIDEO = {
    "clock", "reset", "in_vsync", "in_hsync", "in_de", "in_valid", "in_data",
    "out_vsync", "out_hsync", "out_de", "out_valid", "out_data",
}
ROLES_STREAM = {
    "clock", "reset", "in_valid", "in_ready", "in_data", "in_sof", "in_eol",
    "out_valid", "out_ready", "out_data", "out_sof", "out_eol",
}
EXPECT_CLASSES = set(KINDS) - {"xz", "missing"}  # what a seeded bug may be diagnosed as


def _variant_id(variant: tuple[str, str | None]) -> str:
    return f"{variant[0]}-{variant[1] or 'good'}"


def _tool(name: str) -> simulators.SimulatorInfo:
    info = simulators.find(name)
    if not info.available:
        pytest.skip(f"{name} not available: {info.reason} ({info.install_hint})")
    return info


def _run(cmd: list[str], info: simulators.SimulatorInfo, cwd: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run(cmd, cwd=cwd, env=simulators.subprocess_env(info), capture_output=True, text=True, timeout=120)


def _sources(design: dict) -> list[str]:
    return [str(RTL / s) for s in design["sources"]]


def test_manifest_is_complete() -> None:
    for name, d in MANIFEST.items():
        for key in ("top", "sources", "language", "family", "spec", "pixel_format", "ports", "simulators",
                    "latency_clocks", "pipeline_clocks"):
            assert key in d, f"designs.{name} lacks {key}"
        for src in d["sources"]:
            assert (RTL / src).is_file(), f"designs.{name}: source {src} missing"
        want = ROLES_VIDEO if d["family"] == "video" else ROLES_STREAM
        # the lane_rows designs have no sync outputs (frames are split by line count): optional roles
        have = set(d["ports"]) | ({"out_vsync", "out_hsync"} if d["sources"][0] == "lane_rows.v" else set())
        have -= {"in_keep", "out_keep"}  # the stream's optional per-lane valid masks
        assert have == want, f"designs.{name}: port roles {sorted(d['ports'])}"
        text = "\n".join((RTL / s).read_text(encoding="utf-8") for s in d["sources"])
        for port in d["ports"].values():
            assert re.search(rf"\b{port}\b", text), f"designs.{name}: port {port} not in the sources"
        for bug_name, bug in d.get("bugs", {}).items():
            assert bug["expect"] in EXPECT_CLASSES, f"{name}.bugs.{bug_name}: expect {bug['expect']!r}"
            assert f"`ifdef {bug['define']}" in text or f"`elsif {bug['define']}" in text, (
                f"{name}.bugs.{bug_name}: {bug['define']} is not used by the sources"
            )
    assert sum(len(d.get("bugs", {})) for d in MANIFEST.values()) >= 12


@pytest.mark.parametrize("variant", VARIANTS, ids=_variant_id)
def test_icarus_compiles(variant: tuple[str, str | None], tmp_path: Path) -> None:
    info = _tool("icarus")
    name, define = variant
    d = VERILOG[name]
    defs = [f"-D{define}"] if define else []
    res = _run(["iverilog", "-g2005", "-Wall", "-o", str(tmp_path / "a.vvp"), "-s", d["top"], *defs, *_sources(d)],
               info, tmp_path)
    assert res.returncode == 0, res.stderr
    assert "warning" not in (res.stdout + res.stderr).lower(), res.stdout + res.stderr


@pytest.mark.parametrize("variant", [v for v in VARIANTS if v[1]], ids=_variant_id)
def test_bug_define_changes_the_design(variant: tuple[str, str | None], tmp_path: Path) -> None:
    # the preprocessed text with the define must differ from the good design's
    info = _tool("icarus")
    name, define = variant
    d = VERILOG[name]
    outs = []
    for defs in ([], [f"-D{define}"]):
        out = tmp_path / f"pp{len(defs)}.v"
        res = _run(["iverilog", "-g2005", "-E", "-o", str(out), *defs, *_sources(d)], info, tmp_path)
        assert res.returncode == 0, res.stderr
        outs.append(out.read_text())
    assert outs[0] != outs[1]


@pytest.mark.parametrize("variant", VARIANTS, ids=_variant_id)
def test_verilator_lint_clean(variant: tuple[str, str | None], tmp_path: Path) -> None:
    # -Wall with no command-line waivers: the only waivers are lint_off comments beside their reason
    info = _tool("verilator")
    name, define = variant
    d = VERILOG[name]
    defs = [f"-D{define}"] if define else []
    res = _run(["verilator", "--lint-only", "-Wall", "--top-module", d["top"], *defs, *_sources(d)], info, tmp_path)
    assert res.returncode == 0, res.stdout + res.stderr
    assert "%Warning" not in res.stdout + res.stderr


@pytest.mark.parametrize("name", sorted(VHDL))
def test_ghdl_analyses(name: str, tmp_path: Path) -> None:
    info = _tool("ghdl")
    d = VHDL[name]
    res = _run(["ghdl", "-a", "--std=08", f"--workdir={tmp_path}", *_sources(d)], info, tmp_path)
    assert res.returncode == 0, res.stderr
    res = _run(["ghdl", "-e", "--std=08", f"--workdir={tmp_path}", d["top"]], info, tmp_path)
    assert res.returncode == 0, res.stderr


def test_root_table_hex_is_isqrt() -> None:
    # source: Python's math.isqrt (exact integer square root); root_table[a] = isqrt(8*a)
    lines = (RTL / "edge_root_table.hex").read_text(encoding="ascii").split()
    assert len(lines) == 8192
    assert all(len(w) == 2 for w in lines)
    assert [int(w, 16) for w in lines] == [math.isqrt(8 * a) for a in range(8192)]
    assert int(lines[8191], 16) == 255


def test_root_table_vhdl_package_is_isqrt() -> None:
    # source: Python's math.isqrt; the VHDL constant must hold the same words as the hex file
    text = (RTL / "edge_root_table_pkg.vhd").read_text(encoding="ascii")
    words = [int(w, 16) for w in re.findall(r'x"([0-9A-Fa-f]{2})"', text)]
    assert words == [math.isqrt(8 * a) for a in range(8192)]
