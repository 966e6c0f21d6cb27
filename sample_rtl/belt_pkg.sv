// belt_pkg: sizes shared by the conveyor-belt camera blocks (SystemVerilog package).
//
// The overhead camera delivers 8-bit gray samples; a line of the belt image is at most
// BELT_MAX_LINE pixels. LINE_ADDR_BITS is derived, so a block that takes it from here follows
// a change of the line length without an edit.

package belt_pkg;
  localparam int PIXEL_BITS     = 8;
  localparam int BELT_MAX_LINE  = 640;
  localparam int LINE_ADDR_BITS = $clog2(BELT_MAX_LINE);
  typedef logic [PIXEL_BITS-1:0] pixel_t;
endpackage
