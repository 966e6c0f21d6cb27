"""HDL text generators for the fast path: a harness that streams stimulus from a file and writes a capture file.

The harness ``vkit_harness`` wraps the design under test; ``vkit_fast_top`` wraps the harness and
makes its own clock and reset, so Python never runs per clock. The generated text depends only on the
design (top name, parameter overrides, port widths, reset polarity) and the family, never on the
stimulus: one build runs any image, timing, stall pattern, seed or frame count.

Verilog player: one binary word per clock (video) or per transfer (stream) is read with ``$fread``
from the stimulus file as the run goes (big-endian, ``ceil(bits/8)`` bytes per word, see
:func:`video_word_bits` / :func:`stream_word_bits`); the run plays until the file ends. VHDL player
(video only): a hex text file (one word per line) read into a memory whose depth is the ``DEPTH``
generic, given at run time (GHDL elaborates at run time, so this is not a rebuild).

Video word, MSB first: ``{frame_mark, hsync, vsync, de, valid, data[IW-1:0]}``; ``frame_mark`` is 1
on the first clock of each frame and only drives the harness's ``frame_pulse``.
Stream word, MSB first: ``{idle_data[IW-1:0], gap[15:0], sof, eol, data[IW-1:0]}``: ``gap`` idle
clocks (driving ``idle_data``) before the transfer. The sink's ready pattern is a ``$readmemh`` file
of :data:`READY_WORDS` bits, repeated.

Clock index 0 is the first rising edge with reset released; on edge ``k`` the design samples word
``k`` and the capture samples the design's outputs as they stood before that edge. The Verilog
harness writes its capture as fixed-size binary records (``capture.bin``; text lines with
``+vkit_capture_bin=0``), the VHDL harness as text (``capture.txt``); both formats are described in
:mod:`vkit.sim.capture_text` and give the same Capture.

How the runner uses the fast path (build once, run every case on that build)::

    from cocotb_tools.runner import get_runner
    from vkit.sim.harness import fast_build_plan, fast_test_args

    plan = fast_build_plan("edge_core", sources, "verilog", {"ROOT_TABLE": '"/abs/edge_root_table.hex"'},
                           {"BUG_ADDR_WRAP": 1}, "video", signals, in_width=None, out_width=8)
    runner = get_runner(sim)
    runner.build(build_dir=build_dir, **plan.build_kwargs(sim))     # cache it on plan.key
    for case in cases:                                              # SimCase objects
        runner.test(build_dir=build_dir, **fast_test_args(case, sim))
        capture = Capture.load(case.capture_file)

``fast_build_plan`` writes the harness file(s) (content-addressed folder unless ``out_dir`` is given)
and returns a :class:`HarnessBuild`: ``files``, ``sources`` (compile order), ``toplevel``
(``vkit_fast_top``), ``defines``, ``build_args`` per simulator, ``key`` (a hash of the harness text
and the source files' contents, for a build cache) and ``build_kwargs(sim)`` for ``runner.build``.
``fast_test_args(case, sim)`` writes the case's stimulus beside its capture file and returns the
keyword arguments of ``runner.test``: ``hdl_toplevel``, ``test_module`` (``vkit.sim.tb.fast``),
``plusargs`` (Verilog) or ``parameters`` (VHDL generics), ``test_args``, ``extra_env``
(``VKIT_CASE``) and ``test_dir``.

The native path runs the same ``vkit_fast_top`` as a plain executable, with no cocotb in the loop
(Verilog harness; Icarus or Verilator)::

    from vkit.sim.harness import fast_build_plan, native_build, run_native

    plan = fast_build_plan(...)                                     # as above
    native_build(plan, sim, build_dir)                              # skipped when build_dir holds plan's build
    for case in cases:
        capture = run_native(case, sim, build_dir)                  # also saved to case.capture_file

``native_build_plan(plan, sim, build_dir)`` gives the commands without running them (``NativeBuild``:
``commands``, ``run``, ``key``); ``native_run_args(case)`` the plusargs and capture path of one run.
"""

from __future__ import annotations

import hashlib
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

from vkit.core.errors import ConfigError

__all__ = [
    "TOPLEVEL",
    "HARNESS",
    "GAP_BITS",
    "READY_WORDS",
    "SIMULATORS",
    "HarnessSpec",
    "HarnessBuild",
    "scan_port_widths",
    "video_word_bits",
    "stream_word_bits",
    "word_bytes",
    "verilog_harness",
    "vhdl_harness",
    "fast_build_plan",
    "fast_test_args",
    "harness_sources",
    "CAPTURE_MAGIC",
    "CAPTURE_VERSION",
    "CAPTURE_ROLES",
    "CAPTURE_BIN_NAME",
    "CAPTURE_TEXT_NAME",
    "capture_data_words",
    "capture_record_bytes",
    "capture_file_name",
    "NATIVE_SIMULATORS",
    "NativeBuild",
    "native_build_plan",
    "native_build",
    "native_run_args",
    "run_native",
]

HARNESS = "vkit_harness"
"""Name of the generated harness module/entity (ports clk, rst, load; used by exported testbenches)."""

TOPLEVEL = "vkit_fast_top"
"""Name of the self-clocked wrapper around :data:`HARNESS`: the simulation toplevel on the fast path."""

GAP_BITS = 16
"""Bits of the idle-gap count in a stream word (longest gap: 65535 clocks)."""

READY_WORDS = 65536
"""Clocks in the stream sink's ready pattern; the harness repeats it for longer runs."""

CAPTURE_MAGIC = 0x42434B56
"""First 32-bit word of a binary capture file (bytes "VKCB" in file order)."""

CAPTURE_VERSION = 1
"""Binary capture format version (second header word)."""

CAPTURE_ROLES = ("", "out_de", "out_valid", "out_vsync", "out_hsync", "in_ready", "out_sof", "out_eol")
"""Role names of the X events in a binary capture, by code (record byte 5)."""

CAPTURE_BIN_NAME = "capture.bin"
"""File name of the Verilog harness's capture inside a run folder (binary records)."""

CAPTURE_TEXT_NAME = "capture.txt"
"""File name of the VHDL harness's capture inside a run folder (text lines)."""

STREAM_TAIL = 16
"""Clocks the stream harness keeps capturing after the expected output pixel count arrived."""

SIMULATORS = ("icarus", "verilator", "ghdl")
"""Simulators :func:`fast_build_plan` gives build arguments for."""

_VIDEO_IN = ("in_hsync", "in_vsync", "in_de", "in_valid", "in_data")
_VIDEO_OUT = ("out_vsync", "out_hsync", "out_de", "out_valid", "out_data")
_STREAM_IN = ("in_valid", "in_data", "in_sof", "in_eol", "out_ready")
_STREAM_OUT = ("in_ready", "out_valid", "out_data", "out_sof", "out_eol")


