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
import time
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, BinaryIO

import numpy as np

from vkit.core.errors import ConfigError, DutError
from vkit.sim.case import SimCase
from vkit.sim.fast.stimulus import StimulusFiles, write_stimulus
from vkit.sim.fast.wire import CAPTURE_MAGIC, CAPTURE_ROLES, CAPTURE_VERSION, FAMILY_CODES, capture_data_words
from vkit.video.bus import MAX_WORD_BITS, BusLayout, split_lanes, spread_kept_lanes, spread_lanes, unpack_capture
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
    code_a = np.zeros(kind_a.size, np.uint8)
    for i in np.flatnonzero(kind_a == ord("X")).tolist():
        code_a[i] = _role_code(args[i])
    cap = _build(family, [_Chunk(clock_all, kind_a, code_a, values, xz_data)], height, split_on_height, facts,
                 capacity=int(values.size), value_bits=width if lanes is None else None)
    if width is not None:
        cap.facts.out_data_bits = width
    is_m = kind_a == ord("M")
    masks = _hex_values(np.array(args, dtype="S")[is_m])[0] if is_m.any() else np.zeros(0, np.int64)
    return _lanes_of(cap, values, lanes, masks, pos_p.size, bus, width)


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
    body = raw[16:]
    body = body[: body.size - body.size % (8 + 4 * nw)]  # a run cut short mid-record
    words = body.view("<u4").reshape(-1, 2 + nw)
    chunk, lanes = _decode_records(words, width, bus)
    cap = _build(family, [chunk], height, split_on_height, facts, capacity=int(chunk.values.size),
                 value_bits=width if lanes is None else None)
    cap.facts.out_data_bits = width
    kinds = words[:, 1] & 0xFF
    masks = words[kinds == ord("M"), 2].astype(np.int64)
    return _lanes_of(cap, chunk.values, lanes, masks, int((kinds == ord("P")).sum()), bus, width)


def _lanes_of(cap: Capture, values: np.ndarray, lanes: np.ndarray | None, masks: np.ndarray, words: int,
              bus: BusLayout | None, width: int | None) -> Capture:
    """``cap`` as one sample a pixel where its words were split into ``lanes`` already, or, with output lane
    ``masks`` (one a word), keeping only the lanes each mask marks; else ``cap`` as it is (one sample a word)."""
    if masks.size and bus is not None and bus.lanes > 1:  # an output lane mask: keep the marked lanes only
        if masks.size != words or width is None:
            raise ConfigError(f"capture file: {masks.size} lane masks for {words} output words"
                              f"{'' if width is not None else ' and no data width'}; rerun the case")
        return spread_kept_lanes(cap, lanes if lanes is not None else split_lanes(values, bus, width), masks, bus)
    return cap if lanes is None else spread_lanes(cap, lanes)


def _role_code(role: str) -> int:
    return CAPTURE_ROLES.index(role) if role in CAPTURE_ROLES else 0


@dataclass
class _Chunk:
    """Decoded capture events: clock, ASCII kind and code of every event; the value of every pixel event."""

    clock: np.ndarray
    kind: np.ndarray
    code: np.ndarray
    values: np.ndarray
    xz_count: int


def _decode_records(words: np.ndarray, width: int, bus: BusLayout | None = None) -> tuple[_Chunk, np.ndarray | None]:
    """Binary records (``(n, 2 + data words)`` uint32) of a ``width``-bit bus decoded; X/Z pixels get
    :data:`UNKNOWN`. A word wider than :data:`MAX_WORD_BITS` comes back as its lane values (``(n, lanes)``,
    :func:`_wide_lanes`) beside zeros in the chunk; else the lanes are None."""
    nw = words.shape[1] - 2
    kind_a = (words[:, 1] & 0xFF).astype(np.uint8)
    code = ((words[:, 1] >> 8) & 0xFF).astype(np.uint8)
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
    return _Chunk(words[:, 0].astype(np.int64), kind_a, code, values, int(xz.sum())), lanes


_BLOCK_RECORDS = 1 << 20
"""Records read from a binary capture file at a time (12 MB for an 8-bit bus): the reader's memory is about
one block's records and their numbering, whatever the length of the run or the size of a frame."""


_FOLLOW_POLL_S = 0.01
"""How long the reader waits for more of a capture file the simulator is still writing, s."""

Running = Callable[[], bool]
"""Tells a reader following a capture file whether the simulator writing it still runs."""


