"""Verilog/SystemVerilog tops in several styles read through the compiler front end (pyslang), VHDL through GHDL.

Each expected width is worked out by hand from the language reference (IEEE 1800-2017 for
SystemVerilog, IEEE 1076-2008 for VHDL), section named beside the check; where a simulator is on the
machine, its own elaboration (Verilator --json-only, GHDL) is a second outside reference.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from vkit.core.errors import ConfigError
from vkit.sim.hdlports import INTERFACE, Port, find_design, list_designs, parse_ports, ports_from_verilator
from vkit.sim.simulators import find

SAMPLE = Path(__file__).resolve().parent.parent / "sample_rtl"
BELT_SOURCES = [SAMPLE / n for n in ("window3x3.v", "blur_core.v", "belt_pkg.sv", "belt_video_if.sv", "belt_smooth_top.sv")]

_VERILATOR = find("verilator")
_GHDL = find("ghdl")
needs_verilator = pytest.mark.skipif(not _VERILATOR.available, reason=f"verilator: {_VERILATOR.reason}")
needs_ghdl = pytest.mark.skipif(not _GHDL.available, reason=f"ghdl: {_GHDL.reason}")

# Verilog-1995 style: names in the header, directions and types in the body, parameters in the body.
NON_ANSI = """\
module belt_gate (pclk, mark_in, lane, count, flag);
  parameter LANES = 3;
  parameter LANE_W = 6;
  localparam TOTAL = LANES * LANE_W;
  input pclk;
  input [TOTAL-1:0] mark_in;
  input [$clog2(LANES)-1:0] lane;
  output count;
  output flag;
  reg signed [LANE_W:0] count;
  wire flag;
  assign flag = |mark_in;
  always @(posedge pclk) count <= mark_in[LANE_W-1:0];
endmodule
"""

# Packed structs and a packed 2-D array as port types.
STRUCTS = """\
typedef struct packed {
  logic [4:0] r;
  logic [5:0] g;
  logic [4:0] b;
} rgb565_t;
typedef struct packed {
  rgb565_t px;
  logic    de;
  logic    vs;
} belt_sample_t;
module belt_pack (
  input  logic             clk,
  input  belt_sample_t     sample_i,
  input  logic [3:0][11:0] taps_i,
  output rgb565_t          px_o,
  output int               sum_o
);
endmodule
"""

# Parameters computed from a package and from other parameters.
PKG = """\
package belt_sizes_pkg;
  localparam int PARCEL_BITS = 10;
  localparam int BELT_LINE = 1000;
  function automatic int lanes_for(int width);
    return (width + 255) / 256;
  endfunction
endpackage
"""
PKG_TOP = """\
module belt_measure import belt_sizes_pkg::*; #(
  parameter int LINE = BELT_LINE,
  parameter int LANES = lanes_for(LINE),
  parameter int ACC_BITS = PARCEL_BITS + $clog2(LINE)
) (
  input  logic                     clk,
  input  logic [PARCEL_BITS-1:0]   size_i,
  output logic [LANES*8-1:0]       lane_o,
  output logic [ACC_BITS-1:0]      acc_o
);
endmodule
"""

# `ifdef on the user's defines, a macro value from a define, and an `include found through include folders.
DEFINES = """\
`include "belt_widths.svh"
module belt_cfg (
  input  wire                 clk,
`ifdef BELT_RGB
  input  wire [23:0]          cam_i,
`else
  input  wire [7:0]           cam_i,
`endif
`ifdef BELT_DEBUG
  output wire [`DBG_BITS-1:0] dbg_o,