def video_word_bits(in_width: int) -> int:
    """Bits of one video stimulus word: data plus valid, de, vsync, hsync and the frame mark."""
    return in_width + 5


def stream_word_bits(in_width: int) -> int:
    """Bits of one stream stimulus word: data, eol, sof, the gap count and the idle data."""
    return 2 * in_width + GAP_BITS + 2


def capture_data_words(out_width: int) -> int:
    """32-bit words of output data in one binary capture record: ``ceil(out_width / 32)``."""
    return max(1, (int(out_width) + 31) // 32)


def capture_record_bytes(out_width: int) -> int:
    """Bytes of one binary capture record: clock word, kind/code word, then the data words."""
    return 8 + 4 * capture_data_words(out_width)


def capture_file_name(language: str) -> str:
    """The capture file a harness of ``language`` writes: binary for Verilog, text for VHDL."""
    return CAPTURE_TEXT_NAME if language == "vhdl" else CAPTURE_BIN_NAME


def word_bytes(bits: int) -> int:
    """Bytes of one binary stimulus word of ``bits`` bits (``$fread`` reads whole bytes)."""
    return max(1, (bits + 7) // 8)


@dataclass
class HarnessSpec:
    """Everything the harness text depends on (never the stimulus).

    Attributes:
        family: "video" or "stream".
        dut_top: the design's top module/entity name.
        roles: role -> the design's port name (clock and reset included).
        in_width: input data bus bits, 1..58.
        out_width: output data bus bits, >= 1.
        reset_active_high: polarity of the design's reset port.
        parameters: design parameter/generic overrides, name -> value (int, or a string: a
            Verilog string literal with its own quotes, or a bare string that gets quoted).
    """

    family: str
    dut_top: str
    roles: dict[str, str]
    in_width: int
    out_width: int
    reset_active_high: bool = True
    parameters: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.family not in ("video", "stream"):
            raise ConfigError(f"harness: family {self.family!r} is not known; use 'video' or 'stream'")
        for key in ("in_width", "out_width"):
            value = getattr(self, key)
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise ConfigError(f"harness: {key} = {value!r}, expected an integer >= 1")
        if self.in_width > 58:
            raise ConfigError(f"harness: input data width {self.in_width} bits is too wide for the player (max 58)")
        if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_$]*", self.dut_top or ""):
            raise ConfigError(f"harness: design top {self.dut_top!r} is not an HDL identifier; give the module name")
        if "clock" not in self.roles:
            raise ConfigError("harness: the signal map has no 'clock' role; map it to the design's clock port")
        for name in self.parameters:
            if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_$]*", str(name)):
                raise ConfigError(f"harness: parameter name {name!r} is not an HDL identifier; give the design's parameter name")


@dataclass
class HarnessBuild:
    """What :func:`fast_build_plan` wrote and everything the build needs.

    Attributes:
        files: generated HDL files.
        toplevel: the simulation toplevel (:data:`TOPLEVEL`, self-clocked).
        language: "verilog" or "vhdl".
        spec: the harness spec the text was made from.
        sources: every file to compile, in order (harness and design).
        defines: Verilog defines for the design (``NAME -> value``; the bug variants' switches).
        build_args: simulator -> extra build arguments.
        test_args: simulator -> extra run arguments.
        key: hex digest of the harness text, defines, build arguments and source contents: equal keys
            mean an equal build.
        notes: remarks for the log.
    """

    files: list[Path]
    toplevel: str
    language: str
    spec: HarnessSpec
    sources: list[Path] = field(default_factory=list)
    defines: dict[str, Any] = field(default_factory=dict)
    build_args: dict[str, list[str]] = field(default_factory=dict)
    test_args: dict[str, list[str]] = field(default_factory=dict)
    key: str = ""
    notes: list[str] = field(default_factory=list)

    def build_kwargs(self, simulator: str) -> dict[str, Any]:
        """Keyword arguments for ``cocotb_tools.runner`` ``build()`` (add ``build_dir``).

        Raises:
            ConfigError: the simulator cannot build this language.
        """
        if simulator not in self.build_args:
            raise ConfigError(
                f"fast path: simulator {simulator!r} cannot build the {self.language} harness; "
                f"use one of {', '.join(sorted(self.build_args))}"
            )
        kw: dict[str, Any] = {"sources": [str(p) for p in self.sources], "hdl_toplevel": self.toplevel,
                              "build_args": list(self.build_args[simulator]), "always": True}
        if self.defines:
            kw["defines"] = dict(self.defines)
        if simulator == "icarus":
            kw["timescale"] = ("1ns", "1ps")
        return kw


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


def _int_overrides(overrides: Mapping[str, Any] | None) -> dict[str, int]:
    out: dict[str, int] = {}
    for name, value in (overrides or {}).items():
        if isinstance(value, bool):
            out[name] = int(value)
        elif isinstance(value, int):
            out[name] = value
        elif isinstance(value, str) and re.fullmatch(r"\s*\d+\s*", value):
            out[name] = int(value)
    return out


def _strip_comments(text: str, vhdl: bool) -> str:
    if vhdl:
        return re.sub(r"--[^\n]*", "", text)
    text = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
    return re.sub(r"//[^\n]*", "", text)


def scan_port_widths(
    sources: Sequence[str | Path], top: str, overrides: Mapping[str, Any] | None = None
) -> dict[str, int]:
    """Read the port widths of module/entity ``top`` from HDL source text.

    Handles literal ranges and ranges written with the module's parameter/generic defaults
    (``[WIDTH-1:0]``, ``(W - 1 downto 0)``); integer ``overrides`` replace the defaults. Ports whose
    width cannot be worked out are left out.

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
            params.update(_int_overrides(overrides))
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
        params.update(_int_overrides(overrides))
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


def _v_value(value: Any) -> str:
    """A parameter value as Verilog text: numbers as they are, strings as string literals."""
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, (int, float)):
        return repr(value)
    text = str(value)
    if len(text) >= 2 and text[0] == text[-1] == '"':
        return text
    if re.fullmatch(r"\s*-?\d+\s*|\s*\d*'[sS]?[bBoOdDhH][0-9a-fA-F_xXzZ?]+\s*", text):
        return text.strip()
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _vhdl_value(value: Any) -> str:
    """A generic value as VHDL text: numbers as they are, strings as string literals."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    text = str(value)
    if len(text) >= 2 and text[0] == text[-1] == '"':
        return text
    if re.fullmatch(r"\s*-?\d+\s*", text):
        return text.strip()
    return '"' + text.replace('"', '""') + '"'


_LINT = ("WIDTHEXPAND", "WIDTHTRUNC", "UNUSEDSIGNAL", "UNUSEDPARAM", "BLKSEQ", "UNDRIVEN", "MULTIDRIVEN", "INITIALDLY",
         "ZERODLY")


