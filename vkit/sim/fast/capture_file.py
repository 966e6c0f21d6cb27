"""The one reader of the fast-path harness's capture file (binary records or text lines): a :class:`~vkit.video.capture.Capture`.

Text format (the VHDL harness; the Verilog harness with ``+vkit_capture_bin=0``): a first line
``# vkit capture VERSION FAMILY`` (VERSION is :data:`~vkit.sim.fast.wire.CAPTURE_VERSION`), then one event per line, ``CLOCK KIND ARG``, in the order the harness
saw them (several per clock possible):

    P <hex>|U   an output pixel (U: the data bus held X or Z)
    L -         end of an output line (video: data-enable run ended; stream: after an end-of-line pixel)
    F -         start of an output frame (video: output vsync leading edge; stream: start-of-frame pixel)
    H -         output hsync leading edge (video)
    B -         output data-enable high while output vsync was active (video)
    X <role>    a control output (role name) held X or Z
    K -         the next pixel waited at least one clock with valid high and ready low (stream)
    I -         first input transfer accepted (stream)
    T -         the harness's timeout was reached
    E -         end of the run; CLOCK is the number of clocks run

Binary format (the Verilog harness's default): a 16-byte header (magic "VKCB", version, family, data
width), then the records described in :mod:`vkit.sim.fast.wire`, with the kind letters above. Both
formats give the same Capture for the same run. A file that starts with neither header is not a vkit
capture and is never parsed; a file without the final ``E`` event is a truncated file
(:func:`truncation`).

Frame and line numbering follow the per-clock monitors exactly: a frame or line delimiter that
closes an empty frame or line does not advance the count; without an output vsync, a video frame
closes after ``height`` lines.
"""

from __future__ import annotations

import copy
import tempfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.errors import ConfigError, DutError
from vkit.sim.case import SimCase
from vkit.sim.fast.stimulus import StimulusFiles, write_stimulus
from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_ROLES, CAPTURE_VERSION, FAMILY_CODES, capture_data_words
from vkit.video.bus import MAX_WORD_BITS, BusLayout, split_lanes, spread_lanes, unpack_capture
from vkit.video.capture import MAX_EVENTS, UNKNOWN, Capture, RunFacts
from vkit.video.timing import schedule
from vkit.video.words import samples_between

__all__ = [
    "TEXT_HEADER",
    "parse_capture_text",
    "parse_capture_binary",
    "is_binary_capture",
    "is_text_capture",
    "truncation",
    "input_meta",
    "read_capture",
]

TEXT_HEADER = "# vkit capture "
"""Start of a text capture's first line; the version and the family follow."""
_BINARY_HEADER_BYTES = 16
"""Magic, version, family and data width: four little-endian 32-bit words."""


def parse_capture_text(
    text: str,
    *,
    family: str | None = None,
    height: int | None = None,
    split_on_height: bool = False,
    facts: RunFacts | None = None,
    bus: BusLayout | None = None,
) -> Capture:
    """Turn capture text into a :class:`Capture`.

    Args:
        text: the file's content.
        family: "video" or "stream"; default from the header line.
        height: active lines per frame (used with ``split_on_height``).
        split_on_height: close a video frame after ``height`` lines (when the design has no output vsync).
        facts: run facts known from the input side (frames_sent, first_input_clock, ...); copied in.
        bus: the lane layout; needed for an output bus wider than 62 bits, whose words are split into one
            sample a pixel here (:func:`_wide_lanes`; a narrower capture is split by :func:`read_capture`).

    Raises:
        ConfigError: the text is not a vkit capture (no header line).
    """
    first = text.split("\n", 1)[0]
    if not first.startswith(TEXT_HEADER):
        raise ConfigError("capture text: the first line is not '# vkit capture ...'; give a file written by the vkit harness")
    head = first.split()
    if len(head) < 4 or head[3] != str(CAPTURE_VERSION):
        raise ConfigError(f"capture text: format version {head[3] if len(head) > 3 else 'missing'}, this vkit reads "
                          f"{CAPTURE_VERSION}; rebuild the harness with this vkit")
    family = family or (head[4] if len(head) > 4 else "video")
    tokens = text.split("\n", 1)[1].split() if "\n" in text else []
    if len(tokens) % 3:
        tokens = tokens[: len(tokens) - len(tokens) % 3]  # a run cut short mid-line
    clocks = tokens[0::3]
    kinds = tokens[1::3]
    args = tokens[2::3]
    kind_a = np.array(kinds, dtype="S1").view(np.uint8) if kinds else np.zeros(0, np.uint8)
    pos_p = np.flatnonzero(kind_a == ord("P"))
    clock_all = np.array(clocks, dtype=np.int64) if clocks else np.zeros(0, np.int64)
    width = int(head[5]) if len(head) > 5 and head[5].isdigit() else None
    texts = np.array(args, dtype="S")[pos_p] if pos_p.size else []
    lanes = None
    if width is not None and width > MAX_WORD_BITS:
        limbs, unknown = _hex_limbs(texts, capture_data_words(width))
        lanes = _wide_lanes(limbs, unknown, width, bus)
        values, xz_data = np.zeros(pos_p.size, np.int64), int(unknown.sum())
    else:
        values, xz_data = _hex_values(texts)
    cap = _build(family, clock_all, kind_a, lambda i: args[i], values, xz_data, height, split_on_height, facts)
    if width is not None:
        cap.facts.out_data_bits = width
    return cap if lanes is None else spread_lanes(cap, lanes)


