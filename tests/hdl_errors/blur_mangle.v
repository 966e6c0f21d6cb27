// blur_mangle: the sample blur_core with its output broken on purpose, one way per MODE, for the
// error-catalogue tests (tests/test_errors.py). Same ports as blur_core (video family, gray8).
//
// MODE 0  pass-through of blur_core (latency 1 clock more than blur_core: one output register)
// MODE 1  out_data driven 'x' while out_de is high (X on outputs)
// MODE 2  out_de and out_valid never rise (silent design)
// MODE 3  the last pixel of every line dropped (out_de = de one clock late AND de now)
// MODE 4  one extra pixel after every line (out_de = de OR de one clock late)
// MODE 5  the first output line after reset suppressed (one line missing)
// MODE 6  one extra line of the last line's length before each output vsync
// MODE 7  out_de and out_valid never reset: X on the output controls, data-enable read as low
// MODE 8  out_de and out_valid held high every clock after reset (data-enable never goes low)
//
// Every mode delays the outputs by one register so the modes share one latency.

`timescale 1ns/1ps
`default_nettype none

module blur_mangle #(
    parameter integer MODE      = 0,
    parameter integer MAX_WIDTH = 1024
) (
    input  wire       clk,
    input  wire       rst,
    input  wire       in_vsync,
    input  wire       in_hsync,
    input  wire       in_de,
    input  wire       in_valid,
    input  wire [7:0] in_data,
    output reg        out_vsync,
    output reg        out_hsync,
    output reg        out_de,
    output reg        out_valid,
    output reg  [7:0] out_data
);
    wire       b_vs, b_hs, b_de, b_valid;
    wire [7:0] b_data;
    blur_core #(.MAX_WIDTH(MAX_WIDTH)) u_core (
        .clk(clk), .rst(rst), .in_vsync(in_vsync), .in_hsync(in_hsync), .in_de(in_de),
        .in_valid(in_valid), .in_data(in_data), .out_vsync(b_vs), .out_hsync(b_hs), .out_de(b_de),
        .out_valid(b_valid), .out_data(b_data)
    );

    reg        de_q, vs_q;          // previous-clock values of blur_core's outputs
    reg        first_done;          // MODE 5: the first line after reset has ended
    reg [15:0] run_len, run_cnt;    // MODE 6: length of the last data-enable run
    reg [15:0] burst;               // MODE 6: clocks of the extra line still to emit

    always @(posedge clk) begin
        if (rst) begin
            de_q <= 1'b0; vs_q <= 1'b0; first_done <= 1'b0;
            run_len <= 16'd0; run_cnt <= 16'd0; burst <= 16'd0;
            out_vsync <= 1'b0; out_hsync <= 1'b0; out_de <= 1'b0; out_valid <= 1'b0; out_data <= 8'd0;
        end else begin
            de_q <= b_de;
            vs_q <= b_vs;
            if (de_q && !b_de) first_done <= 1'b1;
            run_cnt <= b_de ? run_cnt + 16'd1 : 16'd0;
            if (de_q && !b_de) run_len <= run_cnt;
            out_vsync <= b_vs;
            out_hsync <= b_hs;
            out_de    <= b_de;
            out_valid <= b_valid;
            out_data  <= b_data;
            case (MODE)
                1: if (b_de) out_data <= 8'bxxxxxxxx;
                2: begin out_de <= 1'b0; out_valid <= 1'b0; end
                3: begin out_de <= b_de & de_q; out_valid <= b_valid & de_q; end
                4: begin out_de <= b_de | de_q; out_valid <= b_valid | de_q; end
                5: if (!first_done) begin out_de <= 1'b0; out_valid <= 1'b0; end
                6: begin
                    // two clocks of gap after the last line, run_len pixels, one clock of gap, then vsync
                    if (b_vs && !vs_q && run_len != 0) burst <= run_len + 16'd2;
                    else if (burst != 0) burst <= burst - 16'd1;
                    if (burst >= 16'd2 && burst <= run_len + 16'd1) begin
                        out_de <= 1'b1; out_valid <= 1'b1;
                    end
                    if ((b_vs && !vs_q && run_len != 0) || burst != 0) out_vsync <= 1'b0;
                end
                7: begin out_de <= 1'bx; out_valid <= 1'bx; end
                8: begin out_de <= 1'b1; out_valid <= 1'b1; end
                default: ;
            endcase
        end
    end
endmodule

`default_nettype wire
