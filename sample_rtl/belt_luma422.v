// belt_luma422: 3x3 erosion (minimum) of the luma of Y'CbCr 4:2:2 video; the colour differences pass
// through beside their own pixel.
//
// Ports: clk, rst (sync, active high); cam_vs, cam_hs, cam_de, cam_dv (pixel valid; low inside
// cam_de = stall), cam_ycc[15:0] = {C, Y} (Y in bits 7:0; C in 15:8 is Cb on even columns and Cr on
// odd ones); res_de, res_dv, res_ycc[15:0] = {C, Y'} with C of the same pixel. Syncs active high.
//
// Latency: 3 clocks from taking pixel x of line y+1 to res_dv for output pixel x-1 of line y (feed,
// window, minimum); the last pixel of a line follows the fall of cam_de, the last line follows the
// leading edge of cam_vs (see lane_rows.v, used here with one 16-bit pixel a clock).
//
// Exact integer formula (Y[r][c] the 3x3 neighbourhood of luma, r = 0 the line above, edges replicated):
//   Y' = min over the nine Y[r][c]                                        0..255
//   res_ycc = {C[1][1], Y'}                                               the centre pixel's own C
//
// Seeded bug (`define): BUG_CHROMA_SLIP_ODD (on odd lines C comes from the pixel to the right, so Cb
// and Cr change places there).

`default_nettype none

module belt_luma422 #(
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
    input  wire [15:0] cam_ycc,
    output reg         res_de,
    output reg         res_dv,
    output reg  [15:0] res_ycc
);
    wire        step, at_top, at_bottom, at_left, at_right, line_end;
    wire [15:0] a_l, a_m, a_r, c_l, c_m, c_r, b_l, b_m, b_r;

    lane_rows #(.BITS(16), .LANES(1), .MAX_GROUPS(MAX_WIDTH)) rows (
        .clk(clk), .rst(rst), .in_vsync(cam_vs), .in_de(cam_de), .in_valid(cam_dv), .in_px(cam_ycc),
        .step(step),
        .row_a_l(a_l), .row_a_m(a_m), .row_a_r(a_r),
        .row_c_l(c_l), .row_c_m(c_m), .row_c_r(c_r),
        .row_b_l(b_l), .row_b_m(b_m), .row_b_r(b_r),
        .at_top(at_top), .at_bottom(at_bottom), .at_left(at_left), .at_right(at_right), .line_end(line_end)
    );

    function [7:0] min3;
        input [7:0] p, q, r;
        begin
            min3 = (p < q) ? ((p < r) ? p : r) : ((q < r) ? q : r);
        end
    endfunction

    wire [7:0] y_min = min3(min3(a_l[7:0], a_m[7:0], a_r[7:0]),
                            min3(c_l[7:0], c_m[7:0], c_r[7:0]),
                            min3(b_l[7:0], b_m[7:0], b_r[7:0]));

    // line parity of the window being stepped: line 0 is the one at the top
    reg  par;
    wire odd_line = at_top ? 1'b0 : par;
`ifdef BUG_CHROMA_SLIP_ODD
    wire [7:0] chroma = odd_line ? c_r[15:8] : c_m[15:8];
`else
    wire [7:0] chroma = c_m[15:8];
`endif

    reg end_q;
    always @(posedge clk) begin
        res_dv <= step;
        end_q  <= step & line_end;
        if (step) res_ycc <= {chroma, y_min};
        if (step && line_end) par <= ~odd_line;
        if (rst) begin
            res_de <= 1'b0; res_dv <= 1'b0; end_q <= 1'b0; par <= 1'b0;
        end else if (step) begin
            res_de <= 1'b1;
        end else if (end_q) begin
            res_de <= 1'b0;
        end
    end

    /* verilator lint_off UNUSEDSIGNAL */
    wire unused = &{1'b0, at_bottom, at_left, at_right, a_l[15:8], a_m[15:8], a_r[15:8], c_l[15:8],
                    c_r[15:8], b_l[15:8], b_m[15:8], b_r[15:8]};
    /* verilator lint_on UNUSEDSIGNAL */
endmodule