def _record_blocks(fh: BinaryIO, width: int, running: Running | None) -> Iterator[np.ndarray]:
    """Whole records from ``fh`` (``(k, width)`` uint32), :data:`_BLOCK_RECORDS` at a time; with ``running``,
    the file is followed while the simulator writes it (a record cut at the end waits for its rest)."""
    rec = 4 * width
    rest = b""
    while True:
        data = fh.read(_BLOCK_RECORDS * rec)
        if not data and running is not None and running():
            time.sleep(_FOLLOW_POLL_S)
            continue
        if not data:  # the writer is done: one last look catches what came after the previous read
            data = fh.read(_BLOCK_RECORDS * rec)
            if not data:
                return
        data = rest + data
        whole = len(data) - len(data) % rec
        rest = data[whole:]
        if whole:
            yield np.frombuffer(data[:whole], "<u4").reshape(-1, width)


def _frame_blocks(path: Path, nw: int, running: Running | None = None) -> Iterator[np.ndarray]:
    """The records of a binary capture file, ``(k, 2 + nw)`` uint32, in chunks of about :data:`_BLOCK_RECORDS`
    each cut right after a line or frame delimiter (``L``/``F``; a run cut short mid-record loses that record)."""
    width = 2 + nw
    pending = np.zeros((0, width), np.uint32)
    with open(path, "rb") as fh:
        fh.seek(_BINARY_HEADER_BYTES)
        for block in _record_blocks(fh, width, running):
            words = np.concatenate([pending, block]) if pending.shape[0] else block
            kinds = words[:, 1] & 0xFF
            delim = np.flatnonzero((kinds == ord("L")) | (kinds == ord("F")))
            if delim.size == 0:
                pending = words
                continue
            cut = int(delim[-1]) + 1
            yield words[:cut]
            pending = words[cut:].copy()  # the block itself is let go
    if pending.shape[0]:
        yield pending


def _parse_binary_file(path: Path, *, family: str | None = None, height: int | None = None,
                       split_on_height: bool = False, facts: RunFacts | None = None, bus: BusLayout | None = None,
                       running: Running | None = None, capacity: int | None = None, keep: bool = False) -> Capture:
    """:func:`parse_capture_binary` of a file, read a block at a time (bounded memory on long runs of big
    frames); with ``running``, while the simulator still writes it (``capacity``: pixels expected). Frames
    split on height and words wider than :data:`MAX_WORD_BITS` are read whole, once the file is complete."""
    with open(path, "rb") as fh:
        head = np.frombuffer(fh.read(_BINARY_HEADER_BYTES), "<u4")
    if head.size < 4:
        raise ConfigError("capture file: no binary capture header (VKCB); give a file written by the vkit harness")
    version, fam_code, width = (int(v) for v in head[1:4])
    if split_on_height or version != CAPTURE_VERSION or width > MAX_WORD_BITS or keep:  # keep: lane masks, read whole
        if running is not None:
            _wait_while(running)
        return parse_capture_binary(np.fromfile(path, np.uint8), family=family, height=height,
                                    split_on_height=split_on_height, facts=facts, bus=bus)
    family = family or ("stream" if fam_code == FAMILY_CODES["stream"] else "video")
    nw = capture_data_words(width)
    if capacity is None or running is None:
        capacity = max(0, path.stat().st_size - _BINARY_HEADER_BYTES) // (8 + 4 * nw)
    chunks = (_decode_records(words, width)[0] for words in _frame_blocks(path, nw, running))
    cap = _build(family, chunks, height, False, facts, capacity=capacity, value_bits=width)
    cap.facts.out_data_bits = width
    return cap


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


@dataclass
class _NonPixel:
    """The events other than pixels, in order: clock, ASCII kind, code and the pixels that came before each."""

    clock: list[np.ndarray] = field(default_factory=list)
    kind: list[np.ndarray] = field(default_factory=list)
    code: list[np.ndarray] = field(default_factory=list)
    pixels_before: list[np.ndarray] = field(default_factory=list)
    last_clock: int | None = None

    def add(self, chunk: _Chunk, pixels_so_far: int) -> None:
        other = np.flatnonzero(chunk.kind != ord("P"))
        self.clock.append(chunk.clock[other])
        self.kind.append(chunk.kind[other])
        self.code.append(chunk.code[other])
        self.pixels_before.append(pixels_so_far + np.cumsum(chunk.kind == ord("P"))[other] if other.size else other)
        if chunk.clock.size:
            self.last_clock = int(chunk.clock[-1])


