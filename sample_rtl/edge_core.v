// edge_core: Sobel gradient magnitude of the luma of an RGB video stream (video family).
//
// Interface: clk, rst (active high, synchronous), in_vsync, in_hsync, in_de, in_valid,
// in_data[23:0] (R = 23:16, G = 15:8, B = 7:0), out_vsync, out_hsync, out_de, out_valid,
// out_data[7:0]. Syncs active high; in_valid low inside in_de is a stall. Output line y leaves
// while input line y+1 arrives; the last line is flushed at the leading edge of in_vsync (see
// window3x3.v for the timing of the window and the flush).
//
// Latency: 8 clocks from taking input pixel (x, y) to out_valid for output pixel (x-1, y-1)
// (1 luma + 3 window + 1 gradient + 1 square + 1 address + 1 table read).
//
// Exact integer formulas (p[row][col] is the 3x3 window of luma12, row 0 = line above):
//   luma12 = (77*R + 150*G + 29*B + 8) >> 4                                      0..4080
//   gx = (p[0][2] + 2*p[1][2] + p[2][2]) - (p[0][0] + 2*p[1][0] + p[2][0])       -16320..16320
//   gy = (p[2][0] + 2*p[2][1] + p[2][2]) - (p[0][0] + 2*p[0][1] + p[0][2])       15 bits signed
//   s  = gx*gx + gy*gy                                          0..532,684,800, 29 bits unsigned
//   a  = min(s >> 12, 8191)                                                      13 bits
//   out = root_table[a], root_table[a] = isqrt(8*a)                             0..255
// Border: BORDER parameter of window3x3 (0 replicate = default, 1 zero, 2 mirror).
//
// ROOT_TABLE is the $readmemh file of the root table (8192 lines of 2 hex digits); a relative
// name is opened from the simulator's working directory, so pass an absolute path (README.md).
//
// Seeded bugs (`define): BUG_SOBEL_TAP_SIGN (gx adds 2*p[1][0] instead of subtracting it),
// BUG_SUMSQ_NARROW (s kept in 28 bits, wraps), BUG_GRADIENT_NARROW (gx, gy kept in 14 bits
// and sign-extended, wrap beyond +-8191), BUG_ADDR_WRAP (a = (s >> 12) mod 8192 instead of
// the clamp), BUG_LUMA_RB_SWAP (R and B weights swapped); plus the window3x3 bugs.

`default_nettype none

module edge_core #(
    parameter integer MAX_WIDTH  = 1024,
    parameter integer BORDER     = 0,
    parameter         ROOT_TABLE = "edge_root_table.hex"
) (
    input  wire        clk,
    input  wire        rst,
    input  wire        in_vsync,
    input  wire        in_hsync,
    input  wire        in_de,
    input  wire        in_valid,
    input  wire [23:0] in_data,
    output wire        out_vsync,
    output wire        out_hsync,
    output wire        out_de,
    output wire        out_valid,
    output reg  [7:0]  out_data
);

    // ------------------------------------------------------------------ luma (1 clock)
    wire [7:0] r = in_data[23:16];
    wire [7:0] g = in_data[15:8];
    wire [7:0] b = in_data[7:0];
    // the low 4 bits of luma_sum are dropped by the >> 4
    /* verilator lint_off UNUSEDSIGNAL */
`ifdef BUG_LUMA_RB_SWAP
    wire [15:0] luma_sum = 16'd29 * r + 16'd150 * g + 16'd77 * b + 16'd8;
