"""Helpers shared by the subcommands: argument parsing, tables and JSON output."""

from __future__ import annotations

import argparse
import json
import math
from collections.abc import Callable, Sequence
from types import MappingProxyType
from typing import Any, TextIO

import numpy as np

from dampctl.errors import UsageError
from dampctl.values import Range, read_float, read_int

SAFETY_LINES = (
    "Safety: an active loop that is unstable on hardware can damage the structure, and piezo "
    "amplifiers run at hazardous voltage.",
    "Verify the loop on hardware with limited gain first, ramp the gain up, keep hardware "
    "limits and an emergency stop, and follow local electrical-safety codes and lab procedures.",
)

#: the cautions printed with a passive design (absorbers, dampers): no loop, but real loads
PASSIVE_LINES = (
    "Caution: passive parts carry real loads: check each absorber's stroke and each damper's "
    "force (dampctl assess) against what the hardware allows.",
    "A tuned absorber loses much of its effect when the structure's frequency drifts: see the "
    "drift check of dampctl assess, and measure the mode before the final tuning.",
)

#: the cautions printed with a piezoelectric shunt design
SHUNT_LINES = (
    "Safety: a piezoelectric strut generates high voltage when it is strained, shunted or not, "
    "and a synthetic inductor is a powered circuit of its own.",
    "Follow the local electrical-safety codes and your lab's procedures; check the shunt "
    "voltage (dampctl assess, part loads) against the strut's and the components' ratings.",
)


def caution_lines(law: str) -> tuple[str, ...]:
    """The cautions to print with a design of this law.

    Parameters
    ----------
    law : str
        The design's law.

    Returns
    -------
    tuple of str
        :data:`PASSIVE_LINES` for absorbers and dampers, :data:`SHUNT_LINES` for piezo shunts,
        :data:`SAFETY_LINES` for active loops.
    """
    if law in ("tmd", "viscous"):
        return PASSIVE_LINES
    return SHUNT_LINES if law == "shunt" else SAFETY_LINES


def add_force_option(parser, what: str) -> None:
    """``--force``: the one meaning it has on every command that writes.

    Without it an existing output is never replaced; with it, outputs of the same names are
    replaced whole (a folder's other files stay). Special files (devices, FIFOs, sockets) and
    the command's own inputs are refused either way (:mod:`dampctl.fileio`).

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    what : str
        What gets replaced, for the help text ("the design file", "files of the same names in
        DIR").
    """
    parser.add_argument(
        "--force",
        action="store_true",
        help=f"replace {what} if it exists (default: refuse and change nothing)",
    )


def add_figure_format(parser, *, embedded: bool = False) -> None:
    """``--figure-format png|svg|pdf``: the file format of the figures a command writes.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    embedded : bool, optional
        The figures go inside an HTML report: png or svg only (a browser shows no embedded
        pdf).
    """
    if embedded:
        parser.add_argument("--figure-format", choices=("png", "svg"), default="png",
                            help="format of the figures embedded in the report: png (default) "
                                 "or svg (sharp at any zoom; pdf only for --plots folders)")
    else:
        parser.add_argument("--figure-format", choices=("png", "svg", "pdf"), default="png",
                            help="file format of the figures: png (default), svg or pdf")


