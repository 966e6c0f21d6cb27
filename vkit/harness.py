"""HDL text generators for the fast path: a harness that plays stimulus from memory and writes a capture file.

The harness ``vkit_harness`` wraps the design under test. A player memory, loaded with ``$readmemh``
(VHDL: textio), holds one word per clock (video family) or one word per transfer plus a per-clock
ready pattern (stream family). A capture block writes one text line per output event to a file, so
Python never touches the simulation per clock: it starts the clock, waits for ``done`` and reads the
file (see :mod:`vkit.capture_text` for the line format).

Video stimulus word, per clock, MSB first: ``{frame_mark, hsync, vsync, de, valid, data[IW-1:0]}``;
``frame_mark`` is 1 on the first clock of each frame and only drives the harness's ``frame_pulse``.

Stream stimulus: ``pixels`` words ``{sof, eol, data[IW-1:0]}``, one per transfer; ``gaps`` words
``{idle_data[IW-1:0], gap[15:0]}``, idle clocks before each transfer and the data driven while idle;
``ready`` words, one bit per clock of the sink's ready, repeated when the run is longer.

Clock index 0 is the first rising edge with reset released; on edge ``k`` the design samples word
``k`` and the capture samples the design's outputs as they stood before that edge.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

from vkit.errors import ConfigError

__all__ = [
    "TOPLEVEL",
    "GAP_BITS",
    "HarnessSpec",
    "HarnessBuild",
    "scan_port_widths",
    "video_word_bits",
    "stream_pixel_bits",
    "stream_gap_bits",
    "verilog_harness",
    "vhdl_harness",
    "harness_sources",
]

TOPLEVEL = "vkit_harness"
"""Name of the generated harness module/entity (the simulation's toplevel on the fast path)."""

GAP_BITS = 16
"""Bits of the idle-gap count in a stream gap word (longest gap: 65535 clocks)."""

STREAM_TAIL = 16
"""Clocks the stream harness keeps capturing after the expected output pixel count arrived."""

_VIDEO_IN = ("in_hsync", "in_vsync", "in_de", "in_valid", "in_data")
_VIDEO_OUT = ("out_vsync", "out_hsync", "out_de", "out_valid", "out_data")
_STREAM_IN = ("in_valid", "in_data", "in_sof", "in_eol", "out_ready")
_STREAM_OUT = ("in_ready", "out_valid", "out_data", "out_sof", "out_eol")


def video_word_bits(in_width: int) -> int:
    """Bits of one video stimulus word: data plus valid, de, vsync, hsync and the frame mark."""
    return in_width + 5


def stream_pixel_bits(in_width: int) -> int:
    """Bits of one stream pixel word: data plus sof and eol."""
    return in_width + 2


def stream_gap_bits(in_width: int) -> int:
    """Bits of one stream gap word: idle data plus the :data:`GAP_BITS` gap count."""
    return in_width + GAP_BITS


@dataclass
class HarnessSpec:
    """Everything the harness text depends on (not the stimulus itself).

    Attributes:
        family: "video" or "stream".
        dut_top: the design's top module/entity name.
        roles: role -> the design's port name (clock and reset included).
        in_width: input data bus bits, >= 1.
        out_width: output data bus bits, >= 1.
        reset_active_high: polarity of the design's reset port.
        out_hsync_active_high / out_vsync_active_high: polarity the capture uses for output syncs.
        in_hsync_active_high / in_vsync_active_high: polarity of the input syncs (idle levels).
        depth: player memory words (video: clocks; stream: transfers), >= the words played.
        ready_depth: stream sink ready-pattern words.
    """

    family: str
    dut_top: str
    roles: dict[str, str]
    in_width: int
    out_width: int
    reset_active_high: bool = True
    out_hsync_active_high: bool = True
    out_vsync_active_high: bool = True
    in_hsync_active_high: bool = True
    in_vsync_active_high: bool = True
    depth: int = 1024
    ready_depth: int = 1024

    def __post_init__(self) -> None:
        if self.family not in ("video", "stream"):
            raise ConfigError(f"harness: family {self.family!r} is not known; use 'video' or 'stream'")
        for key in ("in_width", "out_width", "depth", "ready_depth"):
            value = getattr(self, key)
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise ConfigError(f"harness: {key} = {value!r}, expected an integer >= 1")
        if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_$]*", self.dut_top or ""):
            raise ConfigError(f"harness: design top {self.dut_top!r} is not an HDL identifier; give the module name")
        if "clock" not in self.roles:
            raise ConfigError("harness: the signal map has no 'clock' role; map it to the design's clock port")