def _ev(kind: str, dw: int, arg: str = "-", *, code: int = 0, value: str | None = None, ow: int = 0,
        clock: str = "clocks") -> str:
    """One capture event as Verilog: a binary record when ``cap_bin`` is set, else a text line.

    Binary record (little-endian 32-bit words, as ``%u`` writes them): ``clock``, ``kind | code << 8``
    (kind an ASCII letter, code the X role index or 1 for a pixel with X/Z data), then ``dw`` data words.
    """
    if kind == "X":
        code = CAPTURE_ROLES.index(arg)
    word = ord(kind) | (code << 8)
    if value is None:
        data = f"{32 * dw}'d0"
        text = f'$fwrite(fd, "%0d {kind} {arg}\\n", {clock});'
    else:
        pad = 32 * dw - ow
        data = f"{{{pad}'d0, {value}}}" if pad else value
        text = f'$fwrite(fd, "%0d {kind} {arg}\\n", {clock}, {value});'
    return f'begin if (cap_bin) $fwrite(fd, "%u%u%u", {clock}, 32\'d{word}, {data}); else {text} end'


def verilog_harness(spec: HarnessSpec) -> str:
    """Return the Verilog-2001 text of ``vkit_harness`` and ``vkit_fast_top`` for ``spec``.

    ``vkit_harness`` ports: ``load`` (rising edge: read the plusargs, open the stimulus and capture
    files, read the first word; raise it before releasing reset), ``clk``, ``rst`` (active high,
    drives the design's reset with its own polarity), and outputs ``done``, ``timed_out``,
    ``frame_pulse``, ``pix_stb``/``pix_data``/``pix_xz`` (one clock per captured output pixel, for a
    checker) and ``clocks`` (clocks since reset). Parameters, each overridable by a plusarg:
    ``STIM_FILE`` (``+vkit_stim=``), ``READY_FILE`` (``+vkit_ready=``), ``CAPTURE_FILE``
    (``+vkit_capture=``), ``RWORDS`` (``+vkit_ready_words=``, 1..:data:`READY_WORDS`), ``DRAIN``
    (``+vkit_drain=``, clocks captured after the stimulus ends), ``TIMEOUT`` (``+vkit_timeout=``,
    clocks, 0 = none), ``EXPECT`` (``+vkit_expect=``, stream: output pixels expected), ``HS_HIGH`` /
    ``VS_HIGH`` (``+vkit_hs_high=``, ``+vkit_vs_high=``: sync polarity, 1 = active high),
    ``CAPTURE_BIN`` (``+vkit_capture_bin=``: 1 = binary capture records, the default; 0 = text lines).

    ``vkit_fast_top`` has no inputs: it toggles ``clk`` every ``+vkit_half_ns=`` ns (default 5),
    raises ``load`` a quarter period in, holds reset for ``+vkit_reset_cycles=`` rising edges
    (default 4) and shows ``done``, ``timed_out``, ``frame_pulse`` and ``clocks``; with
    ``+vkit_native=1`` it calls ``$finish`` when ``done`` rises (a run without cocotb).
    """
    r = spec.roles
    iw, ow = spec.in_width, spec.out_width
    video = spec.family == "video"
    nbits = video_word_bits(iw) if video else stream_word_bits(iw)
    nb = word_bytes(nbits)
    dw = capture_data_words(ow)
    conns: list[str] = [f".{r['clock']}(clk)"]
    if "reset" in r:
        conns.append(f".{r['reset']}(dut_rst)")
    roles_all = (_VIDEO_IN + _VIDEO_OUT) if video else (_STREAM_IN + _STREAM_OUT)
    for role in roles_all:
        if role in r:
            conns.append(f".{r[role]}(d_{role})")
    decl: list[str] = []
    width = {"in_data": iw, "out_data": ow}
    for role in roles_all:
        w = width.get(role, 1)
        rng = f"[{w - 1}:0] " if w > 1 or role.endswith("data") else ""
        is_in = role in (_VIDEO_IN if video else _STREAM_IN)
        decl.append(f"    {'reg ' if is_in else 'wire'} {rng}d_{role};")
    tie: list[str] = []
    if video:
        for role, value in (("out_valid", "1'b1"), ("out_vsync", "~vs_on"), ("out_hsync", "~hs_on")):
            if role not in r:
                tie.append(f"    assign d_{role} = {value};")
    params = ""
    if spec.parameters:
        items = [f".{k}({_v_value(v)})" for k, v in spec.parameters.items()]
        params = " #(\n        " + ",\n        ".join(items) + "\n    )"
    lint_off = "".join(f"/* verilator lint_off {w} */\n" for w in _LINT)
    lint_on = "".join(f"/* verilator lint_on {w} */\n" for w in _LINT)
    head = f"""// Generated by vkit.sim.harness: fast-path harness around {spec.dut_top} ({spec.family} family).
// Streams one stimulus word per {'clock' if video else 'transfer'} from a binary file ($fread, {nb} bytes,
// big-endian) and writes one capture line per output event; do not edit, regenerate instead.
`timescale 1ns/1ps
{lint_off}module {HARNESS} #(
    parameter IW = {iw},
    parameter OW = {ow},
    parameter NB = {nb},
    parameter RDEPTH = {READY_WORDS},
    parameter RWORDS = 1,
    parameter DRAIN = 0,
    parameter TIMEOUT = 0,
    parameter EXPECT = 0,
    parameter HS_HIGH = 1,
    parameter VS_HIGH = 1,
    parameter STIM_FILE = "stim.bin",
    parameter READY_FILE = "ready.hex",
    parameter CAPTURE_FILE = "capture.bin",
    parameter CAPTURE_BIN = 1
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
    reg [8*1024-1:0] stim_path, ready_path, cap_path;
    integer n_ready, drain, timeout, n_expect, fd, sfd, got, hs_high, vs_high, cap_bin;
    reg [8*NB-1:0] first_word, nxt;
    reg first_ok;
    wire hs_on = (hs_high != 0);
    wire vs_on = (vs_high != 0);
    wire dut_rst = {'rst' if spec.reset_active_high else '~rst'};
{chr(10).join(decl)}
{chr(10).join(tie)}

    {spec.dut_top}{params} dut (
        {(',' + chr(10) + '        ').join(conns)}
    );

    initial begin
        done = 1'b0; timed_out = 1'b0; frame_pulse = 1'b0; pix_stb = 1'b0; pix_xz = 1'b0;
        pix_data = {{OW{{1'b0}}}}; clocks = 32'd0; fd = 0; sfd = 0; first_ok = 1'b0;
        first_word = {{(8*NB){{1'b0}}}}; nxt = {{(8*NB){{1'b0}}}};
        n_ready = RWORDS; drain = DRAIN; timeout = TIMEOUT; n_expect = EXPECT;
        hs_high = HS_HIGH; vs_high = VS_HIGH; cap_bin = CAPTURE_BIN;
    end

    // Files are opened when `load` rises, so a test can write them first.
    always @(posedge load) begin
        stim_path = STIM_FILE; ready_path = READY_FILE; cap_path = CAPTURE_FILE;
        if ($value$plusargs("vkit_stim=%s", stim_path)) begin end
        if ($value$plusargs("vkit_ready=%s", ready_path)) begin end
        if ($value$plusargs("vkit_capture=%s", cap_path)) begin end
        if ($value$plusargs("vkit_ready_words=%d", n_ready)) begin end
        if ($value$plusargs("vkit_drain=%d", drain)) begin end
        if ($value$plusargs("vkit_timeout=%d", timeout)) begin end
        if ($value$plusargs("vkit_expect=%d", n_expect)) begin end
        if ($value$plusargs("vkit_hs_high=%d", hs_high)) begin end
        if ($value$plusargs("vkit_vs_high=%d", vs_high)) begin end
        if ($value$plusargs("vkit_capture_bin=%d", cap_bin)) begin end
        fd = $fopen(cap_path, "w");
        if (fd == 0) begin
            $display("vkit: error: cannot open the capture file for writing");
            $finish;
        end
        if (cap_bin) $fwrite(fd, "%u%u%u%u", 32'h{CAPTURE_MAGIC:08x}, 32'd{CAPTURE_VERSION}, 32'd{int(not video)}, 32'd{ow});
        else $fwrite(fd, "# vkit capture 1 {spec.family}\\n");
        sfd = $fopen(stim_path, "rb");
        if (sfd == 0) begin
            $display("vkit: error: cannot open the stimulus file; give +vkit_stim=<path of stim.bin>");
            {_ev("E", dw, clock="32'd0")}
            $fclose(fd);
            $finish;
        end
        got = $fread(first_word, sfd);
        first_ok = (got == NB);
{'' if video else _verilog_ready_load()}    end
"""
    body = _verilog_video(spec) if video else _verilog_stream(spec)
    return head + body + "endmodule\n\n" + _verilog_top(spec) + lint_on


