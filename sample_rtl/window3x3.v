// window3x3: reusable 3x3 window generator for line-buffered video filters.
//
// Interface (all synchronous to clk; rst is active high and synchronous; ce is a whole-pipe clock
// enable, tie it to 1'b1 for video timing, the stream core drives it from back-pressure):
//   in_vsync, in_hsync : syncs, active high.
//   in_de              : data-enable, high for the active part of each active line.
//   in_valid           : pixel-valid while in_de is high (low = stall, in_data is ignored).
//   in_data            : PIXEL_BITS-bit pixel; ignored outside in_de or while in_valid is low.
//   win                : the 3x3 window, p[r][c] at bits (3*r+c)*PIXEL_BITS +: PIXEL_BITS,
//                        r = 0 is the line above the centre, c = 0 the column left of it; border
//                        rows/columns are already substituted per BORDER.
//   win_valid          : win holds the window of one output pixel on this clock.
//   win_de             : high from the first to the last output pixel of an output line.
//   win_vsync/hsync    : in_vsync/in_hsync delayed by 3 clocks; win_vsync is held low while the
//                        last line of a frame is being flushed.
//   win_first_row, win_last_row, win_first_col, win_last_col : position flags of the centre.
//
// Behaviour: the line width W is learned from the number of valid pixels in each in_de run (up to
// MAX_WIDTH; wider lines wrap the line-buffer address). When input pixel (x, y) is taken, the window
// centred on (x-1, y-1) leaves 3 clocks later (for x >= 1, y >= 1); the first clock after in_de falls
// emits the centre (W-1, y-1). At the leading edge of in_vsync the last line (H-1) of the frame is
// flushed from the line buffers at one pixel per clock (W+1 clocks: W reads and one end step).
//
// Latency: 3 clocks from taking input (x, y) to win_valid for centre (x-1, y-1).
//
// Border policy (same as scipy.ndimage modes): BORDER = 0 'nearest' (replicate the edge pixel),
// 1 'constant' with cval 0 (zero), 2 'mirror' (reflect about the edge pixel: p[-1] = p[1]).
// Minimum frame is 2x2 for mirror, 1x1 otherwise.
//
// Structure: two line buffers lb1 (line y-1) and lb2 (line y-2) of MAX_WIDTH x PIXEL_BITS, both
// read at column x when a pixel is taken (registered read, inferred block RAM) and written one
// clock later (lb1 <= new pixel, lb2 <= what lb1 held); a 3-column shift register forms the window.
//
// Seeded bugs (each `define changes one thing, for the verification demo):
//   BUG_LINEBUF_OFF_BY_ONE  lb2 is written with lb1's value of the previous column.
//   BUG_RIGHT_BORDER_ZERO   the right border column is zero instead of replicated.
//   BUG_DE_EARLY            win_de leads the pixels by one clock.
//   BUG_DE_LATE             win_de lags the pixels by one clock.
//   BUG_STALL_REPEAT        win_valid follows the data-enable run, repeating the window on stalls.
//   BUG_STALL_DROP          the first pixel after a stall is not taken.
//   BUG_NO_FLUSH            the last line of the frame is never flushed.
//   BUG_VSYNC_NOT_HELD      win_vsync is not held low during the flush.