def parse_capture_binary(
    data: bytes | np.ndarray,
    *,
    family: str | None = None,
    height: int | None = None,
    split_on_height: bool = False,
    facts: RunFacts | None = None,
    bus: BusLayout | None = None,
) -> Capture:
    """Turn binary capture records into a :class:`Capture` (same arguments and result as :func:`parse_capture_text`).

    Args:
        data: the file's bytes (``bytes`` or a uint8 array, e.g. from ``np.fromfile``).

    Raises:
        ConfigError: the data does not start with the binary capture header.
    """
    raw = np.frombuffer(data, np.uint8) if isinstance(data, (bytes, bytearray, memoryview)) else np.asarray(data, np.uint8)
    if raw.size < 16 or not is_binary_capture(raw[:4].tobytes()):
        raise ConfigError("capture file: no binary capture header (VKCB); give a file written by the vkit harness")
    magic, version, fam_code, width = (int(v) for v in raw[:16].view("<u4"))
    del magic
    if version != CAPTURE_VERSION:
        raise ConfigError(f"capture file: binary format version {version}, this vkit reads {CAPTURE_VERSION}; "
                          "rebuild the harness with this vkit")
    family = family or ("stream" if fam_code == FAMILY_CODES["stream"] else "video")
    nw = capture_data_words(width)
    rec = 8 + 4 * nw
    body = raw[16:]
    body = body[: body.size - body.size % rec]  # a run cut short mid-record
    words = body.view("<u4").reshape(-1, 2 + nw)
    clock_all = words[:, 0].astype(np.int64)
    kc = words[:, 1]
    kind_a = (kc & 0xFF).astype(np.uint8)
    code = ((kc >> 8) & 0xFF).astype(np.int64)
    pos_p = np.flatnonzero(kind_a == ord("P"))
    xz = code[pos_p] == 1
    lanes = None
    if width > MAX_WORD_BITS:  # one sample cannot hold the word: split it into lanes from its limbs
        lanes = _wide_lanes(words[pos_p, 2:], xz, width, bus)
        values = np.zeros(pos_p.size, np.int64)
    else:
        d = words[pos_p, 2:].astype(np.uint64)
        v = d[:, 0] | (d[:, 1] << np.uint64(32)) if nw == 2 else d[:, 0]
        values = v.astype(np.int64)
        values[xz] = UNKNOWN

    def arg(i: int) -> str:
        c = int(code[i])
        return CAPTURE_ROLES[c] if 0 < c < len(CAPTURE_ROLES) else "-"

    cap = _build(family, clock_all, kind_a, arg, values, int(xz.sum()), height, split_on_height, facts)
    cap.facts.out_data_bits = width
    return cap if lanes is None else spread_lanes(cap, lanes)