def _verilog_ready_load() -> str:
    return """        if (n_ready < 1 || n_ready > RDEPTH) begin
            $display("vkit: error: %0d ready-pattern words, the harness holds 1..%0d; write a shorter pattern", n_ready, RDEPTH);
            $finish;
        end
        $readmemh(ready_path, rdy_mem, 0, n_ready - 1);
"""


def _verilog_top(spec: HarnessSpec) -> str:
    return f"""// Self-clocked wrapper: clock, load and reset made in HDL, so no Python runs per clock.
module {TOPLEVEL} (
    output wire        done,
    output wire        timed_out,
    output wire        frame_pulse,
    output wire [31:0] clocks
);
    reg clk, rst, load;
    real half_ns;
    integer reset_cycles, native;
    wire pix_stb, pix_xz;
    wire [{spec.out_width - 1}:0] pix_data;

    {HARNESS} h (
        .clk(clk), .rst(rst), .load(load), .done(done), .timed_out(timed_out), .frame_pulse(frame_pulse),
        .pix_stb(pix_stb), .pix_data(pix_data), .pix_xz(pix_xz), .clocks(clocks)
    );

    initial begin
        clk = 1'b0; rst = 1'b1; load = 1'b0;
        half_ns = 5.0; reset_cycles = 4; native = 0;
        if ($value$plusargs("vkit_half_ns=%f", half_ns)) begin end
        if ($value$plusargs("vkit_native=%d", native)) begin end
        if ($value$plusargs("vkit_reset_cycles=%d", reset_cycles)) begin end
        #(half_ns / 2.0) load = 1'b1;
        repeat (reset_cycles) @(posedge clk);
        rst <= 1'b0;
    end

    always #(half_ns) clk = ~clk;

    // Run as a plain executable (+vkit_native=1): end the simulation when the harness is done.
    always @(posedge done) if (native != 0) $finish;
endmodule
"""


def _verilog_finish_block(dw: int) -> str:
    return f"""
    // End of run: stimulus played out and drained, or the timeout reached.
    task finish_run;
        input is_timeout;
        begin
            if (is_timeout) {_ev("T", dw)}
            {_ev("E", dw, clock="clocks + 32'd1")}
            $fflush(fd);
            done <= 1'b1;
            timed_out <= is_timeout;
        end
    endtask
"""


