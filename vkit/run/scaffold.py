"""Drop vkit into an existing RTL repo: guess the signal map from the top level's ports and write a starter kit."""

from __future__ import annotations

import json
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

from vkit.core.errors import ConfigError
from vkit.core.validate import fail, suggest
from vkit.model.pipeline import PRESETS as SPEC_PRESETS
from vkit.run.config import load_config
from vkit.sim.hdlports import HdlDesign, Port, find_design, language_of, list_designs
from vkit.sim.ifwrap import FlatWrapper, flat_wrapper
from vkit.sim.signals import CONTROL_ROLES, FAMILY_ROLES
from vkit.core.vocab import pixel_format_name
from vkit.video.bus import LANE_COUNTS, BusLayout
from vkit.video.formats import PIXEL_FORMAT_BITS
from vkit.video.synthesis import SCAFFOLD_PATTERNS
from vkit.run.conventions import LOW_SUFFIXES, Guess, pin_polarity, reset_style, timing_parameters
from vkit.sim.simulators import INTERFACE_SIMULATORS, LANGUAGES, SIMULATORS

__all__ = [
    "RoleGuess",
    "ScaffoldResult",
    "guess_roles",
    "guess_spec",
    "scaffold",
    "parse_assignments",
    "CONFIG_NAME",
    "MAKEFILE_NAME",
]

CONFIG_NAME = "vkit.toml"
"""File name of the starter config."""

MAKEFILE_NAME = "Makefile.vkit"
"""File name of the cocotb Makefile snippet."""

# -- name vocabulary --------------------------------------------------------------------------------
# Common practice, no source: the names RTL teams give video and AXI4-Stream style ports.

_IN_PREFIX = {"in", "i", "s", "sink", "snk", "slave", "rx", "saxis", "up"}
_OUT_PREFIX = {"out", "o", "m", "src", "source", "master", "tx", "maxis", "dn"}
_IN_SUFFIX = {"in", "i"}
_OUT_SUFFIX = {"out", "o"}

_KINDS: dict[str, tuple[frozenset[str], tuple[str, ...], tuple[str, ...]]] = {
    # kind: (exact words, word prefixes, word suffixes)
    "clock": (
        frozenset({"clk", "clock", "pclk", "aclk", "ck", "pixclk", "pixelclk", "sclk", "vclk", "clkin", "pixclock"}),
        ("clk", "clock"),
        ("clk", "clock"),
    ),
    "reset": (
        frozenset({"rst", "reset", "rstn", "resetn", "arst", "arstn", "areset", "aresetn", "srst", "sreset", "nrst", "nreset", "rstb", "resetb"}),
        ("rst", "reset", "arst", "areset", "srst"),
        ("rst", "reset"),
    ),
    "ready": (frozenset({"ready", "rdy", "tready", "trdy"}), (), ("ready", "rdy")),
    "valid": (frozenset({"valid", "vld", "tvalid", "val", "dv", "dvalid", "datavalid", "pvld", "pvalid", "pixvalid", "pixvld"}), (), ("valid", "vld")),
    "sof": (frozenset({"sof", "tuser", "user", "sop", "framestart", "start", "startofframe"}), (), ("sof",)),
    "eol": (frozenset({"eol", "tlast", "last", "eop", "lineend", "endofline", "linelast"}), (), ("eol", "last")),
    # a per-lane valid mask (AXI4-Stream TKEEP); not TSTRB, which marks position bytes, not absent ones
    "keep": (frozenset({"keep", "tkeep", "lanekeep", "lanevalid", "lanesvalid", "pixkeep"}), (), ("keep",)),
    "vsync": (frozenset({"vsync", "vs", "vsyn", "vsy", "fsync", "fs", "vertsync", "verticalsync"}), ("vsync",), ("vsync", "vs")),
    "hsync": (frozenset({"hsync", "hs", "hsyn", "hsy", "lsync", "horizsync", "horizontalsync"}), ("hsync",), ("hsync", "hs")),
    "enable": (
        frozenset({"ce", "en", "ena", "enable", "clken", "clkena", "clkenable", "cken", "pixen", "pixce", "pce",
                   "clockenable", "pixelenable", "pixclken", "sampleen", "smpen", "cei", "ceo"}),
        ("clken",),
        ("clken",),
    ),
    "de": (frozenset({"de", "den", "dataen", "dataenable", "active", "activevideo", "vde", "act", "dispen", "displayen", "videoactive", "vidactive"}), (), ("de", "den")),
    "data": (
        frozenset({"data", "pixel", "pix", "px", "rgb", "tdata", "y", "luma", "d", "din", "dout", "q", "video", "vid", "gray", "grey", "pixdata", "pixeldata", "vdata", "viddata", "videodata"}),
        ("data", "pix", "rgb"),
        ("data", "pix", "pixel", "rgb"),
    ),
}
_KIND_ORDER = ("enable", "clock", "reset", "ready", "valid", "sof", "eol", "keep", "vsync", "hsync", "de", "data")
_ACTIVE_LOW_WORDS = {"rstn", "resetn", "arstn", "aresetn", "nrst", "nreset", "rstb", "resetb"}
_SCORE_WORDS = {3: "high", 2: "medium", 1: "low"}


def _words(name: str) -> list[str]:
    """Lower-case words of a port name: split at ``_``, digits boundaries kept, camelCase split."""
    text = re.sub(r"(?<=[a-z0-9])(?=[A-Z])", "_", name.strip("\\"))
    return [w for w in re.split(r"[^A-Za-z0-9]+", text.lower()) if w]


@dataclass(frozen=True)
class _Reading:
    """What a port name says: its core words, the side it names, an active-low mark."""

    core: tuple[str, ...]
    side: str | None
    active_low: bool


def _read_name(name: str) -> _Reading:
    words = _words(name)
    side: str | None = None
    low = False
    if len(words) > 1 and words[0] in _IN_PREFIX | _OUT_PREFIX:
        side = "in" if words[0] in _IN_PREFIX else "out"
        words = words[1:]
    if len(words) > 1 and words[0] == "axis":
        words = words[1:]
    if len(words) > 1 and words[-1] in _IN_SUFFIX | _OUT_SUFFIX | {"ni", "no"}:
        last = words.pop()
        side = side or ("in" if last in _IN_SUFFIX or last == "ni" else "out")
        low = last in ("ni", "no")
    if len(words) > 1 and words[-1] in LOW_SUFFIXES:
        words.pop()
        low = True
    if len(words) > 1 and words[0] == "n":
        words = words[1:]
        low = True
    joined = "".join(words)
    if joined in _ACTIVE_LOW_WORDS:
        low = True
    return _Reading(tuple(words), side, low)


