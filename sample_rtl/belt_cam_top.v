// belt_cam_top: the conveyor camera chain in one top: pattern generator -> edge filter -> marker.
// Clock cam_clk, reset cam_rst_n (active low). The edge filter (edge_core, active-high reset) sits at
// u_edge; its ROOT_TABLE is passed through (give an absolute path, see README.md).
`timescale 1ns/1ps
`default_nettype none

module belt_cam_top #(
    parameter integer H_ACT = 32, parameter integer V_ACT = 24, parameter integer ALT_WIDTH = 0,
    parameter integer GAPS = 1,
    parameter         ROOT_TABLE = "edge_root_table.hex"
) (
    input  wire        cam_clk,
    input  wire        cam_rst_n,
    input  wire        cam_run,
    output wire        mark_vs,
    output wire        mark_de,
    output wire        mark_bit,
    output wire [15:0] marks_last,
    output wire [15:0] frames_made
);
    wire        g_vs, g_hs, g_de, g_valid;
    wire [23:0] g_rgb;
    wire        e_vs, e_hs, e_de, e_valid;
    wire [7:0]  e_mag;

    belt_pattern_gen #(.H_ACT(H_ACT), .V_ACT(V_ACT), .ALT_WIDTH(ALT_WIDTH), .GAPS(GAPS)) u_gen (
        .clk(cam_clk), .rst_n(cam_rst_n), .run(cam_run), .vs(g_vs), .hs(g_hs), .de(g_de),
        .pix_valid(g_valid), .rgb(g_rgb), .frame_no(frames_made)
    );

    edge_core #(.MAX_WIDTH(1024), .ROOT_TABLE(ROOT_TABLE)) u_edge (
        .clk(cam_clk), .rst(!cam_rst_n),
        .in_vsync(g_vs), .in_hsync(g_hs), .in_de(g_de), .in_valid(g_valid), .in_data(g_rgb),
        .out_vsync(e_vs), .out_hsync(e_hs), .out_de(e_de), .out_valid(e_valid), .out_data(e_mag)
    );

    belt_edge_marker u_mark (
        .clk(cam_clk), .rst_n(cam_rst_n), .e_vs(e_vs), .e_de(e_de), .e_valid(e_valid), .e_mag(e_mag),
        .m_vs(mark_vs), .m_de(mark_de), .m_bit(mark_bit), .marks_last(marks_last)
    );
endmodule
