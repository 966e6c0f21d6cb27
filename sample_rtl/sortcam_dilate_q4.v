// sortcam_dilate_q4 -- luma + 3x3 grey dilation for the sorting-line camera, four RGB pixels per beat.
//
// Bus: AXI4-Stream style valid/ready. s_axis_tdata[95:0] holds four RGB888 pixels, the FIRST
// (leftmost) pixel in the TOP 24 bits [95:72], the fourth in [23:0]; inside a pixel R is [23:16],
// G [15:8], B [7:0]. s_axis_tuser = first beat of a frame (not needed, framing is by ROWS),
// s_axis_tlast = last beat of a line. m_axis_tdata[31:0] holds the four 8-bit results in the same
// order (first pixel in [31:24]); m_axis_tuser marks beat 0 of line 0, m_axis_tlast the last beat
// of each line. Lines are a whole number of beats (width a multiple of 4, at most MAX_COLS).
// aresetn is synchronous, active low.
//
// Per pixel:  Y   = (77*R + 150*G + 29*B + 128) >> 8            0..255  (BT.601 weights / 256)
//             out = max of Y over the 3x3 neighbourhood, frame edges repeated (replicate)
//
// Timing: output line r leaves while input line r+1 comes in, one register after the beat that
// brings its right-hand neighbour column. After each line's last beat the input stalls one clock
// (the line's last output beat); after the ROWS-th line it stalls MAX beats of a line + 1 clocks
// while the bottom line leaves. Everything advances only when m_axis_tready allows (adv).
//
// Seeded bug (`define): SORTCAM_OUT_FIRST_LOW -- the output word is packed first pixel LOW
// ([7:0]), i.e. the four results leave in reverse lane order.

`timescale 1ns/1ps
`default_nettype none

