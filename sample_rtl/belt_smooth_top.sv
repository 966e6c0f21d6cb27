// belt_smooth_top: smooths the overhead camera's view of the conveyor belt before parcel detection.
//
// Ports: pclk (pixel clock), rst_n (active low, synchronous), cam (belt_video_if.sink: the camera
// link in), belt (belt_video_if.source: the smoothed link out), frame_count (frames seen since
// reset, 16 bits, wraps; a status output the filter does not need).
//
// The filter is blur_core (window3x3.v, blur_core.v): Gaussian [[1,2,1],[2,4,2],[1,2,1]] with
// out = (sum + 8) >> 4; latency and border behaviour as stated in blur_core.v (5 pipeline clocks,
// replicated border). The line buffer depth is LINE_PIXELS (default belt_pkg::BELT_MAX_LINE).

module belt_smooth_top
  import belt_pkg::*;
#(
  parameter int LINE_PIXELS = BELT_MAX_LINE
) (
  input  logic                pclk,
  input  logic                rst_n,
  belt_video_if.sink          cam,
  belt_video_if.source        belt,
  output logic [15:0]         frame_count
);

  logic vs_seen;

  blur_core #(
    .MAX_WIDTH (LINE_PIXELS),
    .BORDER    (0)
  ) u_smooth (
    .clk       (pclk),
    .rst       (!rst_n),
    .in_vsync  (cam.vs),
    .in_hsync  (cam.hs),
    .in_de     (cam.de),
    .in_valid  (cam.valid),
    .in_data   (cam.px),
    .out_vsync (belt.vs),
    .out_hsync (belt.hs),
    .out_de    (belt.de),
    .out_valid (belt.valid),
    .out_data  (belt.px)
  );

  // a frame starts at the leading edge of the camera's vsync
  always_ff @(posedge pclk) begin
    if (!rst_n) begin
      vs_seen     <= 1'b0;
      frame_count <= '0;
    end else begin
      vs_seen <= cam.vs;
      if (cam.vs && !vs_seen)
        frame_count <= frame_count + 16'd1;
    end
  end

endmodule
