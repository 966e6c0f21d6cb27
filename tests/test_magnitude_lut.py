"""Magnitude methods and table files against math.isqrt, Icarus $readmemh and GHDL."""

from __future__ import annotations

import math
import shutil
import subprocess
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from vkit.core.errors import ConfigError
from vkit.model.kernels import correlate3x3
from vkit.model.lut import (
    read_readmemb,
    read_readmemh,
    table_from_function,
    write_readmemb,
    write_readmemh,
    write_vhdl_package,
)
from vkit.model.magnitude import (
    METHODS,
    isqrt,
    magnitude_abs_sum,
    magnitude_exact,
    magnitude_float,
    magnitude_max_min_half,
    magnitude_table,
    root_table,
    sum_of_squares,
    table_address,
)

SOBEL_PEAK = 16320  # Sobel on 12-bit luma: 4 * 4080 (common practice, no source)


def _extreme_gradients() -> tuple[np.ndarray, np.ndarray]:
    values = np.array([-SOBEL_PEAK, -SOBEL_PEAK + 1, -4081, -1, 0, 1, 2, 3, 4080, 11541, SOBEL_PEAK - 1, SOBEL_PEAK], np.int32)
    gx, gy = np.meshgrid(values, values)
    return gx, gy


def test_methods_names() -> None:
    assert METHODS == ("exact", "table", "abs_sum", "max_min_half")


def test_sum_of_squares_exact_and_int32_at_sobel_extremes() -> None:
    gx, gy = _extreme_gradients()
    s = sum_of_squares(gx, gy)
    assert s.dtype == np.int32
    assert int(s.max()) == 2 * SOBEL_PEAK**2 == 532_684_800
    # Python integers as the reference (arbitrary precision, cannot overflow).
    assert s.tolist() == [[x * x + y * y for x, y in zip(rx, ry)] for rx, ry in zip(gx.tolist(), gy.tolist())]
    big = np.array([40000], np.int32)
    assert sum_of_squares(big, big).dtype == np.int64 and int(sum_of_squares(big, big)[0]) == 2 * 40000**2


def test_magnitude_exact_vs_math_isqrt() -> None:
    gx, gy = _extreme_gradients()
    got = magnitude_exact(gx, gy)
    # Reference: math.isqrt (Python standard library).
    expected = [[math.isqrt(x * x + y * y) for x, y in zip(rx, ry)] for rx, ry in zip(gx.tolist(), gy.tolist())]
    assert got.tolist() == expected and got.dtype == np.int32


def test_isqrt_vs_math_isqrt_near_squares() -> None:
    roots = np.array([1, 2, 3, 46340, 46341, 2**26 - 1, 2**26, 2**27 + 1, 2**31 - 1], dtype=np.int64)
    n = np.concatenate([roots * roots - 1, roots * roots, roots * roots + 1, np.array([0, 2**62 - 1])])
    # Reference: math.isqrt, including values beyond float64's 2**53 integer range.
    assert isqrt(n).tolist() == [math.isqrt(int(v)) for v in n]


def test_isqrt_fast_path_just_below_squares() -> None:
    # n = k*k - 1 is the hardest case for a float root; cover k up to 2**26 (n up to 2**52 - 1).
    k = np.random.default_rng(0).integers(2**20, 2**26 + 1, 20_000, dtype=np.int64)
    k[:2] = 2**26, 2**26 - 1
    n = np.concatenate([k * k - 1, k * k])
    # Reference: math.isqrt.
    assert isqrt(n).tolist() == [math.isqrt(int(v)) for v in n]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(-(2**20), 2**20), st.integers(-(2**20), 2**20)), min_size=1, max_size=30))
def test_property_magnitudes_vs_python(pairs: list[tuple[int, int]]) -> None:
    gx = np.array([p[0] for p in pairs], np.int32)
    gy = np.array([p[1] for p in pairs], np.int32)
    # Reference: math.isqrt; abs_sum and max_min_half from their definitions in Python integers.
    assert magnitude_exact(gx, gy).tolist() == [math.isqrt(x * x + y * y) for x, y in pairs]
    assert magnitude_abs_sum(gx, gy).tolist() == [abs(x) + abs(y) for x, y in pairs]
    assert magnitude_max_min_half(gx, gy).tolist() == [
        max(abs(x), abs(y)) + (min(abs(x), abs(y)) >> 1) for x, y in pairs
    ]


def test_approximations_bracket_true_magnitude() -> None:
    img = np.random.default_rng(3).integers(0, 4081, (24, 32)).astype(np.int32)
    gx, gy = correlate3x3(img, "sobel_x"), correlate3x3(img, "sobel_y")
    true = magnitude_float(gx, gy)
    # |gx|+|gy| lies in [r, sqrt(2) r]; max+min/2 in [r - 1 (floor), 1.118 r] (common practice, no source).
    abs_sum = magnitude_abs_sum(gx, gy)
    assert (abs_sum >= true - 1e-9).all() and (abs_sum <= math.sqrt(2) * true + 1e-9).all()
    mmh = magnitude_max_min_half(gx, gy)
    assert (mmh >= np.floor(true * 0.99) - 1).all() and (mmh <= 1.1181 * true + 1e-9).all()