module sortcam_dilate_q4 #(
    parameter integer MAX_COLS = 1024,
    parameter integer ROWS     = 24
) (
    input  wire        aclk,
    input  wire        aresetn,
    input  wire        s_axis_tvalid,
    output wire        s_axis_tready,
    input  wire [95:0] s_axis_tdata,
    /* verilator lint_off UNUSEDSIGNAL */
    input  wire        s_axis_tuser,
    /* verilator lint_on UNUSEDSIGNAL */
    input  wire        s_axis_tlast,
    output reg         m_axis_tvalid,
    input  wire        m_axis_tready,
    output reg  [31:0] m_axis_tdata,
    output reg         m_axis_tuser,
    output reg         m_axis_tlast
);
    localparam integer BEATS = MAX_COLS / 4;
    localparam integer BW = $clog2(BEATS + 1);
    localparam integer AW = (BEATS > 1) ? $clog2(BEATS) : 1;  // line store address
    localparam integer RW = $clog2(ROWS + 1);

    // phases: TAKE input beats; CLOSE one clock after a line (its last output beat); DRAIN the
    // bottom output line from the line stores with no input.
    localparam [1:0] TAKE = 2'd0, CLOSE = 2'd1, DRAIN = 2'd2;

    wire adv = ~m_axis_tvalid | m_axis_tready;
    reg  [1:0]    phase;
    reg  [BW-1:0] beat, beats;       // beat of the line, beats per line (learned from tlast)
    reg  [RW-1:0] row;               // input row being taken (DRAIN: the last one)
    reg           draining;          // CLOSE of the drained bottom line
    assign s_axis_tready = adv & (phase == TAKE);
    wire take = s_axis_tvalid & s_axis_tready;
    wire step = take | (adv & (phase == DRAIN));      // a column of the window comes in
    wire close = adv & (phase == CLOSE);             // the line's right edge: no new column

    // ---- luma of the four incoming pixels, lane 0 = first pixel (top of the input word)
    // the sum is at most 256 * 255 + 128 = 65408: 16 bits; the low byte is the fraction dropped
    /* verilator lint_off UNUSEDSIGNAL */
    function [7:0] luma8(input [23:0] rgb);
        reg [15:0] acc;
        begin
            acc = 16'd77 * rgb[23:16] + 16'd150 * rgb[15:8] + 16'd29 * rgb[7:0] + 16'd128;
            luma8 = acc[15:8];
        end
    endfunction
    /* verilator lint_on UNUSEDSIGNAL */
    wire [31:0] y_in = {luma8(s_axis_tdata[23:0]), luma8(s_axis_tdata[47:24]),
                        luma8(s_axis_tdata[71:48]), luma8(s_axis_tdata[95:72])};  // lane k in [8k+7:8k]

    // ---- two line stores of luma beats: up1 = the row above the incoming one, up2 = two above
    reg [31:0] up1 [0:BEATS-1];
    reg [31:0] up2 [0:BEATS-1];
    wire [AW-1:0] addr = beat[AW-1:0];                   // beat < BEATS inside a line
    wire [31:0] a1 = up1[addr];
    wire [31:0] a2 = up2[addr];
    always @(posedge aclk) if (take) begin
        up2[addr] <= a1;
        up1[addr] <= y_in;
    end

    // the output row is the one above the incoming row (DRAIN: the last row itself)
    wire out_row0 = draining | (phase == DRAIN) ? (row == {RW{1'b0}}) : (row == {{(RW-1){1'b0}}, 1'b1});
    wire emits = (phase == DRAIN) | draining | (row != {RW{1'b0}});
    wire [31:0] n_mid = a1;
    wire [31:0] n_top = out_row0 ? a1 : a2;
    wire [31:0] n_bot = (phase == DRAIN) ? a1 : y_in;

    // ---- the window's columns: q = the previous beat, p = the last pixel of the beat before it
    reg [7:0]  p_top, p_mid, p_bot;
    reg [31:0] q_top, q_mid, q_bot;
    reg        q_first;                                  // q is beat 0 of its line
    always @(posedge aclk) if (step) begin
        p_top <= q_top[31:24]; p_mid <= q_mid[31:24]; p_bot <= q_bot[31:24];
        q_top <= n_top; q_mid <= n_mid; q_bot <= n_bot;
        q_first <= (beat == {BW{1'b0}});
    end

    // 3-wide maximum of one row for each lane of q; l / r: the beats either side (present or not)
    function [7:0] max3(input [7:0] x, input [7:0] y, input [7:0] z);
        reg [7:0] m;
        begin
            m = (x > y) ? x : y;
            max3 = (m > z) ? m : z;
        end
    endfunction
    // l_px: the last pixel of the beat on the left, r_px: the first of the beat on the right
    function [31:0] row_max(input [7:0] l_px, input [31:0] c, input [7:0] r_px, input has_l, input has_r);
        reg [7:0] west, east;
        begin
            west = has_l ? l_px : c[7:0];
            east = has_r ? r_px : c[31:24];
            row_max = {max3(c[23:16], c[31:24], east), max3(c[15:8], c[23:16], c[31:24]),
                       max3(c[7:0], c[15:8], c[23:16]), max3(west, c[7:0], c[15:8])};
        end
    endfunction
    function [31:0] max_rows(input [31:0] t, input [31:0] m, input [31:0] b);
        integer k;
        begin
            for (k = 0; k < 4; k = k + 1)
                max_rows[8*k +: 8] = max3(t[8*k +: 8], m[8*k +: 8], b[8*k +: 8]);
        end
    endfunction
    wire has_r = step;                                   // on close the right neighbour is missing
    wire [31:0] res = max_rows(row_max(p_top, q_top, n_top[7:0], ~q_first, has_r),
                               row_max(p_mid, q_mid, n_mid[7:0], ~q_first, has_r),
                               row_max(p_bot, q_bot, n_bot[7:0], ~q_first, has_r));
    // q is a real column of this line once beat >= 1 (step) or at the line's close
    wire out_now = emits & ((step & (beat != {BW{1'b0}})) | close);

`ifdef SORTCAM_OUT_FIRST_LOW
    wire [31:0] packed_res = res;
`else
    wire [31:0] packed_res = {res[7:0], res[15:8], res[23:16], res[31:24]};
`endif

    // ---- phase control
    always @(posedge aclk) begin
        if (!aresetn) begin
            phase <= TAKE; beat <= {BW{1'b0}}; beats <= {BW{1'b0}}; row <= {RW{1'b0}}; draining <= 1'b0;
        end else if (take) begin
            if (s_axis_tlast) begin
                beats <= beat + 1'b1;
                beat <= {BW{1'b0}};
                phase <= CLOSE;
            end else begin
                beat <= beat + 1'b1;
            end
        end else if (adv & (phase == DRAIN)) begin
            if (beat + 1'b1 == beats) begin
                beat <= {BW{1'b0}};
                phase <= CLOSE;
                draining <= 1'b1;
            end else begin
                beat <= beat + 1'b1;
            end
        end else if (close) begin
            if (draining) begin
                draining <= 1'b0; row <= {RW{1'b0}}; phase <= TAKE;
            end else if (row == ROWS[RW-1:0] - 1'b1) begin
                phase <= DRAIN;
            end else begin
                row <= row + 1'b1; phase <= TAKE;
            end
        end
    end

    // ---- output register
    always @(posedge aclk) begin
        if (!aresetn) begin
            m_axis_tvalid <= 1'b0; m_axis_tdata <= 32'd0; m_axis_tuser <= 1'b0; m_axis_tlast <= 1'b0;
        end else if (adv) begin
            m_axis_tvalid <= out_now;
            if (out_now) begin
                m_axis_tdata <= packed_res;
                m_axis_tuser <= out_row0 & q_first;
                m_axis_tlast <= close;
            end
        end
    end
endmodule

`default_nettype wire