def _wide_lanes(limbs: np.ndarray, unknown: np.ndarray, width: int, bus: BusLayout | None) -> np.ndarray:
    """The lane values ``(n, lanes)`` of output words wider than 62 bits, from their 32-bit limbs (the lane decode step).

    Raises:
        ConfigError: no lane layout of several pixels a clock was given to split the words with.
    """
    if bus is None or bus.lanes == 1:
        raise ConfigError(f"capture: the output data bus is {width} bits, wider than the {MAX_WORD_BITS} bits one "
                          "sample holds; give pixels_per_clock so each word splits into pixels, or narrow the bus")
    return split_lanes(limbs, bus, width, unknown)


def _hex_limbs(texts: Any, n_limbs: int) -> tuple[np.ndarray, np.ndarray]:
    """Hex words as 32-bit limbs ``(n, n_limbs)``, least significant first, and a mask of the words that are not
    plain hex (U, x, z)."""
    n = len(texts)
    digits = 8 * n_limbs
    if n == 0:
        return np.zeros((0, n_limbs), np.uint32), np.zeros(0, bool)
    padded = np.char.rjust(np.asarray(texts, dtype=f"S{digits}"), digits, b"0")
    nib = _HEX_LUT[np.frombuffer(padded.tobytes(), np.uint8).reshape(n, n_limbs, 8)]
    bad = (nib < 0).any(axis=(1, 2))
    weights = (np.int64(16) ** np.arange(7, -1, -1, dtype=np.int64))[None, None, :]
    limbs = (np.where(nib < 0, 0, nib) * weights).sum(axis=2)[:, ::-1]
    return np.ascontiguousarray(limbs).astype(np.uint32), bad


def is_binary_capture(head: bytes) -> bool:
    """True when ``head`` (the first 4+ bytes of a file) is a binary capture header."""
    return len(head) >= 4 and int.from_bytes(head[:4], "little") == CAPTURE_MAGIC


def is_text_capture(head: bytes) -> bool:
    """True when ``head`` (the first bytes of a file) starts a text capture's header line."""
    return head.startswith(TEXT_HEADER.encode("ascii"))


def _binary_truncation(path: Path, size: int) -> str | None:
    if size < _BINARY_HEADER_BYTES:
        return f"it holds {size} bytes, fewer than the {_BINARY_HEADER_BYTES}-byte header"
    with open(path, "rb") as fh:
        header = np.frombuffer(fh.read(_BINARY_HEADER_BYTES), "<u4")
        rec = 8 + 4 * capture_data_words(int(header[3]))
        body = size - _BINARY_HEADER_BYTES
        if body % rec:
            return f"its last record is cut after {body % rec} of {rec} bytes"
        if body == 0:
            return "it holds the header and no event"
        fh.seek(size - rec)
        last = np.frombuffer(fh.read(8), "<u4")
    if (int(last[1]) & 0xFF) != ord("E"):
        return f"it stops at clock {int(last[0])} without the end-of-run event"
    return None


def _text_truncation(path: Path, size: int) -> str | None:
    with open(path, "rb") as fh:
        fh.seek(max(0, size - 256))
        tail = fh.read()
    if not tail.endswith(b"\n"):
        return "its last line is cut mid-line"
    last = tail.rstrip(b"\n").rsplit(b"\n", 1)[-1].split()
    if len(last) < 2 or last[1] != b"E":
        return f"it stops at {b' '.join(last).decode(errors='replace')!r} without the end-of-run line"
    return None


def truncation(path: str | Path) -> str | None:
    """Why the capture file at ``path`` is incomplete (the harness writes an ``E`` event last), or None.

    A file without the end event was cut short: the simulator was stopped before the harness finished
    writing, or the file was copied or cut before it was complete. Only the header and the last event
    are read.

    Raises:
        ConfigError: ``path`` is not a vkit capture file (see :func:`is_binary_capture`).
    """
    p = Path(path)
    size = p.stat().st_size
    with open(p, "rb") as fh:
        head = fh.read(len(TEXT_HEADER))
    if is_binary_capture(head):
        return _binary_truncation(p, size)
    if is_text_capture(head):
        return _text_truncation(p, size)
    raise _not_a_capture(p)


def _not_a_capture(path: Path) -> ConfigError:
    return ConfigError(f"capture file {str(path)!r} is not a vkit capture file (it starts with neither the binary "
                       f"header VKCB nor {TEXT_HEADER.strip()!r}); give the capture.bin or capture.txt a vkit harness wrote")


