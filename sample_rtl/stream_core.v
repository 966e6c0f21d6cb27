// stream_core: 3x3 sharpen of an 8-bit gray pixel stream with a valid/ready handshake (stream family).
//
// Interface: clk, rst (active high, synchronous); slave side s_valid, s_ready, s_data[7:0],
// s_sof (first pixel of a frame), s_eol (last pixel of a line); master side m_valid, m_ready,
// m_data[7:0], m_sof, m_eol. A beat transfers when valid && ready. m_valid never depends on
// m_ready, and m_data/m_sof/m_eol hold while m_valid && !m_ready.
//
// Framing: the line width W is learned from s_eol (up to MAX_WIDTH); a frame is HEIGHT lines.
// s_sof is not needed for framing and is ignored (every frame must be exactly HEIGHT lines).
// After each line's s_eol beat s_ready is low for one clock (the line-end step); after the
// HEIGHT-th line it is low for W+2 clocks while the last output line is flushed from the line
// buffers. Output line y leaves while input line y+1 arrives. m_sof marks output pixel (0, 0),
// m_eol the last pixel of each output line.
//
// Back-pressure: the whole pipeline (window3x3 with ce, the sharpen register, the front end)
// advances only on clocks where ce = !m_valid || m_ready; s_ready = ce && the front end accepts.
//
// Latency: 4 pipeline advances (clocks without back-pressure) from the transfer of input
// pixel (x, y) to m_valid for output pixel (x-1, y-1) (3 window + 1 sharpen/output register).
//
// Exact integer formula (p[row][col] is the 3x3 window, row 0 = line above, border replicate):
//   out = min(max(5*p[1][1] - p[0][1] - p[1][0] - p[1][2] - p[2][1], 0), 255)
//   (the sum is -1020..1275, 12 bits signed, before the saturation)
//
// Seeded bugs (`define): BUG_STREAM_READY (the pipe advances on the registered m_ready, so it
// ignores back-pressure for the first clock of a stall and overwrites a pixel not yet taken),
// BUG_SHARPEN_WRAP (the sum is cut to 8 bits instead of saturated); plus the window3x3 bugs.

`default_nettype none

module stream_core #(
    parameter integer MAX_WIDTH = 1024,
    parameter integer HEIGHT    = 24
) (
    input  wire       clk,
    input  wire       rst,
    input  wire       s_valid,
    output wire       s_ready,
    input  wire [7:0] s_data,
    /* verilator lint_off UNUSEDSIGNAL */
    input  wire       s_sof,  // framing is by HEIGHT, so the start-of-frame flag is not needed
    /* verilator lint_on UNUSEDSIGNAL */
    input  wire       s_eol,
    output reg        m_valid,
    input  wire       m_ready,
    output reg  [7:0] m_data,
    output reg        m_sof,
    output reg        m_eol
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

    localparam integer AW = clog2(MAX_WIDTH + 2);
    localparam integer HW = clog2(HEIGHT + 1);

`ifdef BUG_STREAM_READY
    reg  m_ready_q;
    always @(posedge clk) begin
        if (rst) m_ready_q <= 1'b0;
        else m_ready_q <= m_ready;
    end
    wire ce = ~m_valid | m_ready_q;
`else
    wire ce = ~m_valid | m_ready;
`endif

    // ------------------------------------------------------------------ front end
    // ACCEPT: feed beats as data-enable high (s_valid = pixel-valid); GAP: one clock with
    // data-enable low ends the line; FLUSH: vsync high for W+1 clocks flushes the last line.
    localparam [1:0] ACCEPT = 2'd0, GAP = 2'd1, FLUSH = 2'd2;
    reg  [1:0]    state;
    reg  [AW-1:0] px_cnt, width, fl_cnt;
    reg  [HW-1:0] lines;

    assign s_ready = ce & (state == ACCEPT);
    wire take = s_valid & s_ready;

    always @(posedge clk) begin
        if (rst) begin
            state <= ACCEPT;
            px_cnt <= {AW{1'b0}};
            width <= {AW{1'b0}};
            fl_cnt <= {AW{1'b0}};
            lines <= {HW{1'b0}};
        end else if (ce) begin
            case (state)
                ACCEPT: if (take) begin
                    if (s_eol) begin
                        state <= GAP;
                        width <= px_cnt + 1'b1;
                        px_cnt <= {AW{1'b0}};
                        lines <= lines + 1'b1;
                    end else begin
                        px_cnt <= px_cnt + 1'b1;
                    end
                end
                GAP: begin
                    if (lines == HEIGHT[HW-1:0]) begin
                        state <= FLUSH;
                        fl_cnt <= {AW{1'b0}};
                        lines <= {HW{1'b0}};
                    end else begin
                        state <= ACCEPT;
                    end
                end
                default: begin
                    if (fl_cnt == width) state <= ACCEPT;
                    fl_cnt <= fl_cnt + 1'b1;
                end
            endcase
        end
    end

    // ------------------------------------------------------------------ window (3 advances)
    /* verilator lint_off UNUSEDSIGNAL */
    wire [71:0] win;  // the sharpen kernel has zero corner taps
    /* verilator lint_on UNUSEDSIGNAL */
    wire        w_valid, w_first_row, w_first_col, w_last_col;
    /* verilator lint_off UNUSEDSIGNAL */
    // syncs, data-enable and last-row flag are video-timing outputs the stream side does not use
    wire        w_vs, w_hs, w_de, w_last_row;
    /* verilator lint_on UNUSEDSIGNAL */
    window3x3 #(.PIXEL_BITS(8), .MAX_WIDTH(MAX_WIDTH), .BORDER(0)) u_window (
        .clk(clk), .rst(rst), .ce(ce),
        .in_vsync(state == FLUSH), .in_hsync(1'b0), .in_de(state == ACCEPT), .in_valid(s_valid),
        .in_data(s_data),
        .win_vsync(w_vs), .win_hsync(w_hs), .win_de(w_de), .win_valid(w_valid), .win(win),
        .win_first_row(w_first_row), .win_last_row(w_last_row),
        .win_first_col(w_first_col), .win_last_col(w_last_col)
    );

    // ------------------------------------------------------------------ sharpen + output register
    wire signed [11:0] centre5 = $signed({4'd0, win[4*8 +: 8]}) * 12'sd5;
    wire signed [11:0] sum = centre5
                           - $signed({4'd0, win[1*8 +: 8]}) - $signed({4'd0, win[3*8 +: 8]})
                           - $signed({4'd0, win[5*8 +: 8]}) - $signed({4'd0, win[7*8 +: 8]});
`ifdef BUG_SHARPEN_WRAP
    /* verilator lint_off UNUSEDSIGNAL */
    wire [11:0] sum_unused = sum;  // the cut keeps only sum[7:0]
    /* verilator lint_on UNUSEDSIGNAL */
    wire [7:0] sat = sum[7:0];
`else
    wire [7:0] sat = (sum < 12'sd0) ? 8'd0 : (sum > 12'sd255) ? 8'd255 : sum[7:0];
`endif

    always @(posedge clk) begin
        if (rst) begin
            m_valid <= 1'b0;
            m_data <= 8'd0;
            m_sof <= 1'b0;
            m_eol <= 1'b0;
        end else if (ce) begin
            m_valid <= w_valid;
            if (w_valid) begin
                m_data <= sat;
                m_sof <= w_first_row & w_first_col;
                m_eol <= w_last_col;
            end
        end
    end

endmodule

`default_nettype wire
