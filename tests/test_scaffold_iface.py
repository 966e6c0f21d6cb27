"""`vkit init` on a SystemVerilog top with interface ports: the plain-port wrapper, the simulators it names, a green run on Verilator."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import make_env

from vkit.core.errors import ConfigError
from vkit.run.config import expand_matrix, load_config
from vkit.sim.hdlports import INTERFACE, find_design
from vkit.sim.simulators import find

SAMPLE = Path(__file__).resolve().parent.parent / "sample_rtl"
FILES = ("window3x3.v", "blur_core.v", "belt_pkg.sv", "belt_video_if.sv", "belt_smooth_top.sv")
_VERILATOR = find("verilator")

# belt_smooth_top's links as its interface and modports declare them (sample_rtl/belt_video_if.sv):
# cam is a sink (every signal into the design), belt a source (every signal out of it).
EXPECTED_ROLES = {
    "clock": "pclk", "reset": "rst_n",
    "in_vsync": "cam_vs", "in_hsync": "cam_hs", "in_de": "cam_de", "in_valid": "cam_valid", "in_data": "cam_px",
    "out_vsync": "belt_vs", "out_hsync": "belt_hs", "out_de": "belt_de", "out_valid": "belt_valid", "out_data": "belt_px",
}



def _vkit(args: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    cmd = [sys.executable, "-c", "import sys; from vkit.cli import main; sys.exit(main(sys.argv[1:]))", *args]
    return subprocess.run(cmd, cwd=cwd, env=make_env(), capture_output=True, text=True, timeout=900, check=False)


def _repo(tmp_path: Path) -> Path:
    """A throw-away repo with the conveyor camera's SystemVerilog sources under rtl/."""
    repo = tmp_path / "beltrepo"
    (repo / "rtl").mkdir(parents=True)
    for name in FILES:
        shutil.copy(SAMPLE / name, repo / "rtl" / name)
    return repo


def _init(repo: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    return _vkit(["init", "belt_smooth_top", *[f"rtl/{n}" for n in FILES], *extra], repo)


def test_init_writes_a_wrapper_and_maps_every_role_to_its_plain_ports(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    proc = _init(repo)
    assert proc.returncode == 0, proc.stderr
    assert "MISSING" not in proc.stdout and "Icarus 11 cannot parse" in proc.stdout
    wrapper = repo / "belt_smooth_top_flat.sv"
    assert wrapper.is_file()
    config = load_config(repo / "vkit.toml")
    design = config.designs["belt_smooth_top"]
    assert design.top == "belt_smooth_top_flat" and design.sources[-1] == wrapper.resolve()
    assert design.ports == EXPECTED_ROLES
    assert design.reset_active_high is False  # rst_n: "_n" = active low (common practice, no source)
    assert (design.supported, config.run.simulators) == (["verilator"], ["verilator"])
    # the wrapper elaborates to plain ports only, one per modport signal, with the modport's direction
    flat = find_design(design.sources, design.top)
    assert all(p.direction != INTERFACE for p in flat.ports)
    shape = {p.name: (p.direction, p.width) for p in flat.ports}
    assert shape["cam_px"] == ("input", 8) and shape["belt_px"] == ("output", 8)  # belt_pkg::pixel_t, 8 bits
    assert shape["frame_count"] == ("output", 16)


def test_icarus_is_refused_with_the_reason(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    refused = _init(repo, "--sim", "icarus")
    assert refused.returncode == 2
    assert "icarus cannot take this top (Icarus 11 cannot parse SystemVerilog interface ports" in refused.stderr
    assert not (repo / "vkit.toml").exists()  # nothing written
    assert _init(repo).returncode == 0
    config = load_config(repo / "vkit.toml")
    with pytest.raises(ConfigError, match=r"design belt_smooth_top: icarus cannot take it .*--sim verilator"):
        expand_matrix(config, ["icarus"])
    run = _vkit(["run", "vkit.toml", "--sim", "icarus"], repo)
    assert run.returncode == 2 and "supported_simulators" in run.stderr and "Traceback" not in run.stderr


def test_a_generic_interface_port_is_a_clear_error(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    top = repo / "rtl" / "belt_smooth_top.sv"
    top.write_text(top.read_text().replace("belt_video_if.sink          cam", "belt_video_if               cam"))
    proc = _init(repo)
    assert proc.returncode == 2
    assert "interface port cam (belt_video_if) names no modport" in proc.stderr


@pytest.mark.sim
@pytest.mark.skipif(not _VERILATOR.available, reason=f"verilator: {_VERILATOR.reason}")
def test_scaffolded_interface_top_runs_green_on_verilator_and_catches_a_seeded_bug(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    assert _init(repo).returncode == 0
    only = ["--only", "conveyor-s1", "--only", "impulse"]
    run = _vkit(["run", "vkit.toml", *only], repo)
    assert run.returncode == 0, run.stdout[-2000:] + run.stderr[-2000:]
    # LINE_PIXELS follows the line length (timing_parameters), so the kit runs two frame sizes, each with and
    # without stalls; the line buffer then holds exactly one line
    assert "8 cases: 8 passed" in run.stdout
    # the same kit with blur_core's seeded rounding bug on must fail: the filter inside is really checked
    assert _init(repo, "-D", "BUG_BLUR_TRUNCATE", "--force", "--rewrite-config").returncode == 0
    bad = _vkit(["run", "vkit.toml", "--only", "conveyor-s1/tiny32x24/nostall"], repo)
    assert bad.returncode == 1, bad.stdout[-2000:] + bad.stderr[-2000:]


def test_init_reads_through_include_folders_and_writes_them_into_the_config(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    (repo / "inc").mkdir()
    (repo / "inc" / "belt_line.svh").write_text("`define BELT_LINE_PIXELS 320\n")
    top = repo / "rtl" / "belt_smooth_top.sv"
    top.write_text('`include "belt_line.svh"\n' + top.read_text().replace(
        "parameter int LINE_PIXELS = BELT_MAX_LINE", "parameter int LINE_PIXELS = `BELT_LINE_PIXELS"))
    missing = _init(repo)
    assert missing.returncode == 2 and "belt_smooth_top.sv:1: " in missing.stderr and "--include-dir" in missing.stderr
    assert _init(repo, "-I", "inc").returncode == 0
    config = load_config(repo / "vkit.toml")
    assert config.designs["belt_smooth_top"].include_dirs == [(repo / "inc").resolve()]
    assert "# parameters = { LINE_PIXELS = 320 }" in (repo / "vkit.toml").read_text()  # the elaborated default