@dataclass
class _Events:
    """What the non-pixel events of a capture say (everything but the pixels themselves)."""

    xz_control: list[list[Any]] = field(default_factory=list)
    de_in_blanking: list[int] = field(default_factory=list)
    hsync_per_frame: list[int] = field(default_factory=list)
    vsync_clocks: list[int] = field(default_factory=list)
    hsync_clocks: list[int] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=lambda: {"xz_control": 0, "de_in_blanking": 0})
    vsync_count: int = 0
    hs_count: int = 0
    timed_out: bool = False
    clocks_run: int | None = None
    first_input: int | None = None
    waited_next: list[int] = field(default_factory=list)

    def bounded(self, key: str, entry: Any) -> None:
        """Count an event of list ``key``; keep it while the list is under :data:`MAX_EVENTS`."""
        self.counts[key] += 1
        if self.counts[key] <= MAX_EVENTS:
            getattr(self, key).append(entry)


def _scan_events(family: str, clock_all: np.ndarray, kind_a: np.ndarray, pos_p: np.ndarray,
                 arg_of: Callable[[int], str]) -> _Events:
    """Walk the non-pixel events in order (syncs, X/Z, waits, first input, timeout, end)."""
    ev = _Events()
    for i in np.flatnonzero(kind_a != ord("P")).tolist():
        kind = chr(kind_a[i])
        if kind == "F" and family == "video":
            ev.vsync_count += 1
            ev.vsync_clocks.append(int(clock_all[i]))
            ev.hsync_per_frame.append(ev.hs_count)
            ev.hs_count = 0
        elif kind == "H":
            ev.hs_count += 1
            ev.hsync_clocks.append(int(clock_all[i]))
        elif kind == "B":
            ev.bounded("de_in_blanking", int(clock_all[i]))
        elif kind == "X":
            ev.bounded("xz_control", [int(clock_all[i]), arg_of(i)])
        elif kind == "K":
            ev.waited_next.append(int(np.searchsorted(pos_p, i)))
        elif kind == "I":
            ev.first_input = int(clock_all[i])
        elif kind == "T":
            ev.timed_out = True
        elif kind == "E":
            ev.clocks_run = int(clock_all[i])
    return ev


def _build(family: str, clock_all: np.ndarray, kind_a: np.ndarray, arg_of: Callable[[int], str], values: np.ndarray,
           xz_data: int, height: int | None, split_on_height: bool, facts: RunFacts | None) -> Capture:
    """The Capture from decoded events (clock and ASCII kind code per event, values per pixel event); both formats."""
    out_facts = copy.deepcopy(facts) if facts is not None else RunFacts()
    if out_facts.family is None:
        out_facts.family = family
    is_p = kind_a == ord("P")
    pos_p = np.flatnonzero(is_p)
    if split_on_height and height and (kind_a == ord("F")).any():
        frame_a, line_a, col_a = _positions_loop(kind_a, bool(split_on_height), height)
    else:
        frame_a, line_a, col_a = _positions(kind_a, is_p, pos_p, bool(split_on_height), height)
    ev = _scan_events(family, clock_all, kind_a, pos_p, arg_of)
    cap = Capture(values, clock_all[pos_p], frame_a, line_a, col_a, out_facts)
    _fill_facts(cap, family, ev, xz_data, clock_all)
    return cap


def _fill_facts(cap: Capture, family: str, ev: _Events, xz_data: int, clock_all: np.ndarray) -> None:
    """Write the output-side facts of the events into the capture's run facts."""
    f = cap.facts
    k = int(cap.values.size)
    f.xz_data_count = xz_data
    f.xz_control = ev.xz_control
    if family == "video":
        f.de_in_blanking = ev.de_in_blanking
        f.output_vsync_count = ev.vsync_count
        f.output_hsync_per_frame = ev.hsync_per_frame
        f.output_vsync_clocks = ev.vsync_clocks
        f.output_hsync_clocks = ev.hsync_clocks
    if family == "stream":
        f.backpressure_pixels = [[int(cap.frame[i]), int(cap.line[i]), int(cap.column[i])]
                                 for i in ev.waited_next if i < k]
    if ev.first_input is not None:
        f.first_input_clock = ev.first_input
    f.first_output_clock = int(cap.clock[0]) if k else None
    if f.first_output_clock is not None and f.first_input_clock is not None:
        f.latency_clocks = int(f.first_output_clock) - int(f.first_input_clock)
    timed_out, clocks_run = ev.timed_out, ev.clocks_run
    if clocks_run is None:
        f.notes.append("capture text has no end line: the simulation stopped before the harness finished")
        clocks_run = int(clock_all[-1]) + 1 if clock_all.size else 0
        timed_out = True
    f.clocks_run = clocks_run
    f.timed_out = bool(timed_out)
    for key, total in ev.counts.items():
        if total > MAX_EVENTS:
            f.notes.append(f"{key}: {total} events, only the first {MAX_EVENTS} are listed")