`endif
  output wire [`BELT_OUT_BITS-1:0] cam_o
);
endmodule
"""
INCLUDE = "`define BELT_OUT_BITS 12\n"


def _write(folder: Path, name: str, text: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(text)
    return path


def _shape(ports: list[Port]) -> dict[str, tuple[str, int | None, bool]]:
    return {p.name: (p.direction, p.width, p.signed) for p in ports}


def test_non_ansi_ports_take_body_declarations(tmp_path: Path) -> None:
    ports = parse_ports(_write(tmp_path, "gate.v", NON_ANSI), "belt_gate")
    assert [p.name for p in ports] == ["pclk", "mark_in", "lane", "count", "flag"]  # header order
    assert _shape(ports) == {
        "pclk": ("input", 1, False),
        "mark_in": ("input", 3 * 6, False),  # [TOTAL-1:0], TOTAL = LANES * LANE_W; 1800-2017 7.4.1: msb-lsb+1
        "lane": ("input", 2, False),  # $clog2(3) = 2 (1800-2017 20.8.1: ceiling of log2)
        "count": ("output", 6 + 1, True),  # "output count" takes the reg's type: signed [LANE_W:0]
        "flag": ("output", 1, False),
    }
    over = _shape(parse_ports(tmp_path / "gate.v", "belt_gate", parameters={"LANES": 5, "LANE_W": 4}))
    assert over["mark_in"][1] == 20 and over["lane"][1] == 3 and over["count"][1] == 5  # $clog2(5) = 3


def test_packed_struct_and_array_ports_count_every_bit(tmp_path: Path) -> None:
    ports = _shape(parse_ports(_write(tmp_path, "pack.sv", STRUCTS), "belt_pack"))
    # 1800-2017 7.2.1: a packed struct is one vector of its members' bits; rgb565 = 5 + 6 + 5
    assert ports["px_o"] == ("output", 16, False)
    assert ports["sample_i"] == ("input", 16 + 1 + 1, False)
    assert ports["taps_i"] == ("input", 4 * 12, False)  # 1800-2017 7.4.5: packed dimensions multiply
    assert ports["sum_o"] == ("output", 32, True)  # 1800-2017 6.11: int is 32-bit signed


def test_parameters_from_a_package_and_from_other_parameters(tmp_path: Path) -> None:
    srcs = [_write(tmp_path, "sizes_pkg.sv", PKG), _write(tmp_path, "measure.sv", PKG_TOP)]
    design = find_design(srcs, "belt_measure")
    # LINE = 1000; LANES = (1000 + 255) / 256 = 4 (integer division); ACC_BITS = 10 + $clog2(1000) = 10 + 10
    assert design.parameters == {"LINE": 1000, "LANES": 4, "ACC_BITS": 20}
    assert _shape(design.ports) == {"clk": ("input", 1, False), "size_i": ("input", 10, False),
                                    "lane_o": ("output", 32, False), "acc_o": ("output", 20, False)}
    # an override from the config's parameters flows through: LINE = 64 -> LANES = 1, ACC_BITS = 10 + 6
    small = find_design(srcs, "belt_measure", parameters={"LINE": 64})
    assert small.parameters == {"LINE": 64, "LANES": 1, "ACC_BITS": 16}
    assert _shape(small.ports)["lane_o"][1] == 8


def test_ifdef_defines_and_include_folders(tmp_path: Path) -> None:
    src = _write(tmp_path / "rtl", "cfg.sv", DEFINES)
    inc = tmp_path / "include"
    _write(inc, "belt_widths.svh", INCLUDE)
    plain = _shape(parse_ports(src, "belt_cfg", include_dirs=[inc]))
    assert plain == {"clk": ("input", 1, False), "cam_i": ("input", 8, False), "cam_o": ("output", 12, False)}
    rich = _shape(parse_ports(src, "belt_cfg", include_dirs=[inc], defines={"BELT_RGB": "", "BELT_DEBUG": "", "DBG_BITS": "5"}))
    assert rich["cam_i"] == ("input", 24, False) and rich["dbg_o"] == ("output", 5, False)
    assert list(rich) == ["clk", "cam_i", "dbg_o", "cam_o"]


def test_front_end_errors_are_one_line_with_file_line_and_fix(tmp_path: Path) -> None:
    src = _write(tmp_path / "rtl", "cfg.sv", DEFINES)
    with pytest.raises(ConfigError) as missing:
        parse_ports(src, "belt_cfg")  # belt_widths.svh is in no include folder
    msg = str(missing.value)
    assert msg.startswith("cfg.sv:1: ") and "belt_widths.svh" in msg and "include_dirs" in msg and "\n" not in msg
    broken = _write(tmp_path, "broken.sv", "module belt_broken (input logic a, output logic b)\nendmodule\n")
    with pytest.raises(ConfigError, match=r"^broken\.sv:1: expected ';'.*; fix the source"):
        parse_ports(broken, "belt_broken")
    pkg_less = _write(tmp_path, "measure.sv", PKG_TOP)  # the package file is not in the sources
    with pytest.raises(ConfigError, match=r"^measure\.sv:1: .*belt_sizes_pkg.*add the file that defines the package"):
        parse_ports(pkg_less, "belt_measure")


def test_interface_ports_carry_their_modport_signals() -> None:
    design = find_design(BELT_SOURCES, "belt_smooth_top")
    assert [(p.name, p.direction) for p in design.ports] == [
        ("pclk", "input"), ("rst_n", "input"), ("cam", INTERFACE), ("belt", INTERFACE), ("frame_count", "output")]
    cam, belt = design.interface_ports
    assert (cam.interface, cam.modport, belt.interface, belt.modport) == ("belt_video_if", "sink", "belt_video_if", "source")
    # 1800-2017 25.5: a modport's input is driven into the module that takes it, its output driven out;
    # px is belt_pkg::pixel_t = logic [PIXEL_BITS-1:0], PIXEL_BITS = 8
    assert [(m.name, m.direction, m.width) for m in cam.members] == [
        ("vs", "input", 1), ("hs", "input", 1), ("de", "input", 1), ("valid", "input", 1), ("px", "input", 8)]
    assert {m.direction for m in belt.members} == {"output"}
    assert design.parameters == {"LINE_PIXELS": 640}
    names = [d.name for d in list_designs(BELT_SOURCES)]
    assert names == ["window3x3", "blur_core", "belt_smooth_top"]  # modules only, in file order


@pytest.mark.sim
@needs_verilator
@pytest.mark.parametrize("name,text,top", [("gate.v", NON_ANSI, "belt_gate"), ("pack.sv", STRUCTS, "belt_pack")])
def test_widths_agree_with_verilator(tmp_path: Path, name: str, text: str, top: str) -> None:
    # Outside reference: Verilator's own elaboration of the same top (--json-only).
    src = _write(tmp_path, name, text)
    ours = [(p.name, p.direction, p.width) for p in parse_ports(src, top)]
    theirs = [(p.name, p.direction, p.width) for p in ports_from_verilator(src, top)]
    assert ours == theirs


# -- VHDL through GHDL ---------------------------------------------------------------------------------

VHDL_PKG = """\
package belt_vhdl_pkg is
  constant SAMPLE_BITS : natural := 10;
  function bits_for(n : positive) return natural;
