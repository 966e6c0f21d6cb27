// belt_pattern_gen: a procedural overhead view of a parcel conveyor, as a camera front end would
// deliver it (RGB 8:8:8, syncs active high, pixel-valid gaps like a sensor FIFO running dry).
//
// Frame k: a grey belt whose dark cross stripes move 2 columns per frame, two parcels (a black box
// with a white shipping label, and a blue box) riding along it, and a yellow side rail on the last
// two columns. With ALT_WIDTH set, odd frames are ALT_WIDTH pixels wide instead of H_ACT (a sensor
// switching its window).
// Gaps: when GAPS = 1 a 16-bit Fibonacci LFSR (x^16 + x^14 + x^13 + x^11 + 1) drops pix_valid for one
// clock on about 1 active clock in 8; the pixel is held and sent on the next clock.
// Timing per line: H_ACT active, H_FP front porch, H_SW sync, H_BP back porch; per frame: V_SW sync
// lines, V_BP back porch lines, V_ACT active lines, V_FP front porch lines. Gaps stretch a line.
// Two sync lines by default: a line-buffered filter flushes the last line (as wide as the frame before)
// inside the vsync pulse, so the pulse must outlast the widest line when the width changes.
`timescale 1ns/1ps
`default_nettype none

module belt_pattern_gen #(
    parameter integer H_ACT = 32, parameter integer H_FP = 2, parameter integer H_SW = 2,
    parameter integer H_BP = 4, parameter integer V_ACT = 24, parameter integer V_FP = 1,
    parameter integer V_SW = 2, parameter integer V_BP = 1, parameter integer ALT_WIDTH = 0,
    parameter integer GAPS = 1
) (
    input  wire        clk,
    input  wire        rst_n,
    input  wire        run,          // 0 parks the generator in vertical sync at the next frame start
    output reg         vs,
    output reg         hs,
    output reg         de,
    output reg         pix_valid,
    output reg  [23:0] rgb,
    output reg  [15:0] frame_no
);
    localparam integer V_TOT = V_SW + V_BP + V_ACT + V_FP;

    reg  [11:0] col_r, row_r;        // column inside the line (active + blanking), line inside the frame
    reg  [11:0] x_r;                 // active pixels already sent on this line
    reg  [15:0] lfsr_r;
    wire [11:0] width_w = (ALT_WIDTH != 0 && frame_no[0]) ? ALT_WIDTH[11:0] : H_ACT[11:0];
    wire [11:0] h_tot_w = width_w + H_FP[11:0] + H_SW[11:0] + H_BP[11:0];
    wire        act_row = (row_r >= V_SW + V_BP) && (row_r < V_SW + V_BP + V_ACT);
    wire [11:0] y_w     = row_r - (V_SW + V_BP);
    wire        in_act  = act_row && (x_r < width_w);
    wire        gap     = (GAPS != 0) && (lfsr_r[2:0] == 3'b000) && in_act;
    wire        lfsr_fb = lfsr_r[15] ^ lfsr_r[13] ^ lfsr_r[12] ^ lfsr_r[10];

    // ---- the scene at (x_r, y_w) of frame frame_no
    wire [11:0] belt_x  = x_r + {frame_no[9:0], 1'b0};
    wire        stripe  = (belt_x[2:0] < 3'd2);
    wire [11:0] p1_x    = {4'd0, frame_no[7:0]} + 12'd3;
    wire        parcel1 = (x_r >= p1_x % width_w) && (x_r < (p1_x % width_w) + 9) && (y_w >= 4) && (y_w < 12);
    wire        label1  = parcel1 && (x_r >= (p1_x % width_w) + 3) && (x_r < (p1_x % width_w) + 7) && (y_w >= 6) && (y_w < 10);
    wire        parcel2 = (x_r + 12'd5 >= (frame_no[5:0] << 1)) && (x_r < (frame_no[5:0] << 1) + 2) && (y_w >= 14) && (y_w < 21);
    wire        rail    = (x_r + 2 >= width_w);
    reg  [23:0] scene;
    always @(*) begin
        if (rail)         scene = 24'hE0C020;
        else if (label1)  scene = 24'hFFFFFF;
        else if (parcel1) scene = 24'h000000;
        else if (parcel2) scene = {8'd30, 8'd70 + x_r[7:0], 8'd200};
        else if (stripe)  scene = 24'h404448;
        else              scene = {8'd120 + y_w[7:0], 8'd124 + y_w[7:0], 8'd128 + y_w[7:0]};
    end

    always @(posedge clk) begin
        if (!rst_n) begin
            col_r <= 0; row_r <= 0; x_r <= 0; lfsr_r <= 16'hACE1; frame_no <= 0;
            vs <= 1'b0; hs <= 1'b0; de <= 1'b0; pix_valid <= 1'b0; rgb <= 24'd0;
        end else if (!run && row_r == 0 && col_r == 0) begin
            // parked in vertical sync: the frame before is over (a line-buffered filter flushes it now)
            vs <= 1'b1; hs <= 1'b0; de <= 1'b0; pix_valid <= 1'b0;
        end else begin
            lfsr_r <= {lfsr_r[14:0], lfsr_fb};
            vs <= (row_r < V_SW);
            hs <= (col_r >= width_w + H_FP) && (col_r < width_w + H_FP + H_SW);
            de <= in_act;
            pix_valid <= in_act && !gap;
            rgb <= in_act && !gap ? scene : 24'd0;
            if (in_act && !gap) x_r <= x_r + 1;
            if (gap) begin
                // hold the column: the line is one clock longer
            end else if (col_r + 1 == h_tot_w) begin
                col_r <= 0; x_r <= 0;
                if (row_r + 1 == V_TOT) begin
                    row_r <= 0; frame_no <= frame_no + 1;
                end else begin
                    row_r <= row_r + 1;
                end
            end else begin
                col_r <= col_r + 1;
            end
        end
    end
endmodule