_HEX_LUT = np.full(256, -1, np.int64)
for _i, _c in enumerate(b"0123456789abcdef"):
    _HEX_LUT[_c] = _i
for _i, _c in enumerate(b"ABCDEF"):
    _HEX_LUT[_c] = 10 + _i


def _hex_values(texts: Any) -> tuple[np.ndarray, int]:
    """Hex words to int64 (vectorised); anything not plain hex (U, x, z) becomes UNKNOWN. Returns (values, unknown count)."""
    n = len(texts)
    if n == 0:
        return np.zeros(0, np.int64), 0
    raw = np.asarray(texts, dtype="S")
    width = raw.dtype.itemsize
    if width > 15:  # more than 60 bits: Python ints, then the same rules
        out = np.empty(n, np.int64)
        bad = 0
        for i, t in enumerate(texts):
            try:
                out[i] = int(t.decode(), 16)
            except ValueError:
                out[i] = UNKNOWN
                bad += 1
        return out, bad
    padded = np.char.rjust(raw, width, b"0")
    digits = _HEX_LUT[np.frombuffer(padded.tobytes(), np.uint8).reshape(n, width)]
    bad = (digits < 0).any(axis=1)
    weights = (np.int64(16) ** np.arange(width - 1, -1, -1, dtype=np.int64))[None, :]
    values = (np.where(digits < 0, 0, digits) * weights).sum(axis=1)
    values[bad] = UNKNOWN
    return values.astype(np.int64), int(bad.sum())


