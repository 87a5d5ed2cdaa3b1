"""Figures of a comparison of options (matplotlib is imported here only).

:func:`plot_frf_overlay` draws any set of named |H| curves over one frequency grid — the
structure as built and every option at one output — and takes plain arrays, so any report that
holds several designs' responses can use it. :func:`plot_cost_result` places every option by
its cost against what it buys (smallest damping of the target modes, and the RMS at an output
relative to the structure as built). Styles follow :mod:`dampctl.report.figures`: the structure
as built thin grey dashed, a marker and a line style per kind of option.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import numpy as np

from dampctl.report.figures import _axes
from dampctl.report.style import OPEN_LOOP as OPEN
from dampctl.report.style import SERIES, Drawn, figure_name, render
from dampctl.report.style import plain_ticks as _plain_ticks
from dampctl.report.style import safe_name as _safe

__all__ = [
    "comparison_pngs",
    "plot_cost_result",
    "plot_damping_overlay",
    "plot_frf_overlay",
    "write_comparison_pngs",
]

#: line style and marker of each kind of option (the same shade family per kind)
_KIND_STYLE = {
    "none": {"marker": "o", "linestyle": "--"},
    "passive": {"marker": "s", "linestyle": "-"},
    "shaping": {"marker": "^", "linestyle": ":"},
    "active": {"marker": "D", "linestyle": "-"},
    "passive+shaping": {"marker": "P", "linestyle": "-."},
    "active+shaping": {"marker": "X", "linestyle": "-."},
}


def plot_frf_overlay(
    freq_hz: np.ndarray,
    curves: Mapping[str, np.ndarray],
    *,
    open_curve: np.ndarray | None = None,
    kinds: Mapping[str, str] | None = None,
    output: str = "",
    unit: str = "",
    ax=None,
) -> Drawn:
    """|H| of several options at one output, on one log-log plot.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies (Hz).
    curves : mapping of str to array_like
        Name to |H| on ``freq_hz`` (output unit per input unit).
    open_curve : array_like, optional
        |H| of the structure as built, drawn thin grey dashed.
    kinds : mapping of str to str, optional
        Name to kind of option (``passive``, ``active`` ...), for the line style.
    output : str, optional
        Output name, for the title.
    unit : str, optional
        Output unit, for the axis label.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    f = np.asarray(freq_hz, dtype=float)
    artists = []
    if open_curve is not None:
        artists += ax.loglog(f, open_curve, label="as built", **OPEN)
    colours = _colours(len(curves))
    for (name, values), colour in zip(curves.items(), colours, strict=True):
        style = _KIND_STYLE.get((kinds or {}).get(name, "active"), {"linestyle": "-"})
        artists += ax.loglog(f, values, color=colour, linestyle=style["linestyle"],
                             linewidth=1.3, label=name)
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel(f"|response| ({unit} per N)" if unit else "|response|")
    ax.set_title(f"{output}: every option" if output else "every option")
    positive = f[f > 0]
    if positive.size:
        ax.set_xlim(positive[0], positive[-1])
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(frameon=False, fontsize="small")
    return Drawn(figure, ax, tuple(artists))


def plot_damping_overlay(
    modes, freqs_hz, open_damping, closed: Mapping[str, np.ndarray], *, ax=None
) -> Drawn:
    """Damping ratio of every mode: as built, and with each design (grouped bars, log scale).

    Parameters
    ----------
    modes : sequence of int
        Mode numbers (1-based).
    freqs_hz : sequence of float
        Their natural frequencies (Hz), for the tick labels.
    open_damping : sequence of float
        Damping ratio of each mode as built.
    closed : mapping of str to sequence of float
        Design name to the closed-loop damping ratio of each mode.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    from dampctl.report.style import MIST, grid, hz_label

    figure, ax = _axes(ax)
    x = np.arange(len(modes))
    groups = 1 + len(closed)
    width = 0.84 / groups
    bars = [ax.bar(x - 0.42 + width / 2, np.maximum(open_damping, 1e-6), width, color=MIST,
                   label="as built")]
    for k, ((name, values), colour) in enumerate(
        zip(closed.items(), _colours(len(closed)), strict=True), start=1
    ):
        bars.append(ax.bar(x - 0.42 + width * (k + 0.5), np.maximum(values, 1e-6), width,
                           color=colour, label=name))
    ax.set_yscale("log")
    ax.set_xticks(x, [f"{m}\n{hz_label(f)}" for m, f in zip(modes, freqs_hz, strict=True)])
    ax.yaxis.set_major_formatter(_plain_ticks())
    ax.yaxis.set_minor_formatter(_plain_ticks(minor=True))
    ax.set_xlabel("mode")
    ax.set_ylabel("damping ratio (–)")
    ax.set_title("damping per mode, every design")
    grid(ax, axis="y", which="both")
    ax.legend(frameon=False, fontsize="small")
    return Drawn(figure, ax, tuple(bars))


def _colours(n: int):
    """The palette's series colours, repeated past six."""
    return [SERIES[k % len(SERIES)] for k in range(n)]


