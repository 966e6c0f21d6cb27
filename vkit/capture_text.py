"""Parse the fast-path harness's capture text file into a :class:`vkit.capture.Capture`.

File format (written by :mod:`vkit.harness`): a first line ``# vkit capture 1 FAMILY``, then one
event per line, ``CLOCK KIND ARG``, in the order the harness saw them (several per clock possible):

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

Frame and line numbering follow the per-clock monitors exactly: a frame or line delimiter that
closes an empty frame or line does not advance the count; without an output vsync, a video frame
closes after ``height`` lines.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from vkit.capture import UNKNOWN, Capture
from vkit.errors import ConfigError, DutError

__all__ = ["MAX_EVENTS", "parse_capture_text", "read_capture_text"]

MAX_EVENTS = 1000
"""At most this many entries are kept in an event list (xz_control, de_in_blanking); the rest are counted."""


def parse_capture_text(
    text: str,
    *,
    family: str | None = None,
    height: int | None = None,
    split_on_height: bool = False,
    meta: dict[str, Any] | None = None,
) -> Capture:
    """Turn capture text into a :class:`Capture`.

    Args:
        text: the file's content.
        family: "video" or "stream"; default from the header line.
        height: active lines per frame (used with ``split_on_height``).
        split_on_height: close a video frame after ``height`` lines (when the design has no output vsync).
        meta: meta entries known from the input side (frames_sent, first_input_clock, ...); copied in.

    Raises:
        ConfigError: the text is not a vkit capture (no header line).
    """
    lines = text.split("\n")
    if not lines or not lines[0].startswith("# vkit capture"):
        raise ConfigError("capture text: the first line is not '# vkit capture ...'; give a file written by the vkit harness")
    head = lines[0].split()
    family = family or (head[4] if len(head) > 4 else "video")
    tokens = " ".join(lines[1:]).split()
    if len(tokens) % 3:
        tokens = tokens[: len(tokens) - len(tokens) % 3]  # a run cut short mid-line
    clocks = tokens[0::3]
    kinds = tokens[1::3]
    args = tokens[2::3]

    out_meta: dict[str, Any] = dict(meta or {})
    out_meta.setdefault("family", family)
    out_meta.setdefault("notes", [])
    counts = {"xz_control": 0, "de_in_blanking": 0}
    xz_control: list[list[Any]] = []
    de_in_blanking: list[int] = []
    hsync_per_frame: list[int] = []
    vsync_count = 0
    hs_count = 0
    timed_out = False
    clocks_run: int | None = None
    first_input: int | None = None
    waited_next: list[int] = []

    n_pix = kinds.count("P")
    values = np.empty(n_pix, np.int64)
    clock_a = np.empty(n_pix, np.int64)
    frame_a = np.empty(n_pix, np.int64)
    line_a = np.empty(n_pix, np.int64)
    col_a = np.empty(n_pix, np.int64)
    frame = line = col = 0
    frame_has = line_has = False
    lines_in_frame = 0
    k = 0
    xz_data = 0
    for i, kind in enumerate(kinds):
        if kind == "P":
            a = args[i]
            if a == "U":
                v = UNKNOWN
                xz_data += 1
            else:
                try:
                    v = int(a, 16)
                except ValueError:
                    v = UNKNOWN
                    xz_data += 1
            values[k] = v
            clock_a[k] = int(clocks[i])
            frame_a[k] = frame
            line_a[k] = line
            col_a[k] = col
            k += 1
            col += 1
            frame_has = line_has = True
        elif kind == "L":
            if line_has:
                line += 1
                lines_in_frame += 1
                if split_on_height and height and lines_in_frame >= height:
                    frame += 1
                    line = 0
                    lines_in_frame = 0
                    frame_has = False
            col = 0
            line_has = False
        elif kind == "F":
            if family == "video":
                vsync_count += 1
                hsync_per_frame.append(hs_count)
                hs_count = 0
            if frame_has:
                frame += 1
            line = col = 0
            lines_in_frame = 0
            frame_has = line_has = False
        elif kind == "H":
            hs_count += 1
        elif kind == "B":
            counts["de_in_blanking"] += 1
            if counts["de_in_blanking"] <= MAX_EVENTS:
                de_in_blanking.append(int(clocks[i]))
        elif kind == "X":
            counts["xz_control"] += 1
            if counts["xz_control"] <= MAX_EVENTS:
                xz_control.append([int(clocks[i]), args[i]])
        elif kind == "K":
            waited_next.append(k)
        elif kind == "I":
            first_input = int(clocks[i])
        elif kind == "T":
            timed_out = True
        elif kind == "E":
            clocks_run = int(clocks[i])
    cap = Capture(values[:k], clock_a[:k], frame_a[:k], line_a[:k], col_a[:k], out_meta)
    m = cap.meta
    m["xz_data_count"] = xz_data
    m["xz_control"] = xz_control
    if family == "video":
        m["de_in_blanking"] = de_in_blanking
        m["output_vsync_count"] = vsync_count
        m["output_hsync_per_frame"] = hsync_per_frame
    if family == "stream":
        m["backpressure_pixels"] = [[int(frame_a[i]), int(line_a[i]), int(col_a[i])] for i in waited_next if i < k]
    if first_input is not None:
        m["first_input_clock"] = first_input
    m["first_output_clock"] = int(clock_a[0]) if k else None
    if m.get("first_output_clock") is not None and m.get("first_input_clock") is not None:
        m["latency_clocks"] = int(m["first_output_clock"]) - int(m["first_input_clock"])
    if clocks_run is None:
        m["notes"].append("capture text has no end line: the simulation stopped before the harness finished")
        clocks_run = int(clocks[-1]) + 1 if clocks else 0
        timed_out = True
    m["clocks_run"] = clocks_run
    m["timed_out"] = bool(timed_out)
    for key, total in counts.items():
        if total > MAX_EVENTS:
            m["notes"].append(f"{key}: {total} events, only the first {MAX_EVENTS} are listed")
    return cap


def read_capture_text(path: str | Path, **kwargs: Any) -> Capture:
    """Read a capture text file (see :func:`parse_capture_text` for the keyword arguments).

    Raises:
        DutError: the file does not exist (the simulation never opened it).
    """
    p = Path(path)
    if not p.is_file():
        raise DutError(f"capture text {str(p)!r} does not exist: the simulation did not start the harness; see the simulator log")
    return parse_capture_text(p.read_text(errors="replace"), **kwargs)
