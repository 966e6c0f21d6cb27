// video_hang: the sample blur_core, whose simulation stops advancing after HANG_LINE input lines, for the
// fault-injection tests (tests/test_faults.py). Same ports as blur_core (video family, gray8).
//
// Once HANG_LINE lines have ended (falling edges of in_de), a zero-delay loop spins forever at one
// simulation time: the simulator process runs at 100% CPU and never returns, as a real hung design or a
// combinational loop in a simulator does. Before that the outputs are blur_core's, so a partial capture
// holds correct lines. HANG_LINE = 0 hangs at the first line.
// Latency: that of blur_core. Reset: rst active high, synchronous (passed to blur_core).

`timescale 1ns/1ps
`default_nettype none

module video_hang #(
    parameter integer HANG_LINE = 8,
    parameter integer MAX_WIDTH = 1024
) (
    input  wire       clk,
    input  wire       rst,
    input  wire       in_vsync,
    input  wire       in_hsync,
    input  wire       in_de,
    input  wire       in_valid,
    input  wire [7:0] in_data,
    output wire       out_vsync,
    output wire       out_hsync,
    output wire       out_de,
    output wire       out_valid,
    output wire [7:0] out_data
);
    blur_core #(.MAX_WIDTH(MAX_WIDTH)) u_core (
        .clk(clk), .rst(rst), .in_vsync(in_vsync), .in_hsync(in_hsync), .in_de(in_de),
        .in_valid(in_valid), .in_data(in_data), .out_vsync(out_vsync), .out_hsync(out_hsync),
        .out_de(out_de), .out_valid(out_valid), .out_data(out_data)
    );

    reg  [15:0] lines_done = 16'd0;
    reg         de_q = 1'b0;
    reg         spin = 1'b0;
    integer     turns = 0;

    always @(posedge clk) begin
        de_q <= in_de;
        if (de_q && !in_de) lines_done <= lines_done + 16'd1;
        if (lines_done >= HANG_LINE[15:0]) spin <= 1'b1;
    end

    // The hang: no delay inside the loop, so simulation time never moves on.
    always @(posedge clk) begin
        if (spin) begin
            while (spin) turns = turns + 1;
        end
    end
endmodule