def _kind_score(reading: _Reading, kind: str) -> int:
    exact, prefixes, suffixes = _KINDS[kind]
    joined = "".join(reading.core)
    if joined in exact:
        return 3
    if any(w in exact for w in reading.core):
        return 2
    if any(joined.startswith(p) for p in prefixes) or any(joined.endswith(s) for s in suffixes):
        return 1
    return 0


def _role_for(kind: str, direction: str) -> str | None:
    if direction not in ("input", "output"):
        return None
    if kind in ("clock", "reset"):
        return kind if direction == "input" else None
    if kind == "ready":
        return "in_ready" if direction == "output" else "out_ready"
    return ("in_" if direction == "input" else "out_") + kind


def _fits(kind: str, port: Port) -> bool:
    if kind in ("data", "keep"):
        return port.width is None or port.width > 1
    return port.width in (1, None)


@dataclass
class RoleGuess:
    """The guessed signal map of one top level.

    Unpacks as ``family, roles, notes = guess_roles(ports)``.

    Attributes:
        family: "video" or "stream".
        roles: role -> port name, only roles of ``family`` (see :data:`vkit.sim.signals.FAMILY_ROLES`).
        notes: one line per thing the user must look at (missing roles, ties, unused ports, widths).
        confidence: role -> "high" (the name is a usual name for the role), "medium" (one word of the
            name is), "low" (a partial match or picked as the only port left).
        reset_active_high: reset polarity read from the name (``_n``/``n``/``_b`` suffix = active low),
            None when no reset was found.
        pixel_format: the pixel format the input data width suggests (``gray8``, ``gray10``, ``rgb888``, ...).
        unmapped: ports that play no role.
        pixels_per_clock: pixels a clock the input data width suggests (a 16-bit bus: two gray8 pixels).
        reasons: role -> why that port was taken (the name words read, the direction).
    """

    family: str
    roles: dict[str, str]
    notes: list[str] = field(default_factory=list)
    confidence: dict[str, str] = field(default_factory=dict)
    reset_active_high: bool | None = None
    pixel_format: str = "gray8"
    unmapped: list[str] = field(default_factory=list)
    pixels_per_clock: int = 1
    reasons: dict[str, str] = field(default_factory=dict)

    def __iter__(self):  # type: ignore[no-untyped-def]
        return iter((self.family, self.roles, self.notes))

    @property
    def missing(self) -> list[str]:
        """Required roles of the family with no port."""
        required, _ = FAMILY_ROLES[self.family]
        return [r for r in required if r not in self.roles]


_Candidate = tuple[int, int, Port, _Reading]
"""(name score, port order, port, what its name says) of one port for one role."""
_Pick = tuple[int, Port, _Reading]
"""(name score, port, what its name says) of the port picked for a role."""
_NEUTRAL_ROLES = ("clock", "reset", "in_data", "out_data", "in_valid", "out_valid")
"""Roles both families have: they say nothing about which family a design is."""


def _role_candidates(ports: Sequence[Port]) -> dict[str, list[_Candidate]]:
    """Each role's candidate ports: a port goes to the role of its best-scoring kind that fits it."""
    candidates: dict[str, list[_Candidate]] = {}
    for order, port in enumerate(ports):
        reading = _read_name(port.name)
        scored = [(k, s) for k in _KIND_ORDER if (s := _kind_score(reading, k)) > 0 and _fits(k, port)]
        best = max((s for _, s in scored), default=0)
        for kind, s in scored:
            role = _role_for(kind, port.direction) if s == best else None
            if role is None:
                continue
            role_side = "in" if role.startswith("in_") else ("out" if role.startswith("out_") else None)
            if reading.side is not None and role_side is not None:
                # a ready's name side is the side of the interface it belongs to, like the others
                s += 1 if reading.side == role_side else -2
            candidates.setdefault(role, []).append((s, order, port, reading))
            break
    return candidates


def _pick_ports(candidates: dict[str, list[_Candidate]], notes: list[str]) -> dict[str, _Pick]:
    """The best free port per role, surest roles first; ties and side mismatches become notes."""
    chosen: dict[str, _Pick] = {}
    used: set[str] = set()
    for role in sorted(candidates, key=lambda r: -max(c[0] for c in candidates[r])):
        cands = sorted((c for c in candidates[role] if c[2].name not in used), key=lambda c: (-c[0], c[1]))
        if not cands:
            continue
        score, _, port, reading = cands[0]
        ties = [c[2].name for c in cands[1:] if c[0] == score]
        if ties:
            notes.append(f"{role}: {port.name} picked over {', '.join(ties)} (same name score); CONFIRM")
            score = min(score, 1)
        if reading.side is not None and role.startswith(("in_", "out_")) and not role.startswith(reading.side + "_"):
            notes.append(f"{role}: {port.name} is an {port.direction} but its name says side '{reading.side}'; CONFIRM")
        chosen[role] = (score, port, reading)
        used.add(port.name)
    return chosen


def _fill_data_roles(ports: Sequence[Port], chosen: dict[str, _Pick], notes: list[str]) -> None:
    """Data roles by elimination: the widest multi-bit port left of that direction."""
    used = {pick[1].name for pick in chosen.values()}
    for role, direction in (("in_data", "input"), ("out_data", "output")):
        if role in chosen:
            continue
        rest = [p for p in ports if p.direction == direction and p.name not in used and (p.width or 0) > 1]
        if rest:
            port = max(rest, key=lambda p: p.width or 0)
            chosen[role] = (0, port, _read_name(port.name))
            used.add(port.name)
            notes.append(f"{role}: {port.name} is the widest {direction} left ({port.width} bits), no name matched; CONFIRM")


def _infer_family(chosen: Mapping[str, _Pick], notes: list[str]) -> str:
    """The family whose own control roles found more ports (video on a tie or when none were found)."""

    def count(fam: str) -> int:
        req, opt = FAMILY_ROLES[fam]
        return sum(1 for r in (*req, *opt) if r in chosen and r not in _NEUTRAL_ROLES)

    video_n, stream_n = count("video"), count("stream")
    if video_n == 0 and stream_n == 0:
        notes.append("family: no sync, data-enable, ready, start-of-frame or end-of-line port found; assumed video; CONFIRM")
        return "video"
    family = "video" if video_n >= stream_n else "stream"
    notes.append(f"family: {family} (from {max(video_n, stream_n)} {family} control ports); CONFIRM")
    return family


_SAMPLE_BITS_PREFERRED = (8, 10, 12, 16, 14, 9, 11, 13, 15, 7, 6, 5, 4, 3, 2, 1)
"""Sample widths in the order a guess tries them: the common bus widths first (common practice, no source)."""


