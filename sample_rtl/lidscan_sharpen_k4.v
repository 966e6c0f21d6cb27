// lidscan_sharpen_k4 -- parcel-lid scanner front end: 3x3 sharpen of gray8 video carried
// four pixels a beat on AXI4-Stream, with TKEEP marking the lanes of a beat that hold pixels.
//
// Bus: s_axis_tdata[31:0] holds pixels x..x+3 of a line, pixel x in bits 7:0 (byte 0), and
// s_axis_tkeep[k] says byte k holds a pixel. Every beat of a line is full except the last,
// which keeps bytes 0..(W mod 4)-1 when the line width W is not a multiple of 4 (so a 30-pixel
// line is 7 full beats and one beat with tkeep = 4'b0011). TLAST ends a line, TUSER marks the
// first beat of a frame. The master side uses the same layout and the same rules.
//
// Structure: unpack -> stream_core (one pixel a clock, 3x3 sharpen, replicate border) -> repack.
// The unpacker holds one beat and hands its kept bytes to the core one a clock; it takes the
// next beat once the last kept byte is gone. The repacker gathers core pixels into a beat and
// sends it when four are in or the core's end-of-line arrives (then tkeep marks the bytes
// gathered). A beat waits in the output register while m_axis_tready is low.
//
// Latency (no gaps, no back-pressure): first output beat W + 19 clocks after the first input
// beat for a line of W pixels (51 at W = 32, 49 at W = 30): the core sees one pixel a clock, so
// its one-line delay counts pixels; each input beat costs one clock more than its kept bytes.
//
// Exact integer formula (p = 3x3 window, row 0 above, replicate border), per pixel:
//   out = min(max(5*p[1][1] - p[0][1] - p[1][0] - p[1][2] - p[2][1], 0), 255)
//
// Seeded bug (`define LIDSCAN_TKEEP_ALL): the repacker drives m_axis_tkeep = 4'b1111 on every
// beat, also on a line's short last beat, so stale bytes of the gather register go out as pixels.

`default_nettype none

module lidscan_sharpen_k4 #(
    parameter integer LINE_MAX = 1024,  // longest line, pixels
    parameter integer LINES    = 24     // lines a frame
) (
    input  wire        aclk,
    input  wire        aresetn,
    input  wire [31:0] s_axis_tdata,
    input  wire [3:0]  s_axis_tkeep,
    input  wire        s_axis_tvalid,
    output wire        s_axis_tready,
    input  wire        s_axis_tlast,
    input  wire        s_axis_tuser,
    output reg  [31:0] m_axis_tdata,
    output reg  [3:0]  m_axis_tkeep,
    output reg         m_axis_tvalid,
    input  wire        m_axis_tready,
    output reg         m_axis_tlast,
    output reg         m_axis_tuser
);

    // ---------------------------------------------------------------- unpack: one beat -> bytes
    reg  [31:0] ib_data;
    reg  [3:0]  ib_keep;
    reg         ib_last, ib_user, ib_full;
    reg  [1:0]  ib_lane;

    wire        px_in_valid = ib_full;
    wire        px_in_ready;
    wire [7:0]  px_in_data  = ib_data[8*ib_lane +: 8];
    // the byte handed over is the beat's last when no kept byte follows it
    wire        ib_final    = (ib_lane == 2'd3) || !ib_keep[ib_lane + 2'd1];
    wire        px_in_sof   = ib_user && (ib_lane == 2'd0);
    wire        px_in_eol   = ib_last && ib_final;

    assign s_axis_tready = !ib_full;

    always @(posedge aclk) begin
        if (!aresetn) begin
            ib_full <= 1'b0;
            ib_lane <= 2'd0;
            ib_data <= 32'd0;
            ib_keep <= 4'd0;
            ib_last <= 1'b0;
            ib_user <= 1'b0;
        end else if (s_axis_tvalid && s_axis_tready) begin
            ib_data <= s_axis_tdata;
            ib_keep <= s_axis_tkeep;
            ib_last <= s_axis_tlast;
            ib_user <= s_axis_tuser;
            ib_full <= |s_axis_tkeep;  // a beat with no kept byte carries nothing
            ib_lane <= 2'd0;
        end else if (px_in_valid && px_in_ready) begin
            if (ib_final) begin
                ib_full <= 1'b0;
                ib_lane <= 2'd0;
            end else begin
                ib_lane <= ib_lane + 2'd1;
            end
        end
    end

    // ---------------------------------------------------------------- the filter, one pixel a clock
    wire        px_out_valid, px_out_sof, px_out_eol;
    wire [7:0]  px_out_data;
    wire        px_out_ready = !m_axis_tvalid || m_axis_tready;

    stream_core #(
        .MAX_WIDTH (LINE_MAX),
        .HEIGHT    (LINES)
    ) u_sharpen (
        .clk     (aclk),
        .rst     (!aresetn),
        .s_valid (px_in_valid),
        .s_ready (px_in_ready),
        .s_data  (px_in_data),
        .s_sof   (px_in_sof),
        .s_eol   (px_in_eol),
        .m_valid (px_out_valid),
        .m_ready (px_out_ready),
        .m_data  (px_out_data),
        .m_sof   (px_out_sof),
        .m_eol   (px_out_eol)
    );

    // ---------------------------------------------------------------- repack: bytes -> one beat
    reg  [31:0] ob_data;
    reg  [3:0]  ob_keep;
    reg         ob_user;
    reg  [1:0]  ob_lane;

    wire        px_take  = px_out_valid && px_out_ready;
    wire [3:0]  lane_bit = 4'b0001 << ob_lane;
    reg  [31:0] ob_next;
    always @(*) begin
        ob_next = ob_data;
        ob_next[8*ob_lane +: 8] = px_out_data;
    end

    always @(posedge aclk) begin
        if (!aresetn) begin
            ob_data       <= 32'd0;
            ob_keep       <= 4'd0;
            ob_user       <= 1'b0;
            ob_lane       <= 2'd0;
            m_axis_tvalid <= 1'b0;
            m_axis_tdata  <= 32'd0;
            m_axis_tkeep  <= 4'd0;
            m_axis_tlast  <= 1'b0;
            m_axis_tuser  <= 1'b0;
        end else begin
            if (m_axis_tvalid && m_axis_tready)
                m_axis_tvalid <= 1'b0;
            if (px_take) begin
                if (ob_lane == 2'd3 || px_out_eol) begin
                    m_axis_tvalid <= 1'b1;
                    m_axis_tdata  <= ob_next;
`ifdef LIDSCAN_TKEEP_ALL
                    m_axis_tkeep  <= 4'b1111;
`else
                    m_axis_tkeep  <= ob_keep | lane_bit;
`endif
                    m_axis_tlast  <= px_out_eol;
                    m_axis_tuser  <= (ob_lane == 2'd0) ? px_out_sof : ob_user;
                    ob_keep       <= 4'd0;
                    ob_lane       <= 2'd0;
                end else begin
                    if (ob_lane == 2'd0)
                        ob_user <= px_out_sof;
                    ob_keep <= ob_keep | lane_bit;
                    ob_lane <= ob_lane + 2'd1;
                end
                ob_data <= ob_next;
            end
        end
    end

endmodule

`default_nettype wire
