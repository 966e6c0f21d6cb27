"""A self-checking plain-HDL testbench around the harness: plays one case, compares with expected.hex, no Python.

The testbench (``tb_vkit.v`` or ``tb_vkit.vhd``, text in ``vkit/sim/templates/testbench.*.j2``) clocks
``vkit_harness``, compares every output pixel in output order with ``expected.hex`` (``{check, value}``
per pixel, ``$readmemh`` format; check = 0 on unchecked border pixels) and prints
``vkit: N mismatches in M pixels`` and ``vkit: PASS`` or ``vkit: FAIL``. With N pixels a clock each
line of ``expected.hex`` is one output word, ``{check[N-1:0], value}`` (check bit ``j`` for the field at
bits ``j * OW / N`` upwards; :func:`vkit.sim.fast.stimulus.expected_lane_fields`), and each lane is a pixel;
with per-lane valid masks (``out_keep``) ``{keep[N-1:0], check[N-1:0], value}``, and each word's mask is
compared too (a wrong mask counts as a mismatch).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Sequence

import numpy as np

from vkit.sim.case import SimCase
from vkit.sim.fast.build import VERILATOR_ARGS, define_args
from vkit.sim.fast.stimulus import StimulusFiles, write_expected
from vkit.sim.fast.wire import HARNESS
from vkit.sim.hdltext import render

__all__ = ["TESTBENCH", "verilog_testbench", "vhdl_testbench", "write_testbench", "testbench_commands"]

TESTBENCH = "tb_vkit"
"""Name of the exported testbench module/entity (and of its file, with the language's suffix)."""

_RESET_CYCLES_MIN = 1
_SHOWN_MISMATCHES = 10
"""Mismatching pixels a testbench prints before it only counts."""


def _common(case: SimCase, stim: StimulusFiles, out_width: int, n_expected: int) -> dict[str, Any]:
    lanes = case.pixels_per_clock
    return {
        "lanes": lanes, "first_high": int(case.lane_order == "first_high"), "keep": int(_checks_keep(case)),
        "label": case.label or "one case", "stim": stim, "stim_name": stim.stim.name, "out_width": out_width,
        "n_expected": n_expected, "harness": HARNESS, "half": format(float(case.clock_period_ns) / 2, "g"),
        "reset_cycles": max(_RESET_CYCLES_MIN, int(case.reset_cycles)), "shown": _SHOWN_MISMATCHES,
    }


def _checks_keep(case: SimCase) -> bool:
    """True when the design's output carries per-lane valid masks: the testbench checks them word by word."""
    return "out_keep" in case.signals and case.pixels_per_clock > 1


def verilog_testbench(case: SimCase, stim: StimulusFiles, out_width: int, n_expected: int) -> str:
    """The Verilog text of ``tb_vkit`` for ``case`` played from ``stim`` (``n_expected`` output words)."""
    return render("testbench.v.j2", ready_name=stim.ready.name if stim.ready is not None else "",
                  **_common(case, stim, out_width, n_expected))


def vhdl_testbench(case: SimCase, stim: StimulusFiles, out_width: int, n_expected: int) -> str:
    """The VHDL-2008 text of ``tb_vkit`` for ``case`` played from ``stim`` (``n_expected`` output words)."""
    ew = out_width + case.pixels_per_clock * (2 if _checks_keep(case) else 1)
    return render("testbench.vhd.j2", hexw=4 * ((ew + 3) // 4), n_mem=max(1, n_expected), video=case.family == "video",
                  ready_name=stim.ready.name if stim.ready is not None else "", **_common(case, stim, out_width, n_expected))


def write_testbench(case: SimCase, out_dir: str | Path, stim: StimulusFiles, out_width: int, expected: np.ndarray,
                    mask: np.ndarray | None, language: str) -> tuple[Path, Path]:
    """Write ``expected.hex`` and the testbench into ``out_dir``; return (testbench, expected file).

    Args:
        case: the case (label, clock period, reset cycles).
        out_dir: the folder holding the stimulus files ``stim`` names.
        stim: the case's stimulus (from :func:`vkit.sim.fast.stimulus.write_stimulus` into ``out_dir``).
        out_width: output data bus bits.
        expected: ``(F, H, W)`` expected output in output order (pixels; grouped into words by the case's lanes).
        mask: bool ``(H, W)`` or ``(F, H, W)``, False on unchecked pixels, or None.
        language: "verilog" or "vhdl".
    """
    out = Path(out_dir)
    exp_path, n_expected = write_expected(out / "expected.hex", expected, mask, out_width, case.bus_layout(),
                                          _checks_keep(case))
    make = vhdl_testbench if language == "vhdl" else verilog_testbench
    tb = out / f"{TESTBENCH}{'.vhd' if language == 'vhdl' else '.v'}"
    tb.write_text(make(case, stim, out_width, n_expected))
    return tb, exp_path


def testbench_commands(language: str, harness: list[Path], sources: Sequence[Path],
                       defines: dict[str, Any] | None = None) -> dict[str, list[list[str]]]:
    """Simulator name -> the argument lists that build and run the testbench in its folder, in order."""
    names = [p.name for p in harness]
    srcs = [str(p) for p in sources]
    defs = define_args(defines)
    if language == "vhdl":
        return {"ghdl": [["ghdl", "-a", "--std=08", *srcs, *names, f"{TESTBENCH}.vhd"],
                         ["ghdl", "-e", "--std=08", TESTBENCH], ["ghdl", "-r", "--std=08", TESTBENCH]]}
    return {
        "icarus": [
            ["iverilog", "-g2012", *defs, "-s", TESTBENCH, "-o", f"{TESTBENCH}.vvp", f"{TESTBENCH}.v", *names, *srcs],
            ["vvp", "-n", f"{TESTBENCH}.vvp"],
        ],
        "verilator": [
            ["verilator", "--binary", *VERILATOR_ARGS, *defs, "--top-module", TESTBENCH, "-o", f"V{TESTBENCH}",
             f"{TESTBENCH}.v", *names, *srcs],
            [f"obj_dir/V{TESTBENCH}"],
        ],
    }
