"""Cutting a value change dump to a time window (the VCD format of IEEE 1364, section 18)."""

from __future__ import annotations

import pytest

from vkit.core.errors import ToolError
from vkit.sim.vcd import cut_vcd

DUMP = """$date today $end
$timescale 1 ns $end
$scope module top $end
$var wire 1 ! clk $end
$var wire 8 " data [7:0] $end
$upscope $end
$enddefinitions $end
#0
$dumpvars
0!
b0 "
$end
#5
1!
#10
0!
b101 "
#15
1!
#20
0!
b111 "
#25
1!
"""


def _times(text: str) -> list[int]:
    return [int(line[1:]) for line in text.splitlines() if line.startswith("#")]


def test_window_keeps_header_state_at_start_and_changes_inside(tmp_path):
    src = tmp_path / "all.vcd"
    src.write_text(DUMP)
    out = cut_vcd(src, tmp_path / "cut.vcd", from_ps=12_000, to_ps=22_000).read_text()
    assert out.startswith("$date today $end") and "$enddefinitions $end" in out
    # 1 ns ticks: the window is 12..22; it opens with every value as it stood at 12 ns
    assert _times(out) == [12, 15, 20, 22]
    opening = out.split("#12", 1)[1].split("#15", 1)[0]
    assert "$dumpvars" in opening and "0!" in opening and 'b101 "' in opening
    assert 'b111 "' in out.split("#20", 1)[1]  # the change at 20 ns is kept
    assert "#25" not in out  # nothing after the window


def test_window_after_the_last_change_holds_the_final_values(tmp_path):
    src = tmp_path / "all.vcd"
    src.write_text(DUMP)
    out = cut_vcd(src, tmp_path / "cut.vcd", from_ps=30_000, to_ps=40_000).read_text()
    assert _times(out) == [30, 40]
    assert "1!" in out and 'b111 "' in out


def test_not_a_dump_is_one_clear_error(tmp_path):
    bad = tmp_path / "bad.vcd"
    bad.write_text("#0\n1!\n")
    with pytest.raises(ToolError, match="no \\$enddefinitions"):
        cut_vcd(bad, tmp_path / "cut.vcd", 0, 10)