`default_nettype none

module window3x3 #(
    parameter integer PIXEL_BITS = 8,
    parameter integer MAX_WIDTH  = 1024,
    parameter integer BORDER     = 0
) (
    input  wire                    clk,
    input  wire                    rst,
    input  wire                    ce,
    input  wire                    in_vsync,
    input  wire                    in_hsync,
    input  wire                    in_de,
    input  wire                    in_valid,
    input  wire [PIXEL_BITS-1:0]   in_data,
    output reg                     win_vsync,
    output reg                     win_hsync,
    output reg                     win_de,
    output reg                     win_valid,
    output reg  [9*PIXEL_BITS-1:0] win,
    output reg                     win_first_row,
    output reg                     win_last_row,
    output reg                     win_first_col,
    output reg                     win_last_col
);

    function integer clog2;
        input integer value;
        integer v;
        begin
            v = value - 1;
            clog2 = 0;
            while (v > 0) begin
                clog2 = clog2 + 1;
                v = v >> 1;
            end
            if (clog2 < 1) clog2 = 1;
        end
    endfunction

    // counters reach W itself (a line of exactly MAX_WIDTH pixels must still end), addresses W - 1 at most
    localparam integer AW = clog2(MAX_WIDTH + 1);
    localparam integer MW = clog2(MAX_WIDTH);   // line-buffer address
    localparam integer PB = PIXEL_BITS;
    localparam [AW-1:0] ONE = {{(AW-1){1'b0}}, 1'b1};

    // ------------------------------------------------------------------ stage 0: input events
    reg           de_q, vs_q;
`ifdef BUG_STALL_DROP
    reg           valid_q;
    always @(posedge clk) begin
        if (rst) valid_q <= 1'b0;
        else if (ce) valid_q <= in_valid;
    end
`endif
    reg  [AW-1:0] x_cnt;       // valid pixels taken so far in this in_de run
    reg  [AW-1:0] width;       // learned width of the last complete line
    reg  [1:0]    line_cnt;    // complete lines in this frame, saturating at 2
    reg  [1:0]    fl_phase;    // flush: 0 idle, 1 reading columns, 2 end step
    reg  [AW-1:0] fl_x;
    reg           fl_first_row; // the flushed line is also the first line (1-line frame)

`ifdef BUG_STALL_DROP
    wire take0 = in_de & in_valid & ~(de_q & ~valid_q);