@dataclass
class HarnessBuild:
    """What :func:`harness_sources` wrote, for the runner.

    Attributes:
        files: generated HDL files, to compile before the user's sources.
        toplevel: the simulation toplevel (:data:`TOPLEVEL`).
        language: "verilog" or "vhdl".
        spec: the harness spec the text was made from.
    """

    files: list[Path]
    toplevel: str
    language: str
    spec: HarnessSpec
    notes: list[str] = field(default_factory=list)


# ----------------------------------------------------------------------------------------------
# Port widths from source text


_V_PARAM = re.compile(r"\b(?:parameter|localparam)\b\s*(?:integer\s+)?([A-Za-z_]\w*)\s*=\s*([^,;)\n]+)")
_VHDL_PORT = re.compile(
    r"([A-Za-z_][\w\s,]*?)\s*:\s*(in|out|inout|buffer)\s+(std_u?logic_vector|unsigned|signed|std_u?logic)"
    r"\s*(\(\s*([^)]*?)\s+(downto|to)\s+([^)]*?)\s*\))?",
    re.IGNORECASE,
)
_VHDL_GENERIC = re.compile(r"([A-Za-z_]\w*)\s*:\s*(?:integer|natural|positive)\s*:=\s*([^;)\n]+)", re.IGNORECASE)


def _eval_int(expr: str, params: Mapping[str, int]) -> int | None:
    """Evaluate a small integer expression (+ - * / parentheses, parameter names); None if not possible."""
    text = expr.strip()
    for name in sorted(params, key=len, reverse=True):
        text = re.sub(rf"\b{re.escape(name)}\b", str(params[name]), text)
    if not re.fullmatch(r"[0-9+\-*/() \t]+", text):
        return None
    try:
        return int(eval(text.replace("/", "//"), {"__builtins__": {}}, {}))  # noqa: S307 - digits and operators only
    except (SyntaxError, ZeroDivisionError, ValueError):
        return None


def _strip_comments(text: str, vhdl: bool) -> str:
    if vhdl:
        return re.sub(r"--[^\n]*", "", text)
    text = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
    return re.sub(r"//[^\n]*", "", text)


def scan_port_widths(sources: Sequence[str | Path], top: str) -> dict[str, int]:
    """Read the port widths of module/entity ``top`` from HDL source text.

    Handles literal ranges and ranges written with the module's parameter/generic defaults
    (``[WIDTH-1:0]``, ``(W - 1 downto 0)``). Ports whose width cannot be worked out are left out.

    Returns:
        port name -> width in bits (1 for scalars).
    """
    for src in sources:
        path = Path(src)
        if not path.is_file():
            continue
        vhdl = path.suffix.lower() in (".vhd", ".vhdl")
        text = _strip_comments(path.read_text(errors="replace"), vhdl)
        if vhdl:
            m = re.search(rf"\bentity\s+{re.escape(top)}\s+is(.*?)\bend\b", text, re.I | re.S)
            if not m:
                continue
            body = m.group(1)
            params = {k: v for k, e in _VHDL_GENERIC.findall(body) if (v := _eval_int(e, {})) is not None}
            ports: dict[str, int] = {}
            port_part = body[re.search(r"\bport\b", body, re.I).start():] if re.search(r"\bport\b", body, re.I) else ""
            for names, _d, _t, rng, left, _dir, right in _VHDL_PORT.findall(port_part):
                width = 1
                if rng:
                    lv, rv = _eval_int(left, params), _eval_int(right, params)
                    if lv is None or rv is None:
                        continue
                    width = abs(lv - rv) + 1
                for name in re.split(r"[\s,]+", names.strip()):
                    if name and name.lower() != "port":
                        ports[name.split("(")[-1].strip()] = width
            return ports
        m = re.search(rf"\bmodule\s+{re.escape(top)}\b(.*?)\bendmodule\b", text, re.S)
        if not m:
            continue
        body = m.group(1)
        params = {}
        for name, expr in _V_PARAM.findall(body):
            value = _eval_int(expr, params)
            if value is not None:
                params[name] = value
        ports = {}
        direction: str | None = None
        width = 1
        for seg in re.split(r"[,;()]", body):
            seg = seg.strip()
            m_dir = re.match(r"(input|output|inout)\b(.*)$", seg, re.S)
            if m_dir:
                direction = m_dir.group(1)
                rest = m_dir.group(2)
                m_rng = re.search(r"\[([^\]:]+):([^\]]+)\]", rest)
                width = 1
                if m_rng:
                    lv, rv = _eval_int(m_rng.group(1), params), _eval_int(m_rng.group(2), params)
                    width = abs(lv - rv) + 1 if lv is not None and rv is not None else -1
                names = re.findall(r"[A-Za-z_][A-Za-z0-9_$]*", re.sub(r"\[[^\]]*\]", " ", rest))
                names = [n for n in names if n not in ("wire", "reg", "logic", "signed", "unsigned", "integer")]
                if names and width > 0:
                    ports[names[-1]] = width
            elif direction and re.fullmatch(r"[A-Za-z_][A-Za-z0-9_$]*", seg) and width > 0:
                ports[seg] = width  # continuation of a list: "output a, b"
            else:
                direction = None if "=" in seg or not seg else direction
        return ports
    return {}


