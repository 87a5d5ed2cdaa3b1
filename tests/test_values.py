"""Strict readers: a boolean or a string is never a number; ranges are stated in messages."""

import math

import numpy as np
import pytest

from dampctl.errors import PlantError, UsageError
from dampctl.values import Range, describe, read_float, read_int, read_rows, read_str


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (True, "expected a number, got true (a boolean)"),
        (np.bool_(False), "expected a number, got false (a boolean)"),
        ("10000", "expected a number, got '10000' (a string)"),
        ({"x": True}, "expected a number, got a table"),
        ([1.0], "expected a number, got a list of 1 item"),
        (None, "expected a number, got nothing (null)"),
        (10**400, "is too large for a number, got an integer of 401 digits"),
        (float("nan"), "must be finite, got nan"),
        (-math.inf, "must be finite, got -inf"),
    ],
)
def test_read_float_refuses_what_is_not_a_finite_number(value, text):
    with pytest.raises(PlantError) as caught:
        read_float(value, "modes[3].freq_hz", error=PlantError)
    assert str(caught.value) == f"modes[3].freq_hz: {text}"


def test_read_float_takes_ints_floats_and_numpy_numbers():
    assert read_float(3, "x") == 3.0
    assert read_float(np.float32(0.5), "x") == 0.5
    assert read_float(np.int64(7), "x") == 7.0
    assert isinstance(read_float(2, "x"), float)


@pytest.mark.parametrize(
    ("bounds", "value", "text"),
    [
        (Range(1e-12, 1e12, "kg"), 0.0, "must be in [1e-12, 1e+12] kg, got 0"),
        (Range(0.0, 1.0, high_open=True), 1.0, "must be in [0, 1), got 1"),
        (Range(0.0, 1e9, "Hz", low_open=True), 0.0, "must be in (0, 1e+09] Hz, got 0"),
        (Range(0.0), -1.5, "must be >= 0, got -1.5"),
        (Range(0.0, low_open=True), 0, "must be > 0, got 0"),
        (Range(high=5.0, unit="s"), 6.0, "must be <= 5 s, got 6"),
    ],
)
def test_ranges_are_stated(bounds, value, text):
    with pytest.raises(UsageError) as caught:
        read_float(value, "--x", bounds=bounds, error=UsageError)
    assert str(caught.value) == f"--x: {text}"
    assert bounds.contains(np.nextafter(bounds.low, np.inf) if bounds.low is not None else 0.0)


def test_read_int_wants_a_whole_number():
    assert read_int(4, "n") == 4
    for value in (True, 4.0, "4"):
        with pytest.raises(UsageError, match="expected a whole number"):
            read_int(value, "n", error=UsageError)
    with pytest.raises(UsageError, match=r"must be in \[1, 10\], got an integer of 32 digits"):
        read_int(10**31, "n", bounds=Range(1, 10), error=UsageError)


def test_read_str_and_describe():
    assert read_str("a", "name") == "a"
    with pytest.raises(PlantError, match="name: expected a string, got 5"):
        read_str(5, "name", error=PlantError)
    with pytest.raises(PlantError, match="must not be empty"):
        read_str(" ", "name", error=PlantError, empty=False)
    assert describe("x" * 100).endswith("...' (a string)")


@pytest.mark.parametrize(
    ("rows", "text"),
    [
        ([[1.0, 2.0], [3.0]], "psd[2]: expected a row of 2 numbers, got a list of 1 item"),
        ([[1.0, 2.0], "3, 4"], "psd[2]: expected a row of 2 numbers, got '3, 4' (a string)"),
        ([[1.0, {"a": 1}]], "psd[1][2]: expected a number, got a table"),
        ([[1.0, [2.0]]], "psd[1][2]: expected a number, got a list of 1 item"),
        (1.0, "psd: expected a list of rows of 2 numbers, got 1.0"),
    ],
)
def test_read_rows_names_the_row_and_column(rows, text):
    with pytest.raises(PlantError) as caught:
        read_rows(rows, "psd", 2, error=PlantError)
    assert str(caught.value) == text
