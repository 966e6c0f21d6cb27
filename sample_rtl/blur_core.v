// blur_core: 3x3 Gaussian blur of an 8-bit gray video stream (video family).
//
// Interface: clk, rst (active high, synchronous), in_vsync, in_hsync, in_de, in_valid,
// in_data[7:0], out_vsync, out_hsync, out_de, out_valid, out_data[7:0]. Syncs active high;
// in_valid low inside in_de is a stall. Output line y leaves while input line y+1 arrives; the
// last line is flushed at the leading edge of in_vsync (see window3x3.v).
//
// Latency: 5 clocks from taking input pixel (x, y) to out_valid for output pixel (x-1, y-1)
// (3 window + 1 weighted sum + 1 rounding shift).
//
// Exact integer formulas (p[row][col] is the 3x3 window, row 0 = line above):
//   sum = p[0][0] + 2*p[0][1] + p[0][2] + 2*p[1][0] + 4*p[1][1] + 2*p[1][2]
//         + p[2][0] + 2*p[2][1] + p[2][2]                                       0..4080, 12 bits
//   out = (sum + 8) >> 4                                                        0..255
// Border: BORDER parameter of window3x3 (0 replicate = default, 1 zero, 2 mirror).
//
// Seeded bug (`define): BUG_BLUR_TRUNCATE (out = sum >> 4, no rounding); plus the window3x3 bugs.

`default_nettype none

module blur_core #(
    parameter integer MAX_WIDTH = 1024,
    parameter integer BORDER    = 0
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
    output reg  [7:0] out_data
);

    wire [71:0] win;
    wire        w_vs, w_hs, w_de, w_valid;
    /* verilator lint_off UNUSEDSIGNAL */
    // the position flags are for cores that do their own border muxing; this one does not
    wire        w_first_row, w_last_row, w_first_col, w_last_col;
    /* verilator lint_on UNUSEDSIGNAL */
    window3x3 #(.PIXEL_BITS(8), .MAX_WIDTH(MAX_WIDTH), .BORDER(BORDER)) u_window (
        .clk(clk), .rst(rst), .ce(1'b1),
        .in_vsync(in_vsync), .in_hsync(in_hsync), .in_de(in_de), .in_valid(in_valid), .in_data(in_data),
        .win_vsync(w_vs), .win_hsync(w_hs), .win_de(w_de), .win_valid(w_valid), .win(win),
        .win_first_row(w_first_row), .win_last_row(w_last_row),
        .win_first_col(w_first_col), .win_last_col(w_last_col)
    );

    function [11:0] tap;  // zero-extend one 8-bit window pixel to the 12-bit sum width
        input [71:0] w;
        input integer idx;
        begin
            tap = {4'd0, w[idx*8 +: 8]};
        end
    endfunction

    wire [11:0] sum_next = tap(win, 0) + (tap(win, 1) << 1) + tap(win, 2)
                         + (tap(win, 3) << 1) + (tap(win, 4) << 2) + (tap(win, 5) << 1)
                         + tap(win, 6) + (tap(win, 7) << 1) + tap(win, 8);
    reg  [11:0] sum;
    // sum + 8 <= 4088 fits 12 bits; the >> 4 drops the low 4 bits
    /* verilator lint_off UNUSEDSIGNAL */
`ifdef BUG_BLUR_TRUNCATE
    wire [11:0] rounded = sum;
`else
    wire [11:0] rounded = sum + 12'd8;
`endif
    /* verilator lint_on UNUSEDSIGNAL */

    reg  [1:0] d_vs, d_hs, d_de, d_valid;
    always @(posedge clk) begin
        if (rst) begin
            sum <= 12'd0;
            out_data <= 8'd0;
            d_vs <= 2'd0;
            d_hs <= 2'd0;
            d_de <= 2'd0;
            d_valid <= 2'd0;
        end else begin
            sum <= sum_next;
            out_data <= rounded[11:4];
            d_vs <= {d_vs[0], w_vs};
            d_hs <= {d_hs[0], w_hs};
            d_de <= {d_de[0], w_de};
            d_valid <= {d_valid[0], w_valid};
        end
    end

    assign out_vsync = d_vs[1];
    assign out_hsync = d_hs[1];
    assign out_de = d_de[1];
    assign out_valid = d_valid[1];

endmodule

`default_nettype wire