# ----------------------------------------------------------------------------------------------
# Verilog


def _vbool(v: bool) -> str:
    return "1'b1" if v else "1'b0"


def _v_x(expr: str) -> str:
    """Verilog expression true when 1-bit ``expr`` is X or Z."""
    return f"(({expr}) !== 1'b0 && ({expr}) !== 1'b1)"


def verilog_harness(spec: HarnessSpec) -> str:
    """Return the Verilog-2001 text of ``vkit_harness`` for ``spec``.

    Ports: ``load`` (rising edge: read the plusargs and the stimulus files, open the capture
    file; raise it before releasing reset), ``clk``, ``rst`` (active high, drives the design's reset with its own polarity), and
    outputs ``done``, ``timed_out``, ``frame_pulse``, ``pix_stb``/``pix_data``/``pix_xz`` (one clock
    per captured output pixel, for a checker) and ``clocks`` (clocks since reset).
    Parameters (overridable by plusargs ``+vkit_stim=``, ``+vkit_gaps=``, ``+vkit_ready=``,
    ``+vkit_capture=``, ``+vkit_words=``, ``+vkit_ready_words=``, ``+vkit_drain=``,
    ``+vkit_timeout=``): file names, the words to play, the drain clocks and the timeout clocks.
    """
    r = spec.roles
    iw, ow = spec.in_width, spec.out_width
    conns: list[str] = [f".{r['clock']}(clk)"]
    if "reset" in r:
        conns.append(f".{r['reset']}(dut_rst)")
    video = spec.family == "video"
    for role in (_VIDEO_IN + _VIDEO_OUT) if video else (_STREAM_IN + _STREAM_OUT):
        if role in r:
            conns.append(f".{r[role]}(d_{role})")
    decl: list[str] = []
    width = {"in_data": iw, "out_data": ow}
    for role in (_VIDEO_IN + _VIDEO_OUT) if video else (_STREAM_IN + _STREAM_OUT):
        w = width.get(role, 1)
        rng = f"[{w - 1}:0] " if w > 1 or role.endswith("data") else ""
        is_in = role in (_VIDEO_IN if video else _STREAM_IN)
        decl.append(f"    {'reg ' if is_in else 'wire'} {rng}d_{role};")
    # Optional output roles that are not mapped read as constants.
    tie: list[str] = []
    defaults = {"out_valid": "1'b1", "out_vsync": _vbool(not spec.out_vsync_active_high),
                "out_hsync": _vbool(not spec.out_hsync_active_high)}
    for role, value in defaults.items():
        if video and role not in r:
            tie.append(f"    assign d_{role} = {value};")
    if video:
        load = "        if (n_words > 0) $readmemh(stim_path, mem, 0, n_words - 1);"
    else:
        load = ("        if (n_words > 0) begin\n"
                "            $readmemh(stim_path, pix_mem, 0, n_words - 1);\n"
                "            $readmemh(gaps_path, gap_mem, 0, n_words - 1);\n"
                "        end\n"
                "        $readmemh(ready_path, rdy_mem, 0, n_ready - 1);")
    head = f"""// Generated by vkit.harness: fast-path harness around {spec.dut_top} ({spec.family} family).
// Plays stimulus from memory (one word per {'clock' if video else 'transfer'}) and writes one capture
// line per output event; do not edit, regenerate instead.
`timescale 1ns/1ps
/* verilator lint_off WIDTHEXPAND */
/* verilator lint_off WIDTHTRUNC */
/* verilator lint_off UNUSEDSIGNAL */
/* verilator lint_off UNUSEDPARAM */
/* verilator lint_off BLKSEQ */
module {TOPLEVEL} #(
    parameter IW = {iw},
    parameter OW = {ow},
    parameter DEPTH = {spec.depth},
    parameter RDEPTH = {spec.ready_depth},
    parameter WORDS = {spec.depth},
    parameter RWORDS = 1,
    parameter DRAIN = 0,
    parameter TIMEOUT = 0,
    parameter EXPECT = 0,
    parameter STIM_FILE = "stim.hex",
    parameter GAPS_FILE = "gaps.hex",
    parameter READY_FILE = "ready.hex",
    parameter CAPTURE_FILE = "capture.txt"
) (
    input  wire          clk,
    input  wire          rst,
    input  wire          load,
    output reg           done,
    output reg           timed_out,
    output reg           frame_pulse,
    output reg           pix_stb,
    output reg  [OW-1:0] pix_data,
    output reg           pix_xz,
    output reg  [31:0]   clocks
);
    reg [8*1024-1:0] stim_path, gaps_path, ready_path, cap_path;
    integer n_words, n_ready, drain, timeout, n_expect, fd;
    wire dut_rst = {'rst' if spec.reset_active_high else '~rst'};
{chr(10).join(decl)}
{chr(10).join(tie)}

    {spec.dut_top} dut (
        {(',' + chr(10) + '        ').join(conns)}
    );

    initial begin
        done = 1'b0; timed_out = 1'b0; frame_pulse = 1'b0; pix_stb = 1'b0; pix_xz = 1'b0;
        pix_data = {{OW{{1'b0}}}}; clocks = 32'd0; fd = 0;
        n_words = WORDS; n_ready = RWORDS; drain = DRAIN; timeout = TIMEOUT; n_expect = EXPECT;
    end

    // Files are read when `load` rises, so a cocotb test can write them first.
    always @(posedge load) begin
        stim_path = STIM_FILE; gaps_path = GAPS_FILE; ready_path = READY_FILE; cap_path = CAPTURE_FILE;
        if ($value$plusargs("vkit_stim=%s", stim_path)) begin end
        if ($value$plusargs("vkit_gaps=%s", gaps_path)) begin end
        if ($value$plusargs("vkit_ready=%s", ready_path)) begin end
        if ($value$plusargs("vkit_capture=%s", cap_path)) begin end
        if ($value$plusargs("vkit_words=%d", n_words)) begin end
        if ($value$plusargs("vkit_ready_words=%d", n_ready)) begin end
        if ($value$plusargs("vkit_drain=%d", drain)) begin end
        if ($value$plusargs("vkit_timeout=%d", timeout)) begin end
        if ($value$plusargs("vkit_expect=%d", n_expect)) begin end
        if (n_words > DEPTH) begin
            $display("vkit: error: %0d stimulus words but the harness memory holds %0d; regenerate the harness", n_words, DEPTH);
            $finish;
        end
        fd = $fopen(cap_path, "w");
        if (fd == 0) begin
            $display("vkit: error: cannot open the capture file for writing");
            $finish;
        end
        $fwrite(fd, "# vkit capture 1 {spec.family}\\n");
{load}
    end
"""
    body = _verilog_video(spec) if video else _verilog_stream(spec)
    lint_on = "".join(f"/* verilator lint_on {w} */\n" for w in ("WIDTHEXPAND", "WIDTHTRUNC", "UNUSEDSIGNAL",
                                                                    "UNUSEDPARAM", "BLKSEQ"))
    return head + body + "endmodule\n" + lint_on