def add_quiet(parser) -> None:
    """Give a subcommand the ``-q/--quiet`` option every command has.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument(
        "-q",
        "--quiet",
        action="store_true",
        help="no progress bar and no step messages on standard error (results, warnings and "
        "errors still print)",
    )


def name_list(text: str | None, option: str) -> list[str]:
    """Split ``a,b,c`` into names; empty or None gives []."""
    if text is None:
        return []
    names = [part.strip() for part in text.split(",") if part.strip()]
    if len(set(names)) != len(names):
        raise UsageError(f"{option}: a name is repeated in {text!r}")
    return names


#: largest mode number an option may name when the plant is not known yet
MAX_MODE_NUMBER = 100_000


def mode_list(
    text: str | None, option: str = "--modes", *, n_modes: int | None = None
) -> list[int]:
    """Parse ``1,2,5`` or ``1-4`` into mode numbers (1-based).

    Every number and both ends of every range are checked (1 to ``n_modes``, or to
    :data:`MAX_MODE_NUMBER` when the plant is not known) before a range is expanded, so
    ``1-1000000000`` is an error at once, not a list of a billion numbers.

    Parameters
    ----------
    text : str or None
        The option's value.
    option : str, optional
        The option's name, for messages.
    n_modes : int, optional
        Number of modes of the plant, when known.

    Returns
    -------
    list of int
        Sorted mode numbers without repeats ([] for None).
    """
    if text is None:
        return []
    top = MAX_MODE_NUMBER if n_modes is None else int(n_modes)
    where = f"the plant has {top} modes" if n_modes is not None else f"at most {top}"
    spans: list[tuple[int, int]] = []
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        low_text, dash, high_text = part.partition("-")
        try:
            low = int(low_text)
            high = int(high_text) if dash else low
        except ValueError:
            raise UsageError(
                f"{option}: expected mode numbers like 1,2 or 1-4, got {text!r}"
            ) from None
        if high < low:
            raise UsageError(f"{option}: range {part!r} runs backwards (low-high, e.g. 1-4)")
        if low < 1:
            raise UsageError(f"{option}: mode numbers start at 1, got {text!r}")
        if high > top:
            shown = high if len(str(high)) <= 15 else f"a number of {len(str(high))} digits"
            raise UsageError(f"{option}: mode {shown} does not exist ({where}), got {text!r}")
        spans.append((low, high))
    return sorted({m for low, high in spans for m in range(low, high + 1)})


def number_option(bounds: Range) -> Callable[[str], float]:
    """An argparse ``type`` reading a number inside ``bounds`` (message states the range).

    Parameters
    ----------
    bounds : Range
        The option's stated range.

    Returns
    -------
    callable
        Text to float; raises ``argparse.ArgumentTypeError`` (exit 2, option named).
    """

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"expected a number in {bounds.text()}, got {text!r}"
            ) from None
        try:
            return read_float(value, None, bounds=bounds, error=UsageError)
        except UsageError as exc:
            raise argparse.ArgumentTypeError(exc.message) from None

    parse.__name__ = "number"
    return parse


def whole_option(bounds: Range) -> Callable[[str], int]:
    """An argparse ``type`` reading a whole number inside ``bounds``.

    Parameters
    ----------
    bounds : Range
        The option's stated range.

    Returns
    -------
    callable
        Text to int; raises ``argparse.ArgumentTypeError`` (exit 2, option named).
    """

    def parse(text: str) -> int:
        try:
            value = int(text.strip())
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"expected a whole number in {bounds.text()}, got {text!r}"
            ) from None
        try:
            return read_int(value, None, bounds=bounds, error=UsageError)
        except UsageError as exc:
            raise argparse.ArgumentTypeError(exc.message) from None

    parse.__name__ = "whole number"
    return parse


#: stated ranges of the options the commands share
OPTION_RANGES = MappingProxyType(
    {
        "rate": Range(0.0, 1e9, "Hz", low_open=True),
        "delay": Range(0.0, 1.0, "s"),
        "frequency": Range(0.0, 1e7, "Hz"),
        "fraction": Range(0.0, 1.0, low_open=True, high_open=True),
        "drift": Range(0.0, 1.0, high_open=True),
        "tolerance": Range(0.0, 1.0, low_open=True),
        "seed": Range(0, 2**32 - 1),
        "samples": Range(0, 100_000),
    }
)


def jsonable(value: Any) -> Any:
    """Convert numpy values (and non-finite floats, as None) for JSON."""
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return jsonable(value.tolist())
    if isinstance(value, np.generic):
        return jsonable(value.item())
    if isinstance(value, complex):
        return [jsonable(value.real), jsonable(value.imag)]
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


#: version of the layout of every JSON document the commands print or write
JSON_VERSION = 1


def json_text(payload: dict[str, Any], kind: str) -> str:
    """A JSON document of dampctl: ``format`` (``dampctl-<kind>``) and ``version`` first.

    Parameters
    ----------
    payload : dict
        The document's keys (numpy values and non-finite floats are converted, the latter to
        null).
    kind : str
        What the document is (``check``, ``sizing``, ``tune``, ``assessment``, ...).

    Returns
    -------
    str
        Indented JSON with a final newline.
    """
    document = {"format": f"dampctl-{kind}", "version": JSON_VERSION}
    document.update(payload)
    return json.dumps(jsonable(document), indent=2, allow_nan=False) + "\n"


def print_json(payload: dict[str, Any], out: TextIO, kind: str) -> None:
    """Write ``payload`` to ``out`` as a dampctl JSON document (see :func:`json_text`).

    Parameters
    ----------
    payload : dict
        The document's keys.
    out : TextIO
        Where to write.
    kind : str
        What the document is; its ``format`` is ``dampctl-<kind>``.
    """
    out.write(json_text(payload, kind))


def table(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    """Plain-text table: numbers right-aligned, columns of words (names, labels) left-aligned."""
    cells = [[str(h) for h in headers]] + [[_cell(v) for v in row] for row in rows]
    widths = [max(len(r[k]) for r in cells) for k in range(len(headers))]
    words = []
    for k in range(len(headers)):
        kinds = [_is_word(row[k]) for row in rows]
        words.append(True in kinds and False not in kinds)
    lines = [
        "  ".join(
            c.ljust(w) if left else c.rjust(w)
            for c, w, left in zip(r, widths, words, strict=True)
        ).rstrip()
        for r in cells
    ]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def _cell(value: Any) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float | np.floating):
        if not math.isfinite(value):
            return "inf" if value > 0 else ("-inf" if value < 0 else "nan")
        if 1e4 <= abs(value) < 1e6:
            return f"{value:.0f}"  # 15014 rather than 1.501e+04
        return f"{value:.4g}"
    return str(value)


def _is_word(value: Any) -> bool | None:
    """True for text that is not a number (left-aligned), None for blanks and "-" (they do not
    decide a column's alignment), False otherwise."""
    if value is None or (isinstance(value, str) and value.strip() in ("", "-")):
        return None
    if not isinstance(value, str):
        return False
    try:
        float(value)
    except ValueError:
        return True
    return False
