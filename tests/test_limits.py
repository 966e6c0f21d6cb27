"""Frame and case sizes are checked against named limits before any pixel is made (vkit.video.limits).

A size that would exhaust the machine is one line at config time, exit code 2, instead of a
MemoryError or a run that grows without output.
"""

from __future__ import annotations

import time
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL
from vkit.cli import main
from vkit.core.errors import ConfigError
from vkit.video import limits
from vkit.video.limits import BYTES_PER_PIXEL, MAX_FRAME_PIXELS, MAX_FRAMES, check_case_size
from vkit.video.patterns import make_pattern

PORTS = ", ".join(f'{r} = "{p}"' for r, p in (
    ("clock", "clk"), ("reset", "rst"), ("in_vsync", "in_vsync"), ("in_hsync", "in_hsync"), ("in_de", "in_de"),
    ("in_valid", "in_valid"), ("in_data", "in_data"), ("out_vsync", "out_vsync"), ("out_hsync", "out_hsync"),
    ("out_de", "out_de"), ("out_valid", "out_valid"), ("out_data", "out_data")))


def _config(tmp_path: Path, stimulus: str) -> Path:
    p = tmp_path / "vkit.toml"
    p.write_text(f'[run]\nsimulators = ["icarus"]\nout_dir = "out"\n[designs.d]\ntop = "blur_core"\n'
                 f'sources = ["{SAMPLE_RTL / "window3x3.v"}", "{SAMPLE_RTL / "blur_core.v"}"]\nspec = "blur"\n'
                 f'ports = {{ {PORTS} }}\n[stimulus]\npatterns = ["impulse"]\n{stimulus}\n')
    return p


def _refused(capsys: pytest.CaptureFixture[str], *argv: str) -> str:
    t0 = time.monotonic()
    code = main(list(argv))
    seconds = time.monotonic() - t0
    out, err = capsys.readouterr()
    assert code == 2 and "Traceback" not in out + err
    assert seconds < 60  # refused before generating anything (a loose bound: this is no speed test)
    (line,) = err.strip().splitlines()
    return line


def test_a_billion_frames_is_refused_at_config_time(tmp_path, capsys):
    line = _refused(capsys, "run", str(_config(tmp_path, "frames = 1000000000")))
    assert line == ("vkit: error: vkit.toml [stimulus]: frames = 1000000000 is over the limit of 10000 frames a case "
                    "(each frame is scored and reported on its own); use fewer frames, or more seeds for more runs")
    assert not (tmp_path / "out").exists()


def test_huge_frame_size_is_refused_at_config_time(tmp_path, capsys):
    line = _refused(capsys, "run", str(_config(tmp_path, "size = [100000, 100000]")))
    assert line == ("vkit: error: vkit.toml [stimulus]: size = '100000x100000' is 10000000000 pixels, over the limit "
                    "of 33177600 pixels a frame (8K UHD, 7680x4320: a 3x3 filter shows nothing new in a bigger frame); "
                    "use a smaller size")


def test_huge_pattern_on_the_command_line(tmp_path, capsys):
    line = _refused(capsys, "pattern", "ramp_h", "--size", "100000x100000", "-o", str(tmp_path / "p.png"))
    assert line.startswith("vkit: error: pattern 'ramp_h': size = '100000x100000' is 10000000000 pixels, over the limit")
    assert not (tmp_path / "p.png").exists()


def test_case_memory_estimate_against_the_budget(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(limits, "memory_budget", lambda: 10**9)  # a 1 GB machine share
    line = _refused(capsys, "run", str(_config(tmp_path, "frames = 1000\nsize = [1920, 1080]")))
    need = 1000 * 1920 * 1080 * BYTES_PER_PIXEL
    assert line == ("vkit: error: vkit.toml [stimulus]: frames = 1000 is 2073600000 pixels a case at 1920x1080, about "
                    f"{need / 1e9:,.1f} GB of memory (200 bytes a pixel for frames, model stages and capture), over the "
                    "budget of 1.0 GB (50% of this machine's memory); use fewer frames or a smaller size")


def test_limits_at_their_edges():
    check_case_size("t", MAX_FRAMES, 2, 2, budget=10**12)
    check_case_size("t", 1, 7680, 4320, budget=10**12)  # 8K UHD itself is allowed (ITU-R BT.2020, from memory)
    with pytest.raises(ConfigError, match="over the limit of 10000 frames"):
        check_case_size("t", MAX_FRAMES + 1, 2, 2, budget=10**12)
    with pytest.raises(ConfigError, match="over the limit of 33177600 pixels a frame"):
        check_case_size("t", 1, 7681, 4320, budget=10**12)
    assert MAX_FRAME_PIXELS == 7680 * 4320
    with pytest.raises(ConfigError, match="over the limit"):
        make_pattern("noise", 4321, 7680)
    assert limits.memory_budget() > 0