def _verilog_finish_block() -> str:
    return """
    // End of run: stimulus played out and drained, or the timeout reached.
    task finish_run;
        input is_timeout;
        begin
            if (is_timeout) $fwrite(fd, "%0d T -\\n", clocks);
            $fwrite(fd, "%0d E -\\n", clocks + 32'd1);
            $fflush(fd);
            done <= 1'b1;
            timed_out <= is_timeout;
        end
    endtask
"""


def _verilog_video(spec: HarnessSpec) -> str:
    iw = spec.in_width
    sw = video_word_bits(iw)
    idle_hs = _vbool(not spec.in_hsync_active_high)
    idle_vs = _vbool(not spec.in_vsync_active_high)
    vs_act = "d_out_vsync" if spec.out_vsync_active_high else "~d_out_vsync"
    hs_act = "d_out_hsync" if spec.out_hsync_active_high else "~d_out_hsync"
    return f"""
    // ---- player: one word per clock {{frame_mark, hsync, vsync, de, valid, data}}
    reg [{sw - 1}:0] mem [0:DEPTH-1];
    reg [31:0] addr;
    reg        playing;
    wire [{sw - 1}:0] word = mem[addr];
    always @* begin
        if (playing) begin
            d_in_hsync = word[{iw + 3}]; d_in_vsync = word[{iw + 2}];
            d_in_de = word[{iw + 1}]; d_in_valid = word[{iw}]; d_in_data = word[{iw - 1}:0];
        end else begin
            d_in_hsync = {idle_hs}; d_in_vsync = {idle_vs}; d_in_de = 1'b0; d_in_valid = 1'b0;
            d_in_data = {{IW{{1'b0}}}};
        end
    end
{_verilog_finish_block()}
    // ---- capture
    reg prev_de, prev_vs, prev_hs;
    reg c_de, c_valid, c_vs, c_hs;
    reg [31:0] tail;
    always @* begin
        c_de = (d_out_de === 1'b1);
        c_valid = (d_out_valid === 1'b1);
        c_vs = (({vs_act}) === 1'b1);
        c_hs = (({hs_act}) === 1'b1);
    end
    always @(posedge clk) begin
        pix_stb <= 1'b0;
        frame_pulse <= 1'b0;
        if (rst) begin
            addr <= 32'd0; playing <= (n_words > 0); clocks <= 32'd0; tail <= 32'd0;
            prev_de <= 1'b0; prev_vs <= 1'b0; prev_hs <= 1'b0;
        end else if (!done) begin
            clocks <= clocks + 32'd1;
            if (playing) begin
                frame_pulse <= word[{iw + 4}];
                if (addr + 32'd1 >= n_words) playing <= 1'b0;
                addr <= addr + 32'd1;
            end else begin
                tail <= tail + 32'd1;
            end
            if ({_v_x('d_out_de')}) $fwrite(fd, "%0d X out_de\\n", clocks);
            if (c_de && {_v_x('d_out_valid')}) $fwrite(fd, "%0d X out_valid\\n", clocks);
            if ({_v_x('d_out_vsync')}) $fwrite(fd, "%0d X out_vsync\\n", clocks);
            if ({_v_x('d_out_hsync')}) $fwrite(fd, "%0d X out_hsync\\n", clocks);
            if (prev_de && !c_de) $fwrite(fd, "%0d L -\\n", clocks);
            if (c_vs && !prev_vs) $fwrite(fd, "%0d F -\\n", clocks);
            if (c_hs && !prev_hs) $fwrite(fd, "%0d H -\\n", clocks);
            if (c_de && c_vs) $fwrite(fd, "%0d B -\\n", clocks);
            if (c_de && c_valid) begin
                pix_stb <= 1'b1;
                pix_data <= d_out_data;
                if (^d_out_data === 1'bx) begin
                    pix_xz <= 1'b1;
                    $fwrite(fd, "%0d P U\\n", clocks);
                end else begin
                    pix_xz <= 1'b0;
                    $fwrite(fd, "%0d P %h\\n", clocks, d_out_data);
                end
            end
            if (word[{iw + 4}] && playing) $fflush(fd);
            prev_de <= c_de; prev_vs <= c_vs; prev_hs <= c_hs;
            if (timeout > 0 && clocks + 32'd1 >= timeout) finish_run(1'b1);
            else if (!playing && tail + 32'd1 >= drain) finish_run(1'b0);
        end
    end
"""