end package;
package body belt_vhdl_pkg is
  function bits_for(n : positive) return natural is
    variable b : natural := 0;
  begin
    while 2**b < n loop b := b + 1; end loop;
    return b;
  end function;
end package body;
"""
VHDL_TOP = """\
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;
use work.belt_vhdl_pkg.all;
entity belt_tally is
  generic (LINE : positive := 1000; LANES : natural := 3);
  port (
    clk    : in  std_logic;
    size_i : in  unsigned(SAMPLE_BITS - 1 downto 0);
    pos_o  : out std_logic_vector(bits_for(LINE) - 1 downto 0);
    lane_o : out signed(LANES * 4 - 1 downto 0)
  );
end entity;
architecture rtl of belt_tally is begin end architecture;
"""


@pytest.mark.sim
@needs_ghdl
def test_vhdl_widths_come_from_ghdl_elaboration(tmp_path: Path) -> None:
    srcs = [_write(tmp_path, "belt_vhdl_pkg.vhd", VHDL_PKG), _write(tmp_path, "belt_tally.vhd", VHDL_TOP)]
    design = find_design(srcs, "belt_tally")
    assert design.reader == "ghdl"
    # SAMPLE_BITS = 10 from the package; bits_for(1000) = 10 (2**10 = 1024 >= 1000); LANES * 4 = 12
    # (1076-2008 5.3.2.2: a (left downto right) index range holds left - right + 1 elements)
    assert _shape(design.ports) == {"clk": ("input", 1, False), "size_i": ("input", 10, False),
                                    "pos_o": ("output", 10, False), "lane_o": ("output", 12, True)}
    small = find_design(srcs, "belt_tally", parameters={"LINE": 64, "LANES": 1})
    assert small.parameters == {"LINE": 64, "LANES": 1}
    assert _shape(small.ports)["pos_o"][1] == 6 and _shape(small.ports)["lane_o"][1] == 4  # bits_for(64) = 6


@pytest.mark.sim
@needs_ghdl
def test_vhdl_analysis_errors_name_file_and_line(tmp_path: Path) -> None:
    src = _write(tmp_path, "belt_tally.vhd", VHDL_TOP)  # the package file is missing
    with pytest.raises(ConfigError, match=r"^belt_tally\.vhd:4: .*belt_vhdl_pkg.*; fix the source"):
        find_design([src], "belt_tally")
