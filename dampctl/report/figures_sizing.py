"""Figures of a sizing result (matplotlib only here; numerics never import it).

Each function takes ``ax=None`` (a new figure is made) and returns a dict of its artists.
:func:`sizing_pngs` renders both figures to PNG bytes for :func:`dampctl.fileio.write_files`.
"""

from __future__ import annotations

import numpy as np

from dampctl.report.style import AMBER, BRICK, HARBOUR, MIST, SLATE, grid, render, series_style

__all__ = ["SIZING_FIGURES", "plot_damping_and_cost", "plot_mode_damping", "sizing_pngs"]

#: file names of the sizing figures, as :func:`sizing_pngs` keys them
SIZING_FIGURES = ("sizing_damping_cost.png", "sizing_mode_damping.png")


def _axes(ax):
    if ax is not None:
        return ax.figure, ax
    from matplotlib.figure import Figure

    figure = Figure(figsize=(7.0, 4.2), layout="constrained")
    return figure, figure.add_subplot()


def plot_damping_and_cost(result, ax=None) -> dict:
    """Smallest target damping and total cost against the number of pairs.

    Parameters
    ----------
    result : SizingResult
        The sizing result.
    ax : matplotlib.axes.Axes, optional
        Axes for the damping (the cost goes on a twin y axis); default a new figure.

    Returns
    -------
    dict
        ``figure``, ``axes`` (damping, cost), ``lines`` (design damping, achievable damping,
        cost) and ``target`` (the target line or None).
    """
    figure, ax = _axes(ax)
    k = [r.pairs_used for r in result.rows]
    design = ax.plot(k, [r.min_damping for r in result.rows], "o-", color=HARBOUR,
                     label="min damping (design)")
    best = ax.plot(k, [r.achievable_min_damping for r in result.rows], "s--", color=SLATE,
                   label="min damping (maximized)")
    target = None
    if result.target_damping is not None:
        target = ax.axhline(result.target_damping, color=BRICK, lw=1, ls=":", label="target")
    chosen = None
    if result.recommended is not None:
        chosen = ax.axvline(
            result.recommended, color=MIST, lw=6, alpha=0.6, zorder=0, label="recommended"
        )
    ax.set_xlabel("number of pairs")
    ax.set_ylabel("smallest damping ratio over target modes (–)")
    ax.set_xticks(k)
    twin = ax.twinx()
    cost = twin.plot(k, [r.cost for r in result.rows], "^-", color=AMBER, label="cost")
    twin.set_ylabel("total cost of actuators and sensors")
    # both axes from zero: a single row or a flat curve is not blown up to fill the frame
    damping_top = max([r.achievable_min_damping for r in result.rows]
                      + [r.min_damping for r in result.rows] + [result.target_damping or 0.0])
    ax.set_ylim(0.0, 1.5 * max(damping_top, 1e-3))  # headroom: the legend sits above
    twin.set_ylim(0.0, 1.5 * max(max(r.cost for r in result.rows), 1.0))
    handles = design + best + cost + [h for h in (target, chosen) if h is not None]
    ax.legend(handles=handles, loc="upper left", fontsize="small")
    grid(ax)
    ax.set_title(f"{result.law.upper()}: damping and cost against pair count")
    return {
        "figure": figure,
        "axes": (ax, twin),
        "lines": (design[0], best[0], cost[0]),
        "target": target,
    }


def plot_mode_damping(result, ax=None) -> dict:
    """Closed-loop damping of every target mode, one group of bars per pair count.

    Parameters
    ----------
    result : SizingResult
        The sizing result.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on; default a new figure.

    Returns
    -------
    dict
        ``figure``, ``axes``, ``bars`` (one container per row) and ``target``.
    """
    figure, ax = _axes(ax)
    modes = list(result.modes)
    x = np.arange(len(modes))
    width = 0.8 / max(len(result.rows), 1)
    bars = []
    for j, row in enumerate(result.rows):
        values = [z for _m, z in row.mode_damping]
        bars.append(
            ax.bar(
                x + (j - (len(result.rows) - 1) / 2) * width,
                values,
                width,
                color=series_style(j)["color"],
                label=f"{row.pairs_used} pair(s): {', '.join(row.chosen)}",
            )
        )
    target = None
    if result.target_damping is not None:
        target = ax.axhline(result.target_damping, color=BRICK, lw=1, ls=":", label="target")
    ax.set_xticks(x, [str(m) for m in modes])
    ax.set_xlabel("target mode")
    ax.set_ylabel("closed-loop damping ratio (–)")
    ax.legend(fontsize="x-small")
    grid(ax, axis="y")
    ax.set_title("damping of each target mode for the best set of each size")
    return {"figure": figure, "axes": ax, "bars": tuple(bars), "target": target}


def sizing_pngs(result, *, figure_format: str = "png") -> dict[str, bytes]:
    """Both sizing figures rendered (PNG unless told otherwise), keyed by file name.

    Parameters
    ----------
    result : SizingResult
        The sizing result.
    figure_format : str, optional
        png (default), svg or pdf: the extension of the names changes with it.

    Returns
    -------
    dict of str to bytes
        ``sizing_damping_cost`` and ``sizing_mode_damping`` with the format's extension.
    """
    out = {}
    for name, plot in zip(SIZING_FIGURES, (plot_damping_and_cost, plot_mode_damping), strict=True):
        figure = plot(result)["figure"]
        out[name.replace(".png", "." + figure_format)] = render(figure, figure_format)
    return out
