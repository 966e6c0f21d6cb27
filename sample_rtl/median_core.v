// median_core: 3x3 median filter of an 8-bit gray video stream (video family).
//
// Interface: clk, rst (active high, synchronous), in_vsync, in_hsync, in_de, in_valid,
// in_data[7:0], out_vsync, out_hsync, out_de, out_valid, out_data[7:0]. Syncs active high;
// in_valid low inside in_de is a stall. Output line y leaves while input line y+1 arrives; the
// last line is flushed at the leading edge of in_vsync (see window3x3.v).
//
// Latency: 6 clocks from taking input pixel (x, y) to out_valid for output pixel (x-1, y-1)
// (3 window + 3 compare-exchange stages).
//
// Exact formula: out = the 5th smallest of the 9 window pixels (p[row][col], row 0 = line above).
// Method: a compare-exchange network. Each window row is sorted (3 compare-exchanges: lo <= mid <=
// hi); then the median of 9 is med3(max(lo0, lo1, lo2), med3(mid0, mid1, mid2), min(hi0, hi1, hi2)),
// where med3(a, b, c) = max(min(a, b), min(max(a, b), c)).
// Border: BORDER parameter of window3x3 (0 replicate = default, 1 zero, 2 mirror).
//
// Seeded bug (`define): BUG_MEDIAN_SWAP (the second compare-exchange of row 2 has its outputs
// swapped); plus the window3x3 bugs.

`default_nettype none

module median_core #(
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

    function [7:0] min8;
        input [7:0] a, b;
        begin
            min8 = (a < b) ? a : b;
        end
    endfunction

    function [7:0] max8;
        input [7:0] a, b;
        begin
            max8 = (a < b) ? b : a;
        end
    endfunction

    // sort3: {hi, mid, lo} of three pixels by three compare-exchanges CE(a,b), CE(b,c), CE(a,b)
    function [23:0] sort3;
        input [7:0] a, b, c;
        input       swap_second;  // seeded bug: second compare-exchange outputs swapped
        reg   [7:0] a1, b1, b2, c2, a3, b3;
        begin
            a1 = min8(a, b);
            b1 = max8(a, b);
            b2 = swap_second ? max8(b1, c) : min8(b1, c);
            c2 = swap_second ? min8(b1, c) : max8(b1, c);
            a3 = min8(a1, b2);
            b3 = max8(a1, b2);
            sort3 = {c2, b3, a3};
        end
    endfunction

`ifdef BUG_MEDIAN_SWAP
    localparam SWAP_ROW2 = 1'b1;
`else
    localparam SWAP_ROW2 = 1'b0;
`endif

    // stage 1: sort each row
    reg  [23:0] row0, row1, row2;
    // stage 2: max of the lows, median of the middles, min of the highs
    reg  [7:0]  lo_max, mid_med, hi_min;
    wire [7:0]  mid_med_next = max8(min8(row0[15:8], row1[15:8]),
                                    min8(max8(row0[15:8], row1[15:8]), row2[15:8]));

    reg  [2:0]  d_vs, d_hs, d_de, d_valid;
    always @(posedge clk) begin
        if (rst) begin
            row0 <= 24'd0;
            row1 <= 24'd0;
            row2 <= 24'd0;
            lo_max <= 8'd0;
            mid_med <= 8'd0;
            hi_min <= 8'd0;
            out_data <= 8'd0;
            d_vs <= 3'd0;
            d_hs <= 3'd0;
            d_de <= 3'd0;
            d_valid <= 3'd0;
        end else begin
            row0 <= sort3(win[0*8 +: 8], win[1*8 +: 8], win[2*8 +: 8], 1'b0);
            row1 <= sort3(win[3*8 +: 8], win[4*8 +: 8], win[5*8 +: 8], 1'b0);
            row2 <= sort3(win[6*8 +: 8], win[7*8 +: 8], win[8*8 +: 8], SWAP_ROW2);
            lo_max <= max8(max8(row0[7:0], row1[7:0]), row2[7:0]);
            mid_med <= mid_med_next;
            hi_min <= min8(min8(row0[23:16], row1[23:16]), row2[23:16]);
            out_data <= max8(min8(lo_max, mid_med), min8(max8(lo_max, mid_med), hi_min));
            d_vs <= {d_vs[1:0], w_vs};
            d_hs <= {d_hs[1:0], w_hs};
            d_de <= {d_de[1:0], w_de};
            d_valid <= {d_valid[1:0], w_valid};
        end
    end

    assign out_vsync = d_vs[2];
    assign out_hsync = d_hs[2];
    assign out_de = d_de[2];
    assign out_valid = d_valid[2];

endmodule

`default_nettype wire
