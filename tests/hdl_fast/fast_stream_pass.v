// Stream pass-through for the fast-path harness tests: a one-word skid register.
// Latency: 1 clock from an accepted input word to m_valid. s_ready = register empty or being read.
// {m_data, m_sof, m_eol} = the stored {s_data, s_sof, s_eol}; no filtering.
// Reset: rst active high, synchronous; empties the register.
`timescale 1ns/1ps
module fast_stream_pass #(
    parameter WIDTH = 8
) (
    input  wire             clk,
    input  wire             rst,
    input  wire             s_valid,
    output wire             s_ready,
    input  wire [WIDTH-1:0] s_data,
    input  wire             s_sof,
    input  wire             s_eol,
    output reg              m_valid,
    input  wire             m_ready,
    output reg  [WIDTH-1:0] m_data,
    output reg              m_sof,
    output reg              m_eol
);
    assign s_ready = !m_valid || m_ready;
    always @(posedge clk) begin
        if (rst) begin
            m_valid <= 1'b0;
        end else if (s_ready) begin
            m_valid <= s_valid;
            if (s_valid) begin
                m_data <= s_data;
                m_sof  <= s_sof;
                m_eol  <= s_eol;
            end
        end
    end
endmodule
