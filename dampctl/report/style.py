"""One look for every dampctl figure: the palette, line kinds, figure sizes, file formats.

Every figure module draws with these names, so a closed loop, a limit or the second design of
a comparison has the same colour in every figure of a report. The palette is our own: muted
colours that stay apart in print and for the common red-green colour blindness (the two that
must never be confused, the closed loop and a limit, differ in lightness too).

==============  =========  ====================================================
name            colour     used for
==============  =========  ====================================================
``INK``         #20252c    text-like marks, the design point
``SLATE``       #8b939e    the open loop / the structure as built (dashed)
``HARBOUR``     #1d4e89    the closed loop / the damped structure (solid)
``BRICK``       #b23a2b    limits, requirements, the critical point −1
``AMBER``       #d08a12    crossovers, second series
``PINE``        #2f7d5b    third series, |T|
``PLUM``        #7a4b8c    fourth series
``LAGOON``      #2a9bb4    fifth series
``CLAY``        #9c6b4e    sixth series
``MIST``        #c9ced6    measured data, open-loop bars
==============  =========  ====================================================

Figures are built with :func:`new_figure` (a matplotlib ``Figure``, not pyplot: nothing global)
and rendered with :func:`render` in one of :data:`FIGURE_FORMATS`.
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import numpy as np

__all__ = [
    "AMBER",
    "BRICK",
    "CLAY",
    "CLOSED_LOOP",
    "FIGURE_FORMATS",
    "HARBOUR",
    "INK",
    "LAGOON",
    "MIST",
    "OPEN_LOOP",
    "PINE",
    "PLUM",
    "SERIES",
    "SLATE",
    "Drawn",
    "check_figure_format",
    "figure_name",
    "gain_colormap",
    "grid",
    "hz_label",
    "new_figure",
    "plain_ticks",
    "render",
    "safe_name",
    "series_style",
]

INK = "#20252c"
SLATE = "#8b939e"
HARBOUR = "#1d4e89"
BRICK = "#b23a2b"
AMBER = "#d08a12"
PINE = "#2f7d5b"
PLUM = "#7a4b8c"
LAGOON = "#2a9bb4"
CLAY = "#9c6b4e"
MIST = "#c9ced6"

#: colours of several series (designs, actuators, modes), in order
SERIES = (HARBOUR, AMBER, PINE, PLUM, LAGOON, CLAY)
#: line styles that go with SERIES, so series stay apart in grey print too
_DASHES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (1, 1)))

OPEN_LOOP = {"color": SLATE, "linestyle": "--", "linewidth": 1.1}
CLOSED_LOOP = {"color": HARBOUR, "linestyle": "-", "linewidth": 1.5}

#: file formats a figure can be written in (the HTML report embeds png or svg)
FIGURE_FORMATS = ("png", "svg", "pdf")

_DPI = 110


@dataclass(frozen=True)
class Drawn:
    """What a plot function drew.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
        The figure (it shows itself in a notebook).
    ax : matplotlib.axes.Axes or tuple of Axes
        The axes drawn on (a tuple for a figure of several panels).
    artists : tuple
        The lines, bars and markers created.
    """

    figure: object
    ax: object
    artists: tuple

    def _repr_png_(self) -> bytes:
        return render(self.figure, "png")


def series_style(k: int) -> dict:
    """Colour and line style of the k-th series (0-based; repeats after six).

    Parameters
    ----------
    k : int
        Series index.

    Returns
    -------
    dict
        ``color`` and ``linestyle`` keywords for ``Axes.plot``.
    """
    return {"color": SERIES[k % len(SERIES)], "linestyle": _DASHES[k % len(_DASHES)]}


def new_figure(
    width: float = 7.0, height: float = 4.2, *, rows: int = 1, height_ratios=None,
    sharex: bool = True,
):
    """A new figure (constrained layout) and its axes, one column of ``rows`` panels.

    Parameters
    ----------
    width, height : float, optional
        Size (inches).
    rows : int, optional
        Panels stacked vertically.
    height_ratios : sequence of float, optional
        Relative panel heights.
    sharex : bool, optional
        Panels share the x axis.

    Returns
    -------
    figure : matplotlib.figure.Figure
    axes : Axes, or tuple of Axes when ``rows > 1``
    """
    from matplotlib.figure import Figure

    figure = Figure(figsize=(width, height), layout="constrained")
    if rows == 1:
        return figure, figure.add_subplot()
    axes = figure.subplots(rows, 1, sharex=sharex, height_ratios=height_ratios)
    return figure, tuple(axes)


def grid(ax, *, which: str = "major", axis: str = "both") -> None:
    """The light grid every figure uses.

    Parameters
    ----------
    ax : Axes
        The axes.
    which, axis : str, optional
        As ``Axes.grid``.
    """
    ax.grid(True, which=which, axis=axis, color=MIST, linewidth=0.6, alpha=0.8)
    ax.set_axisbelow(True)


def gain_colormap():
    """Colour map of a gain factor 0 → 3 on a root locus: mist to amber to harbour blue.

    Returns
    -------
    matplotlib.colors.Colormap
    """
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("dampctl-gain", ["#e7d9b8", AMBER, HARBOUR, INK])


def hz_label(freq_hz: float) -> str:
    """A frequency for a tick or label: 86.6 Hz, 462 Hz, 12.5 kHz (no exponents).

    Parameters
    ----------
    freq_hz : float
        Frequency (Hz).

    Returns
    -------
    str
    """
    if freq_hz >= 1e4:
        return f"{freq_hz / 1e3:.3g} kHz"
    if freq_hz >= 100:
        return f"{freq_hz:.0f} Hz"
    return f"{freq_hz:.3g} Hz"


def plain_ticks(*, minor: bool = False):
    """Log-axis tick labels as plain numbers (0.003, 0.05, 200) instead of 3 × 10⁻³.

    Parameters
    ----------
    minor : bool, optional
        For minor ticks: label only 2, 3 and 5 of each decade.

    Returns
    -------
    matplotlib.ticker.FuncFormatter
    """
    from matplotlib.ticker import FuncFormatter

    def label(value, _pos):
        if value <= 0:
            return ""
        if minor and round(value / 10 ** np.floor(np.log10(value))) not in (2, 3, 5):
            return ""
        return f"{value:g}"

    return FuncFormatter(label)


def check_figure_format(value: str) -> str:
    """The figure format, checked against :data:`FIGURE_FORMATS`.

    Parameters
    ----------
    value : str
        png, svg or pdf (case-insensitive).

    Returns
    -------
    str
        The lower-case format.
    """
    text = str(value).lower()
    if text not in FIGURE_FORMATS:
        raise ValueError(f"figure format must be one of {', '.join(FIGURE_FORMATS)}, got {value!r}")
    return text


def figure_name(stem: str, figure_format: str = "png") -> str:
    """File name of a figure: ``stem.png``, ``stem.svg`` or ``stem.pdf``.

    Parameters
    ----------
    stem : str
        Name without extension (may hold a sub-folder).
    figure_format : str, optional
        One of :data:`FIGURE_FORMATS`.

    Returns
    -------
    str
    """
    return f"{stem}.{check_figure_format(figure_format)}"


def safe_name(name: str) -> str:
    """A signal or pair name as a piece of a file name (letters, digits, - and _).

    Parameters
    ----------
    name : str
        Any name.

    Returns
    -------
    str
    """
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


def render(figure, figure_format: str = "png") -> bytes:
    """A figure's file content in one of :data:`FIGURE_FORMATS`.

    PNG at 110 dpi; SVG with text kept as text (searchable, smaller) and no timestamp; PDF
    without a creation date, so the same figure gives the same bytes.

    Parameters
    ----------
    figure : matplotlib.figure.Figure or Drawn
        The figure.
    figure_format : str, optional
        png (default), svg or pdf.

    Returns
    -------
    bytes
    """
    fmt = check_figure_format(figure_format)
    figure = getattr(figure, "figure", figure)
    buffer = io.BytesIO()
    if fmt == "svg":
        from matplotlib import rc_context

        with rc_context({"svg.fonttype": "none", "svg.hashsalt": "dampctl"}):
            figure.savefig(buffer, format="svg", metadata={"Date": None})
    elif fmt == "pdf":
        figure.savefig(buffer, format="pdf", metadata={"CreationDate": None})
    else:
        figure.savefig(buffer, format="png", dpi=_DPI)
    return buffer.getvalue()
