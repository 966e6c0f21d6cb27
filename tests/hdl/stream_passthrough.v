// Stream pass-through for testing the vkit stream source, sink and monitor: a 2-entry FIFO.
// Latency: 1 clock from an accepted input word to m_valid (when the FIFO was empty).
// s_ready = FIFO not full; m_valid = FIFO not empty; a word moves on valid && ready.
// {m_data, m_sof, m_eol} = the oldest stored {s_data, s_sof, s_eol}; no filtering.
// Reset: rst active high, synchronous; empties the FIFO.
`timescale 1ns/1ps
module stream_passthrough #(
    parameter WIDTH = 8
) (
    input  wire             clk,
    input  wire             rst,
    input  wire             s_valid,
    output wire             s_ready,
    input  wire [WIDTH-1:0] s_data,
    input  wire             s_sof,
    input  wire             s_eol,
    output wire             m_valid,
    input  wire             m_ready,
    output wire [WIDTH-1:0] m_data,
    output wire             m_sof,
    output wire             m_eol
);
    reg [WIDTH+1:0] mem [0:1];
    reg             wr_ptr, rd_ptr;
    reg [1:0]       count;

    wire push = s_valid && s_ready;
    wire pop  = m_valid && m_ready;

    assign s_ready = (count != 2'd2);
    assign m_valid = (count != 2'd0);
    assign {m_data, m_sof, m_eol} = mem[rd_ptr];

    always @(posedge clk) begin
        if (rst) begin
            wr_ptr <= 1'b0;
            rd_ptr <= 1'b0;
            count  <= 2'd0;
        end else begin
            if (push) begin
                mem[wr_ptr] <= {s_data, s_sof, s_eol};
                wr_ptr      <= ~wr_ptr;
            end
            if (pop)
                rd_ptr <= ~rd_ptr;
            count <= count + {1'b0, push} - {1'b0, pop};
        end
    end
endmodule