def _layout_guesses(in_width: int, out_width: int | None) -> list[tuple[str, int]]:
    """Every (pixel format, pixels a clock) whose word is ``in_width`` bits, likeliest first: common sample
    widths first, then one pixel a clock before several; an output width that the lane count does not
    divide rules that count out."""
    found = []
    for bits in _SAMPLE_BITS_PREFERRED:
        for kind in ("gray", "rgb"):
            fmt = pixel_format_name(kind, bits)
            for lanes in LANE_COUNTS:
                if PIXEL_FORMAT_BITS[fmt] * lanes == in_width and (out_width is None or out_width % lanes == 0):
                    found.append((fmt, lanes))
    return found


_YCBCR_WORDS = ("ycc", "ycbcr", "yuv", "ycrcb", "yc")
"""Words in a data port's name that say it carries Y'CbCr (common practice, no source)."""


def _ycbcr_guess(name: str, width: int) -> str | None:
    """``ycbcr422_<b>`` for a ``2b``-bit port (or ``ycbcr444_<b>`` for a ``3b``-bit one whose width is not
    even) named like Y'CbCr; None otherwise."""
    if not any(w in _YCBCR_WORDS for w in _words(name)):
        return None
    for kind, n in (("ycbcr422", 2), ("ycbcr444", 3)):
        if width % n == 0 and 8 <= width // n <= 16:
            return pixel_format_name(kind, width // n)
    return None


def _pixel_format(chosen: Mapping[str, _Pick], notes: list[str]) -> tuple[str, int]:
    """The pixel format and the pixels a clock the input data port's width suggests (a note says which and why)."""
    if "in_data" not in chosen:
        return "gray8", 1
    port = chosen["in_data"][1]
    w = port.width
    if w in (8, 24):
        return ("rgb888" if w == 24 else "gray8"), 1
    if w is None:
        notes.append(f"in_data: width of {port.name} is {port.width_expr or 'unknown'}; assumed gray8 (8 bits); CONFIRM")
        return "gray8", 1
    out = chosen.get("out_data")
    ycc = _ycbcr_guess(port.name, w)
    if ycc is not None:
        notes.append(f"in_data: {port.name} is {w} bits and its name says Y'CbCr: guessed {ycc} "
                     "(Y in the low bits, the colour differences above); CONFIRM")
        return ycc, 1
    guesses = _layout_guesses(w, out[1].width if out is not None else None)
    keep = chosen.get("in_keep")
    if keep is not None and keep[1].width:  # a mask of one bit a lane says the lane count
        guesses = sorted(guesses, key=lambda g: g[1] != keep[1].width)
        notes.append(f"in_keep: {keep[1].name} ({keep[1].width} bits) is a per-lane valid mask, one bit a lane: "
                     f"a line may end in a partly filled beat whose mask marks the lanes holding pixels; CONFIRM")
    if not guesses:
        pixel_format = "rgb888" if w > 24 else "gray8"
        notes.append(f"in_data: {port.name} is {w} bits; vkit drives {pixel_format} in its low bits; CONFIRM")
        return pixel_format, 1
    fmt, lanes = guesses[0]
    others = ", ".join(f"{f} x {n}" for f, n in guesses[1:4])
    notes.append(f"in_data: {port.name} is {w} bits: guessed {BusLayout(fmt, lanes=lanes).describe()}"
                 + (f" (it could also be {others})" if others else "") + "; CONFIRM")
    return fmt, lanes


def _lanes_for(design: HdlDesign, guess: RoleGuess, pixel_format: str) -> int:
    """Pixels a clock when the input data port holds a whole number of ``pixel_format`` pixels, else 1."""
    port = next((p for p in design.ports if p.name == guess.roles.get("in_data")), None)
    bits = PIXEL_FORMAT_BITS[pixel_format]
    if port is None or port.width is None or port.width % bits or port.width // bits not in LANE_COUNTS:
        return 1
    return port.width // bits


def guess_roles(ports: Sequence[Port], family: str | None = None) -> RoleGuess:
    """Guess which port plays which role from the usual names, directions and widths.

    Names are read word by word (``pix_clk_i`` -> pix, clk + side "in"; ``s_axis_tvalid`` -> side "in",
    tvalid; ``arst_n`` -> arst, active low). The port direction decides ``in_`` versus ``out_`` (a
    ready output is ``in_ready``, a ready input ``out_ready``); a name whose prefix or suffix says the
    other side is still accepted, with a lower confidence and a note. Control roles need 1-bit ports,
    data roles wider ones. A data role left without a named port takes the widest remaining port of
    that direction (confidence "low").

    Args:
        ports: the top level's ports (:func:`vkit.sim.hdlports.parse_ports`).
        family: "video" or "stream"; None infers it (video when syncs or data-enable are found,
            stream when ready/start-of-frame/end-of-line are found).

    Returns:
        A :class:`RoleGuess`; every guess is for the user to CONFIRM.

    Raises:
        ConfigError: ``family`` is not a known family.
    """
    if family is not None and family not in FAMILY_ROLES:
        raise ConfigError(f"family {family!r} is not known; use one of {', '.join(FAMILY_ROLES)} or leave it out to infer it")
    notes: list[str] = []
    chosen = _pick_ports(_role_candidates(ports), notes)
    _fill_data_roles(ports, chosen, notes)
    family = family or _infer_family(chosen, notes)
    required, optional = FAMILY_ROLES[family]
    picked = [(role, chosen[role]) for role in (*required, *optional) if role in chosen]
    roles = {role: port.name for role, (_, port, _) in picked}
    confidence = {role: _SCORE_WORDS.get(max(1, min(3, score)), "low") for role, (score, _, _) in picked}
    notes += [f"{role}: no port found; map it by hand" for role in required if role not in roles]
    unmapped = [p for p in ports if p.name not in roles.values()]
    notes += [f"port {p.name} ({p.direction}, {p.width if p.width is not None else p.width_expr or '?'} bits) plays "
              "no role; tie it off in a wrapper if it must be driven" for p in unmapped]
    reset_high: bool | None = None
    if "reset" in roles:
        reset_high = not chosen["reset"][2].active_low
        notes.append(f"reset: {roles['reset']} taken as active {'high' if reset_high else 'low'} from its name; CONFIRM")
    pixel_format, lanes = _pixel_format(chosen, notes)
    reasons = {role: _role_reason(role, score, port, reading) for role, (score, port, reading) in picked}
    return RoleGuess(family, roles, notes, confidence, reset_high, pixel_format, [p.name for p in unmapped],
                     pixels_per_clock=lanes, reasons=reasons)


def _role_reason(role: str, score: int, port: Port, reading: _Reading) -> str:
    """Why ``port`` was taken for ``role``: the words of its name that matched, its direction and width."""
    words = "_".join(reading.core) or port.name
    kind = role.split("_", 1)[-1]
    how = {3: f"is a usual name for {kind}", 2: f"has a word that is a usual name for {kind}",
           1: f"partly matches {kind}"}.get(min(3, score), "is the widest port left")
    side = f", name side '{reading.side}'" if reading.side else ""
    return f"'{words}' {how}; {port.direction}{side}, {port.width or '?'} bit(s)"


# -- which preset the design implements ------------------------------------------------------------

_SPEC_WORDS: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("edge", ("edge", "sobel", "gradient", "grad")),
    ("median", ("median", "med3", "despeckle")),
    ("blur", ("blur", "gauss", "gaussian", "smooth", "lowpass")),
    ("sharpen", ("sharpen", "sharp", "unsharp", "laplace")),
    ("erode", ("erode", "erosion")),
    ("dilate", ("dilate", "dilation")),
)


