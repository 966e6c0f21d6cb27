"""Tests of the HDL port reader: ANSI, non-ANSI, parameterised Verilog and VHDL entities, checked against Verilator and GHDL."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from vkit.core.errors import ConfigError
from vkit.sim.hdlports import Port, eval_int, find_design, list_designs, parse_ports, ports_from_verilator
from vkit.sim.simulators import find, subprocess_env

SAMPLE = Path(__file__).resolve().parent.parent / "sample_rtl"

ANSI = """\
`timescale 1ns/1ps
`default_nettype none
// a header comment with input wire [99:0] not_a_port
module cam_ansi #(
    parameter integer W = 10,           // pixel bits
    parameter N = 3, M = W * 2,
    parameter [7:0] MASK = 8'hF0
) (
    input  wire                 pix_clk_i,
    input  wire                 arst_n,
    (* keep = "true" *) input wire [W-1:0] pix_i,
    input  logic [N-1:0][7:0]   rgb_i,   /* packed 2-D */
    output reg signed [M-1:0]   acc_o,
    output logic [$clog2(1920)-1:0] col_o,
    output wire [0:3]           ascending_o,
    output int                  count_o,
    output                      den_o, hs_o,
`ifdef WITH_DEBUG
    output wire [31:0]          dbg_o,
`endif
    input  wire [MASK[3:0]:0]   odd_i
);
    function [7:0] f;
        input [15:0] not_a_port;
        f = not_a_port[7:0];
    endfunction
endmodule
"""

NON_ANSI = """\
module cam_old (clk, rst_n, vs_in, data_in, q, q_valid, wide);
    parameter WIDTH = 12;
    localparam TOP = WIDTH - 1;
    input clk;
    input rst_n, vs_in;
    input [TOP:0] data_in;
    output [7:0] q;
    output q_valid;
    output wide;
    reg [7:0] q;
    reg q_valid;
    reg signed [2*WIDTH-1:0] wide;
    task show;
        input [3:0] not_a_port;
        begin end
    endtask
endmodule

module second_one(input a, output b);
endmodule
"""

VHDL = """\
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;

-- entity not_this is port (x : in bit);
entity Cam_Filter is
  generic (
    W     : integer := 10;   -- pixel bits
    N     : natural := 2**3;
    DEPTH : positive := 1920 / 2
  );
  port (
    pclk, arst_n : in  std_logic;
    pix_i        : in  std_logic_vector(W-1 downto 0);
    lut_o        : out unsigned(0 to N-1);
    acc_o        : out signed(2*W downto 1);
    cnt_o        : out integer range 0 to DEPTH - 1;
    pos_o        : out natural range 0 to 255;
    den_o        : buffer std_ulogic;
    mode_i       : in  std_logic_vector(W mod 3 downto 0) := (others => '0')
  );
end entity Cam_Filter;

architecture rtl of Cam_Filter is
  signal not_a_port : std_logic_vector(99 downto 0);
