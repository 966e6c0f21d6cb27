// Video pass-through that puts unknowns on its outputs, for testing how the vkit video monitor records X/Z.
// Latency: 2 clocks, as video_passthrough: out_* = in_* delayed by two registers.
// out_data is all 'x' on every output pixel whose index n (counted from 0 over the whole run) has
// n % XZ_EVERY == XZ_FIRST; out_de is 'x' for exactly one clock, the first clock after the first output
// line (where it would fall to 0). Not for Verilator, which has no 'x' (two-state).
// Reset: rst active high, synchronous; clears the control registers and the counters.
`timescale 1ns/1ps
module video_xz #(
    parameter WIDTH    = 8,
    parameter XZ_EVERY = 50,
    parameter XZ_FIRST = 7
) (
    input  wire             clk,
    input  wire             rst,
    input  wire             in_vsync,
    input  wire             in_hsync,
    input  wire             in_de,
    input  wire             in_valid,
    input  wire [WIDTH-1:0] in_data,
    output reg              out_vsync,
    output reg              out_hsync,
    output reg              out_de,
    output reg              out_valid,
    output reg  [WIDTH-1:0] out_data
);
    reg             vsync_q, hsync_q, de_q, valid_q;
    reg [WIDTH-1:0] data_q;
    reg [31:0]      n_pix;
    reg             de_x_done;

    always @(posedge clk) begin
        if (rst) begin
            vsync_q <= 1'b0; hsync_q <= 1'b0; de_q <= 1'b0; valid_q <= 1'b0;
            out_vsync <= 1'b0; out_hsync <= 1'b0; out_de <= 1'b0; out_valid <= 1'b0;
            n_pix <= 32'd0; de_x_done <= 1'b0;
        end else begin
            vsync_q <= in_vsync; hsync_q <= in_hsync; de_q <= in_de; valid_q <= in_valid;
            out_vsync <= vsync_q; out_hsync <= hsync_q; out_valid <= valid_q;
            if (out_de === 1'b1 && !de_q && !de_x_done) begin
                out_de    <= 1'bx;
                de_x_done <= 1'b1;
            end else begin
                out_de <= de_q;
            end
            if (de_q && valid_q)
                n_pix <= n_pix + 32'd1;
        end
        data_q <= in_data;
        if (!rst && de_q && valid_q && (n_pix % XZ_EVERY) == XZ_FIRST)
            out_data <= {WIDTH{1'bx}};
        else
            out_data <= data_q;
    end
endmodule