def guess_spec(names: Sequence[str], pixel_format: str) -> tuple[str, str]:
    """A pipeline preset for the design: from words in ``names`` (top first, then other modules and
    files), else "edge" for rgb888 input and "blur" for gray8.

    Returns:
        (preset name, the reason in a few words).
    """
    for name in names:
        low = name.lower()
        for spec, words in _SPEC_WORDS:
            for w in words:
                if w in low:
                    return spec, f"the name {name!r} contains {w!r}"
    if pixel_format == "rgb888":
        return "edge", "no filter named in the sources; edge is the preset taking rgb888"
    return "blur", "no filter named in the sources; blur is a gray8 preset"



# -- writing the starter kit ------------------------------------------------------------------------


@dataclass
class ScaffoldResult:
    """What :func:`scaffold` wrote and what it guessed.

    Attributes:
        out_dir: the folder the files went to.
        config: the starter config (``vkit.toml``).
        test_module: the cocotb test module (``test_vkit_<top>.py``).
        makefile: the cocotb Makefile snippet (``Makefile.vkit``).
        design: the parsed top level (name, language, ports, parameters).
        guess: the guessed signal map, family, reset polarity and pixel format.
        spec: the pipeline preset written into the config.
        simulators: simulators written into the config.
        notes: every line the user should read, CONFIRM items first.
        kept: files that existed and were left as they were (the config, when a kit is upgraded).
        wrapper: the plain-port wrapper written for a top with SystemVerilog interface ports, or None.
    """

    out_dir: Path
    config: Path
    test_module: Path
    makefile: Path
    design: HdlDesign
    guess: RoleGuess
    spec: str
    simulators: list[str]
    notes: list[str] = field(default_factory=list)
    kept: list[Path] = field(default_factory=list)
    wrapper: Path | None = None
    guesses: list[Guess] = field(default_factory=list)

    @property
    def files(self) -> list[Path]:
        """The files of the kit: config, test module, Makefile (and the interface wrapper when there is one)."""
        return [self.config, self.test_module, self.makefile, *([self.wrapper] if self.wrapper else [])]

    @property
    def written(self) -> list[Path]:
        """The files written (the kit's files but the kept ones)."""
        return [p for p in self.files if p not in self.kept]

    def summary(self) -> str:
        """A few lines for the terminal: the files, the signal map with confidences, the notes."""
        through = f", through {self.wrapper.name}" if self.wrapper is not None else ""
        lines = [f"vkit init: {self.design.name} ({self.design.language}, family {self.guess.family}, spec {self.spec}{through})"]
        lines += [f"  kept {p} (as you left it)" for p in self.kept]
        lines += [f"  {'rewrote' if self.kept else 'wrote'} {p}" for p in self.written]
        for role, port in self.guess.roles.items():
            why = self.guess.reasons.get(role)
            lines.append(f"  {role:10s} -> {port:20s} ({self.guess.confidence.get(role, 'low')}"
                         f"{': ' + why if why else ''})")
        for role in self.guess.missing:
            lines.append(f"  {role:10s} -> MISSING (map it by hand in {self.config.name})")
        lines += [f"  guess: {g.line()}" for g in self.guesses]
        lines += [f"  note: {n}" for n in self.notes]
        lines.append(f"  next: check the CONFIRM lines in {self.config.name}, then `vkit run {self.config.name}` "
                     f"or `make -f {self.makefile.name} SIM={self.simulators[0]}`")
        return "\n".join(lines)


def _q(text: str) -> str:
    """A TOML basic string."""
    return json.dumps(str(text), ensure_ascii=False)


