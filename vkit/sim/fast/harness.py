"""The fast-path harness as HDL text: ``vkit_harness`` plays stimulus from a file and writes a capture file.

The harness ``vkit_harness`` wraps the design under test; ``vkit_fast_top`` wraps the harness and
makes its own clock and reset, so Python never runs per clock. The generated text depends only on the
design (top name, parameter overrides, port widths, reset polarity) and the family, never on the
stimulus: one build runs any image, timing, stall pattern, seed or frame count. The HDL lives in
``vkit/sim/templates/harness*.j2``; word layouts and capture records in :mod:`vkit.sim.fast.wire`.

Verilog player: one binary word per clock (video) or per transfer (stream) read with ``$fread`` as the
run goes; the run plays until the file ends. VHDL player: video, a hex text file read into a
memory whose depth is the ``DEPTH`` generic, given at run time (GHDL elaborates at run time, so this
is not a rebuild); stream, one hex line per transfer read as the run goes. Clock index 0 is the first rising edge with reset released; on edge ``k`` the
design samples word ``k`` and the capture samples the design's outputs as they stood before that edge.
The Verilog harness writes binary capture records (``capture.bin``; text lines with
``+vkit_capture_bin=0``), the VHDL harness text (``capture.txt``); :mod:`vkit.sim.fast.capture_file`
reads both.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any, Callable

from vkit.core.errors import ConfigError
from vkit.sim.fast.wire import (
    CAPTURE_MAGIC,
    CAPTURE_ROLES,
    CAPTURE_VERSION,
    FAMILY_CODES,
    GAP_BITS,
    HARNESS,
    MAX_IN_WIDTH,
    READY_WORDS,
    STREAM_TAIL_CLOCKS,
    TOPLEVEL,
    capture_data_words,
    stream_word_bits,
    video_bit,
    video_word_bits,
    word_bytes,
)
from vkit.sim.hdltext import render

__all__ = ["HarnessSpec", "verilog_harness", "vhdl_harness"]

_IDENT = r"[A-Za-z_][A-Za-z0-9_$]*"

_VIDEO_IN = ("in_hsync", "in_vsync", "in_de", "in_valid", "in_enable", "in_data")
_VIDEO_OUT = ("out_vsync", "out_hsync", "out_de", "out_valid", "out_enable", "out_data")
_OUT_LEVEL_ROLES = ("out_de", "out_valid", "out_enable")
"""Output pins whose polarity is built into the harness text (the syncs' polarity is given at run time)."""
_STREAM_IN = ("in_valid", "in_data", "in_sof", "in_eol", "out_ready", "in_keep")
_STREAM_OUT = ("in_ready", "out_valid", "out_data", "out_sof", "out_eol", "out_keep")

_LINT = ("WIDTHEXPAND", "WIDTHTRUNC", "UNUSEDSIGNAL", "UNUSEDPARAM", "BLKSEQ", "UNDRIVEN", "MULTIDRIVEN", "INITIALDLY",
         "ZERODLY")
"""Verilator warnings switched off around the generated text (it mixes widths on purpose)."""


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
        out_active_high: polarity of the ``out_de``, ``out_valid`` and ``out_enable`` pins (left out: active
            high). The input pins' levels come with the stimulus, the output syncs' polarity at run time.
        lanes: pixels a beat; the width of the per-lane valid masks ``in_keep`` / ``out_keep`` when mapped.
    """

    family: str
    dut_top: str
    roles: dict[str, str]
    in_width: int
    out_width: int
    reset_active_high: bool = True
    parameters: dict[str, Any] = field(default_factory=dict)
    out_active_high: dict[str, bool] = field(default_factory=dict)
    lanes: int = 1

    def __post_init__(self) -> None:
        if self.family not in FAMILY_CODES:
            raise ConfigError(f"harness: family {self.family!r} is not known; use 'video' or 'stream'")
        for key in ("in_width", "out_width"):
            value = getattr(self, key)
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise ConfigError(f"harness: {key} = {value!r}, expected an integer >= 1")
        if self.in_width > MAX_IN_WIDTH:
            raise ConfigError(f"harness: input data width {self.in_width} bits is too wide for the player (max {MAX_IN_WIDTH})")
        if not re.fullmatch(_IDENT, self.dut_top or ""):
            raise ConfigError(f"harness: design top {self.dut_top!r} is not an HDL identifier; give the module name")
        if "clock" not in self.roles:
            raise ConfigError("harness: the signal map has no 'clock' role; map it to the design's clock port")
        for name in self.parameters:
            if not re.fullmatch(_IDENT, str(name)):
                raise ConfigError(f"harness: parameter name {name!r} is not an HDL identifier; give the design's parameter name")

    @property
    def keep_bits(self) -> int:
        """Bits of the per-lane valid mask the player drives (0 without ``in_keep``)."""
        return self.lanes if "in_keep" in self.roles else 0

    @property
    def video(self) -> bool:
        """True for the video family."""
        return self.family == "video"

    def out_level(self, role: str) -> bool:
        """The asserted level of output pin ``role`` (True = high)."""
        return bool(self.out_active_high.get(role, True))


# ----------------------------------------------------------------------------------------------
# Verilog


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


def _event_writer(dw: int, ow: int) -> Callable[..., str]:
    """The Verilog statement that writes one capture event: a binary record when ``cap_bin`` is set, else a text line.

    Binary record (see :mod:`vkit.sim.fast.wire`): ``clock``, ``kind | code << 8`` (kind an ASCII letter, code
    the X role index or 1 for a pixel with X/Z data), then ``dw`` data words.
    """

    def ev(kind: str, arg: str = "-", *, code: int = 0, value: str | None = None, clock: str = "clocks") -> str:
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

    return ev


def _role_widths(spec: HarnessSpec) -> dict[str, int]:
    """Bits of the harness's multi-bit signals per role (every other role is one bit)."""
    return {"in_data": spec.in_width, "out_data": spec.out_width, "in_keep": spec.lanes, "out_keep": spec.lanes}


def _verilog_ports(spec: HarnessSpec) -> tuple[list[str], list[dict[str, Any]], list[tuple[str, str]]]:
    """Instance connections, the harness's signals per role, and the tie-offs of unmapped video outputs."""
    r = spec.roles
    ins, outs = (_VIDEO_IN, _VIDEO_OUT) if spec.video else (_STREAM_IN, _STREAM_OUT)
    conns = [f".{r['clock']}(clk)"] + ([f".{r['reset']}(dut_rst)"] if "reset" in r else [])
    conns += [f".{r[role]}(d_{role})" for role in ins + outs if role in r]
    width = _role_widths(spec)
    decl = []
    for role in ins + outs:
        if role in ("in_keep", "out_keep") and role not in r:
            continue
        w = width.get(role, 1)
        wide = w > 1 or role.endswith(("data", "keep"))
        decl.append({"role": role, "is_in": role in ins, "range": f"[{w - 1}:0] " if wide else ""})
    tie = []
    if spec.video:
        ties = (("out_valid", _v_bit(spec.out_level("out_valid"))), ("out_enable", _v_bit(spec.out_level("out_enable"))),
                ("out_vsync", "~vs_on"), ("out_hsync", "~hs_on"))
        tie = [(role, value) for role, value in ties if role not in r]
    return conns, decl, tie


def _v_bit(level: bool) -> str:
    return "1'b1" if level else "1'b0"


def _word_bits(spec: HarnessSpec) -> dict[str, int]:
    """Bit positions in the stimulus word that the player reads (from :mod:`vkit.sim.fast.wire`)."""
    iw = spec.in_width
    if spec.video:
        return {flag: video_bit(flag, iw) for flag in ("valid", "de", "vsync", "hsync", "frame_mark", "enable")}
    return {"eol": iw, "sof": iw + 1, "gap_lo": iw + 2, "gap_hi": iw + 1 + GAP_BITS,
            "idle_lo": iw + 2 + GAP_BITS, "idle_hi": 2 * iw + 1 + GAP_BITS,
            "keep_lo": 2 * iw + 2 + GAP_BITS, "keep_hi": 2 * iw + 1 + GAP_BITS + spec.keep_bits}


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
    iw, ow = spec.in_width, spec.out_width
    conns, decl, tie = _verilog_ports(spec)
    params = ""
    if spec.parameters:
        items = [f".{k}({_v_value(v)})" for k, v in spec.parameters.items()]
        params = " #(\n        " + ",\n        ".join(items) + "\n    )"
    nbits = video_word_bits(iw) if spec.video else stream_word_bits(iw, spec.keep_bits)
    return render(
        "harness.v.j2", dut_top=spec.dut_top, family=spec.family, video=spec.video, iw=iw, ow=ow,
        nb=word_bytes(nbits), ready_words=READY_WORDS, harness=HARNESS, toplevel=TOPLEVEL, lint=_LINT,
        reset_active_high=spec.reset_active_high, decl=decl, tie=tie, params=params, conns=conns,
        magic=CAPTURE_MAGIC, version=CAPTURE_VERSION, family_code=FAMILY_CODES[spec.family], gap_bits=GAP_BITS,
        stream_tail=STREAM_TAIL_CLOCKS, bit=_word_bits(spec), ev=_event_writer(capture_data_words(ow), ow), vx=_v_x,
        on={role: _v_bit(spec.out_level(role)) for role in _OUT_LEVEL_ROLES},
        keep_in="in_keep" in spec.roles, keep_out="out_keep" in spec.roles, lanes=spec.lanes,
        keep_value="d_out_keep" if ow <= spec.lanes else f"{{{ow - spec.lanes}'d0, d_out_keep}}",
    )


# ----------------------------------------------------------------------------------------------
# VHDL


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


def _vhdl_ports(spec: HarnessSpec) -> tuple[list[str], list[tuple[str, str]], list[tuple[str, str]]]:
    """Port map entries, the harness's signals per role with their types, and tie-offs of unmapped outputs."""
    r = spec.roles
    conns = [f"{r['clock']} => clk"] + ([f"{r['reset']} => dut_rst"] if "reset" in r else [])
    width = _role_widths(spec)
    sigs = []
    for role in (_VIDEO_IN + _VIDEO_OUT if spec.video else _STREAM_IN + _STREAM_OUT):
        if role in ("in_keep", "out_keep") and role not in r:  # declared only where the design has the mask
            continue
        sigs.append((role, f"std_logic_vector({width[role] - 1} downto 0)" if role in width else "std_logic"))
        if role in r:
            conns.append(f"{r[role]} => d_{role}")
    ties = []
    if spec.video:
        level = {role: "'1'" if spec.out_level(role) else "'0'" for role in _OUT_LEVEL_ROLES}
        ties = [(role, value) for role, value in (("out_valid", level["out_valid"]), ("out_enable", level["out_enable"]),
                                                  ("out_vsync", "not vs_on"), ("out_hsync", "not hs_on"))
                if role not in r]
    return conns, sigs, ties


def vhdl_harness(spec: HarnessSpec) -> str:
    """Return the VHDL-2008 text of entities ``vkit_harness`` and ``vkit_fast_top`` for ``spec``.

    Same ports as the Verilog harness, and clock for clock the same run. Video: the stimulus is a hex
    text file (one word per line, the video word of :func:`verilog_harness`) read into a memory of
    ``DEPTH`` words; file names, word counts, depth, drain, timeout and sync polarity are generics
    (``STIM_FILE``, ``CAPTURE_FILE``, ``WORDS``, ``DEPTH``, ``DRAIN``, ``TIMEOUT``, ``HS_HIGH``,
    ``VS_HIGH``). Stream: one hex line per transfer (the stream word of :func:`verilog_harness`, padded to
    whole bytes), read as the run goes, and the sink's ready pattern (``READY_FILE``, ``RWORDS``) with
    ``WORDS``, ``DRAIN``, ``TIMEOUT`` and ``EXPECT``. GHDL takes generics at run time (``-gNAME=VALUE``),
    so a new stimulus needs no new build. ``vkit_fast_top`` adds ``HALF_PS`` (half clock period, ps) and
    ``RESET_CYCLES`` and makes clock, load and reset itself.
    """
    iw, ow = spec.in_width, spec.out_width
    conns, sigs, ties = _vhdl_ports(spec)
    gmap = ""
    if spec.parameters:
        gmap = ("\n        generic map (\n            "
                + ",\n            ".join(f"{k} => {_vhdl_value(v)}" for k, v in spec.parameters.items()) + "\n        )")
    common = dict(dut_top=spec.dut_top, harness=HARNESS, toplevel=TOPLEVEL, iw=iw, ow=ow, oh=4 * ((ow + 3) // 4),
                  sigs=sigs, conns=conns, gmap=gmap, reset_active_high=spec.reset_active_high, bit=_word_bits(spec),
                  version=CAPTURE_VERSION)
    if not spec.video:
        return render("harness_stream.vhd.j2", sw=8 * word_bytes(stream_word_bits(iw, spec.keep_bits)),
                      ready_words=READY_WORDS, stream_tail=STREAM_TAIL_CLOCKS, keep_in="in_keep" in spec.roles,
                      keep_out="out_keep" in spec.roles, lanes=spec.lanes, kh=4 * ((spec.lanes + 3) // 4),
                      **common)
    sw = video_word_bits(iw)
    return render("harness.vhd.j2", sw=sw, hexw=4 * ((sw + 3) // 4), ties=ties,
                  on={role: "'1'" if spec.out_level(role) else "'0'" for role in _OUT_LEVEL_ROLES}, **common)
