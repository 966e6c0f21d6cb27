// belt_cam_tb: a plain Verilog testbench for belt_cam_top: runs FRAMES frames and dumps the waves
// (SystemVerilog string for the file name: iverilog -g2012).
// +waves=FILE picks the dump file (default belt_cam.vcd; Verilator writes FST when built with
// --trace-fst). No checking here: the dump is judged afterwards.
`timescale 1ns/1ps
`default_nettype none

module belt_cam_tb;
    parameter integer FRAMES = 3;
    parameter integer ALT_WIDTH = 0;
    parameter         ROOT_TABLE = "edge_root_table.hex";
    reg clk = 1'b0;
    reg rst_n = 1'b0;
    reg run = 1'b0;
    wire mark_vs, mark_de, mark_bit;
    wire [15:0] marks_last, frames_made;
    string wave_file;                      // SystemVerilog string: build with -g2012 (Icarus)

    belt_cam_top #(.ALT_WIDTH(ALT_WIDTH), .ROOT_TABLE(ROOT_TABLE)) dut (
        .cam_clk(clk), .cam_rst_n(rst_n), .cam_run(run), .mark_vs(mark_vs), .mark_de(mark_de),
        .mark_bit(mark_bit), .marks_last(marks_last), .frames_made(frames_made)
    );

    always #5 clk = ~clk;

    initial begin
        if (!$value$plusargs("waves=%s", wave_file)) wave_file = "belt_cam.vcd";
        $dumpfile(wave_file);
        $dumpvars(0, belt_cam_tb);
        repeat (4) @(posedge clk);
        rst_n <= 1'b1;
        run <= 1'b1;
        wait (frames_made == FRAMES);
        run <= 1'b0;                       // park in vertical sync after the last frame
        repeat (200) @(posedge clk);       // the last line leaves at the parked vsync
        $display("belt_cam_tb: %0d frames, last frame had %0d marked pixels", FRAMES, marks_last);
        $finish;
    end
endmodule