def _verilog_stream(spec: HarnessSpec) -> str:
    iw = spec.in_width
    pw = stream_pixel_bits(iw)
    gw = stream_gap_bits(iw)
    return f"""
    // ---- source: transfers {{sof, eol, data}} with idle gaps {{idle_data, gap}}; sink ready pattern
    reg [{pw - 1}:0] pix_mem [0:DEPTH-1];
    reg [{gw - 1}:0] gap_mem [0:DEPTH-1];
    reg              rdy_mem [0:RDEPTH-1];
    reg [31:0] xi, ri, tail, npix;
    reg [{GAP_BITS - 1}:0] gap_left;
    reg        started;
    wire sending = started && !done && (xi < n_words);
    wire offer = sending && (gap_left == {GAP_BITS}'d0);
    wire [{pw - 1}:0] pword = pix_mem[xi];
    wire [{gw - 1}:0] gword = gap_mem[xi];
    always @* begin
        d_in_valid = offer;
        d_in_sof = offer & pword[{iw + 1}];
        d_in_eol = offer & pword[{iw}];
        d_in_data = offer ? pword[{iw - 1}:0] : (sending ? gword[{gw - 1}:{GAP_BITS}] : {{IW{{1'b0}}}});
        d_out_ready = started && !done && rdy_mem[ri];
    end
{_verilog_finish_block()}
    // ---- capture
    reg c_valid, c_ready, waited;
    always @* begin
        c_valid = (d_out_valid === 1'b1);
        c_ready = d_out_ready;
    end
    always @(posedge clk) begin
        pix_stb <= 1'b0;
        frame_pulse <= 1'b0;
        if (rst) begin
            xi <= 32'd0; ri <= 32'd0; clocks <= 32'd0; tail <= 32'd0; npix <= 32'd0; started <= 1'b1;
            waited <= 1'b0;
            gap_left <= (n_words > 0) ? gap_mem[0][{GAP_BITS - 1}:0] : {GAP_BITS}'d0;
        end else if (!done) begin
            clocks <= clocks + 32'd1;
            ri <= (ri + 32'd1 >= n_ready) ? 32'd0 : ri + 32'd1;
            if (offer && (d_in_ready === 1'b1)) begin
                if (pword[{iw + 1}]) frame_pulse <= 1'b1;
                if (xi == 32'd0) $fwrite(fd, "%0d I -\\n", clocks);
                xi <= xi + 32'd1;
                gap_left <= (xi + 32'd1 < n_words) ? gap_mem[xi + 32'd1][{GAP_BITS - 1}:0] : {GAP_BITS}'d0;
            end else if (sending && gap_left != {GAP_BITS}'d0) begin
                gap_left <= gap_left - {GAP_BITS}'d1;
            end
            if (!sending) tail <= tail + 32'd1;
            if ({_v_x('d_out_valid')}) $fwrite(fd, "%0d X out_valid\\n", clocks);
            if ({_v_x('d_in_ready')}) $fwrite(fd, "%0d X in_ready\\n", clocks);
            if (c_valid && !c_ready) waited <= 1'b1;
            if (c_valid && c_ready) begin
                waited <= 1'b0;
                if (waited) $fwrite(fd, "%0d K -\\n", clocks);
                if ({_v_x('d_out_sof')}) $fwrite(fd, "%0d X out_sof\\n", clocks);
                if ({_v_x('d_out_eol')}) $fwrite(fd, "%0d X out_eol\\n", clocks);
                if (d_out_sof === 1'b1) begin
                    $fwrite(fd, "%0d F -\\n", clocks);
                    $fflush(fd);
                end
                pix_stb <= 1'b1;
                pix_data <= d_out_data;
                npix <= npix + 32'd1;
                if (^d_out_data === 1'bx) begin
                    pix_xz <= 1'b1;
                    $fwrite(fd, "%0d P U\\n", clocks);
                end else begin
                    pix_xz <= 1'b0;
                    $fwrite(fd, "%0d P %h\\n", clocks, d_out_data);
                end
                if (d_out_eol === 1'b1) $fwrite(fd, "%0d L -\\n", clocks);
            end
            if (timeout > 0 && clocks + 32'd1 >= timeout) finish_run(1'b1);
            else if (!sending && (tail + 32'd1 >= drain || (n_expect > 0 && npix >= n_expect && tail >= {STREAM_TAIL}))) finish_run(1'b0);
        end
    end
"""