`else
    wire take0 = in_de & in_valid;
`endif
    wire eol0      = de_q & ~in_de & (x_cnt != {AW{1'b0}});
    wire vs_edge0  = in_vsync & ~vs_q;
`ifdef BUG_NO_FLUSH
    wire fl_start0 = 1'b0;
`else
    wire fl_start0 = vs_edge0 & (line_cnt != 2'd0) & (fl_phase == 2'd0);
`endif
    wire fl_px0    = fl_start0 | (fl_phase == 2'd1);
    wire fl_end0   = (fl_phase == 2'd2);
    wire [AW-1:0] fl_addr0 = fl_start0 ? {AW{1'b0}} : fl_x;
    wire [AW-1:0] addr0    = take0 ? x_cnt : fl_addr0;
    wire px0  = take0 | fl_px0;
    wire end0 = eol0 | fl_end0;
    // an emission needs a line above the centre (line_cnt >= 1) and, for a pixel, a column left of it
    wire emit0 = ((px0 & (addr0 != {AW{1'b0}})) | end0) & ((line_cnt != 2'd0) | fl_px0 | fl_end0);
    // the line that ends now had one pixel: its end step is also its first column
    wire end_w1 = eol0 ? (x_cnt == ONE) : (width == ONE);
    wire first_col0 = (px0 & (addr0 == ONE)) | (end0 & end_w1);
`ifdef BUG_VSYNC_NOT_HELD
    wire vs_eff0 = in_vsync;
`else
    wire vs_eff0 = in_vsync & ~(fl_px0 | fl_end0);
`endif

    always @(posedge clk) begin
        if (rst) begin
            de_q <= 1'b0;
            vs_q <= 1'b0;
            x_cnt <= {AW{1'b0}};
            width <= {AW{1'b0}};
            line_cnt <= 2'd0;
            fl_phase <= 2'd0;
            fl_x <= {AW{1'b0}};
            fl_first_row <= 1'b0;
        end else if (ce) begin
            de_q <= in_de;
            vs_q <= in_vsync;
            if (take0) x_cnt <= x_cnt + ONE;
            else if (!in_de) x_cnt <= {AW{1'b0}};
            if (eol0) begin
                width <= x_cnt;
                if (line_cnt != 2'd2) line_cnt <= line_cnt + 2'd1;
            end
            if (vs_edge0) line_cnt <= 2'd0;
            case (fl_phase)
                2'd0: if (fl_start0) begin
                    fl_phase <= (width == ONE) ? 2'd2 : 2'd1;
                    fl_x <= ONE;
                    fl_first_row <= (line_cnt == 2'd1);
                end
                2'd1: begin
                    if (fl_x == width - ONE) fl_phase <= 2'd2;
                    fl_x <= fl_x + ONE;
                end
                default: fl_phase <= 2'd0;
            endcase
        end
    end

    // ------------------------------------------------------------------ line buffers
    reg  [PB-1:0] lb1 [0:MAX_WIDTH-1];
    reg  [PB-1:0] lb2 [0:MAX_WIDTH-1];
    reg  [PB-1:0] lb1_q, lb2_q;
    // Power-up contents zero (block-RAM init on FPGAs). The good design never lets a location it
    // has not written reach the outputs; the zero fill keeps seeded-bug variants free of X.
    integer init_i;
    initial begin
        for (init_i = 0; init_i < MAX_WIDTH; init_i = init_i + 1) begin
            lb1[init_i] = {PB{1'b0}};
            lb2[init_i] = {PB{1'b0}};
        end
    end

    reg           s1_px, s1_end, s1_take, s1_emit, s1_first_row, s1_last_row, s1_first_col;
    reg           s1_vs, s1_hs;
    reg  [MW-1:0] s1_addr;
    reg  [PB-1:0] s1_pix;
`ifdef BUG_LINEBUF_OFF_BY_ONE
    reg  [PB-1:0] lb1_q_prev;
    always @(posedge clk) begin
        if (rst) lb1_q_prev <= {PB{1'b0}};
        else if (ce && s1_take) lb1_q_prev <= lb1_q;
    end
    wire [PB-1:0] lb2_wdata = lb1_q_prev;
`else
    wire [PB-1:0] lb2_wdata = lb1_q;
`endif

    always @(posedge clk) begin
        if (ce) begin
            if (px0) begin
                lb1_q <= lb1[addr0[MW-1:0]];
                lb2_q <= lb2[addr0[MW-1:0]];
            end
            if (s1_take) begin
                lb1[s1_addr] <= s1_pix;
                lb2[s1_addr] <= lb2_wdata;
            end
        end
    end

    always @(posedge clk) begin
        if (rst) begin
            s1_px <= 1'b0;
            s1_end <= 1'b0;
            s1_take <= 1'b0;
            s1_emit <= 1'b0;
            s1_first_row <= 1'b0;
            s1_last_row <= 1'b0;
            s1_first_col <= 1'b0;
            s1_vs <= 1'b0;
            s1_hs <= 1'b0;
            s1_addr <= {MW{1'b0}};
            s1_pix <= {PB{1'b0}};
        end else if (ce) begin
            s1_px <= px0;
            s1_end <= end0;
            s1_take <= take0;
            s1_emit <= emit0;
            s1_first_row <= (fl_phase != 2'd0) ? fl_first_row : (line_cnt == 2'd1);
            s1_last_row <= fl_px0 | fl_end0;
            s1_first_col <= first_col0;
            s1_vs <= vs_eff0;
            s1_hs <= in_hsync;
            s1_addr <= addr0[MW-1:0];
            s1_pix <= in_data;
        end
    end

    // ------------------------------------------------------------------ stage 1: column + row border
    reg  [PB-1:0] col_top, col_bot;
    always @(*) begin
        col_bot = s1_pix;
        if (s1_last_row) begin
            if (BORDER == 1) col_bot = {PB{1'b0}};
            else if (BORDER == 2 && !s1_first_row) col_bot = lb2_q;
            else col_bot = lb1_q;
        end
        col_top = lb2_q;
        if (s1_first_row) begin
            if (BORDER == 1) col_top = {PB{1'b0}};
            else if (BORDER == 2 && !s1_last_row) col_top = s1_pix;
            else col_top = lb1_q;
        end
    end

    // window columns: c0 = x-2, c1 = x-1 (centre), c2 = x; each {top, mid, bot}
    reg  [3*PB-1:0] w_c0, w_c1, w_c2;
    reg             s2_emit, s2_first_row, s2_last_row, s2_first_col, s2_last_col, s2_vs, s2_hs;
    always @(posedge clk) begin
        if (rst) begin
            w_c0 <= {3*PB{1'b0}};
            w_c1 <= {3*PB{1'b0}};
            w_c2 <= {3*PB{1'b0}};
            s2_emit <= 1'b0;
            s2_first_row <= 1'b0;
            s2_last_row <= 1'b0;
            s2_first_col <= 1'b0;
            s2_last_col <= 1'b0;
            s2_vs <= 1'b0;
            s2_hs <= 1'b0;
        end else if (ce) begin
            if (s1_px | s1_end) begin
                w_c0 <= w_c1;
                w_c1 <= w_c2;
                w_c2 <= {col_top, lb1_q, col_bot};
            end
            s2_emit <= s1_emit;
            s2_first_row <= s1_first_row;
            s2_last_row <= s1_last_row;
            s2_first_col <= s1_first_col;
            s2_last_col <= s1_end;
            s2_vs <= s1_vs;
            s2_hs <= s1_hs;
        end
    end

    // ------------------------------------------------------------------ stage 2: column border
    reg  [3*PB-1:0] left, right;
    always @(*) begin
        left = w_c0;
        if (s2_first_col) begin
            if (BORDER == 1) left = {3*PB{1'b0}};
            else if (BORDER == 2 && !s2_last_col) left = w_c2;
            else left = w_c1;
        end
        right = w_c2;
        if (s2_last_col) begin
`ifdef BUG_RIGHT_BORDER_ZERO
            right = {3*PB{1'b0}};
`else
            if (BORDER == 1) right = {3*PB{1'b0}};
            else if (BORDER == 2 && !s2_first_col) right = w_c0;
            else right = w_c1;
`endif
        end
    end

    // data-enable run: set by the first emission of a line, cleared by its last
    reg  run2;
    wire de2 = s2_emit | run2;
    always @(posedge clk) begin
        if (rst) run2 <= 1'b0;
        else if (ce && s2_emit) run2 <= ~s2_last_col;
    end
`ifdef BUG_DE_EARLY
    reg  run1;
    always @(posedge clk) begin
        if (rst) run1 <= 1'b0;
        else if (ce && s1_emit) run1 <= ~s1_end;
    end
    wire de_out = s1_emit | run1;
    /* verilator lint_off UNUSEDSIGNAL */
    wire de2_unused = de2;  // the early data-enable replaces de2
    /* verilator lint_on UNUSEDSIGNAL */
`elsif BUG_DE_LATE
    reg  de2_q;
    always @(posedge clk) begin
        if (rst) de2_q <= 1'b0;
        else if (ce) de2_q <= de2;
    end
    wire de_out = de2_q;
`else
    wire de_out = de2;
`endif
`ifdef BUG_STALL_REPEAT
    wire valid_out = s2_emit | run2;
`else
    wire valid_out = s2_emit;
`endif

    always @(posedge clk) begin
        if (rst) begin
            win_vsync <= 1'b0;
            win_hsync <= 1'b0;
            win_de <= 1'b0;
            win_valid <= 1'b0;
            win <= {9*PB{1'b0}};
            win_first_row <= 1'b0;
            win_last_row <= 1'b0;
            win_first_col <= 1'b0;
            win_last_col <= 1'b0;
        end else if (ce) begin
            win_vsync <= s2_vs;
            win_hsync <= s2_hs;
            win_de <= de_out;
            win_valid <= valid_out;
            // rows: r0 = top, r1 = mid, r2 = bot; columns: left, centre (w_c1), right.
            // Loaded only with an output pixel, so line-buffer contents never read (undefined
            // RAM after power-up) do not reach the outputs.
            if (valid_out) win <= {right[PB-1:0],        w_c1[PB-1:0],        left[PB-1:0],
                    right[2*PB-1:PB],     w_c1[2*PB-1:PB],     left[2*PB-1:PB],
                    right[3*PB-1:2*PB],   w_c1[3*PB-1:2*PB],   left[3*PB-1:2*PB]};
            win_first_row <= s2_first_row;
            win_last_row <= s2_last_row;
            win_first_col <= s2_first_col;
            win_last_col <= s2_last_col;
        end
    end

endmodule

`default_nettype wire
