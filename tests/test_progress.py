"""The run progress display: plain lines for logs, one redrawn line for a terminal (no timed assertions:
the clock is a list of readings the test hands out)."""

from __future__ import annotations

import io

import pytest

from vkit.report.progress import Progress, format_duration


class FakeClock:
    """Hands out the given readings in order, seconds."""

    def __init__(self, *readings: float):
        self.readings = list(readings)

    def __call__(self) -> float:
        return self.readings.pop(0) if len(self.readings) > 1 else self.readings[0]


class Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def screen(text: str) -> list[str]:
    """What a terminal shows: "\\r" returns to column 0, ESC[2K erases the line (ECMA-48 EL 2)."""
    lines = [""]
    i = 0
    while i < len(text):
        if text.startswith("\x1b[2K", i):
            lines[-1] = ""
            i += 4
        elif text[i] == "\r":
            i += 1
        elif text[i] == "\n":
            lines.append("")
            i += 1
        else:
            lines[-1] += text[i]
            i += 1
    return [line for line in lines if line]


def test_plain_mode_writes_one_line_per_case_with_counts_and_estimate():
    out = io.StringIO()
    p = Progress(4, out, live=False, clock=FakeClock(0.0, 10.0, 20.0))  # start, then one reading per case
    p.update("a/icarus/box", "pass", 9.5)
    p.update("b/icarus/box", "fail", 9.9, diagnosis="rounding: 60 pixels differ by exactly 1 LSB", note="expected to fail")
    p.close()
    text = out.getvalue()
    assert "\r" not in text and "\x1b" not in text  # CI logs get no control characters
    lines = text.splitlines()
    assert lines[0] == "pass a/icarus/box 9.5 s  ([1/4] 1 passed, 0 failed, 0:10 elapsed, ~0:30 left)"
    # 20 s for 2 cases, 2 to go at the same rate: 20 s left
    assert lines[1] == ("FAIL b/icarus/box 9.9 s: rounding: 60 pixels differ by exactly 1 LSB [expected to fail]"
                        "  ([2/4] 1 passed, 1 failed, 0:20 elapsed, ~0:20 left)")
    assert len(lines) == 2


def test_live_mode_keeps_failures_and_redraws_one_status_line():
    out = io.StringIO()
    p = Progress(3, out, live=True, clock=FakeClock(0.0, 5.0, 10.0, 10.0, 15.0))  # start, then one per redraw
    p.update("a", "pass", 1.0)
    p.update("b", "error", 1.0, diagnosis="could not build b")
    p.echo("waves: b/waves.fst")
    p.update("c", "pass", 1.0)
    p.close()
    shown = screen(out.getvalue())
    assert shown == ["ERROR b 1.0 s: could not build b", "waves: b/waves.fst",
                     "[3/3] 2 passed, 0 failed, 1 errors, 0:15 elapsed, ~0:00 left"]
    assert out.getvalue().count("\n") == 3  # the status line is redrawn in place, never scrolled


def test_long_diagnosis_is_shortened_and_estimate_waits_for_a_case():
    out = io.StringIO()
    p = Progress(2, out, live=False, clock=FakeClock(0.0))
    assert p.remaining() is None and "time left unknown" in p.status()
    p.update("a", "fail", diagnosis="x" * 500)
    assert "x" * 117 + "..." in out.getvalue() and "x" * 118 not in out.getvalue()


@pytest.mark.parametrize("term, live", [("xterm-256color", True), ("dumb", False)])
def test_terminal_is_detected_from_the_stream(monkeypatch, term, live):
    monkeypatch.setenv("TERM", term)
    assert Progress(1, Tty()).live is live
    assert Progress(1, io.StringIO()).live is False  # a file or pipe: plain lines


def test_format_duration():
    assert format_duration(59.6) == "1:00"
    assert format_duration(3725) == "1:02:05"  # 1 h 2 min 5 s
    assert format_duration(-3) == "0:00"