def _toml_scalar(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    return _q(str(value))


def _inline_table(table: Mapping[str, Any]) -> str:
    if not table:
        return "{}"
    return "{ " + ", ".join(f"{k} = {_toml_scalar(v)}" for k, v in table.items()) + " }"


def _rel(path: Path, base: Path) -> str:
    return Path(os.path.relpath(path.resolve(), base.resolve())).as_posix()


def _template(name: str) -> str:
    return resources.files("vkit.run").joinpath("templates", name).read_text(encoding="utf-8")


def _render(text: str, values: Mapping[str, str]) -> str:
    for key, value in values.items():
        text = text.replace("{{" + key + "}}", value)
    left = re.findall(r"\{\{(\w+)\}\}", text)
    if left:
        raise ConfigError(f"template placeholder(s) {', '.join(sorted(set(left)))} have no value; this is a vkit bug, please report it")
    return text


_VIDEO_STIMULUS = """\
[stimulus]
# verification patterns, the conveyor-belt scene and frames that kill the spec's mutants (vkit strength);
# add images = ["frames/*.png"] for your own
{patterns_line}
size = [32, 24]          # [width, height] pixels of the "tiny" timing
timings = ["tiny"]       # add presets as you go: tiny64x48, vga640x480p60, hd1280x720p60, fhd1920x1080p60
frames = 2
seeds = [1]
stalls = [0, { probability = 0.1, max_length = 3 }]   # in_valid low inside data-enable
"""

_STREAM_STIMULUS = """\
[stimulus]
# verification patterns, the conveyor-belt scene and frames that kill the spec's mutants (vkit strength);
# add images = ["frames/*.png"] for your own
{patterns_line}
size = [32, 24]          # [width, height] pixels
frames = 2
seeds = [1]
gaps = [0, 0.1]                                            # source valid low
backpressure = [0, { probability = 0.2, max_length = 3 }]  # sink ready low
"""


@dataclass
class _Kit:
    """Everything the three starter files are written from."""

    name: str
    design: HdlDesign
    sources: list[Path]
    out_dir: Path
    guess: RoleGuess
    spec: str
    spec_reason: str
    simulators: list[str]
    parameters: dict[str, Any]
    defines: dict[str, Any]
    notes: list[str]
    include_dirs: list[Path] = field(default_factory=list)
    wrapper: FlatWrapper | None = None
    polarity: dict[str, bool] = field(default_factory=dict)
    timing_parameters: dict[str, str] = field(default_factory=dict)
    guesses: list[Guess] = field(default_factory=list)

    @property
    def wrapper_path(self) -> Path | None:
        """Where the interface wrapper goes (beside the config), or None without one."""
        return self.out_dir / f"{self.wrapper.name}.sv" if self.wrapper is not None else None

    @property
    def all_sources(self) -> list[Path]:
        """The user's sources, then the interface wrapper when there is one."""
        return [*self.sources, *([self.wrapper_path] if self.wrapper_path is not None else [])]


def _design_lines(kit: _Kit, ports_by_name: Mapping[str, Port]) -> list[str]:
    """The ``[designs.NAME]`` table of the starter config, guesses marked CONFIRM."""
    design, guess = kit.design, kit.guess
    lines = [
        f"[designs.{kit.name}]",
        f"top = {_q(design.name)}",
        f"sources = [{', '.join(_q(_rel(s, kit.out_dir)) for s in kit.all_sources)}]",
        _c(f"family = {_q(guess.family)}", "guessed: CONFIRM (video: syncs + data-enable; stream: valid/ready + sof/eol)"),
    ]
    data = guess.roles.get("in_data")
    data_port = ports_by_name.get(data) if data else None
    why_fmt = f"from {data} ({data_port.width if data_port and data_port.width else '?'} bits)" if data else "no input data port found"
    lines.append(_c(f"pixel_format = {_q(guess.pixel_format)}", f"guessed {why_fmt}: CONFIRM (gray8, gray10, rgb888, ...)"))
    if guess.pixels_per_clock > 1:
        layout = BusLayout(guess.pixel_format, lanes=guess.pixels_per_clock).describe()
        lines.append(_c(f"pixels_per_clock = {guess.pixels_per_clock}", f"guessed {why_fmt}: {layout}; CONFIRM"))
        lines.append(_c('lane_order = "first_low"', 'the first pixel of a clock in the low bits; "first_high" for the other order'))
    lines.append(_c(f"spec = {_q(kit.spec)}", f"guessed, {kit.spec_reason}: CONFIRM (presets: {', '.join(SPEC_PRESETS)}; or spec_file = \"my_spec.toml\")"))
    if guess.reset_active_high is not None:
        lines.append(_c(f"reset_active_high = {_toml_scalar(guess.reset_active_high)}", f"guessed from {guess.roles['reset']}: CONFIRM"))
    if kit.polarity:
        table = {role: "high" if high else "low" for role, high in kit.polarity.items()}
        lines.append(_c(f"port_polarity = {_inline_table(table)}",
                        "guessed from the active-low marks in the port names: CONFIRM"))
    lines.append("# port_polarity: pins not listed are active high; syncs not listed follow the timing's polarity")
    if kit.timing_parameters:
        lines.append(_c(f"timing_parameters = {_inline_table(kit.timing_parameters)}",
                        "guessed from the parameter names: CONFIRM (set per timing at build)"))
    lines += [
        "reset_cycles = 4",
        "clock_period_ns = 10.0",
        _c("tolerance_lsb = 0", "largest accepted |actual - expected|, LSB (0 = bit exact)"),
        _c("# latency_clocks = 46", "the latency the design declares: first output pixel clock minus first input pixel clock"),
        _c("# latency_timing = \"tiny32x24\"", "the timing latency_clocks holds for (checked there when given)"),
    ]
    if kit.parameters:
        lines.append(f"parameters = {_inline_table(kit.parameters)}")
    elif any(v is not None for v in design.parameters.values()):
        params = {k: v for k, v in design.parameters.items() if v is not None}
        lines.append(f"# parameters = {_inline_table(params)}   # defaults read from the source")
    if kit.defines:
        lines.append(f"defines = {_inline_table(kit.defines)}")
    if kit.include_dirs:
        lines.append(f"include_dirs = [{', '.join(_q(_rel(d, kit.out_dir)) for d in kit.include_dirs)}]")
    if kit.wrapper is not None:
        lines.append(_c(f"supported_simulators = [{', '.join(_q(s) for s in _interface_simulators())}]",
                        INTERFACE_SIMULATORS["icarus"].split(" (")[0]))
    return lines


def _port_lines(design_name: str, guess: RoleGuess, ports_by_name: Mapping[str, Port]) -> list[str]:
    """The ``[designs.NAME.ports]`` table: each guessed port with its confidence, missing roles commented."""
    lines = [f"[designs.{design_name}.ports]"]
    required, optional = FAMILY_ROLES[guess.family]
    for role in (*required, *optional):
        port = guess.roles.get(role)
        if port is not None:
            conf = guess.confidence.get(role, "low")
            p = ports_by_name[port]
            shape = f"{p.direction}, {p.width if p.width is not None else (p.width_expr or '?')} bit{'s' if p.width != 1 else ''}"
            lines.append(_c(f"{role} = {_q(port)}", f"guessed (confidence {conf}; {shape}): CONFIRM"))
        elif role in required:
            lines.append(_c(f"# {role} = \"\"", "MISSING: no port found; map it to the design's port"))
    if guess.unmapped:
        lines.append(f"# not mapped: {', '.join(guess.unmapped)}")
    return lines


def _config_text(kit: _Kit) -> str:
    """The starter ``vkit.toml``."""
    ports_by_name = {p.name: p for p in kit.design.ports}
    head = [
        f"# {CONFIG_NAME}: starter config written by `vkit init` for {kit.design.name}.",
        "# Lines marked CONFIRM are guesses from the port names and widths: check each against the design.",
        f"# Run: vkit run {CONFIG_NAME}        or: make -f {MAKEFILE_NAME} SIM={kit.simulators[0]}",
        "",
        "[run]",
        'out_dir = "vkit-out"',
        f"simulators = [{', '.join(_q(s) for s in kit.simulators)}]",
        _c('path = "auto"', "native harness where the simulator builds one, else fast, else clock by clock"),
        "",
    ]
    design = _design_lines(kit, ports_by_name)
    ports = _port_lines(kit.name, kit.guess, ports_by_name)
    stimulus = (_video_stimulus(kit.guess, kit.timing_parameters) if kit.guess.family == "video"
                else _stream_stimulus(kit.guess)).replace(
        "{patterns_line}", _patterns_line())
    return "\n".join([*head, *design, "", *ports, "", stimulus])


_NO_STALLS = "stalls = [0]                       # no in_valid port: the design cannot take a stall\n"
_ENABLES = ("enables = [{ every = 2 }, { duty = 0.5, max_gap = 3 }]   # in_enable: one clock in two, and random\n")


def _stream_stimulus(guess: RoleGuess) -> str:
    """The stream ``[stimulus]``; with per-lane valid masks a second frame, one pixel narrower, whose lines end
    in a partly filled beat whatever the lanes (31 is a multiple of no lane count from 2 to 30; at widths that
    fill every beat the masks are never read)."""
    if "in_keep" not in guess.roles:
        return _STREAM_STIMULUS
    line = ('timings = [{ name = "tiny32x24", h_active = 32, h_front_porch = 2, h_sync = 3, h_back_porch = 3, '
            'v_active = 24, v_front_porch = 1, v_sync = 1, v_back_porch = 1 }, { name = "tiny31x24", h_active = 31, '
            'h_front_porch = 2, h_sync = 3, h_back_porch = 3, v_active = 24, v_front_porch = 1, v_sync = 1, '
            'v_back_porch = 1 }]\n# two line lengths: at 31 pixels the last beat of a line is partly filled and '
            'in_keep / out_keep mark its lanes\n')
    return _STREAM_STIMULUS.replace("size = [32, 24]          # [width, height] pixels\n", line)


_TWO_TIMINGS = ('timings = ["tiny", "tiny64x48"]   # two line lengths: parameters follow the timing '
                '(timing_parameters); add presets as you go\n')


def _video_stimulus(guess: RoleGuess, timing_parameters: Mapping[str, str] | None = None) -> str:
    """The video ``[stimulus]``: stalls only for a design with a pixel-valid input; enable patterns for a
    design with a clock-enable input; two frame sizes for a design sized by its timing, so a size taken
    from one timing instead of the parameter shows."""
    text = _VIDEO_STIMULUS
    if timing_parameters:
        text = re.sub(r"timings = .*\n", _TWO_TIMINGS, text)
    if "in_valid" not in guess.roles:
        text = re.sub(r"stalls = .*\n", _NO_STALLS, text)
    if "in_enable" in guess.roles:
        text += _ENABLES
    return text


def _flow_guesses(guess: RoleGuess) -> list[Guess]:
    """Which stall and enable cases the starter stimulus holds, and why."""
    if guess.family != "video":
        return []
    out = [Guess("stall cases written", "in_valid is mapped") if "in_valid" in guess.roles else
           Guess("no stall cases", "no in_valid port: a stall would be data the design takes")]
    if "in_enable" in guess.roles:
        out.append(Guess("enable patterns every 2nd clock and random (duty 0.5, gaps <= 3)",
                         f"{guess.roles['in_enable']} is a clock enable: every raster sample waits for it"))
    return out


def _patterns_line(items: tuple[str, ...] = SCAFFOLD_PATTERNS) -> str:
    """``patterns = [...]`` for ``name[:seed]`` items, seeds of one name gathered into one table."""
    seeds: dict[str, list[int]] = {}
    for item in items:
        name, _, seed = item.partition(":")
        seeds.setdefault(name, [])
        if seed:
            seeds[name].append(int(seed))
    parts = [f'{{ name = "{n}", seeds = [{", ".join(map(str, s))}] }}' if s else f'"{n}"' for n, s in seeds.items()]
    return f"patterns = [{', '.join(parts)}]"


def _c(code: str, comment: str) -> str:
    """A config line with its comment in a column."""
    return f"{code:34s} # {comment}"


def _makefile_text(design_name: str, language: str, test_module: str, default_sim: str) -> str:
    """``Makefile.vkit``: cocotb's flow with every build input read from the config at make time."""
    return _render(
        _template("Makefile.vkit.tmpl"),
        {
            "design": design_name,
            "config_name": CONFIG_NAME,
            "test_module": test_module,
            "default_sim": default_sim,
            "ghdl_hint": ", SIM=ghdl" if language == "vhdl" else "",
        },
    )


def _test_module_text(design_name: str, design: HdlDesign, default_sim: str) -> str:
    return _render(
        _template("test_vkit.py.tmpl"),
        {"top": design.name, "design": design_name, "config_name": CONFIG_NAME, "default_sim": default_sim},
    )


def _read_top(top: str, sources: list[Path], parameters: Mapping[str, Any], defines: Mapping[str, Any],
              include_dirs: Sequence[Path] = ()) -> tuple[HdlDesign, list[HdlDesign]]:
    """The top level and every design in the sources, which must all be in one language."""
    values = {k: v for k, v in parameters.items() if isinstance(v, (int, str)) and not isinstance(v, bool)}
    texts = {k: str(v) for k, v in defines.items()}
    design = find_design(sources, top, parameters=values, defines=texts, include_dirs=include_dirs)
    all_designs = list_designs(sources, parameters=values, defines=texts, include_dirs=include_dirs)
    languages = {d.language for d in all_designs} | {design.language} | {language_of(p) for p in sources}
    if len(languages) > 1:
        raise ConfigError(
            f"vkit init: sources mix {' and '.join(sorted(languages))}; vkit builds one language per design, "
            "wrap the design in one language or list one language's files"
        )
    return design, all_designs


def _interface_simulators() -> list[str]:
    """The simulators that take a top with SystemVerilog interface ports (behind the wrapper)."""
    return [s for s, why in INTERFACE_SIMULATORS.items() if not why]


def _wrap_interfaces(design: HdlDesign, notes: list[str]) -> tuple[HdlDesign, FlatWrapper | None]:
    """The design vkit drives: ``design`` itself, or its plain-port wrapper when its top has interface ports."""
    if not design.interface_ports:
        return design, None
    wrapper = flat_wrapper(design)
    ports = ", ".join(f"{p.name} ({p.width_expr})" for p in design.interface_ports)
    notes.append(f"interface ports {ports}: {wrapper.name}.sv wraps {design.name} and shows each modport signal as "
                 f"a plain port <port>_<signal>; the config's top is {wrapper.name}")
    refused = "; ".join(f"{s}: {why}" for s, why in INTERFACE_SIMULATORS.items() if why)
    notes.append(f"simulators: {', '.join(_interface_simulators())} only (supported_simulators in the config); {refused}")
    if wrapper.skipped_parameters:
        notes.append(f"parameters {', '.join(wrapper.skipped_parameters)} are not integers; {wrapper.name}.sv keeps "
                     f"{design.name}'s defaults for them; edit the wrapper to pass them on")
    return wrapper.design, wrapper


def _simulators_for(language: str, simulators: Sequence[str] | None, interfaces: bool = False) -> list[str]:
    """The simulators to write into the config: as given (each must compile ``language``, and take
    interface ports when the top has them), else all that do."""
    able = [s for s in SIMULATORS if language in LANGUAGES[s] and (not interfaces or s in _interface_simulators())]
    if simulators is None:
        return [s for s in ("icarus", "verilator", "ghdl") if s in able]
    for s in simulators:
        if s not in SIMULATORS:
            raise fail("vkit init", "simulators", s, "not a simulator vkit drives", suggest(s, SIMULATORS))
        if interfaces and INTERFACE_SIMULATORS.get(s):
            raise ConfigError(f"vkit init: {s} cannot take this top ({INTERFACE_SIMULATORS[s]}); pick {', '.join(able)}")
        if s not in able:
            raise ConfigError(f"vkit init: {s} does not compile {language}; pick one of {', '.join(able)}")
    if not simulators:
        raise ConfigError("vkit init: simulators is empty; name at least one")
    return list(simulators)


def _check_choices(name: str, spec: str | None, pixel_format: str | None) -> None:
    if not re.fullmatch(r"[A-Za-z_][\w-]*", name):
        raise ConfigError(f"vkit init: design name {name!r} is not a plain name; pass design_name (letters, digits, _ and -)")
    if spec is not None and spec not in SPEC_PRESETS:
        raise fail("vkit init", "spec", spec, "not a preset", f"{suggest(spec, SPEC_PRESETS)} (or edit spec in the config later)")
    if pixel_format is not None and pixel_format not in PIXEL_FORMAT_BITS:
        raise fail("vkit init", "pixel_format", pixel_format, "not known", suggest(pixel_format, PIXEL_FORMAT_BITS))


def _targets(out: Path, design: HdlDesign, force: bool) -> dict[str, Path]:
    """The three files to write; existing ones are an error unless ``force``."""
    test_name = f"test_vkit_{re.sub(r'[^0-9A-Za-z_]', '_', design.name).lower()}"
    targets = {"config": out / CONFIG_NAME, "test_module": out / f"{test_name}.py", "makefile": out / MAKEFILE_NAME}
    existing = [str(p) for p in targets.values() if p.exists()]
    if existing and not force:
        raise ConfigError(f"vkit init: {', '.join(existing)} already exist(s); nothing was written; pass --force to overwrite")
    return targets


def _choose_spec(spec: str | None, design: HdlDesign, all_designs: list[HdlDesign], sources: list[Path],
                 guess: RoleGuess, notes: list[str]) -> tuple[str, str]:
    """The preset to write (given, else guessed from the names) and why; a format clash becomes a note."""
    if spec is None:
        names = [design.name] + [d.name for d in all_designs if d.name != design.name] + [p.stem for p in sources]
        spec, reason = guess_spec(names, guess.pixel_format)
    else:
        reason = "as given"
    spec_input = SPEC_PRESETS[spec].input
    if spec_input != guess.pixel_format:
        notes.append(
            f"spec: preset {spec!r} takes {spec_input} but pixel_format is {guess.pixel_format}; "
            "pick a preset with that input or write a spec_file; CONFIRM"
        )
    notes.append(f"spec: {spec} ({reason}); CONFIRM")
    return spec, reason


def _write_kit(kit: _Kit, targets: Mapping[str, Path], keep_config: bool) -> ScaffoldResult:
    """Write the cocotb test module, the Makefile and (unless kept) the config; what was written and kept."""
    kit.out_dir.mkdir(parents=True, exist_ok=True)
    test_name = targets["test_module"].stem
    if kit.wrapper is not None and kit.wrapper_path is not None:
        kit.wrapper_path.write_text(kit.wrapper.text, encoding="utf-8")
    if not keep_config:
        targets["config"].write_text(_config_text(kit), encoding="utf-8")
    targets["test_module"].write_text(_test_module_text(kit.name, kit.design, kit.simulators[0]), encoding="utf-8")
    targets["makefile"].write_text(_makefile_text(kit.name, kit.design.language, test_name, kit.simulators[0]),
                                   encoding="utf-8")
    return ScaffoldResult(out_dir=kit.out_dir, config=targets["config"], test_module=targets["test_module"],
                          makefile=targets["makefile"], design=kit.design, guess=kit.guess, spec=kit.spec,
                          simulators=kit.simulators, notes=kit.notes,
                          kept=[targets["config"]] if keep_config else [], wrapper=kit.wrapper_path,
                          guesses=list(kit.guesses))


def _kept_design(config_path: Path, design: HdlDesign, design_name: str | None) -> tuple[str, RoleGuess, str, list[str]]:
    """The design of a kept config this kit is for: (name, its confirmed signal map, spec, simulators).

    Raises:
        ConfigError: the config cannot be read, or it has no design with this top level (or name).
    """
    config = load_config(config_path)
    if design_name is not None:
        found = [design_name] if design_name in config.designs else []
    else:
        found = [n for n, d in config.designs.items() if d.top.lower() == design.name.lower() and d.bug is None]
    if not found:
        raise ConfigError(f"vkit init --force: {config_path} has no design {design_name or 'with top ' + design.name}; "
                          "pass --name with its design name, or --rewrite-config to write a new config")
    d = config.designs[found[0]]
    guess = RoleGuess(d.family, dict(d.ports), confidence={r: "kept" for r in d.ports},
                      reset_active_high=d.reset_active_high, pixel_format=d.pixel_format)
    spec = d.spec_preset or (d.spec_file.name if d.spec_file else "spec table")
    sims = [s for s in (d.simulators or config.run.simulators) if design.language in LANGUAGES.get(s, ())]
    return found[0], guess, spec, sims


def _upgrade_kit(design: HdlDesign, sources: list[Path], out: Path, targets: Mapping[str, Path],
                 design_name: str | None, simulators: list[str], wrapper: FlatWrapper | None = None) -> ScaffoldResult:
    """Keep the config (the user's confirmed guesses); rewrite the Makefile and test module to read it."""
    name, guess, spec, kept_sims = _kept_design(targets["config"], design, design_name)
    notes = [f"kept {targets['config'].name}: its signal map, spec, parameters, defines and stimulus are as you "
             f"left them; {targets['makefile'].name} and {targets['test_module'].name} were rewritten to read "
             f"them from it (pass --rewrite-config to write a new config as well)"]
    kit = _Kit(name, design, sources, out, guess, spec, "kept", kept_sims or simulators, {}, {}, notes, wrapper=wrapper)
    return _write_kit(kit, targets, keep_config=True)


def scaffold(
    top: str,
    sources: Sequence[str | Path],
    out_dir: str | Path = ".",
    family: str | None = None,
    *,
    spec: str | None = None,
    pixel_format: str | None = None,
    simulators: Sequence[str] | None = None,
    parameters: Mapping[str, Any] | None = None,
    defines: Mapping[str, Any] | None = None,
    design_name: str | None = None,
    force: bool = False,
    rewrite_config: bool = False,
    include_dirs: Sequence[str | Path] = (),
) -> ScaffoldResult:
    """Write a starter kit for design ``top`` into ``out_dir`` (usually the root of the user's RTL repo).

    Writes three files, all from the top level's own port names:

    * ``vkit.toml``: one ``[designs.<name>]`` table (sources relative to the config, the guessed
      signal map with ``# guessed: CONFIRM`` comments, a pipeline preset to confirm, reset polarity)
      and a small ``[stimulus]`` (tiny timing, a few patterns and the conveyor scene, with and
      without stalls or back-pressure). ``vkit run vkit.toml`` runs it.
    * ``test_vkit_<top>.py``: a cocotb test module that reads the config, runs each case through
      :func:`vkit.sim.tb.entry.run_case`, scores it against :mod:`vkit.model.pipeline` and writes the report.
    * ``Makefile.vkit``: cocotb's Makefile flow for that module (``make -f Makefile.vkit SIM=icarus``).

    Args:
        top: top-level module or entity name.
        sources: HDL files in compile order.
        out_dir: folder to write into (created if missing).
        family: "video" or "stream"; None infers it from the port names.
        spec: pipeline preset; None guesses it from the module/file names and the pixel format.
        pixel_format: "gray8" or "rgb888"; None takes it from the input data width.
        simulators: simulators for the config; default icarus + verilator (Verilog) or ghdl (VHDL).
        parameters: parameter/generic values for the build (also used to work out port widths).
        defines: Verilog defines for the build.
        design_name: the design's name in the config; default ``top``.
        force: overwrite existing files (otherwise an existing file is a ConfigError and nothing is written).
            An existing config is kept, with the signal map, spec and parameters confirmed in it: the
            Makefile and the test module are rewritten for it (this upgrades a kit of an earlier release).
        rewrite_config: with ``force``, write a new config too (the confirmed values in the old one are lost).
        include_dirs: folders the sources' `include lines search (written into the config).

    A top with SystemVerilog interface ports (``iface.modport``) gets a fourth file, ``<top>_flat.sv``:
    a wrapper that shows each modport signal as a plain port; the config's top is the wrapper and its
    ``supported_simulators`` names the simulators that can take interfaces (not Icarus 11).

    Raises:
        ConfigError: a source is missing, ``top`` is not in the sources (the message lists what is),
            the sources mix Verilog and VHDL, a name is not valid, or a file exists and ``force`` is False.
    """
    if not sources:
        raise ConfigError("vkit init: no sources given; list the HDL files of the design, in compile order")
    src_paths = [Path(s) for s in sources]
    params, defs = dict(parameters or {}), dict(defines or {})
    dirs = [Path(d) for d in include_dirs]
    design, all_designs = _read_top(top, src_paths, params, defs, dirs)
    name = design_name or re.sub(r"\W", "_", design.name)
    _check_choices(name, spec, pixel_format)
    wrap_notes: list[str] = []
    driven, wrapper = _wrap_interfaces(design, wrap_notes)
    sims = _simulators_for(design.language, simulators, interfaces=wrapper is not None)
    out = Path(out_dir)
    targets = _targets(out, design, force)
    if force and not rewrite_config and targets["config"].exists():
        return _upgrade_kit(driven, src_paths, out, targets, design_name, sims, wrapper)
    guess = guess_roles(driven.ports, family)
    notes = wrap_notes + list(guess.notes)
    if pixel_format is not None and pixel_format != guess.pixel_format:
        notes.append(f"pixel_format: {pixel_format} as given (the data width suggested {guess.pixel_format})")
        guess.pixel_format = pixel_format
        guess.pixels_per_clock = _lanes_for(design, guess, pixel_format)
    spec_name, reason = _choose_spec(spec, design, all_designs, src_paths, guess, notes)
    kit = _Kit(name, driven, src_paths, out, guess, spec_name, reason, sims, params, defs, notes, dirs, wrapper)
    _read_conventions(kit, params)
    return _write_kit(kit, targets, keep_config=False)


def _read_conventions(kit: _Kit, given: Mapping[str, Any]) -> None:
    """Pin polarity, reset style, timing parameters and the flows the stimulus may hold, with reasons."""
    guess = kit.guess
    controls = [r for r in (*FAMILY_ROLES[guess.family][0], *FAMILY_ROLES[guess.family][1])
                if r in CONTROL_ROLES and r not in ("clock", "reset")]
    kit.polarity, kit.guesses = pin_polarity(guess.roles, controls)
    if guess.reset_active_high is not None:
        rst = guess.roles["reset"]
        kit.guesses.append(Guess(f"reset {rst} active {'high' if guess.reset_active_high else 'low'}",
                                 "its name has an active-low mark" if not guess.reset_active_high else
                                 "no active-low mark in its name"))
    style = reset_style(kit.sources, guess.roles.get("reset"), kit.design.language)
    if style is not None:
        kit.guesses.append(style)
    free = {k: v for k, v in kit.design.parameters.items() if k not in given}
    kit.timing_parameters, timing_guesses = timing_parameters(free)
    kit.guesses += timing_guesses + _flow_guesses(guess)
    if kit.timing_parameters:
        kit.guesses.append(Guess("timings tiny (32x24) and tiny64x48 written",
                                 "parameters follow the timing: one frame size cannot show a size fixed in the RTL"))


def parse_assignments(items: Sequence[str] | None, what: str = "parameter") -> dict[str, int | str]:
    """``["W=10", "MODE=fast", "DEBUG"]`` -> ``{"W": 10, "MODE": "fast", "DEBUG": 1}`` (command-line -P / -D).

    Raises:
        ConfigError: an item without a name, or a name that is not an HDL identifier.
    """
    out: dict[str, int | str] = {}
    for item in items or []:
        name, sep, value = str(item).partition("=")
        name = name.strip()
        if not re.fullmatch(r"[A-Za-z_]\w*", name):
            raise ConfigError(f"{what} {item!r}: give NAME=VALUE with NAME an HDL identifier, e.g. WIDTH=8")
        text = value.strip()
        if not sep:
            out[name] = 1
        elif re.fullmatch(r"[+-]?\d+", text):
            out[name] = int(text)
        else:
            out[name] = text
    return out