begin
end architecture rtl;
"""


def _write(tmp_path: Path, name: str, text: str) -> Path:
    p = tmp_path / name
    p.write_text(text)
    return p


def _by_name(ports: list[Port]) -> dict[str, Port]:
    return {p.name: p for p in ports}


# -- expressions ---------------------------------------------------------------------------------------


def test_eval_int_follows_vhdl_integer_rules() -> None:
    # The light VHDL reader's evaluator (used when GHDL is absent). VHDL integer division truncates
    # toward zero (IEEE 1076-2008 9.2.7, from memory), as Python's int(a / b) does for these values.
    assert eval_int("-7 / 2") == -3
    assert eval_int("16#FF# + w mod 3", {"W": 10}) == 255 + 1
    assert eval_int("W*2-1", {"w": 12}) == 23
    assert eval_int("2**N", {"N": 5}) == 32
    # not constant integers: unknown names, attributes, function calls, absurd exponents
    assert eval_int("pkg.W - 1") is None
    assert eval_int("W'length", {"W": 1}) is None
    assert eval_int("log2(W)", {"W": 8}) is None
    assert eval_int("2**100000") is None


# -- Verilog -------------------------------------------------------------------------------------------


def test_ansi_header_widths_directions_and_signs(tmp_path: Path) -> None:
    src = _write(tmp_path, "cam_ansi.v", ANSI)
    ports = parse_ports([src], "cam_ansi")
    names = [p.name for p in ports]
    assert names == ["pix_clk_i", "arst_n", "pix_i", "rgb_i", "acc_o", "col_o", "ascending_o", "count_o", "den_o", "hs_o", "odd_i"]
    by = _by_name(ports)
    assert by["pix_clk_i"] == Port("pix_clk_i", "input", 1, False, "")
    assert (by["pix_i"].width, by["pix_i"].width_expr) == (10, "logic[9:0]")  # the elaborated type
    assert by["rgb_i"].width == 3 * 8
    assert (by["acc_o"].direction, by["acc_o"].width, by["acc_o"].signed) == ("output", 20, True)
    assert by["col_o"].width == 11
    assert by["ascending_o"].width == 4
    assert (by["count_o"].width, by["count_o"].signed) == (32, True)  # int is 32-bit signed (IEEE 1800-2017 6.11)
    # "output den_o, hs_o": the second name inherits direction and type
    assert by["hs_o"] == Port("hs_o", "output", 1, False, "")
    # [MASK[3:0]:0] with MASK = 8'hF0: MASK[3:0] is 4'b0000, so the range is [0:0], one bit
    # (IEEE 1800-2017 7.4.1: a range [msb:lsb] holds |msb - lsb| + 1 bits)
    assert by["odd_i"].width == 1


def test_ansi_defines_and_parameter_overrides(tmp_path: Path) -> None:
    src = _write(tmp_path, "cam_ansi.v", ANSI)
    with_dbg = parse_ports([src], "cam_ansi", defines=["WITH_DEBUG"], parameters={"W": 16, "N": 4})
    by = _by_name(with_dbg)
    assert by["dbg_o"].width == 32
    assert by["pix_i"].width == 16
    assert by["rgb_i"].width == 32
    assert by["acc_o"].width == 32  # M = W * 2 follows the override
    design = find_design([src], "cam_ansi")
    assert design.parameters == {"W": 10, "N": 3, "M": 20, "MASK": 0xF0}


def test_non_ansi_port_list_with_body_declarations(tmp_path: Path) -> None:
    src = _write(tmp_path, "cam_old.v", NON_ANSI)
    ports = parse_ports(src, "cam_old")
    assert [p.name for p in ports] == ["clk", "rst_n", "vs_in", "data_in", "q", "q_valid", "wide"]
    by = _by_name(ports)
    assert by["rst_n"] == Port("rst_n", "input", 1, False, "")
    assert (by["data_in"].width, by["data_in"].width_expr) == (12, "logic[11:0]")  # [TOP:0], TOP = WIDTH - 1
    assert (by["q"].direction, by["q"].width) == ("output", 8)
    # "output wide; reg signed [2*WIDTH-1:0] wide;": the range and sign come from the reg declaration
    assert (by["wide"].width, by["wide"].signed) == (24, True)
    assert parse_ports(src, "second_one") == [Port("a", "input", 1), Port("b", "output", 1)]


def test_unknown_top_lists_what_was_found(tmp_path: Path) -> None:
    a = _write(tmp_path, "cam_old.v", NON_ANSI)
    b = _write(tmp_path, "cam.vhd", VHDL)
    with pytest.raises(ConfigError) as err:
        parse_ports([a, b], "cam_top")
    msg = str(err.value)
    assert "'cam_top' not found" in msg
    for name in ("cam_old (verilog, cam_old.v)", "second_one", "Cam_Filter (vhdl, cam.vhd)"):
        assert name in msg
    assert "\n" not in msg


def test_missing_file_and_unknown_suffix_are_config_errors(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="does not exist"):
        parse_ports([tmp_path / "nope.v"], "x")
    odd = _write(tmp_path, "core.txt", "module x; endmodule")
    with pytest.raises(ConfigError, match="suffix"):
        parse_ports([odd], "x")


def test_sample_rtl_headers() -> None:
    designs = {(d.name, d.language): d for d in list_designs(sorted(SAMPLE.glob("*.v")) + sorted(SAMPLE.glob("*.vhd")))}
    edge_v = designs[("edge_core", "verilog")]
    edge_vhd = designs[("edge_core", "vhdl")]
    # the Verilog and VHDL editions of the edge core share one interface
    assert [(p.name, p.direction, p.width) for p in edge_v.ports] == [(p.name, p.direction, p.width) for p in edge_vhd.ports]
    win = _by_name(designs[("window3x3", "verilog")].ports)
    assert win["win"].width == 9 * 8  # [9*PIXEL_BITS-1:0], PIXEL_BITS = 8
    stream = _by_name(designs[("stream_core", "verilog")].ports)
    assert (stream["s_ready"].direction, stream["m_ready"].direction) == ("output", "input")


_VERILATOR = find("verilator")


@pytest.mark.sim
@pytest.mark.skipif(not _VERILATOR.available, reason=f"verilator: {_VERILATOR.reason}")
@pytest.mark.parametrize("top,params,defines", [("cam_ansi", {}, []), ("cam_ansi", {"W": 16, "N": 4}, ["WITH_DEBUG"]), ("cam_old", {}, [])])
def test_reader_agrees_with_verilator_elaboration(tmp_path: Path, top: str, params: dict[str, int], defines: list[str]) -> None:
    # Outside reference: Verilator's elaborated port types (--json-only).
    src = _write(tmp_path, "cam.sv", ANSI.replace("[MASK[3:0]:0]", "[3:0]") + NON_ANSI)
    ours = parse_ports([src], top, parameters=params, defines=defines)
    theirs = ports_from_verilator([src], top, parameters=params, defines=defines)
    assert [(p.name, p.direction, p.width, p.signed) for p in ours] == [(p.name, p.direction, p.width, p.signed) for p in theirs]


@pytest.mark.sim
@pytest.mark.skipif(not _VERILATOR.available, reason=f"verilator: {_VERILATOR.reason}")
def test_sample_cores_agree_with_verilator() -> None:
    srcs = [SAMPLE / "window3x3.v", SAMPLE / "blur_core.v", SAMPLE / "stream_core.v", SAMPLE / "median_core.v"]
    for top in ("blur_core", "stream_core", "median_core", "window3x3"):
        ours = [(p.name, p.direction, p.width) for p in parse_ports(srcs, top)]
        theirs = [(p.name, p.direction, p.width) for p in ports_from_verilator(srcs, top)]
        assert ours == theirs, top


# -- VHDL ----------------------------------------------------------------------------------------------


def test_vhdl_entity_ports(tmp_path: Path) -> None:
    src = _write(tmp_path, "cam.vhd", VHDL)
    design = find_design([src], "cam_filter")  # VHDL names are case-insensitive
    assert design.name == "Cam_Filter"
    assert design.parameters == {"W": 10, "N": 8, "DEPTH": 960}
    by = _by_name(design.ports)
    assert [p.name for p in design.ports] == ["pclk", "arst_n", "pix_i", "lut_o", "acc_o", "cnt_o", "pos_o", "den_o", "mode_i"]
    assert by["pclk"] == Port("pclk", "input", 1, False, "")
    assert by["arst_n"].direction == "input"
    assert (by["pix_i"].width, by["pix_i"].width_expr) == (10, "std_logic_vector(W-1 downto 0)")
    assert (by["lut_o"].width, by["lut_o"].signed) == (8, False)
    assert (by["acc_o"].width, by["acc_o"].signed) == (20, True)
    assert by["cnt_o"].width == (960 - 1).bit_length()  # integer range 0 to 959 needs 10 bits
    assert by["pos_o"].width == 8
    assert (by["den_o"].direction, by["den_o"].width) == ("output", 1)  # buffer is an output
    assert by["mode_i"].width == 10 % 3 + 1
    over = _by_name(parse_ports([src], "Cam_Filter", parameters={"w": 24}))
    assert over["pix_i"].width == 24


_GHDL = find("ghdl")


@pytest.mark.sim
@pytest.mark.skipif(not _GHDL.available or shutil.which("ghdl") is None, reason=f"ghdl: {_GHDL.reason}")
def test_vhdl_widths_agree_with_ghdl(tmp_path: Path) -> None:
    # Outside reference: GHDL elaborates the entity and reports each vector port's 'length.
    src = _write(tmp_path, "cam.vhd", VHDL.split("architecture")[0])
    ours = {p.name: p.width for p in parse_ports([src], "Cam_Filter") if p.width_expr.lower().startswith(("std_", "unsigned", "signed"))}
    report = " & ".join(f'" {n}=" & integer\'image({n}\'length)' for n in ours)
    (tmp_path / "chk.vhd").write_text(
        "architecture chk of Cam_Filter is begin\n"
        f"  assert false report \"LEN\" & {report} severity note;\nend architecture;\n"
    )
    env = subprocess_env(_GHDL)
    for cmd in (["ghdl", "-a", "--std=08", "--workdir=" + str(tmp_path), str(src), str(tmp_path / "chk.vhd")],
                ["ghdl", "--elab-run", "--std=08", "--workdir=" + str(tmp_path), "cam_filter"]):
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=tmp_path, check=False, env=env, timeout=120)
        assert proc.returncode == 0, proc.stderr
    theirs = {m.group(1): int(m.group(2)) for m in re.finditer(r"(\w+)=(\d+)", proc.stdout + proc.stderr)}
    assert {k.lower(): v for k, v in ours.items()} == {k.lower(): v for k, v in theirs.items()}
