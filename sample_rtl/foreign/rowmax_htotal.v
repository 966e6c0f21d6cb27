// rowmax_htotal: 3x3 grey dilation (maximum of the window) for a raster of H_TOTAL clocks per line.
//
// Formula: px_out(x, y) = max of p(x+i, y+j), i, j in -1..1; pixels outside the frame take the value of
// the nearest edge pixel (replicate), which for a maximum is the same as leaving them out.
//
// Sizing: H_TOTAL is the timing's total clocks per line (active + front porch + sync + back porch). Two
// shift registers of H_TOTAL stages delay the raster by exactly one and two lines, so the design must be
// built for the timing it runs on (a parameter that follows the timing).
//
// Ports: clk; rst_n, active low, asynchronous; vs_in, hs_in, de_in, px_in (syncs active high);
// vs_out, hs_out, de_out, px_out: the input raster delayed by H_TOTAL + 2 clocks, with the result.
//
// Latency: H_TOTAL + 3 clocks from taking input (0, 0) to the first output pixel.
//
// Seeded bug (`define):
//   BUG_FIXED_SECOND_LINE  the second delay line keeps the default length 40 (tiny32x24's h_total)
//                          instead of H_TOTAL: right only on that timing.
`timescale 1ns/1ps
`default_nettype none

module rowmax_htotal #(
    parameter integer H_TOTAL = 40
) (
    input  wire       clk,
    input  wire       rst_n,
    input  wire       vs_in,
    input  wire       hs_in,
    input  wire       de_in,
    input  wire [7:0] px_in,
    output reg        vs_out,
    output reg        hs_out,
    output reg        de_out,
    output reg  [7:0] px_out
);
`ifdef BUG_FIXED_SECOND_LINE
    localparam integer SECOND = 40;
`else
    localparam integer SECOND = H_TOTAL;
`endif

    reg [10:0] row1 [0:H_TOTAL-1];  // {vs, hs, de, px}, one line back
    reg [8:0]  row2 [0:SECOND-1];   // {de, px}, two lines back
    integer i;

    wire [10:0] centre = row1[H_TOTAL-1];
    wire [8:0]  above  = row2[SECOND-1];

    function [7:0] max3;
        input [7:0] a, b, c;
        begin
            max3 = (a > b) ? ((a > c) ? a : c) : ((b > c) ? b : c);
        end
    endfunction

    // the window's columns, newest first: the maximum of each column with the vertical border resolved
    wire [7:0] col_now = max3(centre[7:0], above[8] ? above[7:0] : centre[7:0], de_in ? px_in : centre[7:0]);
    reg  [7:0] col_m1, col_m2, col_m3;
    reg        de_m1, de_m2, de_m3;
    reg  [2:0] ctl_m1, ctl_m2;  // {vs, hs, de} of the centre line

    wire [7:0] left  = de_m3 ? col_m3 : col_m2;
    wire [7:0] right = de_m1 ? col_m1 : col_m2;

    always @(posedge clk or negedge rst_n) begin
        if (!rst_n) begin
            for (i = 0; i < H_TOTAL; i = i + 1) row1[i] <= 11'd0;
            for (i = 0; i < SECOND; i = i + 1) row2[i] <= 9'd0;
            col_m1 <= 8'd0; col_m2 <= 8'd0; col_m3 <= 8'd0;
            de_m1 <= 1'b0; de_m2 <= 1'b0; de_m3 <= 1'b0;
            ctl_m1 <= 3'd0; ctl_m2 <= 3'd0;
            vs_out <= 1'b0; hs_out <= 1'b0; de_out <= 1'b0; px_out <= 8'd0;
        end else begin
            row1[0] <= {vs_in, hs_in, de_in, px_in};
            for (i = 1; i < H_TOTAL; i = i + 1) row1[i] <= row1[i - 1];
            row2[0] <= centre[8:0];
            for (i = 1; i < SECOND; i = i + 1) row2[i] <= row2[i - 1];
            col_m1 <= col_now; col_m2 <= col_m1; col_m3 <= col_m2;
            de_m1 <= centre[8]; de_m2 <= de_m1; de_m3 <= de_m2;
            ctl_m1 <= centre[10:8]; ctl_m2 <= ctl_m1;
            vs_out <= ctl_m2[2];
            hs_out <= ctl_m2[1];
            de_out <= ctl_m2[0];
            px_out <= max3(left, col_m2, right);
        end
    end
endmodule

`default_nettype wire