# ----------------------------------------------------------------------------------------------
# VHDL


def vhdl_harness(spec: HarnessSpec) -> str:
    """Return the VHDL-2008 text of entity ``vkit_harness`` for ``spec`` (video family only).

    Same ports as the Verilog harness; file names, word counts, drain and timeout are generics
    (``STIM_FILE``, ``CAPTURE_FILE``, ``WORDS``, ``DRAIN``, ``TIMEOUT``), set with GHDL's ``-g``.
    Same stimulus and capture file formats as :func:`verilog_harness`.
    """
    if spec.family != "video":
        raise ConfigError("VHDL harness: only the video family is generated for VHDL; use a Verilog harness for stream")
    r = spec.roles
    iw, ow = spec.in_width, spec.out_width
    sw = video_word_bits(iw)
    hexw = 4 * ((sw + 3) // 4)
    oh = 4 * ((ow + 3) // 4)

    def slv(w: int) -> str:
        return f"std_logic_vector({w - 1} downto 0)"

    conns = [f"{r['clock']} => clk"]
    if "reset" in r:
        conns.append(f"{r['reset']} => dut_rst")
    sigs = []
    for role in _VIDEO_IN + _VIDEO_OUT:
        typ = slv(iw) if role == "in_data" else slv(ow) if role == "out_data" else "std_logic"
        sigs.append(f"    signal d_{role} : {typ};")
        if role in r:
            conns.append(f"{r[role]} => d_{role}")
    ties = []
    if "out_valid" not in r:
        ties.append("    d_out_valid <= '1';")
    if "out_vsync" not in r:
        ties.append(f"    d_out_vsync <= '{0 if spec.out_vsync_active_high else 1}';")
    if "out_hsync" not in r:
        ties.append(f"    d_out_hsync <= '{0 if spec.out_hsync_active_high else 1}';")
    vs_on = "'1'" if spec.out_vsync_active_high else "'0'"
    hs_on = "'1'" if spec.out_hsync_active_high else "'0'"
    return f"""-- Generated by vkit.harness: fast-path harness around {spec.dut_top} (video family, VHDL-2008).
-- Plays one stimulus word per clock from memory and writes one capture line per output event.
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;
use std.textio.all;

entity {TOPLEVEL} is
    generic (
        DEPTH        : positive := {spec.depth};
        WORDS        : natural := {spec.depth};
        DRAIN        : natural := 0;
        TIMEOUT      : natural := 0;
        STIM_FILE    : string := "stim.hex";
        CAPTURE_FILE : string := "capture.txt"
    );
    port (
        clk         : in  std_logic;
        rst         : in  std_logic;
        load        : in  std_logic;
        done        : out std_logic := '0';
        timed_out   : out std_logic := '0';
        frame_pulse : out std_logic := '0';
        pix_stb     : out std_logic := '0';
        pix_data    : out {slv(ow)} := (others => '0');
        pix_xz      : out std_logic := '0';
        clocks      : out natural := 0
    );
end entity;

architecture harness of {TOPLEVEL} is
    type mem_t is array (0 to DEPTH - 1) of std_logic_vector({sw - 1} downto 0);

    impure function load_mem(path : string; n : natural) return mem_t is
        file f : text;
        variable l : line;
        variable v : std_logic_vector({hexw - 1} downto 0);
        variable m : mem_t := (others => (others => '0'));
        variable status : file_open_status;
    begin
        if n = 0 then
            return m;
        end if;
        file_open(status, f, path, read_mode);
        assert status = open_ok report "vkit: error: cannot open the stimulus file " & path severity failure;
        for i in 0 to n - 1 loop
            exit when endfile(f);
            readline(f, l);
            hread(l, v);
            m(i) := v({sw - 1} downto 0);
        end loop;
        file_close(f);
        return m;
    end function;

    signal MEM     : mem_t;
    signal dut_rst : std_logic;
    signal addr    : natural := 0;
    signal playing : boolean := false;
    signal fin     : std_logic := '0';
    signal word    : std_logic_vector({sw - 1} downto 0);
{chr(10).join(sigs)}
begin
    dut_rst <= {'rst' if spec.reset_active_high else 'not rst'};
{chr(10).join(ties)}
    word <= MEM(addr) when addr < DEPTH else (others => '0');
    d_in_hsync <= word({iw + 3}) when playing else '{0 if spec.in_hsync_active_high else 1}';
    d_in_vsync <= word({iw + 2}) when playing else '{0 if spec.in_vsync_active_high else 1}';
    d_in_de    <= word({iw + 1}) when playing else '0';
    d_in_valid <= word({iw}) when playing else '0';
    d_in_data  <= word({iw - 1} downto 0) when playing else (others => '0');
    done <= fin;

    -- The stimulus file is read when `load` rises, so a cocotb test can write it first.
    loader : process (load)
    begin
        if rising_edge(load) then
            MEM <= load_mem(STIM_FILE, WORDS);
        end if;
    end process;

    dut : entity work.{spec.dut_top}
        port map (
            {(',' + chr(10) + '            ').join(conns)}
        );

    capture : process (clk)
        file cap : text;
        variable opened : boolean := false;
        variable l : line;
        variable count, tail : natural := 0;
        variable prev_de, prev_vs, prev_hs, c_de, c_vs, c_hs, c_valid : boolean := false;
        variable padded : std_logic_vector({oh - 1} downto 0);

        procedure event(kind : string) is
        begin
            write(l, integer'image(count) & " " & kind);
            writeline(cap, l);
        end procedure;

        procedure control_x(s : std_logic; role : string) is
        begin
            if s /= '0' and s /= '1' then
                event("X " & role);
            end if;
        end procedure;
    begin
        if rising_edge(clk) then
            if not opened then
                file_open(cap, CAPTURE_FILE, write_mode);
                write(l, string'("# vkit capture 1 video"));
                writeline(cap, l);
                opened := true;
            end if;
            pix_stb <= '0';
            frame_pulse <= '0';
            if rst = '1' then
                addr <= 0; playing <= WORDS > 0; count := 0; tail := 0;
                prev_de := false; prev_vs := false; prev_hs := false;
            elsif fin = '0' then
                if playing then
                    frame_pulse <= word({iw + 4});
                    if addr + 1 >= WORDS then
                        playing <= false;
                    end if;
                    addr <= addr + 1;
                else
                    tail := tail + 1;
                end if;
                c_de := d_out_de = '1';
                c_valid := d_out_valid = '1';
                c_vs := d_out_vsync = {vs_on};
                c_hs := d_out_hsync = {hs_on};
                control_x(d_out_de, "out_de");
                control_x(d_out_valid, "out_valid");
                control_x(d_out_vsync, "out_vsync");
                control_x(d_out_hsync, "out_hsync");
                if prev_de and not c_de then event("L -"); end if;
                if c_vs and not prev_vs then event("F -"); end if;
                if c_hs and not prev_hs then event("H -"); end if;
                if c_de and c_vs then event("B -"); end if;
                if c_de and c_valid then
                    pix_stb <= '1';
                    pix_data <= d_out_data;
                    if is_x(d_out_data) then
                        pix_xz <= '1';
                        event("P U");
                    else
                        pix_xz <= '0';
                        padded := (others => '0');
                        padded({ow - 1} downto 0) := d_out_data;
                        event("P " & to_hstring(padded));
                    end if;
                end if;
                prev_de := c_de; prev_vs := c_vs; prev_hs := c_hs;
                if TIMEOUT > 0 and count + 1 >= TIMEOUT then
                    event("T -");
                    count := count + 1;
                    event("E -");
                    fin <= '1'; timed_out <= '1';
                    file_close(cap);
                elsif not playing and tail + 1 >= DRAIN then
                    count := count + 1;
                    event("E -");
                    fin <= '1';
                    file_close(cap);
                else
                    count := count + 1;
                end if;
                clocks <= count;
            end if;
        end if;
    end process;
end architecture;
"""


# ----------------------------------------------------------------------------------------------
# For the runner


def _case_get(case: Any, key: str, default: Any = None) -> Any:
    if isinstance(case, Mapping):
        return case.get(key, default)
    return getattr(case, key, default)


def spec_from_case(
    case: Any,
    dut_top: str,
    *,
    sources: Sequence[str | Path] = (),
    in_width: int | None = None,
    out_width: int | None = None,
    depth: int | None = None,
    ready_depth: int | None = None,
) -> HarnessSpec:
    """Build a :class:`HarnessSpec` from a SimCase (or a dict with the same keys).

    Widths come from the arguments, else from the source text (:func:`scan_port_widths`), else the
    input width from the pixel format.

    Raises:
        ConfigError: a width cannot be worked out (give ``in_width``/``out_width``).
    """
    from vkit.stimulus import case_timing, stimulus_words_needed

    family = str(_case_get(case, "family", "video"))
    signals = _case_get(case, "signals", {})
    roles = dict(getattr(signals, "roles", signals) or {})
    scanned = scan_port_widths(sources, dut_top) if sources else {}
    if in_width is None:
        in_width = scanned.get(roles.get("in_data", ""))
    if in_width is None:
        from vkit.tb.signals import pixel_bits

        in_width = pixel_bits(str(_case_get(case, "pixel_format", "gray8")))
    if out_width is None:
        out_width = scanned.get(roles.get("out_data", ""))
    if out_width is None:
        raise ConfigError(
            f"harness: cannot work out the width of output port {roles.get('out_data')!r} of {dut_top!r} from "
            "the sources; give out_width (bits of the output data bus)"
        )
    timing = case_timing(case) if family == "video" else None
    if depth is None:
        depth = stimulus_words_needed(case)
    pol_h = bool(getattr(timing, "hsync_active_high", True))
    pol_v = bool(getattr(timing, "vsync_active_high", True))
    return HarnessSpec(
        family=family,
        dut_top=dut_top,
        roles=roles,
        in_width=int(in_width),
        out_width=int(out_width),
        reset_active_high=bool(_case_get(case, "reset_active_high", True)),
        out_hsync_active_high=pol_h,
        out_vsync_active_high=pol_v,
        in_hsync_active_high=pol_h,
        in_vsync_active_high=pol_v,
        depth=max(1, int(depth)),
        ready_depth=max(1, int(ready_depth or _ready_depth(case))),
    )


def _ready_depth(case: Any) -> int:
    from vkit.stimulus import READY_PATTERN_WORDS

    return READY_PATTERN_WORDS


def harness_sources(
    case: Any,
    out_dir: str | Path,
    dut_top: str,
    *,
    sources: Sequence[str | Path] = (),
    language: str | None = None,
    in_width: int | None = None,
    out_width: int | None = None,
) -> HarnessBuild:
    """Write the harness HDL for ``case`` into ``out_dir`` and say how to build it.

    The runner compiles ``build.files`` before the user's sources and uses ``build.toplevel``
    (``vkit_harness``) as the simulation toplevel. The memory depth is the case's stimulus size, so
    the build depends on the case's timing, frame count and stalls as well as the signal map.

    Args:
        case: a :class:`vkit.tb.case.SimCase` (or a dict with its keys).
        out_dir: folder for the generated file(s).
        dut_top: the design's top module/entity name.
        sources: the design's HDL files (used to read port widths).
        language: "verilog" or "vhdl"; default from the sources' suffixes.
        in_width / out_width: data bus bits, when the sources cannot tell.

    Returns:
        A :class:`HarnessBuild`.
    """
    if language is None:
        suffixes = {Path(s).suffix.lower() for s in sources}
        language = "vhdl" if suffixes and suffixes <= {".vhd", ".vhdl"} else "verilog"
    if language not in ("verilog", "vhdl"):
        raise ConfigError(f"harness: language {language!r} is not known; use 'verilog' or 'vhdl'")
    spec = spec_from_case(case, dut_top, sources=sources, in_width=in_width, out_width=out_width)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    if language == "vhdl":
        path = out / f"{TOPLEVEL}.vhd"
        path.write_text(vhdl_harness(spec))
    else:
        path = out / f"{TOPLEVEL}.v"
        path.write_text(verilog_harness(spec))
    return HarnessBuild(files=[path], toplevel=TOPLEVEL, language=language, spec=spec)