def _scan_events(family: str, events: _NonPixel) -> _Events:
    """Walk the non-pixel events in order (syncs, X/Z, waits, first input, timeout, end)."""
    ev = _Events()
    parts = (np.concatenate(x).tolist() if x else [] for x in (events.clock, events.kind, events.code, events.pixels_before))
    for clock, k, code, before in zip(*parts):
        kind = chr(k)
        if kind == "F" and family == "video":
            ev.vsync_count += 1
            ev.vsync_clocks.append(clock)
            ev.hsync_per_frame.append(ev.hs_count)
            ev.hs_count = 0
        elif kind == "H":
            ev.hs_count += 1
            ev.hsync_clocks.append(clock)
        elif kind == "B":
            ev.bounded("de_in_blanking", clock)
        elif kind == "X":
            ev.bounded("xz_control", [clock, CAPTURE_ROLES[code] if 0 < code < len(CAPTURE_ROLES) else "-"])
        elif kind == "K":
            ev.waited_next.append(before)
        elif kind == "I":
            ev.first_input = clock
        elif kind == "T":
            ev.timed_out = True
        elif kind == "E":
            ev.clocks_run = clock
    return ev


class _PixelArrays:
    """The per-pixel arrays of a capture, filled chunk by chunk in the smallest dtypes that hold them
    (int32; values int16 for a bus of up to 15 bits, int64 above 31; clocks int64 past 2**31)."""

    def __init__(self, capacity: int, value_bits: int | None) -> None:
        values = np.int64 if value_bits is None or value_bits > 31 else np.int32 if value_bits > 15 else np.int16
        self.names = ("values", "clock", "frame", "line", "column")
        self.arrays = {n: np.empty(capacity, values if n == "values" else np.int32) for n in self.names}
        self.size = 0

    def add(self, values: np.ndarray, clock: np.ndarray, frame: np.ndarray, line: np.ndarray, column: np.ndarray) -> None:
        k = int(values.size)
        end = self.size + k
        for name, part in zip(self.names, (values, clock, frame, line, column)):
            arr = self.arrays[name]
            if end > arr.size:  # more pixels than the file's records: only when the capacity was a guess
                arr = self.arrays[name] = np.concatenate([arr[: self.size], np.empty(max(end, 2 * arr.size), arr.dtype)])
            if part.size and arr.dtype != np.int64 and int(part.max()) > np.iinfo(arr.dtype).max:
                arr = self.arrays[name] = arr.astype(np.int64)
            arr[self.size:end] = part
        self.size = end

    def capture(self, facts: RunFacts) -> Capture:
        return Capture(*(self.arrays[n][: self.size] for n in self.names), facts=facts)


def _build(family: str, chunks: Iterable[_Chunk], height: int | None, split_on_height: bool,
           facts: RunFacts | None, *, capacity: int = 0, value_bits: int | None = None) -> Capture:
    """The Capture from decoded events, a chunk at a time (both formats).

    Chunks after the first start right after an ``L`` or ``F`` event (the numbering carries over,
    :class:`_Carry`); with ``split_on_height`` there is one chunk.
    """
    out_facts = copy.deepcopy(facts) if facts is not None else RunFacts()
    if out_facts.family is None:
        out_facts.family = family
    pixels = _PixelArrays(capacity, value_bits)
    events = _NonPixel()
    carry = _Carry()
    xz_seen = 0
    for chunk in chunks:
        is_p = chunk.kind == ord("P")
        pos_p = np.flatnonzero(is_p)
        if split_on_height and height and (chunk.kind == ord("F")).any():
            frame_a, line_a, col_a = _positions_loop(chunk.kind, bool(split_on_height), height)
        else:
            frame_a, line_a, col_a = _positions(chunk.kind, is_p, pos_p, bool(split_on_height), height, carry)
        events.add(chunk, pixels.size)
        pixels.add(chunk.values, chunk.clock[pos_p], frame_a, line_a, col_a)
        xz_seen += chunk.xz_count
    cap = pixels.capture(out_facts)
    _fill_facts(cap, family, _scan_events(family, events), xz_seen, events.last_clock)
    return cap


def _fill_facts(cap: Capture, family: str, ev: _Events, xz_data: int, last_clock: int | None) -> None:
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
        clocks_run = last_clock + 1 if last_clock is not None else 0
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


@dataclass
class _Carry:
    """Where the numbering stands at a chunk edge (right after a line or frame delimiter): frames opened,
    lines closed in the current frame, and whether a pixel came since the last ``F``."""

    frame: int = 0
    line: int = 0
    frame_has: bool = False