def test_root_table_every_entry_vs_math_isqrt() -> None:
    table = root_table(13, 8, scale=8)
    assert table.dtype == np.uint8 and table.shape == (8192,)
    # Reference: math.isqrt, saturated to 8 bits; isqrt(8191 * 8) = 255.
    assert table.tolist() == [min(math.isqrt(a * 8), 255) for a in range(8192)]
    assert int(table[8191]) == 255
    rounded = root_table(13, 8, scale=8, rounding="half_up")
    # floor(sqrt(n) + 1/2) == isqrt(4n) // 2 rounded up by one when the remainder passes half (math.isqrt).
    assert rounded.tolist() == [min((math.isqrt(4 * a * 8) + 1) // 2, 255) for a in range(8192)]
    assert rounded.tolist() == [min(math.floor(math.sqrt(a * 8) + 0.5), 255) for a in range(8192)]
    small = root_table(10, 4, scale=3)
    assert small.tolist() == [min(math.isqrt(3 * a), 15) for a in range(1024)]


def test_table_address_clamps_at_last_entry() -> None:
    sums = np.array([0, 8191, 8192, 8191 << 3, (8192 << 3) - 1, 8192 << 3, 532_684_800], np.int32)
    address, clamped = table_address(sums, 3, 13)
    assert address.tolist() == [0, 1023, 1024, 8191, 8191, 8191, 8191]
    assert clamped.tolist() == [False, False, False, False, False, True, True]
    address, clamped = table_address(sums, 0, 13)
    assert address.tolist() == [0, 8191, 8191, 8191, 8191, 8191, 8191] and clamped.sum() == 5


def test_magnitude_table_end_to_end() -> None:
    gx, gy = _extreme_gradients()
    table = root_table(13, 8, scale=1 << 16)
    magnitude, address, clamped = magnitude_table(gx, gy, 16, 13, table)
    sums = (gx.astype(np.int64) ** 2 + gy.astype(np.int64) ** 2).tolist()
    # Reference: math.isqrt on the truncated address times the scale (Python integers).
    expected = [[min(math.isqrt(min(s >> 16, 8191) << 16), 255) for s in row] for row in sums]
    assert magnitude.tolist() == expected and magnitude.dtype == np.int32
    assert clamped.tolist() == [[(s >> 16) > 8191 for s in row] for row in sums]
    with pytest.raises(ConfigError, match="entries"):
        magnitude_table(gx, gy, 16, 12, table)


def test_table_from_function_rounding_is_exact() -> None:
    # A value a hair under one half must not round up (float addition of 0.5 would give 1.0).
    values = [0.49999999999999994, 0.5, 2.4999999999999996, 2.5]
    assert table_from_function(lambda a: values[a], 2, 8, "half_up").tolist() == [0, 1, 2, 3]
    assert 0.49999999999999994 + 0.5 == 1.0  # why the exact path matters (IEEE 754 double rounding)
    assert table_from_function(lambda a: Fraction(a, 2), 3, 8, "half_up").tolist() == [0, 1, 1, 2, 2, 3, 3, 4]
    assert table_from_function(lambda a: Fraction(a, 2), 3, 8).tolist() == [0, 0, 1, 1, 2, 2, 3, 3]
    # Saturation to the data range and agreement with root_table (math.sqrt as the real function).
    assert table_from_function(lambda a: 100 * a, 2, 8).tolist() == [0, 100, 200, 255]
    assert np.array_equal(table_from_function(lambda a: math.sqrt(8 * a), 13, 8), root_table(13, 8, scale=8))
    with pytest.raises(ConfigError, match="unsigned"):
        table_from_function(lambda a: -1.0, 2, 8)
    with pytest.raises(ConfigError, match="finite"):
        table_from_function(lambda a: float("nan"), 2, 8)


def test_readmemh_round_trip_and_format(tmp_path: Path) -> None:
    table = root_table(6, 10, scale=100)
    path = write_readmemh(table, tmp_path / "root.hex", 10, comment="sqrt(100*a)\nten-bit words")
    lines = path.read_text().splitlines()
    assert lines[0] == "// sqrt(100*a)" and lines[2] == "000" and lines[3] == "00a"
    assert all(len(line) == 3 for line in lines[2:]) and len(lines) == 2 + 64
    assert np.array_equal(read_readmemh(path), table)
    bpath = write_readmemb(table, tmp_path / "root.bin", 10)
    blines = bpath.read_text().splitlines()
    assert blines[1] == "0000001010" and all(len(line) == 10 for line in blines)
    assert np.array_equal(read_readmemb(bpath), table)


def test_read_readmemh_syntax(tmp_path: Path) -> None:
    # IEEE 1364-2005 17.2.9: comments, whitespace, '_' in numbers and @address are allowed.
    path = tmp_path / "mem.hex"
    path.write_text("/* header */ 0_1 02 // c\n@2 0a\n0B\n")
    assert read_readmemh(path).tolist() == [1, 2, 10, 11]
    path.write_text("00\n@2 01\n")
    with pytest.raises(ConfigError, match="address 1"):
        read_readmemh(path)
    path.write_text("0x\n")
    with pytest.raises(ConfigError, match="not a base-16"):
        read_readmemh(path)


def test_table_writers_reject_bad_words(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="does not fit 8"):
        write_readmemh(np.array([0, 256]), tmp_path / "x.hex", 8)
    with pytest.raises(ConfigError, match="VHDL"):
        write_vhdl_package(np.array([1]), tmp_path / "x.vhd", "signal", 8)
    with pytest.raises(ConfigError, match="VHDL"):
        write_vhdl_package(np.array([1]), tmp_path / "x.vhd", "bad__name", 8)


@pytest.mark.skipif(shutil.which("iverilog") is None, reason="Icarus Verilog not installed (apt-get install iverilog)")
def test_readmemh_and_readmemb_files_load_in_icarus(tmp_path: Path) -> None:
    table = root_table(13, 8, scale=8)
    write_readmemh(table, tmp_path / "root.hex", 8, comment="root table")
    write_readmemb(table, tmp_path / "root.bin", 8, comment="root table")
    (tmp_path / "tb.v").write_text(
        "module tb;\n"
        "  reg [7:0] h [0:8191];\n  reg [7:0] b [0:8191];\n  integer i;\n"
        "  initial begin\n"
        '    $readmemh("root.hex", h);\n    $readmemb("root.bin", b);\n'
        '    for (i = 0; i < 8192; i = i + 1) $display("%0d %0d", h[i], b[i]);\n'
        "    $finish;\n  end\nendmodule\n"
    )
    subprocess.run(["iverilog", "-o", "tb.vvp", "tb.v"], cwd=tmp_path, check=True, capture_output=True)
    run = subprocess.run(["vvp", "-n", "tb.vvp"], cwd=tmp_path, check=True, capture_output=True, text=True)
    rows = [line.split() for line in run.stdout.splitlines() if line and line[0].isdigit()]
    # Reference: Icarus Verilog's $readmemh/$readmemb (IEEE 1364) reading our files.
    assert [int(h) for h, _ in rows] == table.tolist()
    assert [int(b) for _, b in rows] == table.tolist()


def _ghdl_check(tmp_path: Path, table: np.ndarray, data_bits: int, std: str) -> None:
    write_vhdl_package(table, tmp_path / "root_pkg.vhd", "root_pkg", data_bits, "ROOT", comment="root table")
    probes = sorted({0, len(table) // 2, len(table) - 1} | set(range(min(3, len(table)))))
    checks = "\n".join(
        f'    assert to_integer(unsigned(ROOT({a}))) = {int(table[a])} report "entry {a} wrong" severity failure;'
        for a in probes
    )
    (tmp_path / "tb.vhd").write_text(
        "library ieee;\nuse ieee.std_logic_1164.all;\nuse ieee.numeric_std.all;\nuse work.root_pkg.all;\n"
        "entity tb is\nend entity tb;\narchitecture sim of tb is\nbegin\n  process\n  begin\n"
        f"    assert ROOT_DEPTH = {len(table)} and ROOT_WIDTH = {data_bits} severity failure;\n"
        f"{checks}\n    report \"table ok\";\n    wait;\n  end process;\nend architecture sim;\n"
    )
    for args in (["-a", std, "root_pkg.vhd", "tb.vhd"], ["-e", std, "tb"], ["-r", std, "tb"]):
        run = subprocess.run(["ghdl", *args], cwd=tmp_path, capture_output=True, text=True)
        assert run.returncode == 0, f"ghdl {' '.join(args)} failed: {run.stdout}{run.stderr}"


@pytest.mark.skipif(shutil.which("ghdl") is None, reason="GHDL not installed (apt-get install ghdl)")
@pytest.mark.parametrize("std", ["--std=93", "--std=08"])
def test_vhdl_package_analyses_and_holds_the_table_in_ghdl(tmp_path: Path, std: str) -> None:
    # Reference: GHDL analyses, elaborates and runs a testbench that reads entries back (IEEE 1076).
    _ghdl_check(tmp_path, root_table(13, 8, scale=8), 8, std)
    _ghdl_check(tmp_path, root_table(5, 6, scale=3), 6, std)  # 6-bit words: binary string literals
    _ghdl_check(tmp_path, np.array([5], np.uint8), 4, std)  # one word: named aggregate
