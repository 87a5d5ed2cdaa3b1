"""Strict readers of values from files and options: a number is a number, and a sane one.

TOML and JSON hand over booleans, strings, integers of any size, floats, lists and tables.
``float(True)`` is 1.0 and ``float("1e4")`` is 10000.0, so a plain ``float()`` reads
``freq_hz = true`` or ``sample_rate_hz = "10000"`` as numbers without a word. The readers here
take exactly the type asked for, inside its stated range, and otherwise raise the caller's
error class (a :class:`~dampctl.errors.DampctlError` subclass) naming the field, what arrived
and what was expected::

    modes[3].freq_hz: expected a number, got true (a boolean)
    requirements.sample_rate_hz: expected a number, got '10000' (a string)
    modes[2].modal_mass_kg: must be in [1e-12, 1e+12] kg, got 0

Every stage may use them (like :mod:`dampctl.errors` and :mod:`dampctl.fileio`); the ranges
of the plant file's keys live beside the values they check (:mod:`dampctl.model.components`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from numbers import Integral, Real
from typing import Any

import numpy as np

from dampctl.errors import DampctlError

__all__ = ["Range", "describe", "read_float", "read_int", "read_rows", "read_str"]


class Range:
    """A stated range of a quantity: bounds, which ends are open, and the unit.

    Parameters
    ----------
    low, high : float or None
        Bounds (None: unbounded on that side).
    unit : str, optional
        Unit shown in messages (``"Hz"``, ``"kg"``).
    low_open, high_open : bool, optional
        Whether the bound itself is excluded.
    """

    __slots__ = ("high", "high_open", "low", "low_open", "unit")

    def __init__(
        self,
        low: float | None = None,
        high: float | None = None,
        unit: str = "",
        *,
        low_open: bool = False,
        high_open: bool = False,
    ) -> None:
        self.low, self.high, self.unit = low, high, unit
        self.low_open, self.high_open = low_open, high_open

    def __repr__(self) -> str:
        return f"Range({self.text()!r})"

    def contains(self, value: float) -> bool:
        """Whether ``value`` lies in the range.

        Parameters
        ----------
        value : float
            A finite number.

        Returns
        -------
        bool
        """
        if self.low is not None and (value <= self.low if self.low_open else value < self.low):
            return False
        return not (
            self.high is not None and (value >= self.high if self.high_open else value > self.high)
        )

    def text(self) -> str:
        """The range as a reader sees it: ``[1e-12, 1e+12] kg``, ``> 0 Hz``, ``>= 0``."""
        unit = f" {self.unit}" if self.unit else ""
        if self.low is not None and self.high is not None:
            left = "(" if self.low_open else "["
            right = ")" if self.high_open else "]"
            return f"{left}{_g(self.low)}, {_g(self.high)}{right}{unit}"
        if self.low is not None:
            return f"{'>' if self.low_open else '>='} {_g(self.low)}{unit}"
        if self.high is not None:
            return f"{'<' if self.high_open else '<='} {_g(self.high)}{unit}"
        return f"any finite number{unit}"


def describe(value: Any) -> str:
    """A short, safe description of a value for an error message.

    Parameters
    ----------
    value : object
        What arrived.

    Returns
    -------
    str
        ``true (a boolean)``, ``'10000' (a string)``, ``a table``, ``a list of 3 items``,
        ``an integer of 400 digits``, or the value's repr (cut to 60 characters).
    """
    if isinstance(value, bool | np.bool_):
        return f"{'true' if value else 'false'} (a boolean)"
    if isinstance(value, str):
        text = value if len(value) <= 40 else value[:37] + "..."
        return f"{text!r} (a string)"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list | tuple):
        return f"a list of {len(value)} item{'' if len(value) == 1 else 's'}"
    if isinstance(value, Integral) and abs(int(value)) > 10**30:
        return f"an integer of {len(str(abs(int(value))))} digits"
    if value is None:
        return "nothing (null)"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def read_float(
    value: Any,
    field: str | None,
    *,
    bounds: Range | None = None,
    error: type[DampctlError] = DampctlError,
) -> float:
    """A finite number (int or float, never a boolean or a string), inside ``bounds``.

    Parameters
    ----------
    value : object
        What the file or the caller gave.
    field : str or None
        Where it came from (``modes[3].freq_hz``, ``--rate``), for the message.
    bounds : Range, optional
        The stated range (default: any finite number).
    error : type, optional
        The DampctlError subclass to raise.

    Returns
    -------
    float

    Raises
    ------
    DampctlError
        Of class ``error``: not a number, too large for a float, not finite, or out of range.
    """
    if isinstance(value, bool | np.bool_) or not isinstance(value, Real):
        raise error(f"expected a number, got {describe(value)}", field=field)
    try:
        number = float(value)
    except OverflowError:
        raise error(
            f"is too large for a number, got {describe(value)}"
            + (f" (expected {bounds.text()})" if bounds is not None else ""),
            field=field,
        ) from None
    if not math.isfinite(number):
        raise error(f"must be finite, got {number!r}", field=field)
    if bounds is not None and not bounds.contains(number):
        raise error(f"must be {_range_phrase(bounds)}, got {_g(number)}", field=field)
    return number


def read_int(
    value: Any,
    field: str | None,
    *,
    bounds: Range | None = None,
    error: type[DampctlError] = DampctlError,
) -> int:
    """A whole number (an integer, never a boolean, a float or a string), inside ``bounds``.

    Parameters
    ----------
    value : object
        What the file or the caller gave.
    field : str or None
        Where it came from, for the message.
    bounds : Range, optional
        The stated range.
    error : type, optional
        The DampctlError subclass to raise.

    Returns
    -------
    int
    """
    if isinstance(value, bool | np.bool_) or not isinstance(value, Integral):
        raise error(f"expected a whole number, got {describe(value)}", field=field)
    number = int(value)
    if bounds is not None and not bounds.contains(number):
        shown = describe(number) if abs(number) > 10**30 else str(number)
        raise error(f"must be {_range_phrase(bounds)}, got {shown}", field=field)
    return number


def read_str(
    value: Any, field: str | None, *, error: type[DampctlError] = DampctlError, empty: bool = True
) -> str:
    """A string (never a number, a list or a table).

    Parameters
    ----------
    value : object
        What the file or the caller gave.
    field : str or None
        Where it came from, for the message.
    error : type, optional
        The DampctlError subclass to raise.
    empty : bool, optional
        Whether ``""`` is allowed.

    Returns
    -------
    str
    """
    if not isinstance(value, str):
        raise error(f"expected a string, got {describe(value)}", field=field)
    if not empty and not value.strip():
        raise error("must not be empty", field=field)
    return value


def read_rows(
    value: Any,
    field: str | None,
    width: int,
    *,
    bounds: Sequence[Range | None] = (),
    error: type[DampctlError] = DampctlError,
) -> list[list[float]]:
    """A table of numbers: a list of rows of exactly ``width`` numbers each.

    Ragged rows, strings, booleans, inline tables and nested lists are refused with the row
    (counted from 1) and column named, never passed to numpy.

    Parameters
    ----------
    value : object
        What the file gave.
    field : str or None
        Where it came from (``disturbances[1].psd``).
    width : int
        Numbers per row.
    bounds : sequence of Range or None, optional
        Range of each column.
    error : type, optional
        The DampctlError subclass to raise.

    Returns
    -------
    list of list of float
    """
    if not isinstance(value, list | tuple):
        raise error(f"expected a list of rows of {width} numbers, got {describe(value)}",
                    field=field)
    rows = []
    for k, row in enumerate(value):
        where = f"{field}[{k + 1}]" if field else f"[{k + 1}]"
        if not isinstance(row, list | tuple) or len(row) != width:
            raise error(f"expected a row of {width} numbers, got {describe(row)}", field=where)
        columns = list(bounds) + [None] * (width - len(bounds))
        rows.append(
            [
                read_float(x, f"{where}[{j + 1}]", bounds=columns[j], error=error)
                for j, x in enumerate(row)
            ]
        )
    return rows


def _range_phrase(bounds: Range) -> str:
    text = bounds.text()
    if bounds.low is not None and bounds.high is not None:
        return f"in {text}"
    return text


def _g(number: float) -> str:
    """Compact form of a bound or value: 0, 1, 0.5, 1e-12, 1e+07, 462.3."""
    if isinstance(number, Integral):
        return str(int(number))
    return f"{number:.6g}"
