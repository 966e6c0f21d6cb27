"""Fixed-point helpers against Python's own integer arithmetic."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from vkit.core.errors import ConfigError
from vkit.model.fixedpoint import ROUNDING, bits_for_range, saturate, shift_round


def test_truncate_is_floor_like_signed_arithmetic_shift() -> None:
    values = np.arange(-40, 41, dtype=np.int32)
    # Python's >> on int is an arithmetic (floor) shift, as Verilog >>> on a signed value.
    assert shift_round(values, 3).tolist() == [v >> 3 for v in range(-40, 41)]
    assert shift_round(-3, 1) == -2


def test_half_up_rounds_halves_towards_plus_infinity() -> None:
    values = np.arange(-40, 41, dtype=np.int32)
    # math.floor(v / 8 + 0.5) is the textbook definition of round-half-up.
    import math

    assert shift_round(values, 3, "half_up").tolist() == [math.floor(v / 8 + 0.5) for v in range(-40, 41)]
    assert shift_round(-4, 3, "half_up") == 0 and shift_round(4, 3, "half_up") == 1
    assert shift_round(12, 3, "half_up") == 2 and shift_round(-12, 3, "half_up") == -1


def test_shift_zero_returns_input_unchanged() -> None:
    values = np.array([-5, 0, 7], dtype=np.int32)
    for rounding in ROUNDING:
        assert shift_round(values, 0, rounding) is values
        assert shift_round(7, 0, rounding) == 7


def test_shift_round_keeps_dtype_and_input() -> None:
    values = np.array([100, 200], dtype=np.int32)
    out = shift_round(values, 2, "half_up")
    assert out.dtype == np.int32
    assert values.tolist() == [100, 200]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(-(1 << 30), (1 << 30)), min_size=1, max_size=20), st.integers(0, 20))
def test_shift_round_matches_python_ints(values: list[int], shift: int) -> None:
    arr = np.array(values, dtype=np.int64)
    half = (1 << (shift - 1)) if shift else 0
    # Python integers are arbitrary precision: the reference cannot overflow.
    assert shift_round(arr, shift).tolist() == [v >> shift for v in values]
    assert shift_round(arr, shift, "half_up").tolist() == [(v + half) >> shift for v in values]
    # Python's round() of an exact Fraction sends ties to the even neighbour (Python language reference,
    # built-in round(): "rounding is done toward the even choice").
    assert shift_round(arr, shift, "half_even").tolist() == [round(Fraction(v, 1 << shift)) for v in values]
    assert [shift_round(v, shift, "half_even") for v in values] == [round(Fraction(v, 1 << shift)) for v in values]


def test_half_even_ties_go_to_the_even_neighbour() -> None:
    # ties at shift 2 are the multiples of 2 that are not multiples of 4: 2/4 -> 0, 6/4 -> 2, -2/4 -> 0, -6/4 -> -2;
    # NumPy's np.round is half-to-even as well (NumPy reference, numpy.around)
    values = np.arange(-64, 65, dtype=np.int32)
    assert shift_round(values, 2, "half_even").tolist() == np.round(values / 4).astype(int).tolist()
    assert shift_round(np.array([2, 6, -2, -6, 10]), 2, "half_even").tolist() == [0, 2, 0, -2, 2]


def test_bad_shift_and_rounding_are_config_errors() -> None:
    with pytest.raises(ConfigError, match="shift"):
        shift_round(5, -1)
    with pytest.raises(ConfigError, match="rounding"):
        shift_round(5, 1, "nearest_even")
    with pytest.raises(ConfigError, match="dtype"):
        shift_round(np.array([1.5]), 1)


def test_saturate_reports_where_it_clipped() -> None:
    values = np.array([-3, 0, 5, 255, 300], dtype=np.int32)
    clipped, mask = saturate(values, 0, 255)
    assert clipped.tolist() == [0, 0, 5, 255, 255]
    assert mask.tolist() == [True, False, False, False, True]
    assert clipped.dtype == np.int32
    with pytest.raises(ConfigError, match="empty"):
        saturate(values, 5, 4)


@pytest.mark.parametrize(
    ("lo", "hi", "expected"),
    [
        ((0), 4080, (12, False)),
        (-16320, 16320, (15, True)),
        (0, 532_684_800, (29, False)),
        (0, 255, (8, False)),
        (0, 256, (9, False)),
        (-128, 127, (8, True)),
        (-129, 127, (9, True)),
        (-128, 128, (9, True)),
        (-1, 0, (1, True)),
        (0, 0, (1, False)),
    ],
)
def test_bits_for_range_examples(lo: int, hi: int, expected: tuple[int, bool]) -> None:
    # Two's complement n bits hold -2**(n-1)..2**(n-1)-1 (common practice, no source).
    assert bits_for_range(lo, hi) == expected


@settings(max_examples=60, deadline=None)
@given(st.integers(-(1 << 40), 1 << 40), st.integers(0, 1 << 40))
def test_bits_for_range_is_minimal(lo: int, span: int) -> None:
    hi = lo + span
    bits, signed = bits_for_range(lo, hi)
    if signed:
        assert -(1 << (bits - 1)) <= lo and hi <= (1 << (bits - 1)) - 1
        if bits > 1:
            assert not (-(1 << (bits - 2)) <= lo and hi <= (1 << (bits - 2)) - 1)
    else:
        assert lo >= 0 and hi < (1 << bits)
        assert bits == 1 or hi >= (1 << (bits - 1))
