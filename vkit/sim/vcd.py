"""Cut a value change dump (IEEE 1364 VCD) down to a time window, for simulators that cannot dump one.

The result is itself a VCD: the original header, then at the window's first time a ``$dumpvars``
block holding every variable's value as it stood then, then the changes inside the window.
"""

from __future__ import annotations

import re
from pathlib import Path

from vkit.core.errors import ToolError

__all__ = ["cut_vcd"]

_UNITS_PS = {"s": 10**12, "ms": 10**9, "us": 10**6, "ns": 10**3, "ps": 1, "fs": 10**-3}
_TIMESCALE = re.compile(r"\$timescale\s+(\d+)\s*([munpf]?s)\s+\$end", re.S)


def _ps_per_tick(header: str) -> float:
    m = _TIMESCALE.search(header)
    if m is None:
        return 1.0  # IEEE 1364 leaves it to the tool; a dump without one is taken as 1 ps
    return int(m.group(1)) * _UNITS_PS[m.group(2)]


def _ident(line: str) -> str | None:
    """The identifier code a value-change line sets (scalar ``0!``, vector ``b101 !``, real ``r1.5 !``)."""
    if not line:
        return None
    if line[0] in "01xzXZ":
        return line[1:]
    if line[0] in "bBrR":
        parts = line.split()
        return parts[1] if len(parts) == 2 else None
    return None


def cut_vcd(src: str | Path, dst: str | Path, from_ps: int, to_ps: int) -> Path:
    """Write the part of the VCD ``src`` between ``from_ps`` and ``to_ps`` (simulation time, ps) to ``dst``.

    Raises:
        ToolError: ``src`` is missing or has no ``$enddefinitions``.
    """
    src, dst = Path(src), Path(dst)
    try:
        text = src.read_text(errors="replace")
    except OSError as exc:
        raise ToolError(f"waves: cannot read the dump {str(src)!r} ({exc.strerror}); see the simulator log") from None
    end = text.find("$enddefinitions")
    if end < 0:
        raise ToolError(f"waves: {str(src)!r} has no $enddefinitions: not a VCD, or the run stopped early")
    end = text.index("$end", end + len("$enddefinitions")) + len("$end")
    header, body = text[:end], text[end:]
    tick = _ps_per_tick(header)
    lo, hi = from_ps / tick, to_ps / tick
    state: dict[str, str] = {}
    out: list[str] = []
    now = 0.0
    opened = False
    for raw in body.splitlines():
        line = raw.strip()
        if not line or line.startswith("$") and not line.startswith("$dumpvars"):
            continue
        if line.startswith("#"):
            now = float(line[1:])
            if now > hi:
                break
            if now >= lo and not opened:
                out.append(f"#{int(lo)}")
                out.append("$dumpvars")
                out.extend(state.values())
                out.append("$end")
                opened = True
            if opened and now > lo:
                out.append(line)
            continue
        ident = _ident(line)
        if ident is None:
            continue
        if opened:
            out.append(line)
        else:
            state[ident] = line
    if not opened:  # the window starts after the last change: its values are the final ones
        out += [f"#{int(lo)}", "$dumpvars", *state.values(), "$end"]
    if out[-1] != f"#{int(hi)}":
        out.append(f"#{int(hi)}")  # the window's end, so viewers show its full width
    dst.parent.mkdir(parents=True, exist_ok=True)
    dst.write_text(header + "\n" + "\n".join(out) + "\n")
    return dst
