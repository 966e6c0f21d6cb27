// Video pass-through for the fast-path harness tests.
// Latency: 1 clock. Every output is the input registered once; no filtering (out_data = in_data).
// Reset: rst active high, synchronous; clears the control registers (data is left free).
`timescale 1ns/1ps
module fast_video_pass #(
    parameter WIDTH = 8
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
    always @(posedge clk) begin
        if (rst) begin
            out_vsync <= 1'b0; out_hsync <= 1'b0; out_de <= 1'b0; out_valid <= 1'b0;
        end else begin
            out_vsync <= in_vsync; out_hsync <= in_hsync; out_de <= in_de; out_valid <= in_valid;
        end
        out_data <= in_data;
    end
endmodule
