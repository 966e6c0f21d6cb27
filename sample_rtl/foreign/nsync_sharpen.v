// nsync_sharpen: 3x3 sharpening of 8-bit luma on a raster whose syncs and data-enable are active low.
//
// Formula: q_pix(x, y) = clamp(5*p(x, y) - p(x, y-1) - p(x, y+1) - p(x-1, y) - p(x+1, y), 0, 255);
// pixels outside the frame take the value of the nearest edge pixel (replicate).
//
// Ports: vsync_n, hsync_n, den_n and q_vsync_n, q_hsync_n, q_den_n are all active low (0 = pulse,
// 0 = active video). reset is active high and synchronous to pclk.
//
// Structure: the line length is measured, not configured: the clocks from one den_n falling edge to
// the next (when shorter than MAX_LINE) give the line period. Two circular buffers written every clock
// return the raster one line and two lines back (read address = write address - period); the output
// raster is the input raster delayed by one line plus 2 clocks. Until the first period is measured
// (the first line of the first frame) the delayed syncs read as their reset value, 0, and data-enable
// as inactive: after reset q_vsync_n and q_hsync_n stay low for about one line (reset fill), as a
// design whose sync registers reset to 0 does.
//
// Latency: one line (h_total clocks) + 3 clocks from taking input (0, 0) to the first output pixel.
//
// Seeded bug (`define):
//   BUG_DEN_POLARITY  q_den_n is driven with the active-high data-enable (the inversion forgotten).
`timescale 1ns/1ps
`default_nettype none

module nsync_sharpen #(
    parameter integer ADDR_BITS = 11  // 2**ADDR_BITS must exceed the longest line (h_total), in clocks
) (
    input  wire       pclk,
    input  wire       reset,
    input  wire       vsync_n,
    input  wire       hsync_n,
    input  wire       den_n,
    input  wire [7:0] pix,
    output reg        q_vsync_n,
    output reg        q_hsync_n,
    output reg        q_den_n,
    output reg  [7:0] q_pix
);
    localparam integer DEPTH = 1 << ADDR_BITS;

    // one raster sample as stored: {vsync_n, hsync_n, den_n, pix} (pin levels)
    reg  [10:0] line_a [0:DEPTH-1];  // one line back
    reg  [10:0] line_b [0:DEPTH-1];  // two lines back
    reg  [ADDR_BITS-1:0] wr;
    reg  [ADDR_BITS-1:0] period;
    reg                  period_ok;
    reg  [ADDR_BITS:0]   since_den;
    reg                  den_q;

    // a den_n falling edge one line after the previous one (no vsync between) gives the period at once
    wire        measured = den_q && !den_n && !since_den[ADDR_BITS];
    wire [ADDR_BITS-1:0] period_now = measured ? since_den[ADDR_BITS-1:0] : period;
    wire        ok_now = period_ok || measured;
    wire [ADDR_BITS-1:0] rd = wr - period_now;
    wire [10:0] now_s  = {vsync_n, hsync_n, den_n, pix};
    wire [10:0] fill_s = {1'b0, 1'b0, 1'b1, 8'd0};  // syncs at their reset value, data-enable inactive
    wire [10:0] mid_s  = ok_now ? line_a[rd] : fill_s;
    /* verilator lint_off UNUSEDSIGNAL */  // the line above is read for its data-enable and pixel, not its syncs
    wire [10:0] up_s   = ok_now ? line_b[rd] : fill_s;
    /* verilator lint_on UNUSEDSIGNAL */

    // window columns: {de, top, mid, bottom} with the vertical border resolved
    wire        col_de  = ~mid_s[8];
    wire [7:0]  col_mid = mid_s[7:0];
    wire [7:0]  col_top = up_s[8] ? col_mid : up_s[7:0];
    wire [7:0]  col_bot = den_n ? col_mid : pix;
    reg  [24:0] c_new, c_cur;         // column x-1, x-2 after an edge: {de, top, mid, bottom}
    /* verilator lint_off UNUSEDSIGNAL */  // sharpen reads only the centre row of the left column
    reg  [24:0] c_old;                // column x-3
    /* verilator lint_on UNUSEDSIGNAL */
    reg  [1:0]  sync_a, sync_b;       // {vsync_n, hsync_n} of the centre line, aligned with c_cur
    reg         den_a, den_b;

    wire [7:0] left  = c_old[24] ? c_old[15:8] : c_cur[15:8];
    wire [7:0] right = c_new[24] ? c_new[15:8] : c_cur[15:8];
    wire signed [11:0] sharp = 12'sd5 * $signed({4'd0, c_cur[15:8]}) - $signed({4'd0, c_cur[23:16]})
                             - $signed({4'd0, c_cur[7:0]}) - $signed({4'd0, left}) - $signed({4'd0, right});

    always @(posedge pclk) begin
        line_a[wr] <= now_s;
        line_b[wr] <= mid_s;
        wr <= wr + 1'b1;
        den_q <= den_n;
        if (reset) begin
            wr <= {ADDR_BITS{1'b0}};
            period <= {ADDR_BITS{1'b0}};
            period_ok <= 1'b0;
            since_den <= {(ADDR_BITS + 1){1'b1}};
            den_q <= 1'b1;
            c_new <= 25'd0; c_cur <= 25'd0; c_old <= 25'd0;
            sync_a <= 2'b00; sync_b <= 2'b00; den_a <= 1'b1; den_b <= 1'b1;
            q_vsync_n <= 1'b0; q_hsync_n <= 1'b0; q_den_n <= 1'b1; q_pix <= 8'd0;
        end else begin
            // line period: den_n falling edge to the next one, kept when shorter than the buffers; a vsync
            // pulse between the two (vertical blanking) voids the measurement
            if (measured) begin
                period <= since_den[ADDR_BITS-1:0];
                period_ok <= 1'b1;
            end
            if (!vsync_n) since_den <= {(ADDR_BITS + 1){1'b1}};
            else if (den_q && !den_n) since_den <= {{ADDR_BITS{1'b0}}, 1'b1};
            else if (!since_den[ADDR_BITS]) since_den <= since_den + 1'b1;
            c_new <= {col_de, col_top, col_mid, col_bot};
            c_cur <= c_new;
            c_old <= c_cur;
            sync_a <= mid_s[10:9]; sync_b <= sync_a;
            den_a <= mid_s[8]; den_b <= den_a;
            q_vsync_n <= sync_b[1];
            q_hsync_n <= sync_b[0];
`ifdef BUG_DEN_POLARITY
            q_den_n <= ~den_b;
`else
            q_den_n <= den_b;
`endif
            q_pix <= sharp < 0 ? 8'd0 : (sharp > 255 ? 8'd255 : sharp[7:0]);
        end
    end
endmodule

`default_nettype wire
