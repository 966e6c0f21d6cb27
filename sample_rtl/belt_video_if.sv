// belt_video_if: one raster video link between conveyor-belt camera blocks (SystemVerilog interface).
//
// Signals: vs, hs (syncs, active high), de (data-enable), valid (sample present; low inside de is
// a stall), px (one gray sample, belt_pkg::pixel_t). A block that receives video takes the link as
// `belt_video_if.sink`, a block that sends it as `belt_video_if.source`.

interface belt_video_if;
  import belt_pkg::*;
  logic   vs;
  logic   hs;
  logic   de;
  logic   valid;
  pixel_t px;

  modport sink   (input  vs, hs, de, valid, px);
  modport source (output vs, hs, de, valid, px);
endinterface