def _positions(kind: np.ndarray, is_p: np.ndarray, pos_p: np.ndarray, split: bool, height: int | None,
               carry: _Carry | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Frame, line and column of every pixel event, vectorised (see the module docstring for the rules).

    ``carry``: the events continue a run cut right after a delimiter (not with ``split``); updated in place.
    """
    n = kind.size
    carry = carry if carry is not None else _Carry()
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
    # An F opens a new frame when a pixel came since the last F (in an earlier chunk, for the first one).
    f_pos = np.flatnonzero(is_f)
    p_at_f = cum_p[f_pos]
    prev_p_at_f = np.concatenate(([0], p_at_f[:-1]))
    eff_f = np.zeros(n, bool)
    eff_f[f_pos] = p_at_f > prev_p_at_f
    if f_pos.size and carry.frame_has:
        eff_f[f_pos[0]] = True
    cum_eff_l = np.cumsum(eff_l)
    last_d = np.maximum.accumulate(np.where(delim, idx, -1))
    last_f = np.maximum.accumulate(np.where(is_f, idx, -1))
    base_p = np.where(last_d >= 0, cum_p[np.maximum(last_d, 0)], 0)
    col = cum_p - 1 - base_p
    if split and height:
        frame = cum_eff_l // height
        line = cum_eff_l % height
    else:
        frame = np.cumsum(eff_f) + carry.frame
        line = cum_eff_l - np.where(last_f >= 0, cum_eff_l[np.maximum(last_f, 0)], -carry.line)
        _carry_on(carry, cum_p, cum_eff_l, f_pos, int(eff_f.sum()))
    return frame[pos_p], line[pos_p], col[pos_p]


def _carry_on(carry: _Carry, cum_p: np.ndarray, cum_eff_l: np.ndarray, f_pos: np.ndarray, frames_opened: int) -> None:
    """Move ``carry`` to the end of a chunk (its cumulative pixel and closed-line counts, its ``F`` events)."""
    if not cum_p.size:
        return
    carry.frame += frames_opened
    if f_pos.size:
        last = int(f_pos[-1])
        carry.line = int(cum_eff_l[-1] - cum_eff_l[last])
        carry.frame_has = bool(cum_p[-1] > cum_p[last])
    else:
        carry.line += int(cum_eff_l[-1])
        carry.frame_has = carry.frame_has or bool(cum_p[-1] > 0)


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


def _wait_while(running: Running, path: Path | None = None) -> None:
    """Wait while ``running`` says the simulator runs (and, with ``path``, only until that file has a header)."""
    while running():
        if path is not None and path.is_file() and path.stat().st_size >= _BINARY_HEADER_BYTES:
            return
        time.sleep(_FOLLOW_POLL_S)


def _parse_file(path: Path, running: Running | None = None, capacity: int | None = None, keep: bool = False,
                **kwargs: Any) -> Capture:
    """Parse a harness capture file in either format (told apart by the header); with ``running``, a binary
    file is read while the simulator writes it, a text file once it is done."""
    if running is not None:
        _wait_while(running, path)
    if path.is_dir():
        raise ConfigError(f"capture file {str(path)!r} is a directory; give the capture.bin or capture.txt file in it")
    if not path.is_file():
        raise DutError(f"capture file {str(path)!r} does not exist: the simulation did not start the harness; "
                       "see the simulator log")
    with open(path, "rb") as fh:
        head = fh.read(len(TEXT_HEADER))
    if is_binary_capture(head):
        return _parse_binary_file(path, running=running, capacity=capacity, keep=keep, **kwargs)
    if not is_text_capture(head):
        raise _not_a_capture(path)
    if running is not None:
        _wait_while(running)
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


def read_capture(path: str | Path, case: SimCase, stim: StimulusFiles | None = None, *,
                 running: Running | None = None) -> Capture:
    """Read a harness capture file (live fast-path run, native run or exported testbench; binary or text).

    Args:
        path: the ``capture.bin`` / ``capture.txt`` the harness wrote.
        case: the case the run was made from (gives the input-side run facts and how frames split).
        stim: the stimulus the run used, if at hand (saves rebuilding it).
        running: read the file while the simulator writes it, as long as this says it runs (the Verilog
            harness flushes the file at every output line end): the reading overlaps the simulation.

    Raises:
        DutError: the file does not exist (the simulation never opened it).
        ConfigError: the file is not a vkit capture file (neither header), or of another format version.
    """
    cap = _parse_file(
        Path(path),
        running=running,
        capacity=stim.expect_pixels if stim is not None else None,
        family=case.family,
        height=int(case.height),
        split_on_height=case.family == "video" and "out_vsync" not in case.signals,
        facts=input_meta(case, stim),
        bus=case.bus_layout(),
        keep="out_keep" in case.signals,
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
        if cap.facts.out_data_bits <= MAX_WORD_BITS and "out_keep" not in case.signals:  # split as it was read
            cap = unpack_capture(cap, bus, cap.facts.out_data_bits)
    if case.family == "video":
        pattern = case.enable_pattern()
        enable = None
        if pattern is not None:
            enable = schedule(case.video_timing(), case.frame_count(), case.stall_pattern(), pattern).enable
        cap.facts.latency_samples = samples_between(enable, cap.facts.first_input_clock, cap.facts.first_output_clock)
    return cap
