"""Vector export of a regression case and replay of the capture its plain-HDL testbench wrote."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.cli import main

MANIFEST = SAMPLE_RTL / "designs.toml"
CASE = "blur_core@blur_truncate/icarus/conveyor-s1/tiny32x24/stall0.1"


def _config(tmp_path: Path, cache: Path) -> Path:
    p = tmp_path / "vkit.toml"
    p.write_text(
        f'[run]\nsimulators = ["icarus"]\ncache_dir = "{cache}"\nout_dir = "live"\nwaves = "off"\n'
        f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = true\n'
        '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\nstalls = [0.1]\n'
    )
    return p


@pytest.mark.sim
def test_exported_testbench_replays_to_the_live_verdict(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    cfg = _config(tmp_path, build_cache_dir)
    assert main(["run", str(cfg), "--only", CASE]) == 1
    live = json.loads((tmp_path / "live" / "report.json").read_text())["cases"][0]
    export = tmp_path / "export"
    assert main(["export", str(cfg), CASE, "--out", str(export)]) == 0
    info = json.loads((export / "vectors.json").read_text())
    assert info["case"] == CASE
    # the exported testbench runs with no Python at all: iverilog + vvp, the commands the export lists
    printed = ""
    for cmd in info["commands"]["icarus"]:
        done = subprocess.run(cmd, cwd=export, capture_output=True, text=True, timeout=300)
        assert done.returncode == 0, done.stdout + done.stderr
        printed += done.stdout
    mismatches = live["verdict"]["mismatches"]
    assert f"vkit: {mismatches} mismatches in 768 pixels" in printed
    assert main(["replay", str(export)]) == 1
    replayed = json.loads((export / "report" / "report.json").read_text())["cases"][0]
    assert replayed["verdict"]["mismatches"] == mismatches
    assert replayed["diagnosis"]["kind"] == live["diagnosis"]["kind"] == "rounding"
    assert replayed["files"]["frames"]["0"]["composite"].endswith("_composite.png")
    _replay_refuses_cut_and_foreign_captures(export, capsys)


def _replay_refuses_cut_and_foreign_captures(export: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A capture cut short is a truncated file (exit 2), not a design that did not flush its last line;
    random bytes are not a capture at all and are never parsed."""
    capsys.readouterr()
    data = (export / "capture.bin").read_bytes()
    cut = export / "cut.bin"
    cut.write_bytes(data[: len(data) * 2 // 3])
    assert main(["replay", str(export), "--capture", str(cut)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith(f"vkit: error: capture file {str(cut)!r} is truncated: its last record is cut after "), err
    assert err.endswith("the testbench did not finish writing it (stopped early, or the file was cut): rerun it to "
                        "the end, then replay")
    junk = export / "junk.bin"
    junk.write_bytes(bytes((i * 97 + 13) % 256 for i in range(5000)))
    assert main(["replay", str(export), "--capture", str(junk)]) == 2
    assert capsys.readouterr().err.strip() == (
        f"vkit: error: capture file {str(junk)!r} is not a vkit capture file (it starts with neither the binary "
        "header VKCB nor '# vkit capture'); give the capture.bin or capture.txt a vkit harness wrote")


def test_replay_of_a_folder_that_is_not_an_export(tmp_path):
    from vkit.core.errors import ConfigError
    from vkit.run.vectors import replay

    with pytest.raises(ConfigError, match="is not a vkit export"):
        replay(tmp_path)


def test_export_needs_exactly_one_case(tmp_path, build_cache_dir, capsys):
    cfg = _config(tmp_path, build_cache_dir)
    assert main(["export", str(cfg), "blur_core", "--out", str(tmp_path / "x")]) == 2
    assert "selects" in capsys.readouterr().err