def plot_cost_result(comparison, *, output: int = 0, ax=None) -> Drawn:
    """Every option placed by its cost against what it buys.

    Panels: the smallest damping ratio of the target modes (log scale); the RMS at one output
    relative to the structure as built (lower is better); and, when a move was compared, its
    settling time. A shaper changes neither damping nor RMS, so shaping rows appear in the
    settling panel only. Options without a cost (an unpriced passive part) are left out and
    named in the title.

    Parameters
    ----------
    comparison : Comparison
        The comparison (:func:`dampctl.report.compare.compare_designs`).
    output : int, optional
        Index of the output whose RMS is shown.
    ax : sequence of matplotlib Axes, optional
        Where to draw, one per panel; default a new figure.

    Returns
    -------
    Drawn
        ``ax`` is the first panel; the artists include every panel's markers.
    """
    panels = 3 if comparison.move is not None else 2
    if ax is None:
        from matplotlib.figure import Figure

        figure = Figure(figsize=(4.6 * panels, 4.4))
        figure.subplots_adjust(left=0.07, right=0.98, bottom=0.13, top=0.86, wspace=0.32)
        axes = list(figure.subplots(1, panels))
    else:
        axes = list(ax)
        figure = axes[0].figure
    name = comparison.outputs[output]
    base = comparison.rows[0].rms.get(name) or 0.0
    artists, missing = [], []
    colours = _colours(len(comparison.rows))
    for row, colour in zip(comparison.rows, colours, strict=True):
        if row.cost is None:
            missing.append(row.name)
            continue
        style = {"color": colour, "marker": _KIND_STYLE.get(row.kind, {"marker": "o"})["marker"],
                 "s": 50, "label": row.name}
        plain = row.kind in ("none", "passive", "active")
        if plain:
            artists.append(axes[0].scatter([row.cost], [max(row.min_damping, 1e-5)], **style))
            rms = row.rms.get(name)
            if base > 0 and rms is not None:
                artists.append(axes[1].scatter([row.cost], [rms / base], **style))
        if panels == 3 and row.settling_time_s is not None:
            artists.append(axes[2].scatter([row.cost], [row.settling_time_s], **style))
    axes[0].set_yscale("log")
    axes[0].yaxis.set_major_formatter(_plain_ticks())
    axes[0].yaxis.set_minor_formatter(_plain_ticks(minor=True))
    axes[0].set_ylabel("smallest damping ratio (target modes)")
    axes[1].set_ylabel(f"RMS at {name} / as built")
    axes[1].axhline(1.0, **OPEN)
    if panels == 3:
        axes[2].set_yscale("log")
        axes[2].yaxis.set_major_formatter(_plain_ticks())
        axes[2].yaxis.set_minor_formatter(_plain_ticks(minor=True))
        axes[2].set_ylabel(f"settling time of the move (s, {comparison.move.output})")
        axes[2].legend(frameon=False, fontsize="small")
    else:
        axes[0].legend(frameon=False, fontsize="small")
    for a in axes:
        a.set_xlabel("cost")
        a.grid(True, which="both", alpha=0.3)
    title = "what each option buys for its cost"
    if missing:
        title += f" (no price: {', '.join(missing)})"
    figure.suptitle(title)
    return Drawn(figure, axes[0], tuple(artists))


def comparison_pngs(comparison, *, figure_format: str = "png") -> dict[str, bytes]:
    """Every figure of a comparison (PNG unless told otherwise).

    Parameters
    ----------
    comparison : Comparison
        The comparison.
    figure_format : str, optional
        png (default), svg or pdf; the names' extension follows it.

    Returns
    -------
    dict of str to bytes
        ``frf_overlay_<output>.png`` per output and ``cost_vs_result.png``.
    """
    files = {}
    kinds = {r.name: r.kind for r in comparison.rows}
    for k, name in enumerate(comparison.outputs):
        curves = {}
        for r in comparison.rows:
            if r.kind in ("none", "shaping") or "+" in r.kind:
                continue  # shaping changes no response: the as-built and design curves stand
            curves[r.name] = r.frf[k]
        drawn = plot_frf_overlay(
            comparison.freq_hz, curves, open_curve=comparison.open_frf[k], kinds=kinds,
            output=name, unit=comparison.output_units[k],
        )
        files[figure_name(f"frf_overlay_{_safe(name)}", figure_format)] = render(
            drawn.figure, figure_format)
    files[figure_name("cost_vs_result", figure_format)] = render(
        plot_cost_result(comparison).figure, figure_format)
    return files


def write_comparison_pngs(comparison, folder: str | Path, *, inputs=(), replace: bool = False):
    """Write every figure of a comparison into ``folder``, all or none.

    Parameters
    ----------
    comparison : Comparison
        The comparison.
    folder : path-like
        Destination folder (created when missing).
    inputs : iterable of path-like, optional
        Input files that must not be overwritten.
    replace : bool, optional
        Replace existing files of the same names.

    Returns
    -------
    list of Path
        The files written.
    """
    from dampctl.fileio import write_files

    return write_files(folder, comparison_pngs(comparison), inputs=inputs, replace=replace)
