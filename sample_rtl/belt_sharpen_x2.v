// belt_sharpen_x2: 3x3 sharpen of 8-bit grey video carried two pixels a clock.
//
// Ports: clk, rst (sync, active high); cam_vs, cam_hs, cam_de, cam_dv (pixel valid; low inside
// cam_de = stall), cam_px[15:0]; res_de, res_dv, res_px[15:0]. Syncs active high. Each data word
// holds two pixels: the first (leftmost) in bits 7:0, the second in bits 15:8.
// Widths and timings must be even: the line is taken one pair a clock.
//
// Latency: 3 clocks from taking pair k of line y+1 to res_dv for output pair k-1 of line y (feed,
// window, sum); the last pair of a line follows the fall of cam_de, the last line follows the
// leading edge of cam_vs (see lane_rows.v).
//
// Exact integer formula (p[r][c] the 3x3 neighbourhood, r = 0 the line above, edges replicated):
//   s   = 5*p[1][1] - p[0][1] - p[1][0] - p[1][2] - p[2][1]        -1020..1275
//   out = min(max(s, 0), 255)                                       0..255
//
// Seeded bug (`define): BUG_LANES_SWAPPED (the two output pixels of a word leave in each other's lane).

`default_nettype none

module belt_sharpen_x2 #(
    parameter integer MAX_WIDTH = 1024
) (
    input  wire        clk,
    input  wire        rst,
    input  wire        cam_vs,
    /* verilator lint_off UNUSEDSIGNAL */
    input  wire        cam_hs,          // lines are told apart by cam_de
    /* verilator lint_on UNUSEDSIGNAL */
    input  wire        cam_de,
    input  wire        cam_dv,
    input  wire [15:0] cam_px,
    output reg         res_de,
    output reg         res_dv,
    output reg  [15:0] res_px
);
    wire        step, at_top, at_bottom, at_left, at_right, line_end;
    wire [15:0] a_l, a_m, a_r, c_l, c_m, c_r, b_l, b_m, b_r;

    lane_rows #(.BITS(8), .LANES(2), .MAX_GROUPS(MAX_WIDTH / 2)) rows (
        .clk(clk), .rst(rst), .in_vsync(cam_vs), .in_de(cam_de), .in_valid(cam_dv), .in_px(cam_px),
        .step(step),
        .row_a_l(a_l), .row_a_m(a_m), .row_a_r(a_r),
        .row_c_l(c_l), .row_c_m(c_m), .row_c_r(c_r),
        .row_b_l(b_l), .row_b_m(b_m), .row_b_r(b_r),
        .at_top(at_top), .at_bottom(at_bottom), .at_left(at_left), .at_right(at_right), .line_end(line_end)
    );

    // the centre row's four columns around the pair: west of pixel 0, pixel 0, pixel 1, east of pixel 1
    wire [7:0] west = at_left  ? c_m[7:0]  : c_l[15:8];
    wire [7:0] east = at_right ? c_m[15:8] : c_r[7:0];

    function [7:0] sharpen;
        input [7:0] up, left, mid, right, down;
        reg signed [11:0] s;
        begin
            s = 12'sd5 * $signed({4'd0, mid}) - $signed({4'd0, up}) - $signed({4'd0, left})
                - $signed({4'd0, right}) - $signed({4'd0, down});
            sharpen = (s < 0) ? 8'd0 : (s > 255) ? 8'd255 : s[7:0];
        end
    endfunction

    wire [7:0] q0 = sharpen(a_m[7:0],  west,      c_m[7:0],  c_m[15:8], b_m[7:0]);
    wire [7:0] q1 = sharpen(a_m[15:8], c_m[7:0],  c_m[15:8], east,      b_m[15:8]);

    reg end_q;
    always @(posedge clk) begin
        res_dv <= step;
        end_q  <= step & line_end;
        if (step) begin
`ifdef BUG_LANES_SWAPPED
            res_px <= {q0, q1};
`else
            res_px <= {q1, q0};
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
    wire unused = &{1'b0, at_top, at_bottom, a_l, a_r, b_l, b_r, c_l[7:0], c_r[15:8]};
    /* verilator lint_on UNUSEDSIGNAL */
endmodule
