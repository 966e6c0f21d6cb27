// belt_smooth10: 3x3 smoothing of 10-bit grey video whose one-pixel frame passes the input through.
//
// Ports: clk, rst (sync, active high); cam_vs, cam_hs, cam_de, cam_dv (pixel valid; low inside
// cam_de = stall), cam_px[9:0]; res_de, res_dv, res_px[9:0]. Syncs active high.
//
// Latency: 3 clocks from taking pixel x of line y+1 to res_dv for output pixel x-1 of line y (feed,
// window, sum); the last pixel of a line follows the fall of cam_de, the last line follows the
// leading edge of cam_vs (see lane_rows.v, used here with one pixel a clock).
//
// Exact integer formula (p[r][c] the 3x3 neighbourhood, r = 0 the line above):
//   inside:  s = p[0][0] + 2*p[0][1] + p[0][2] + 2*p[1][0] + 4*p[1][1] + 2*p[1][2]
//                + p[2][0] + 2*p[2][1] + p[2][2]                                     0..16368, 14 bits
//            out = (s + 8) >> 4                                                      0..1023
//   on the first and last line and column: out = p[1][1] (the input sample, unchanged)
//
// Seeded bugs (`define): BUG_PATH8 (samples enter the line memories cut to their top 8 bits);
// BUG_RING_FROM_FILTER (the frame pixels take the smoothed value, edges replicated, instead of the input).

`default_nettype none

module belt_smooth10 #(
    parameter integer MAX_WIDTH = 1024
) (
    input  wire       clk,
    input  wire       rst,
    input  wire       cam_vs,
    /* verilator lint_off UNUSEDSIGNAL */
    input  wire       cam_hs,          // lines are told apart by cam_de
    /* verilator lint_on UNUSEDSIGNAL */
    input  wire       cam_de,
    input  wire       cam_dv,
    input  wire [9:0] cam_px,
    output reg        res_de,
    output reg        res_dv,
    output reg  [9:0] res_px
);
`ifdef BUG_PATH8
    wire [9:0] px_in = {cam_px[9:2], 2'b00};
    /* verilator lint_off UNUSEDSIGNAL */
    wire       low_bits_lost = &{1'b0, cam_px[1:0]};
    /* verilator lint_on UNUSEDSIGNAL */
`else
    wire [9:0] px_in = cam_px;
`endif
    wire       step, at_top, at_bottom, at_left, at_right, line_end;
    wire [9:0] a_l, a_m, a_r, c_l, c_m, c_r, b_l, b_m, b_r;

    lane_rows #(.BITS(10), .LANES(1), .MAX_GROUPS(MAX_WIDTH)) rows (
        .clk(clk), .rst(rst), .in_vsync(cam_vs), .in_de(cam_de), .in_valid(cam_dv), .in_px(px_in),
        .step(step),
        .row_a_l(a_l), .row_a_m(a_m), .row_a_r(a_r),
        .row_c_l(c_l), .row_c_m(c_m), .row_c_r(c_r),
        .row_b_l(b_l), .row_b_m(b_m), .row_b_r(b_r),
        .at_top(at_top), .at_bottom(at_bottom), .at_left(at_left), .at_right(at_right), .line_end(line_end)
    );

    // lane_rows repeats the edge group beyond the line; with one pixel a group that is the edge pixel
    wire [13:0] s = {4'd0, a_l} + {3'd0, a_m, 1'b0} + {4'd0, a_r}
                  + {3'd0, c_l, 1'b0} + {2'd0, c_m, 2'b00} + {3'd0, c_r, 1'b0}
                  + {4'd0, b_l} + {3'd0, b_m, 1'b0} + {4'd0, b_r};
    wire [13:0] rounded = s + 14'd8;
    wire        frame_px = at_top | at_bottom | at_left | at_right;

    reg end_q;
    always @(posedge clk) begin
        res_dv <= step;
        end_q  <= step & line_end;
        if (step) begin
`ifdef BUG_RING_FROM_FILTER
            res_px <= rounded[13:4];
`else
            res_px <= frame_px ? c_m : rounded[13:4];
`endif
        end
        if (rst) begin
            res_de <= 1'b0; res_dv <= 1'b0; end_q <= 1'b0;
        end else if (step) begin
            res_de <= 1'b1;
        end else if (end_q) begin
            res_de <= 1'b0;
        end
    end

    /* verilator lint_off UNUSEDSIGNAL */
    wire unused = &{1'b0, frame_px, rounded[3:0]};
    /* verilator lint_on UNUSEDSIGNAL */
endmodule
