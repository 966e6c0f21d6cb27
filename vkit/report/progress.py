"""Progress of a long run: one updating line on a terminal, one plain line per case in CI logs."""

from __future__ import annotations

import os
import shutil
import sys
import time
from typing import Callable, TextIO

__all__ = ["Progress", "format_duration"]

_CLEAR_LINE = "\r\x1b[2K"
"""Carriage return, then ANSI "erase entire line" (ECMA-48 EL 2): the status line is redrawn in place."""
_DIAGNOSIS_CHARS = 120
"""Longest diagnosis quoted in a failing case's line (the report has the whole text)."""


def format_duration(seconds: float) -> str:
    """``m:ss`` under an hour, ``h:mm:ss`` above (whole seconds, rounded)."""
    total = max(0, int(round(seconds)))
    minutes, secs = divmod(total, 60)
    hours, minutes = divmod(minutes, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes}:{secs:02d}"


class Progress:
    """Counts finished cases and shows done/total, passes, failures, elapsed and estimated time left.

    On a terminal (``live``) one status line is redrawn in place after each case, and each case that did
    not pass is printed above it as a line of its own so it stays on screen. Elsewhere (CI logs, files,
    pipes) every case gets one plain line, no control characters.

    The estimate is ``elapsed / done * (total - done)``: cases finish at the average rate so far, which
    holds for a parallel run too because elapsed is wall time.

    Args:
        total: cases the run will finish (>= 0).
        stream: where the lines go (default ``sys.stdout``).
        live: force the terminal (True) or plain (False) mode; default: live when ``stream`` is a
            terminal and ``TERM`` is not ``dumb``.
        clock: seconds from any fixed origin (default ``time.monotonic``; tests pass their own).
        indent: text put before every case line; a run indents them so that a case's progress line never
            reads like the closing problem line (``FAIL <id>: ...``) that CI logs are searched for.
    """

    def __init__(self, total: int, stream: TextIO | None = None, *, live: bool | None = None,
                 clock: Callable[[], float] = time.monotonic, indent: str = "") -> None:
        self.total = max(0, int(total))
        self.stream = stream if stream is not None else sys.stdout
        self.live = _is_terminal(self.stream) if live is None else bool(live)
        self._clock = clock
        self._start = clock()
        self.done = 0
        self.passed = 0
        self.failed = 0
        self.errors = 0
        self._drawn = False
        self.indent = indent

    def elapsed(self) -> float:
        """Seconds since the run started."""
        return self._clock() - self._start

    def remaining(self, elapsed: float | None = None) -> float | None:
        """Estimated seconds left (at ``elapsed`` seconds, default now), or None before the first case is done."""
        if not self.done:
            return None
        elapsed = self.elapsed() if elapsed is None else elapsed
        return elapsed / self.done * max(0, self.total - self.done)

    def status(self) -> str:
        """The counters as one line of text: ``[12/40] 10 passed, 2 failed, 0:35 elapsed, ~1:22 left``."""
        elapsed = self.elapsed()
        left = self.remaining(elapsed)
        parts = [f"[{self.done}/{self.total}] {self.passed} passed, {self.failed} failed"]
        if self.errors:
            parts.append(f"{self.errors} errors")
        parts.append(f"{format_duration(elapsed)} elapsed")
        parts.append("time left unknown" if left is None else f"~{format_duration(left)} left")
        return ", ".join(parts)

    def update(self, case_id: str, status: str, seconds: float | None = None, diagnosis: str | None = None,
               note: str = "") -> None:
        """Count one finished case and show it.

        Args:
            case_id: the case's id.
            status: ``pass``, ``fail``, ``no_output`` or ``error``.
            seconds: the case's own time, s.
            diagnosis: what went wrong, for a case that did not pass (shortened to 120 characters).
            note: extra words for the case's line (e.g. ``expected to fail``).
        """
        self.done += 1
        if status == "pass":
            self.passed += 1
        elif status == "error":
            self.errors += 1
        else:
            self.failed += 1
        line = self._case_line(case_id, status, seconds, diagnosis, note)
        if not self.live:
            self._write(f"{line}  ({self.status()})\n")
            return
        if status != "pass":
            self._write(f"{_CLEAR_LINE}{line}\n")
        self._draw()

    def echo(self, text: str) -> None:
        """Print a line of its own (a build message, a waves path) without breaking the status line."""
        if self.live and self._drawn:
            self._write(f"{_CLEAR_LINE}{text}\n")
            self._draw()
        else:
            self._write(f"{text}\n")

    def close(self) -> None:
        """End the status line (live mode) so later output starts on a fresh line."""
        if self.live and self._drawn:
            self._write(f"{_CLEAR_LINE}{self.status()}\n")
            self._drawn = False

    def __enter__(self) -> Progress:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _case_line(self, case_id: str, status: str, seconds: float | None, diagnosis: str | None, note: str) -> str:
        text = f"{self.indent}{status.upper() if status != 'pass' else 'pass'} {case_id}"
        if seconds is not None:
            text += f" {seconds:.1f} s"
        if diagnosis and status != "pass":
            text += f": {diagnosis if len(diagnosis) <= _DIAGNOSIS_CHARS else diagnosis[:_DIAGNOSIS_CHARS - 3] + '...'}"
        if note:
            text += f" [{note}]"
        return text

    def _draw(self) -> None:
        width = shutil.get_terminal_size((100, 24)).columns
        line = self.status()
        if len(line) >= width:
            line = line[: max(1, width - 1)]
        self._write(f"{_CLEAR_LINE}{line}")
        self._drawn = True

    def _write(self, text: str) -> None:
        self.stream.write(text)
        self.stream.flush()


def _is_terminal(stream: TextIO) -> bool:
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty and isatty()) and os.environ.get("TERM", "") != "dumb"
    except ValueError:  # a closed stream
        return False
