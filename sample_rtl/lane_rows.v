// lane_rows: three-row, three-group column window for video carrying LANES pixels a clock.
//
// Used by belt_sharpen_x2.v and belt_smooth10.v. Written apart from window3x3.v: it works on groups
// of LANES pixels, keeps two line memories indexed by group, and hands the core the three rows of
// three consecutive groups (left, mid, right) plus where the mid group sits in the frame.
//
// Ports: clk, rst (sync, active high); in_vsync/in_de/in_valid/in_px (video, syncs active high,
// in_valid low inside in_de = stall). Out: step (a window is ready this clock), row_*_{l,m,r}
// (LANES*BITS each; lane 0 = leftmost pixel = least significant field), at_top, at_bottom,
// at_left (mid group is the first of the line), at_right (mid group is the last), line_end (the
// output line finished with this clock's window).
//
// Timing: output line r is windowed while input line r+1 arrives: group k-1 is stepped the clock
// after group k is taken; the last group of a line is stepped the clock after in_de falls. The last
// line of a frame is replayed from the line memories after the leading edge of in_vsync (one group
// a clock, no stalls), so the vertical front porch must be at least one line.
// Rows beyond the frame repeat the edge row; groups beyond the line repeat the edge group (the core
// picks the edge pixel inside it).

`default_nettype none

module lane_rows #(
    parameter integer BITS       = 8,
    parameter integer LANES      = 2,
    parameter integer MAX_GROUPS = 512
) (
    input  wire                  clk,
    input  wire                  rst,
    input  wire                  in_vsync,
    input  wire                  in_de,
    input  wire                  in_valid,
    input  wire [LANES*BITS-1:0] in_px,
    output reg                   step,
    output reg  [LANES*BITS-1:0] row_a_l, row_a_m, row_a_r,
    output reg  [LANES*BITS-1:0] row_c_l, row_c_m, row_c_r,
    output reg  [LANES*BITS-1:0] row_b_l, row_b_m, row_b_r,
    output reg                   at_top,
    output reg                   at_bottom,
    output reg                   at_left,
    output reg                   at_right,
    output reg                   line_end
);
    localparam integer GW = LANES * BITS;

    reg [GW-1:0] mem_prev [0:MAX_GROUPS-1];  // line r   (the centre row while line r+1 arrives)
    reg [GW-1:0] mem_old  [0:MAX_GROUPS-1];  // line r-1

    // feed: one group of three rows a clock, from the input or from the replay of the last line
    reg  [15:0] grp, groups, replay_k;
    reg  [1:0]  lines_in;          // 0, 1, or 2 = "two or more lines of this frame taken"
    reg         replaying, replay_done, de_q, vs_q;
    wire        take     = in_de & in_valid & ~replaying;
    wire        vs_edge  = in_vsync & ~vs_q;
    wire        line_out = de_q & ~in_de & ~replaying;   // an input line just ended

    reg          f_valid, f_first, f_eol, f_top, f_bottom;
    reg [GW-1:0] f_a, f_c, f_b;

    always @(posedge clk) begin
        f_valid     <= 1'b0;
        f_eol       <= replay_done || (line_out && lines_in != 0);
        replay_done <= 1'b0;
        de_q        <= in_de;
        vs_q        <= in_vsync;
        if (rst) begin
            grp <= 0; groups <= 0; lines_in <= 0; replaying <= 1'b0; replay_k <= 0;
            de_q <= 1'b0; vs_q <= 1'b0; f_eol <= 1'b0;
        end else if (replaying) begin
            f_valid  <= 1'b1;
            f_first  <= (replay_k == 0);
            f_a      <= mem_old[replay_k[$clog2(MAX_GROUPS)-1:0]];
            f_c      <= mem_prev[replay_k[$clog2(MAX_GROUPS)-1:0]];
            f_b      <= mem_prev[replay_k[$clog2(MAX_GROUPS)-1:0]];
            f_top    <= 1'b0;
            f_bottom <= 1'b1;
            if (replay_k + 1 == groups) begin
                replaying   <= 1'b0;
                replay_done <= 1'b1;
            end
            replay_k <= replay_k + 1;
        end else begin
            if (vs_edge) begin
                replaying <= (lines_in != 0) && (groups != 0);
                replay_k  <= 0;
                lines_in  <= 0;
            end
            if (take) begin
                mem_prev[grp[$clog2(MAX_GROUPS)-1:0]] <= in_px;
                mem_old[grp[$clog2(MAX_GROUPS)-1:0]]  <= mem_prev[grp[$clog2(MAX_GROUPS)-1:0]];
                f_valid  <= (lines_in != 0);
                f_first  <= (grp == 0);
                f_a      <= (lines_in == 1) ? mem_prev[grp[$clog2(MAX_GROUPS)-1:0]] : mem_old[grp[$clog2(MAX_GROUPS)-1:0]];
                f_c      <= mem_prev[grp[$clog2(MAX_GROUPS)-1:0]];
                f_b      <= in_px;
                f_top    <= (lines_in == 1);
                f_bottom <= 1'b0;
                grp      <= grp + 1;
            end
            if (line_out) begin
                if (lines_in == 0) groups <= grp;
                if (lines_in != 2) lines_in <= lines_in + 1;
                grp <= 0;
            end
        end
    end

    // column shift: s0 = newest group taken, s1 = the one before
    reg [GW-1:0] a0, a1, c0, c1, b0, b1;
    reg          first0, top0, bottom0;
    always @(posedge clk) begin
        step     <= 1'b0;
        line_end <= 1'b0;
        if (f_valid) begin
            a1 <= a0; a0 <= f_a;
            c1 <= c0; c0 <= f_c;
            b1 <= b0; b0 <= f_b;
            first0 <= f_first; top0 <= f_top; bottom0 <= f_bottom;
            if (!f_first) begin                  // window of the previous group: left s1, mid s0, right new
                step    <= 1'b1;
                row_a_l <= first0 ? a0 : a1; row_a_m <= a0; row_a_r <= f_a;
                row_c_l <= first0 ? c0 : c1; row_c_m <= c0; row_c_r <= f_c;
                row_b_l <= first0 ? b0 : b1; row_b_m <= b0; row_b_r <= f_b;
                at_left <= first0; at_right <= 1'b0; at_top <= f_top; at_bottom <= f_bottom;
            end
        end else if (f_eol) begin                // last group of the line: right repeats the edge group
            step     <= 1'b1;
            line_end <= 1'b1;
            row_a_l <= first0 ? a0 : a1; row_a_m <= a0; row_a_r <= a0;
            row_c_l <= first0 ? c0 : c1; row_c_m <= c0; row_c_r <= c0;
            row_b_l <= first0 ? b0 : b1; row_b_m <= b0; row_b_r <= b0;
            at_left <= first0; at_right <= 1'b1; at_top <= top0; at_bottom <= bottom0;
        end
        if (rst) step <= 1'b0;
    end
endmodule