def _positions(kind: np.ndarray, is_p: np.ndarray, pos_p: np.ndarray, split: bool, height: int | None
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Frame, line and column of every pixel event, vectorised (see the module docstring for the rules)."""
    n = kind.size
    is_l = kind == ord("L")
    is_f = kind == ord("F")
    cum_p = np.cumsum(is_p)
    idx = np.arange(n)
    # An L or F closes a non-empty line when a pixel came since the last L or F.
    delim = is_l | is_f
    d_pos = np.flatnonzero(delim)
    p_at_d = cum_p[d_pos]
    prev_p_at_d = np.concatenate(([0], p_at_d[:-1]))
    eff_l = np.zeros(n, bool)
    eff_l[d_pos] = (p_at_d > prev_p_at_d) & is_l[d_pos]
    # An F opens a new frame when a pixel came since the last F.
    f_pos = np.flatnonzero(is_f)
    p_at_f = cum_p[f_pos]
    prev_p_at_f = np.concatenate(([0], p_at_f[:-1]))
    eff_f = np.zeros(n, bool)
    eff_f[f_pos] = p_at_f > prev_p_at_f
    cum_eff_l = np.cumsum(eff_l)
    last_d = np.maximum.accumulate(np.where(delim, idx, -1))
    last_f = np.maximum.accumulate(np.where(is_f, idx, -1))
    base_p = np.where(last_d >= 0, cum_p[np.maximum(last_d, 0)], 0)
    col = cum_p - 1 - base_p
    if split and height:
        frame = cum_eff_l // height
        line = cum_eff_l % height
    else:
        frame = np.cumsum(eff_f)
        line = cum_eff_l - np.where(last_f >= 0, cum_eff_l[np.maximum(last_f, 0)], 0)
    return (frame[pos_p].astype(np.int64), line[pos_p].astype(np.int64), col[pos_p].astype(np.int64))


def _positions_loop(kind: np.ndarray, split: bool, height: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Frame, line and column of every pixel event, one event at a time (frames split on height and on F)."""
    frame = line = col = lines_in_frame = 0
    frame_has = line_has = False
    out: list[tuple[int, int, int]] = []
    for k in kind.tolist():
        if k == 80:  # P
            out.append((frame, line, col))
            col += 1
            frame_has = line_has = True
        elif k == 76:  # L
            if line_has:
                line += 1
                lines_in_frame += 1
                if split and lines_in_frame >= height:
                    frame += 1
                    line = lines_in_frame = 0
                    frame_has = False
            col = 0
            line_has = False
        elif k == 70:  # F
            if frame_has:
                frame += 1
            line = col = lines_in_frame = 0
            frame_has = line_has = False
    arr = np.array(out, np.int64).reshape(-1, 3)
    return arr[:, 0].copy(), arr[:, 1].copy(), arr[:, 2].copy()


def _parse_file(path: Path, **kwargs: Any) -> Capture:
    """Parse a harness capture file in either format (told apart by the header)."""
    if path.is_dir():
        raise ConfigError(f"capture file {str(path)!r} is a directory; give the capture.bin or capture.txt file in it")
    if not path.is_file():
        raise DutError(f"capture file {str(path)!r} does not exist: the simulation did not start the harness; "
                       "see the simulator log")
    with open(path, "rb") as fh:
        head = fh.read(len(TEXT_HEADER))
    if is_binary_capture(head):
        return parse_capture_binary(np.fromfile(path, np.uint8), **kwargs)
    if not is_text_capture(head):
        raise _not_a_capture(path)
    return parse_capture_text(path.read_text(errors="replace"), **kwargs)


def input_meta(case: SimCase, stim: StimulusFiles | None = None) -> RunFacts:
    """The input-side run facts of ``case`` (frames_sent, first_input_clock, stall_pixels, syncs)."""
    if stim is None:
        with tempfile.TemporaryDirectory(prefix="vkit_meta_") as tmp:
            stim = write_stimulus(case, tmp)
    known = dict(stim.input_meta)
    known.pop("first_gap_clocks", None)
    facts = RunFacts.from_dict(known)
    facts.family = case.family
    if case.simulator:
        facts.simulator = case.simulator
    if stim.timeout:
        facts.timeout_clocks = int(stim.timeout)
    return facts


def read_capture(path: str | Path, case: SimCase, stim: StimulusFiles | None = None) -> Capture:
    """Read a harness capture file (live fast-path run, native run or exported testbench; binary or text).

    Args:
        path: the ``capture.bin`` / ``capture.txt`` the harness wrote.
        case: the case the run was made from (gives the input-side run facts and how frames split).
        stim: the stimulus the run used, if at hand (saves rebuilding it).

    Raises:
        DutError: the file does not exist (the simulation never opened it).
        ConfigError: the file is not a vkit capture file (neither header), or of another format version.
    """
    cap = _parse_file(
        Path(path),
        family=case.family,
        height=int(case.height),
        split_on_height=case.family == "video" and "out_vsync" not in case.signals,
        facts=input_meta(case, stim),
        bus=case.bus_layout(),
    )
    if cap.facts.timed_out and cap.facts.timeout_clocks is None:
        cap.facts.timeout_clocks = int(cap.facts.clocks_run or 0)
    if case.family == "video":  # a sync output the design does not have is not counted
        if "out_vsync" not in case.signals:
            cap.facts.output_vsync_count = None
        if "out_vsync" not in case.signals or "out_hsync" not in case.signals:
            cap.facts.output_hsync_per_frame = None
    bus = case.bus_layout()
    if bus.lanes > 1:
        cap.facts.pixels_per_clock = bus.lanes
        if cap.facts.out_data_bits is None:
            raise ConfigError(f"capture file {str(path)!r} does not name its data width, which {bus.lanes} pixels a clock "
                              "need to split the words; rebuild the harness with this vkit")
        if cap.facts.out_data_bits <= MAX_WORD_BITS:  # a wider bus was split as it was read
            cap = unpack_capture(cap, bus, cap.facts.out_data_bits)
    if case.family == "video":
        pattern = case.enable_pattern()
        enable = None
        if pattern is not None:
            enable = schedule(case.video_timing(), case.frame_count(), case.stall_pattern(), pattern).enable
        cap.facts.latency_samples = samples_between(enable, cap.facts.first_input_clock, cap.facts.first_output_clock)
    return cap