def _verilog_video(spec: HarnessSpec) -> str:
    iw = spec.in_width
    dw = capture_data_words(spec.out_width)
    return f"""
    // ---- player: one word per clock {{frame_mark, hsync, vsync, de, valid, data}}
    reg [8*NB-1:0] word;
    reg playing;
    always @* begin
        if (playing === 1'b1) begin
            d_in_hsync = word[{iw + 3}]; d_in_vsync = word[{iw + 2}];
            d_in_de = word[{iw + 1}]; d_in_valid = word[{iw}]; d_in_data = word[{iw - 1}:0];
        end else begin
            d_in_hsync = ~hs_on; d_in_vsync = ~vs_on; d_in_de = 1'b0; d_in_valid = 1'b0;
            d_in_data = {{IW{{1'b0}}}};
        end
    end
{_verilog_finish_block(dw)}
    // ---- capture
    reg prev_de, prev_vs, prev_hs;
    reg c_de, c_valid, c_vs, c_hs;
    reg [31:0] tail;
    always @* begin
        c_de = (d_out_de === 1'b1);
        c_valid = (d_out_valid === 1'b1);
        c_vs = (d_out_vsync === vs_on);
        c_hs = (d_out_hsync === hs_on);
    end
    always @(posedge clk) begin
        pix_stb <= 1'b0;
        frame_pulse <= 1'b0;
        if (rst) begin
            word <= first_word; playing <= first_ok; clocks <= 32'd0; tail <= 32'd0;
            prev_de <= 1'b0; prev_vs <= 1'b0; prev_hs <= 1'b0;
        end else if (!done) begin
            clocks <= clocks + 32'd1;
            if (playing) begin
                frame_pulse <= word[{iw + 4}];
                got = $fread(nxt, sfd);
                if (got == NB) word <= nxt;
                else playing <= 1'b0;
            end else begin
                tail <= tail + 32'd1;
            end
            if ({_v_x('d_out_de')}) {_ev("X", dw, "out_de")}
            if (c_de && {_v_x('d_out_valid')}) {_ev("X", dw, "out_valid")}
            if ({_v_x('d_out_vsync')}) {_ev("X", dw, "out_vsync")}
            if ({_v_x('d_out_hsync')}) {_ev("X", dw, "out_hsync")}
            if (prev_de && !c_de) {_ev("L", dw)}
            if (c_vs && !prev_vs) {_ev("F", dw)}
            if (c_hs && !prev_hs) {_ev("H", dw)}
            if (c_de && c_vs) {_ev("B", dw)}
            if (c_de && c_valid) begin
                pix_stb <= 1'b1;
                pix_data <= d_out_data;
                if (^d_out_data === 1'bx) begin
                    pix_xz <= 1'b1;
                    {_ev("P", dw, "U", code=1)}
                end else begin
                    pix_xz <= 1'b0;
                    {_ev("P", dw, "%h", value="d_out_data", ow=spec.out_width)}
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
    dw = capture_data_words(spec.out_width)
    g0, g1 = iw + 2, iw + 1 + GAP_BITS
    i0, i1 = iw + 2 + GAP_BITS, 2 * iw + 1 + GAP_BITS
    return f"""
    // ---- source: transfers {{idle_data, gap, sof, eol, data}}, gap idle clocks before each; sink ready pattern
    reg              rdy_mem [0:RDEPTH-1];
    reg [8*NB-1:0] cur;
    reg [31:0] ri, tail, npix;
    // rdy_mem[ri] kept in a register: a memory read inside always @* makes Icarus re-evaluate the
    // block for the whole 64K-word pattern (a 32x24 run took seconds instead of a fraction).
    reg        rdy_cur;
    wire [31:0] ri_next = (ri + 32'd1 >= n_ready) ? 32'd0 : ri + 32'd1;
    reg [{GAP_BITS - 1}:0] gap_left;
    reg        started, have, any_xfer;
    wire sending = started && !done && have;
    wire offer = sending && (gap_left == {GAP_BITS}'d0);
    always @* begin
        d_in_valid = offer;
        d_in_sof = offer & cur[{iw + 1}];
        d_in_eol = offer & cur[{iw}];
        d_in_data = offer ? cur[{iw - 1}:0] : (sending ? cur[{i1}:{i0}] : {{IW{{1'b0}}}});
        d_out_ready = started && !done && rdy_cur;
    end
{_verilog_finish_block(dw)}
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
            ri <= 32'd0; rdy_cur <= rdy_mem[0]; clocks <= 32'd0; tail <= 32'd0; npix <= 32'd0; started <= 1'b1;
            waited <= 1'b0; any_xfer <= 1'b0;
            cur <= first_word; have <= first_ok;
            gap_left <= first_ok ? first_word[{g1}:{g0}] : {GAP_BITS}'d0;
        end else if (!done) begin
            clocks <= clocks + 32'd1;
            ri <= ri_next;
            rdy_cur <= rdy_mem[ri_next];
            if (offer && (d_in_ready === 1'b1)) begin
                if (cur[{iw + 1}]) frame_pulse <= 1'b1;
                if (!any_xfer) {_ev("I", dw)}
                any_xfer <= 1'b1;
                got = $fread(nxt, sfd);
                if (got == NB) begin
                    cur <= nxt;
                    gap_left <= nxt[{g1}:{g0}];
                end else begin
                    have <= 1'b0;
                    gap_left <= {GAP_BITS}'d0;
                end
            end else if (sending && gap_left != {GAP_BITS}'d0) begin
                gap_left <= gap_left - {GAP_BITS}'d1;
            end
            if (!sending) tail <= tail + 32'd1;
            if ({_v_x('d_out_valid')}) {_ev("X", dw, "out_valid")}
            if ({_v_x('d_in_ready')}) {_ev("X", dw, "in_ready")}
            if (c_valid && !c_ready) waited <= 1'b1;
            if (c_valid && c_ready) begin
                waited <= 1'b0;
                if (waited) {_ev("K", dw)}
                if ({_v_x('d_out_sof')}) {_ev("X", dw, "out_sof")}
                if ({_v_x('d_out_eol')}) {_ev("X", dw, "out_eol")}
                if (d_out_sof === 1'b1) begin
                    {_ev("F", dw)}
                    $fflush(fd);
                end
                pix_stb <= 1'b1;
                pix_data <= d_out_data;
                npix <= npix + 32'd1;
                if (^d_out_data === 1'bx) begin
                    pix_xz <= 1'b1;
                    {_ev("P", dw, "U", code=1)}
                end else begin
                    pix_xz <= 1'b0;
                    {_ev("P", dw, "%h", value="d_out_data", ow=spec.out_width)}
                end
                if (d_out_eol === 1'b1) {_ev("L", dw)}
            end
            if (timeout > 0 && clocks + 32'd1 >= timeout) finish_run(1'b1);
            else if (!sending && (tail + 32'd1 >= drain || (n_expect > 0 && npix >= n_expect && tail >= {STREAM_TAIL}))) finish_run(1'b0);
        end
    end
"""


# ----------------------------------------------------------------------------------------------
# VHDL


def vhdl_harness(spec: HarnessSpec) -> str:
    """Return the VHDL-2008 text of entities ``vkit_harness`` and ``vkit_fast_top`` for ``spec`` (video only).

    Same ports as the Verilog harness. The stimulus is a hex text file (one word per line, the
    video word of :func:`verilog_harness`) read into a memory of ``DEPTH`` words; file names, word
    counts, depth, drain, timeout and sync polarity are generics (``STIM_FILE``, ``CAPTURE_FILE``,
    ``WORDS``, ``DEPTH``, ``DRAIN``, ``TIMEOUT``, ``HS_HIGH``, ``VS_HIGH``) that GHDL takes at run
    time (``-gNAME=VALUE``), so a new stimulus needs no new build. ``vkit_fast_top`` adds
    ``HALF_PS`` (half clock period, ps) and ``RESET_CYCLES`` and makes clock, load and reset itself.
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
        ties.append("    d_out_vsync <= not vs_on;")
    if "out_hsync" not in r:
        ties.append("    d_out_hsync <= not hs_on;")
    vs_on = "vs_on"
    hs_on = "hs_on"
    gmap = ""
    if spec.parameters:
        gmap = ("\n        generic map (\n            "
                + ",\n            ".join(f"{k} => {_vhdl_value(v)}" for k, v in spec.parameters.items()) + "\n        )")
    return f"""-- Generated by vkit.sim.harness: fast-path harness around {spec.dut_top} (video family, VHDL-2008).
-- Plays one stimulus word per clock from memory and writes one capture line per output event.
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;
use std.textio.all;

entity {HARNESS} is
    generic (
        DEPTH        : positive := 1;
        WORDS        : natural := 0;
        DRAIN        : natural := 0;
        TIMEOUT      : natural := 0;
        HS_HIGH      : natural := 1;
        VS_HIGH      : natural := 1;
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

architecture harness of {HARNESS} is
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
    function on_level(n : natural) return std_logic is
    begin
        if n /= 0 then
            return '1';
        end if;
        return '0';
    end function;
    constant hs_on : std_logic := on_level(HS_HIGH);
    constant vs_on : std_logic := on_level(VS_HIGH);
{chr(10).join(sigs)}
begin
    dut_rst <= {'rst' if spec.reset_active_high else 'not rst'};
{chr(10).join(ties)}
    word <= MEM(addr) when addr < DEPTH else (others => '0');
    d_in_hsync <= word({iw + 3}) when playing else not hs_on;
    d_in_vsync <= word({iw + 2}) when playing else not vs_on;
    d_in_de    <= word({iw + 1}) when playing else '0';
    d_in_valid <= word({iw}) when playing else '0';
    d_in_data  <= word({iw - 1} downto 0) when playing else (others => '0');
    done <= fin;

    -- The stimulus file is read when `load` rises, so a cocotb test can write it first.
    loader : process (load)
    begin
        if rising_edge(load) then
            assert WORDS <= DEPTH report "vkit: error: WORDS = " & integer'image(WORDS) & " stimulus words but DEPTH = "
                & integer'image(DEPTH) & "; give DEPTH >= WORDS" severity failure;
            MEM <= load_mem(STIM_FILE, WORDS);
        end if;
    end process;

    dut : entity work.{spec.dut_top}{gmap}
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

-- Self-clocked wrapper: clock, load and reset made in HDL, so no Python runs per clock.
library ieee;
use ieee.std_logic_1164.all;

entity {TOPLEVEL} is
    generic (
        DEPTH        : positive := 1;
        WORDS        : natural := 0;
        DRAIN        : natural := 0;
        TIMEOUT      : natural := 0;
        HS_HIGH      : natural := 1;
        VS_HIGH      : natural := 1;
        STIM_FILE    : string := "stim.hex";
        CAPTURE_FILE : string := "capture.txt";
        HALF_PS      : positive := 5000;
        RESET_CYCLES : positive := 4
    );
    port (
        done        : out std_logic;
        timed_out   : out std_logic;
        frame_pulse : out std_logic;
        clocks      : out natural
    );
end entity;

architecture top of {TOPLEVEL} is
    constant HALF : time := HALF_PS * 1 ps;
    signal clk, load : std_logic := '0';
    signal rst : std_logic := '1';
    signal pix_stb, pix_xz : std_logic;
    signal pix_data : {slv(ow)};
begin
    clk <= not clk after HALF;

    h : entity work.{HARNESS}
        generic map (
            DEPTH => DEPTH, WORDS => WORDS, DRAIN => DRAIN, TIMEOUT => TIMEOUT, HS_HIGH => HS_HIGH,
            VS_HIGH => VS_HIGH, STIM_FILE => STIM_FILE, CAPTURE_FILE => CAPTURE_FILE
        )
        port map (
            clk => clk, rst => rst, load => load, done => done, timed_out => timed_out,
            frame_pulse => frame_pulse, pix_stb => pix_stb, pix_data => pix_data, pix_xz => pix_xz,
            clocks => clocks
        );

    reset : process
    begin
        wait for HALF / 2;
        load <= '1';
        for i in 1 to RESET_CYCLES loop
            wait until rising_edge(clk);
        end loop;
        rst <= '0';
        wait;
    end process;
end architecture;
"""


# ----------------------------------------------------------------------------------------------
# For the runner


def _case_get(case: Any, key: str, default: Any = None) -> Any:
    if isinstance(case, Mapping):
        return case.get(key, default)
    return getattr(case, key, default)


def _language_of(sources: Sequence[str | Path], language: str | None) -> str:
    if language is None:
        suffixes = {Path(s).suffix.lower() for s in sources}
        language = "vhdl" if suffixes and suffixes <= {".vhd", ".vhdl"} else "verilog"
    if language not in ("verilog", "vhdl"):
        raise ConfigError(f"harness: language {language!r} is not known; use 'verilog' or 'vhdl'")
    return language


def _verilator_args() -> list[str]:
    # --timing runs the harness's own clock; g++ 12 needs C++20 for Verilator's coroutines.
    return ["--timing", "-CFLAGS", "-std=gnu++20", "-O3", "-Wno-fatal", "-Wno-lint", "-Wno-style"]


def fast_build_plan(
    dut_top: str,
    sources: Sequence[str | Path],
    language: str | None,
    parameters: Mapping[str, Any] | None,
    defines: Mapping[str, Any] | None,
    family: str,
    signals: Mapping[str, str],
    in_width: int | None = None,
    out_width: int | None = None,
    *,
    out_dir: str | Path | None = None,
    reset_active_high: bool = True,
    pixel_format: str | None = None,
) -> HarnessBuild:
    """Write the fast-path harness for a design and describe the one build every case runs on.

    The result depends only on the arguments (never on a stimulus), so the runner builds once per
    design variant and simulator, keyed on ``HarnessBuild.key``.

    Args:
        dut_top: the design's top module/entity.
        sources: the design's HDL files in compile order (absolute paths are safest).
        language: "verilog" or "vhdl"; None = from the sources' suffixes.
        parameters: design parameter/generic overrides (``{"ROOT_TABLE": '"/abs/t.hex"', "HEIGHT": 24}``),
            applied in the harness's instance of the design.
        defines: Verilog defines for the build (``{"BUG_ADDR_WRAP": 1}``), or None.
        family: "video" or "stream".
        signals: role -> the design's port name (clock, reset, in_*, out_*).
        in_width / out_width: data bus bits; None = read from the sources (with ``parameters``),
            else the input from ``pixel_format``.
        out_dir: folder for the harness file(s); None = a folder named after the content hash
            under the system temp folder.
        reset_active_high: polarity of the design's reset.
        pixel_format: "gray8" or "rgb888", only used when ``in_width`` cannot be read.

    Returns:
        A :class:`HarnessBuild`.

    Raises:
        ConfigError: a width cannot be worked out, or a bad family/language/name.
    """
    language = _language_of(sources, language)
    params = dict(parameters or {})
    roles = dict(getattr(signals, "roles", signals) or {})
    srcs = [Path(s) for s in sources]
    for src in srcs:
        if not src.is_file():
            raise ConfigError(f"fast path: design source {str(src)!r} does not exist; give the design's HDL files")
    scanned = scan_port_widths(srcs, dut_top, params)
    if in_width is None:
        in_width = scanned.get(roles.get("in_data", ""))
    if in_width is None and pixel_format:
        from vkit.sim.signals import pixel_bits

        in_width = pixel_bits(pixel_format)
    if in_width is None:
        raise ConfigError(
            f"harness: cannot work out the width of input port {roles.get('in_data')!r} of {dut_top!r} from the "
            "sources; give in_width (bits of the input data bus)"
        )
    if out_width is None:
        out_width = scanned.get(roles.get("out_data", ""))
    if out_width is None:
        raise ConfigError(
            f"harness: cannot work out the width of output port {roles.get('out_data')!r} of {dut_top!r} from "
            "the sources; give out_width (bits of the output data bus)"
        )
    spec = HarnessSpec(family=family, dut_top=dut_top, roles=roles, in_width=int(in_width), out_width=int(out_width),
                       reset_active_high=bool(reset_active_high), parameters=params)
    text = vhdl_harness(spec) if language == "vhdl" else verilog_harness(spec)
    defs = dict(defines or {})
    if language == "vhdl":
        if defs:
            raise ConfigError(f"fast path: defines {sorted(defs)} apply to Verilog; VHDL designs take generics (parameters)")
        build_args = {"ghdl": ["--std=08"]}
        test_args = {"ghdl": ["--std=08"]}
    else:
        build_args = {"icarus": [], "verilator": _verilator_args()}
        test_args = {"icarus": [], "verilator": []}
    h = hashlib.sha256(text.encode())
    h.update(repr(sorted((k, str(v)) for k, v in defs.items())).encode())
    h.update(repr(sorted(build_args.items())).encode())
    for src in srcs:
        h.update(str(src.resolve()).encode() + b"\0" + src.read_bytes())
    key = h.hexdigest()
    out = Path(out_dir) if out_dir is not None else Path(tempfile.gettempdir()) / "vkit_harness" / key[:16]
    out.mkdir(parents=True, exist_ok=True)
    path = out / (f"{HARNESS}.vhd" if language == "vhdl" else f"{HARNESS}.v")
    if not path.is_file() or path.read_text() != text:
        tmp = path.with_suffix(path.suffix + f".{id(text)}.tmp")
        tmp.write_text(text)
        tmp.replace(path)
    files = [path]
    ordered = [*srcs, path] if language == "vhdl" else [path, *srcs]
    return HarnessBuild(files=files, toplevel=TOPLEVEL, language=language, spec=spec, sources=ordered,
                        defines=defs, build_args=build_args, test_args=test_args, key=key)


def fast_test_args(case: Any, simulator: str, *, in_width: int | None = None) -> dict[str, Any]:
    """Write ``case``'s stimulus (once) beside its capture file and return ``runner.test`` keyword arguments.

    Args:
        case: a :class:`vkit.sim.case.SimCase`; its ``capture_file`` decides where files go.
        simulator: "icarus", "verilator" (Verilog harness) or "ghdl" (VHDL harness).
        in_width: input data bus bits when it differs from the pixel format's bits.

    Returns:
        ``dict(hdl_toplevel, hdl_toplevel_lang, test_module, plusargs, parameters, test_args, extra_env,
        test_dir)``;
        pass it to ``runner.test(build_dir=..., **args)``. ``test_dir`` is the case's run folder
        (None for GHDL, which must run in the build folder; every path passed is absolute).
    """
    from vkit.sim.stimulus import fast_run_dir, prepare_fast_run
    from vkit.sim.case import CASE_ENV

    if simulator not in SIMULATORS:
        raise ConfigError(f"fast path: simulator {simulator!r} is not supported; use one of {', '.join(SIMULATORS)}")
    language = "vhdl" if simulator == "ghdl" else "verilog"
    stim = prepare_fast_run(case, in_width, language=language)
    run_dir = fast_run_dir(case)
    capture_txt = run_dir / capture_file_name(language)
    case_json = _case_json(case, run_dir / "case.json")
    period = float(_case_get(case, "clock_period_ns", 10.0))
    reset_cycles = int(_case_get(case, "reset_cycles", 4))
    plusargs: list[str] = []
    parameters: dict[str, Any] = {}
    if language == "vhdl":
        parameters = stim.generics(capture_txt)
        parameters.update(HALF_PS=max(1, int(round(period * 500))), RESET_CYCLES=reset_cycles)
    else:
        plusargs = stim.plusargs(capture_txt) + [f"+vkit_half_ns={period / 2:.6f}", f"+vkit_reset_cycles={reset_cycles}"]
    return {
        "hdl_toplevel": TOPLEVEL,
        # A runner object that did not run the build itself needs the language (cocotb_tools.runner).
        "hdl_toplevel_lang": language,
        "test_module": "vkit.sim.tb.fast",
        "plusargs": plusargs,
        "parameters": parameters,
        "test_args": ["--std=08"] if simulator == "ghdl" else [],
        "extra_env": {CASE_ENV: str(case_json)},
        # GHDL (mcode) finds its work library only in the build folder, so it runs there (test_dir None).
        "test_dir": None if simulator == "ghdl" else str(run_dir),
    }


def _case_json(case: Any, path: Path) -> Path:
    if hasattr(case, "to_json"):
        return case.to_json(path)
    import json

    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(dict(case), indent=2, sort_keys=True) + "\n")
    return path


def harness_sources(
    case: Any,
    out_dir: str | Path,
    dut_top: str,
    *,
    sources: Sequence[str | Path] = (),
    language: str | None = None,
    in_width: int | None = None,
    out_width: int | None = None,
    parameters: Mapping[str, Any] | None = None,
    defines: Mapping[str, Any] | None = None,
) -> HarnessBuild:
    """:func:`fast_build_plan` with the family, signals, reset polarity and pixel format taken from ``case``.

    Args:
        case: a :class:`vkit.sim.case.SimCase` (or a dict with its keys); only its design-side fields
            are used, so every case of the same design gives the same build.
        out_dir: folder for the generated file(s).
        dut_top: the design's top module/entity name.
        sources: the design's HDL files.
        language: "verilog" or "vhdl"; default from the sources' suffixes.
        in_width / out_width: data bus bits, when the sources cannot tell.
        parameters: design parameter/generic overrides (see :func:`fast_build_plan`).
        defines: Verilog defines for the build.
    """
    signals = _case_get(case, "signals", {})
    return fast_build_plan(
        dut_top, sources, language, parameters, defines, str(_case_get(case, "family", "video")), signals,
        in_width, out_width, out_dir=out_dir, reset_active_high=bool(_case_get(case, "reset_active_high", True)),
        pixel_format=str(_case_get(case, "pixel_format", "gray8")),
    )


# ----------------------------------------------------------------------------------------------
# Native runs: vkit_fast_top as a plain executable, no cocotb in the loop

NATIVE_SIMULATORS = ("icarus", "verilator")
"""Simulators :func:`native_build_plan` builds a plain executable with (Verilog harness)."""

_NATIVE_INFO = "vkit_native.json"


@dataclass
class NativeBuild:
    """The commands that build ``vkit_fast_top`` as a plain executable, and the command that runs it.

    Attributes:
        simulator: "icarus" or "verilator".
        build_dir: the folder the build writes into.
        commands: argument lists run in ``build_dir`` in order (each one a subprocess).
        run: the argument list that runs one case (add the plusargs of :func:`native_run_args`).
        key: the harness build's key plus the simulator: equal keys mean an equal executable.
    """

    simulator: str
    build_dir: Path
    commands: list[list[str]]
    run: list[str]
    key: str


def native_build_plan(plan: HarnessBuild, simulator: str, build_dir: str | Path) -> NativeBuild:
    """The build of ``plan``'s harness and design as a plain executable (``iverilog``/``vvp`` or ``verilator --binary``).

    Args:
        plan: from :func:`fast_build_plan` (Verilog harness).
        simulator: "icarus" or "verilator".
        build_dir: folder for the build products (absolute paths are used throughout).

    Raises:
        ConfigError: a VHDL harness or a simulator without a native build here.
    """
    if plan.language != "verilog" or simulator not in NATIVE_SIMULATORS:
        raise ConfigError(
            f"native path: {simulator!r} with a {plan.language} harness has no native build; use icarus or verilator "
            "with a Verilog design, or path = \"fast\""
        )
    out = Path(build_dir).resolve()
    srcs = [str(Path(p).resolve()) for p in plan.sources]
    defs = [f"-D{k}" if v is None or v == "" else f"-D{k}={v}" for k, v in plan.defines.items()]
    if simulator == "icarus":
        vvp = out / f"{TOPLEVEL}.vvp"
        commands = [["iverilog", "-g2012", *defs, "-s", TOPLEVEL, "-o", str(vvp), *srcs]]
        run = ["vvp", "-n", str(vvp)]
    else:
        mdir = out / "obj_native"
        commands = [["verilator", "--binary", *_verilator_args(), "-j", "2", *defs, "--top-module", TOPLEVEL,
                     "--Mdir", str(mdir), "-o", f"V{TOPLEVEL}", *srcs]]
        run = [str(mdir / f"V{TOPLEVEL}")]
    key = hashlib.sha256(f"{plan.key}\0{simulator}\0native".encode()).hexdigest()
    return NativeBuild(simulator, out, commands, run, key)


def native_build(plan: HarnessBuild, simulator: str, build_dir: str | Path, *, always: bool = False) -> NativeBuild:
    """Run :func:`native_build_plan`'s commands unless ``build_dir`` already holds the same build; record it there.

    Raises:
        ToolError: the simulator is not installed, or a build command failed (its last output lines are given).
    """
    import json
    import subprocess

    from vkit.core.errors import ToolError
    from vkit.sim.simulators import require, subprocess_env

    nb = native_build_plan(plan, simulator, build_dir)
    info_file = nb.build_dir / _NATIVE_INFO
    if not always and info_file.is_file() and Path(nb.run[-1]).is_file():
        if json.loads(info_file.read_text()).get("key") == nb.key:
            return nb
    env = subprocess_env(require(simulator))
    nb.build_dir.mkdir(parents=True, exist_ok=True)
    for cmd in nb.commands:
        res = subprocess.run(cmd, cwd=nb.build_dir, env=env, capture_output=True, text=True)
        if res.returncode != 0:
            tail = " | ".join((res.stdout + res.stderr).strip().splitlines()[-3:])
            raise ToolError(f"native build: {cmd[0]} exited with {res.returncode}: {tail}; fix the design or its sources")
    info_file.write_text(json.dumps({"key": nb.key, "simulator": simulator, "run": nb.run}) + "\n")
    return nb


def native_run_args(case: Any, *, in_width: int | None = None) -> tuple[list[str], Path]:
    """Write ``case``'s stimulus (once) and return (plusargs for a native run, the capture file it will write)."""
    from vkit.sim.stimulus import fast_run_dir, prepare_fast_run

    stim = prepare_fast_run(case, in_width, language="verilog")
    capture = fast_run_dir(case) / CAPTURE_BIN_NAME
    period = float(_case_get(case, "clock_period_ns", 10.0))
    reset_cycles = int(_case_get(case, "reset_cycles", 4))
    plusargs = stim.plusargs(capture) + [f"+vkit_half_ns={period / 2:.6f}", f"+vkit_reset_cycles={reset_cycles}",
                                         "+vkit_native=1"]
    return plusargs, capture


def run_native(case: Any, simulator: str, build_dir: str | Path, *, in_width: int | None = None,
               timeout_s: float | None = None) -> Any:
    """Run ``case`` on the native executable in ``build_dir`` (made by :func:`native_build`); return its Capture.

    Python writes the stimulus, runs the executable once with the harness's plusargs (no cocotb),
    reads the binary capture and saves it to ``case.capture_file`` (also on a timeout, partial).

    Args:
        case: a :class:`vkit.sim.case.SimCase`.
        simulator: the simulator the build was made with ("icarus" or "verilator").
        build_dir: the folder given to :func:`native_build`.
        in_width: input data bus bits when it differs from the pixel format's bits.
        timeout_s: wall-clock limit of the run in seconds (None: none; the harness's own timeout still holds).

    Returns:
        A :class:`vkit.video.capture.Capture` with ``meta["path"] = "native"``.

    Raises:
        ConfigError: ``build_dir`` holds no native build for ``simulator``.
        ToolError: the executable failed or ran past ``timeout_s``.
    """
    import json
    import subprocess
    import time

    from vkit.core.errors import ToolError
    from vkit.run.export import read_capture
    from vkit.sim.simulators import find, subprocess_env
    from vkit.sim.stimulus import fast_run_dir, read_fast_run

    info_file = Path(build_dir) / _NATIVE_INFO
    info = json.loads(info_file.read_text()) if info_file.is_file() else {}
    if info.get("simulator") != simulator:
        raise ConfigError(f"native path: {str(build_dir)!r} holds no native {simulator} build; call "
                          "vkit.sim.harness.native_build first")
    plusargs, capture = native_run_args(case, in_width=in_width)
    run_dir = fast_run_dir(case)
    capture.unlink(missing_ok=True)
    t0 = time.perf_counter()
    try:
        res = subprocess.run([*info["run"], *plusargs], cwd=run_dir, env=subprocess_env(find(simulator)),
                             capture_output=True, text=True, timeout=timeout_s)
    except subprocess.TimeoutExpired:
        res = None
    secs = time.perf_counter() - t0
    (run_dir / "native.log").write_text("" if res is None else res.stdout + res.stderr)
    if res is not None and res.returncode != 0:
        tail = " | ".join((res.stdout + res.stderr).strip().splitlines()[-3:])
        message = f"native run: {info['run'][0]} exited with {res.returncode}: {tail}; see {run_dir / 'native.log'}"
        if capture.is_file():  # keep what was captured before the failure
            partial = read_capture(capture, case, read_fast_run(case))
            partial.meta.update(simulator=simulator, path="native", timed_out=True)
            partial.meta.setdefault("notes", []).append(message)
            partial.save(_case_get(case, "capture_file"), compress=False)
        raise ToolError(message)
    if not capture.is_file():
        raise ToolError(f"native run: no capture file after {secs:.1f} s; see {run_dir / 'native.log'}")
    cap = read_capture(capture, case, read_fast_run(case))
    if res is None:
        cap.meta["timed_out"] = True
        cap.meta.setdefault("notes", []).append(f"the native run passed its {timeout_s} s wall-clock limit; the capture is partial")
    cap.meta["simulator"] = simulator
    cap.meta["path"] = "native"
    cap.save(_case_get(case, "capture_file"), compress=False)
    return cap
