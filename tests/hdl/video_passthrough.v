// Video pass-through for testing the vkit video source and monitor.
// Latency: 2 clocks. out_* = in_* delayed by two registers; no filtering (out_data = in_data).
// Reset: rst active high, synchronous; clears the control registers (data is left free).
`timescale 1ns/1ps
module video_passthrough #(
    parameter WIDTH = 24
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

    always @(posedge clk) begin
        if (rst) begin
            vsync_q <= 1'b0; hsync_q <= 1'b0; de_q <= 1'b0; valid_q <= 1'b0;
            out_vsync <= 1'b0; out_hsync <= 1'b0; out_de <= 1'b0; out_valid <= 1'b0;
        end else begin
            vsync_q <= in_vsync; hsync_q <= in_hsync; de_q <= in_de; valid_q <= in_valid;
            out_vsync <= vsync_q; out_hsync <= hsync_q; out_de <= de_q; out_valid <= valid_q;
        end
        data_q   <= in_data;
        out_data <= data_q;
    end
endmodule
