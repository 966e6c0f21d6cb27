"""The vkit command: exit codes, one-line errors, and the small file-writing commands."""

from __future__ import annotations

import math
import subprocess
import sys

from PIL import Image

from vkit.cli import main


def test_user_errors_are_one_line_with_exit_code_2(tmp_path, capsys):
    assert main(["run", str(tmp_path / "missing.toml")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("vkit: error: ") and "\n" not in err and "missing.toml" in err
    assert main(["no-such-command"]) == 2
    assert main(["pattern", "nope", "-o", str(tmp_path / "x.png")]) == 2
    assert "unknown name 'nope'" in capsys.readouterr().err


def test_python_dash_m_has_no_traceback(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("[run\n")
    proc = subprocess.run([sys.executable, "-m", "vkit", "run", str(bad)], capture_output=True, text=True, check=False)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert proc.stderr.startswith(f"vkit: error: {bad}:1:")


def test_lut_root_matches_isqrt(tmp_path):
    out = tmp_path / "root.hex"
    assert main(["lut", "root", "--address-bits", "13", "--data-bits", "8", "--scale", "8",
                 "--format", "readmemh", "-o", str(out)]) == 0
    words = [int(line, 16) for line in out.read_text().splitlines() if line.strip() and not line.startswith("//")]
    assert len(words) == 8192
    # reference: Python's math.isqrt (floor of the exact root), saturated to 8 bits
    assert words == [min(255, math.isqrt(8 * a)) for a in range(8192)]


def test_pattern_and_widths(tmp_path, capsys):
    out = tmp_path / "c.png"
    assert main(["pattern", "checkerboard", "--size", "40x20", "-o", str(out)]) == 0
    with Image.open(out) as im:
        assert im.size == (40, 20)
    assert main(["widths", "edge"]) == 0
    assert "sum_sq" in capsys.readouterr().out
