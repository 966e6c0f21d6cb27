"""What `vkit init` reads off a design beyond its roles: pin polarity, reset style, timing parameters.

Each guess comes with its reason, in words the summary prints. Names are read the way RTL teams
commonly mark them (common practice, no source): an active-low pin ends in ``_n``, ``_b``, ``_l``,
``_neg`` or ``n`` (``rstn``), or starts with ``n_``; a parameter named like ``H_TOTAL`` or
``LINE_SAMPLES`` holds the clocks of a whole line.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

__all__ = ["Guess", "active_low_mark", "pin_polarity", "reset_style", "timing_parameters", "LOW_SUFFIXES"]

LOW_SUFFIXES: tuple[str, ...] = ("n", "b", "l", "neg")
"""Last name words that mark an active-low pin (``vsync_n``, ``de_b``, ``hs_l``, ``vs_neg``)."""
_LOW_PREFIX = "n"
"""A first name word that marks an active-low pin (``n_vsync``)."""
_LOW_WORDS = {"rstn", "resetn", "arstn", "aresetn", "nrst", "nreset", "rstb", "resetb", "srstn"}
"""Whole names that say active low in one word."""
_SIDE_WORDS = {"i", "o", "in", "out"}
"""Direction words a name may end with after the polarity mark (``vsync_n_i``)."""


@dataclass(frozen=True)
class Guess:
    """One guess of `vkit init`: what was guessed and why (both printed in the summary)."""

    what: str
    reason: str

    def line(self) -> str:
        """``what (reason); CONFIRM``."""
        return f"{self.what} ({self.reason}); CONFIRM"


def _words(name: str) -> list[str]:
    text = re.sub(r"(?<=[a-z0-9])(?=[A-Z])", "_", name.strip("\\"))
    return [w for w in re.split(r"[^A-Za-z0-9]+", text.lower()) if w]


def active_low_mark(name: str) -> str | None:
    """The part of ``name`` that marks it active low (``"_n"``, ``"n_"``, ``"rstn"``, ...), or None."""
    words = _words(name)
    if len(words) > 1 and words[-1] in _SIDE_WORDS:
        words = words[:-1]
    if len(words) > 1 and words[-1] in LOW_SUFFIXES:
        return f"_{words[-1]}"
    if len(words) > 1 and words[-1] in ("ni", "no"):
        return f"_{words[-1]}"
    if len(words) > 1 and words[0] == _LOW_PREFIX:
        return f"{_LOW_PREFIX}_"
    if "".join(words) in _LOW_WORDS:
        return "".join(words)
    return None


def pin_polarity(roles: Mapping[str, str], control_roles: Sequence[str]) -> tuple[dict[str, bool], list[Guess]]:
    """role -> active high for each mapped control role, from its port name, with the reasons.

    Only pins whose names carry a mark are returned as active low; the others are left out (active high,
    or for syncs the timing's polarity), and the reason says so.
    """
    polarity: dict[str, bool] = {}
    guesses: list[Guess] = []
    for role in control_roles:
        port = roles.get(role)
        if port is None or role == "clock":
            continue
        mark = active_low_mark(port)
        if mark is not None:
            polarity[role] = False
            guesses.append(Guess(f"{role} ({port}) active low", f"its name ends/starts with {mark!r}"))
        elif role.endswith(("vsync", "hsync")):
            guesses.append(Guess(f"{role} ({port}) follows the timing's sync polarity",
                                 "no active-low mark in its name"))
        else:
            guesses.append(Guess(f"{role} ({port}) active high", "no active-low mark in its name"))
    return polarity, guesses


def _verilog_async(text: str, reset: str) -> bool | None:
    """True when ``reset`` is in an edge list beside a clock edge (asynchronous), False when it is only
    read inside clocked blocks, None when the text does not say."""
    name = re.escape(reset)
    if re.search(rf"@\s*\(\s*(pos|neg)edge\s+\w+\s+(or|,)\s*(pos|neg)edge\s+{name}\b", text) or \
            re.search(rf"@\s*\(\s*(pos|neg)edge\s+{name}\s+(or|,)\s*(pos|neg)edge\s+\w+", text):
        return True
    if re.search(r"@\s*\(\s*posedge\s+\w+\s*\)", text) and re.search(rf"\b{name}\b", text):
        return False
    return None


def _vhdl_async(text: str, reset: str) -> bool | None:
    """True when ``reset`` is in a process sensitivity list, False when only clocked processes read it."""
    lists = re.findall(r"\bprocess\s*\(([^)]*)\)", text, re.IGNORECASE)
    if any(reset.lower() in [w.strip().lower() for w in s.split(",")] for s in lists):
        return True
    if lists and re.search(rf"\b{re.escape(reset)}\b", text, re.IGNORECASE):
        return False
    return None


def reset_style(sources: Sequence[Path], reset: str | None, language: str) -> Guess | None:
    """Whether the design's reset is synchronous or asynchronous, read from the sources (a note for the user:
    vkit holds reset for whole clocks, which suits both)."""
    if reset is None:
        return None
    found: bool | None = None
    for path in sources:
        try:
            text = Path(path).read_text(errors="replace")
        except OSError:
            continue
        got = (_vhdl_async if language == "vhdl" else _verilog_async)(text, reset)
        if got is not None:
            found = got if found is None else (found or got)
    if found is None:
        return Guess(f"reset {reset}: synchronous or asynchronous not seen", "no clocked block reads it by name")
    if found:
        where = "a process sensitivity list" if language == "vhdl" else "an edge list beside the clock"
        return Guess(f"reset {reset} asynchronous", f"it is in {where}; vkit holds it for whole clocks, which suits it")
    return Guess(f"reset {reset} synchronous", "only clocked blocks read it")


_TIMING_WORDS: tuple[tuple[str, tuple[tuple[str, ...], ...]], ...] = (
    ("h_total", (("h", "total"), ("htotal",), ("line", "samples"), ("line", "clks"), ("line", "clocks"),
                 ("line", "period"), ("samples", "per", "line"), ("clks", "per", "line"), ("h", "period"))),
    ("v_total", (("v", "total"), ("vtotal",), ("frame", "lines"), ("lines", "per", "frame"))),
    ("h_active", (("h", "active"), ("hactive",), ("active", "width"), ("line", "pixels"), ("pixels", "per", "line"))),
    ("v_active", (("v", "active"), ("vactive",), ("active", "lines"), ("active", "height"))),
    ("h_blank", (("h", "blank"), ("hblank",), ("h", "blanking"))),
    ("v_blank", (("v", "blank"), ("vblank",), ("v", "blanking"))),
)
"""Timing fields and the parameter name words that ask for them (common practice, no source)."""


def timing_parameters(parameters: Mapping[str, object]) -> tuple[dict[str, str], list[Guess]]:
    """parameter -> timing field for parameters whose names ask for a timing value (``H_TOTAL``,
    ``LINE_SAMPLES``, ``LINE_CLKS``, ``V_TOTAL``, ...), with the reasons."""
    out: dict[str, str] = {}
    guesses: list[Guess] = []
    for name in parameters:
        words = tuple(_words(name))
        joined = "".join(words)
        for field, shapes in _TIMING_WORDS:
            if any(words == shape or joined == "".join(shape) for shape in shapes):
                out[name] = field
                guesses.append(Guess(f"parameter {name} follows the timing's {field}",
                                     f"its name reads as {field.replace('_', ' ')}"))
                break
    return out, guesses
