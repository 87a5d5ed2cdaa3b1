"""Small CSV tables with a header row: sites, DOF maps, damping per mode, mode tables.

Every problem names the file, the line (counted from 1, the header being line 1) and the
column, e.g. ``sites.csv: line 4, column dof: expected a whole number, got 'x'``.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from dampctl.errors import PlantError, PlantFileError
from dampctl.values import Range

__all__ = ["CsvTable", "read_csv_table"]


@dataclass(frozen=True)
class CsvTable:
    """The rows of a CSV file, as text, with where each came from.

    Parameters
    ----------
    source : str
        The file, for messages.
    header : tuple of str
        Column names, stripped.
    rows : tuple of tuple of str
        The cells of each data row, stripped.
    lines : tuple of int
        The file line (1-based) of each data row.
    """

    source: str
    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    lines: tuple[int, ...]

    def column(self, name: str) -> int:
        """Index of a column.

        Parameters
        ----------
        name : str
            Column name.

        Returns
        -------
        int
        """
        return self.header.index(name)

    def error(self, k: int, column: str, message: str) -> PlantError:
        """The error for a bad cell: file, line and column named.

        Parameters
        ----------
        k : int
            Row index (0-based, data rows only).
        column : str
            Column name.
        message : str
            What is wrong.

        Returns
        -------
        PlantError
        """
        return PlantError(message, source=self.source,
                          field=f"line {self.lines[k]}, column {column}")

    def text(self, k: int, column: str) -> str:
        """A non-empty text cell.

        Parameters
        ----------
        k : int
            Row index (0-based).
        column : str
            Column name.

        Returns
        -------
        str
        """
        value = self.rows[k][self.column(column)]
        if not value:
            raise self.error(k, column, "is empty")
        return value

    def number(self, k: int, column: str, bounds: Range | None = None) -> float:
        """A finite number, inside ``bounds``.

        Parameters
        ----------
        k : int
            Row index (0-based).
        column : str
            Column name.
        bounds : Range, optional
            Stated range.

        Returns
        -------
        float
        """
        cell = self.rows[k][self.column(column)]
        try:
            value = float(cell)
        except ValueError:
            raise self.error(k, column, f"expected a number, got {cell!r}") from None
        if not math.isfinite(value):
            raise self.error(k, column, f"must be finite, got {cell!r}")
        if bounds is not None and not bounds.contains(value):
            raise self.error(k, column, f"must be in {bounds.text()}, got {cell}")
        return value

    def whole(self, k: int, column: str, low: int, high: int) -> int:
        """A whole number in [low, high].

        Parameters
        ----------
        k : int
            Row index (0-based).
        column : str
            Column name.
        low, high : int
            Allowed range (inclusive).

        Returns
        -------
        int
        """
        cell = self.rows[k][self.column(column)]
        try:
            value = int(cell)
        except ValueError:
            raise self.error(k, column, f"expected a whole number, got {cell!r}") from None
        if not low <= value <= high:
            raise self.error(k, column, f"must be in [{low}, {high}], got {value}")
        return value


def read_csv_table(
    path: str | Path,
    required: Sequence[str],
    optional: Sequence[str] = (),
    *,
    what: str = "table",
    extra: bool = False,
) -> CsvTable:
    """Read a CSV file with a header row naming its columns.

    Blank lines are skipped; cells are stripped; a UTF-8 byte-order mark is allowed.

    Parameters
    ----------
    path : str or path-like
        The file.
    required : sequence of str
        Columns that must be present, in any order.
    optional : sequence of str, optional
        Columns that may be present.
    what : str, optional
        What the table holds, for messages ("sites").
    extra : bool, optional
        Whether other columns are allowed (after the named ones, e.g. one per mode).

    Returns
    -------
    CsvTable

    Raises
    ------
    PlantFileError
        The file cannot be read, is not text, has no header, a column is missing, unknown or
        repeated, a row has the wrong number of cells, or there are no rows.
    """
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise PlantFileError(f"cannot read the {what} file ({exc.strerror or exc})",
                             source=source) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise PlantFileError("not a text (UTF-8) file", source=source) from None
    try:
        numbered = [(n, [c.strip() for c in row])
                    for n, row in enumerate(csv.reader(io.StringIO(text)), start=1)]
    except csv.Error as exc:
        raise PlantFileError(f"not a CSV file ({exc})", source=source) from None
    numbered = [(n, row) for n, row in numbered if any(row)]
    if not numbered:
        raise PlantFileError(f"empty: expected a header {','.join(required)} and rows",
                             source=source)
    header_line, header = numbered[0]
    seen: set[str] = set()
    for c, name in enumerate(header, start=1):
        if name in seen:
            raise PlantFileError(f"column {name!r} is repeated", source=source,
                                 field=f"line {header_line}, column {c}")
        seen.add(name)
        if not extra and name not in (*required, *optional):
            raise PlantFileError(
                f"unknown column {name!r} (expected {', '.join((*required, *optional))})",
                source=source, field=f"line {header_line}, column {c}")
    for name in required:
        if name not in seen:
            raise PlantFileError(f"missing column {name!r} (the header must name "
                                 f"{', '.join(required)})", source=source,
                                 field=f"line {header_line}")
    rows, lines = [], []
    for n, row in numbered[1:]:
        if len(row) != len(header):
            raise PlantFileError(f"{len(row)} cells for {len(header)} columns",
                                 source=source, field=f"line {n}")
        rows.append(tuple(row))
        lines.append(n)
    if not rows:
        raise PlantFileError(f"no rows after the header (expected one row per {what} entry)",
                             source=source)
    return CsvTable(source, tuple(header), tuple(rows), tuple(lines))