`else
    wire [15:0] luma_sum = 16'd77 * r + 16'd150 * g + 16'd29 * b + 16'd8;
`endif
    /* verilator lint_on UNUSEDSIGNAL */
    reg  [11:0] luma;
    reg         l_vs, l_hs, l_de, l_valid;
    always @(posedge clk) begin
        if (rst) begin
            luma <= 12'd0;
            l_vs <= 1'b0;
            l_hs <= 1'b0;
            l_de <= 1'b0;
            l_valid <= 1'b0;
        end else begin
            luma <= luma_sum[15:4];
            l_vs <= in_vsync;
            l_hs <= in_hsync;
            l_de <= in_de;
            l_valid <= in_valid;
        end
    end

    // ------------------------------------------------------------------ window (3 clocks)
    wire [107:0] win;
    wire         w_vs, w_hs, w_de, w_valid;
    /* verilator lint_off UNUSEDSIGNAL */
    // the position flags are for cores that do their own border muxing; this one does not
    wire         w_first_row, w_last_row, w_first_col, w_last_col;
    /* verilator lint_on UNUSEDSIGNAL */
    window3x3 #(.PIXEL_BITS(12), .MAX_WIDTH(MAX_WIDTH), .BORDER(BORDER)) u_window (
        .clk(clk), .rst(rst), .ce(1'b1),
        .in_vsync(l_vs), .in_hsync(l_hs), .in_de(l_de), .in_valid(l_valid), .in_data(luma),
        .win_vsync(w_vs), .win_hsync(w_hs), .win_de(w_de), .win_valid(w_valid), .win(win),
        .win_first_row(w_first_row), .win_last_row(w_last_row),
        .win_first_col(w_first_col), .win_last_col(w_last_col)
    );

    wire [14:0] p00 = {3'd0, win[0*12 +: 12]};
    wire [14:0] p01 = {3'd0, win[1*12 +: 12]};
    wire [14:0] p02 = {3'd0, win[2*12 +: 12]};
    wire [14:0] p10 = {3'd0, win[3*12 +: 12]};
    wire [14:0] p12 = {3'd0, win[5*12 +: 12]};
    wire [14:0] p20 = {3'd0, win[6*12 +: 12]};
    wire [14:0] p21 = {3'd0, win[7*12 +: 12]};
    wire [14:0] p22 = {3'd0, win[8*12 +: 12]};
    /* verilator lint_off UNUSEDSIGNAL */
    wire [11:0] p11_unused = win[4*12 +: 12];  // Sobel has a zero centre tap
    /* verilator lint_on UNUSEDSIGNAL */

    // ------------------------------------------------------------------ gradient (1 clock)
    // sums of three taps are 0..16320 (14 bits); the difference fits 15 bits two's complement
    wire [14:0] gx_pos = p02 + (p12 << 1) + p22;
`ifdef BUG_SOBEL_TAP_SIGN
    wire [14:0] gx_neg = p00 - (p10 << 1) + p20;
`else
    wire [14:0] gx_neg = p00 + (p10 << 1) + p20;
`endif
    wire [14:0] gy_pos = p20 + (p21 << 1) + p22;
    wire [14:0] gy_neg = p00 + (p01 << 1) + p02;
`ifdef BUG_GRADIENT_NARROW
    /* verilator lint_off UNUSEDSIGNAL */
    wire [14:0] gx_diff = gx_pos - gx_neg;  // bit 14 dropped by the seeded bug
    wire [14:0] gy_diff = gy_pos - gy_neg;
    /* verilator lint_on UNUSEDSIGNAL */
    // 14 bits kept and sign-extended: |g| > 8191 wraps (the sign bit was forgotten in the sizing)
    wire signed [14:0] gx_next = $signed({gx_diff[13], gx_diff[13:0]});
    wire signed [14:0] gy_next = $signed({gy_diff[13], gy_diff[13:0]});
`else
    wire [14:0] gx_diff = gx_pos - gx_neg;
    wire [14:0] gy_diff = gy_pos - gy_neg;
    wire signed [14:0] gx_next = $signed(gx_diff);
    wire signed [14:0] gy_next = $signed(gy_diff);
`endif
    reg  signed [14:0] gx, gy;

    // ------------------------------------------------------------------ square (1 clock)
    // the >> 12 drops sum_sq[11:0]; a square is never negative, so bit 29 of gx2/gy2 is always 0
    /* verilator lint_off UNUSEDSIGNAL */
    reg  [28:0] sum_sq;
    wire signed [29:0] gx2 = gx * gx;
    wire signed [29:0] gy2 = gy * gy;
    /* verilator lint_on UNUSEDSIGNAL */
`ifdef BUG_SUMSQ_NARROW
    wire [27:0] sum_sq_narrow = gx2[27:0] + gy2[27:0];
    wire [28:0] sum_sq_next = {1'b0, sum_sq_narrow};
`else
    wire [28:0] sum_sq_next = gx2[28:0] + gy2[28:0];
`endif

    // ------------------------------------------------------------------ address (1 clock)
    reg  [12:0] addr;
    wire [16:0] addr_full = sum_sq[28:12];
`ifdef BUG_ADDR_WRAP
    /* verilator lint_off UNUSEDSIGNAL */
    wire [16:0] addr_unused = addr_full;  // the wrap drops the high bits
    /* verilator lint_on UNUSEDSIGNAL */
    wire [12:0] addr_next = addr_full[12:0];
`else
    wire [12:0] addr_next = (addr_full > 17'd8191) ? 13'd8191 : addr_full[12:0];
`endif

    // ------------------------------------------------------------------ root table (1 clock)
    reg  [7:0] root_rom [0:8191];
    initial $readmemh(ROOT_TABLE, root_rom);

    // control signals ride along the 4 datapath clocks
    reg  [3:0] d_vs, d_hs, d_de, d_valid;

    always @(posedge clk) begin
        if (rst) begin
            gx <= 15'sd0;
            gy <= 15'sd0;
            sum_sq <= 29'd0;
            addr <= 13'd0;
            out_data <= 8'd0;
            d_vs <= 4'd0;
            d_hs <= 4'd0;
            d_de <= 4'd0;
            d_valid <= 4'd0;
        end else begin
            gx <= gx_next;
            gy <= gy_next;
            sum_sq <= sum_sq_next;
            addr <= addr_next;
            out_data <= root_rom[addr];
            d_vs <= {d_vs[2:0], w_vs};
            d_hs <= {d_hs[2:0], w_hs};
            d_de <= {d_de[2:0], w_de};
            d_valid <= {d_valid[2:0], w_valid};
        end
    end

    assign out_vsync = d_vs[3];
    assign out_hsync = d_hs[3];
    assign out_de = d_de[3];
    assign out_valid = d_valid[3];

endmodule

`default_nettype wire
