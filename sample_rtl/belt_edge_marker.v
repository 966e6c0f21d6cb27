// belt_edge_marker: the stage after the edge filter on the conveyor camera: marks pixels whose edge
// strength reaches THRESH and counts them per frame (a parcel detector would read the count).
// Latency: 1 clock; mark = (edge >= THRESH). marks_last holds the count of the frame before.
`timescale 1ns/1ps
`default_nettype none

module belt_edge_marker #(
    parameter integer THRESH = 48
) (
    input  wire        clk,
    input  wire        rst_n,
    input  wire        e_vs,
    input  wire        e_de,
    input  wire        e_valid,
    input  wire [7:0]  e_mag,
    output reg         m_vs,
    output reg         m_de,
    output reg         m_bit,
    output reg  [15:0] marks_last
);
    reg [15:0] marks_r;
    reg        vs_q;
    always @(posedge clk) begin
        if (!rst_n) begin
            m_vs <= 1'b0; m_de <= 1'b0; m_bit <= 1'b0; marks_r <= 0; marks_last <= 0; vs_q <= 1'b0;
        end else begin
            vs_q <= e_vs;
            m_vs <= e_vs;
            m_de <= e_de && e_valid;
            m_bit <= e_de && e_valid && (e_mag >= THRESH);
            if (e_vs && !vs_q) begin
                marks_last <= marks_r;
                marks_r <= 0;
            end else if (e_de && e_valid && e_mag >= THRESH) begin
                marks_r <= marks_r + 1;
            end
        end
    end
endmodule
