"""Figures of time simulations and input shapers (matplotlib is imported here only).

Every ``plot_*`` function draws on ``ax`` (a new figure when None) and returns a
:class:`~dampctl.report.figures.Drawn`; the data come from the results
(:class:`~dampctl.discrete.simresult.Simulation`, :class:`~dampctl.laws.shaping.ShaperDesign`),
never computed here. :func:`simulation_pngs` and :func:`shaper_pngs` render them to PNG bytes
for :func:`dampctl.fileio.write_files`.

Style as the assessment figures: open loop thin grey dashed, closed loop solid dark blue,
limits and tolerances dark red; the settling band a light band about the static value.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from dampctl.report.style import (
    AMBER,
    HARBOUR,
    PINE,
    SERIES,
    SLATE,
    Drawn,
    figure_name,
    render,
)
from dampctl.report.style import BRICK as MARK
from dampctl.report.style import CLOSED_LOOP as CLOSED
from dampctl.report.style import OPEN_LOOP as OPEN

__all__ = [
    "plot_forces",
    "plot_impulses",
    "plot_moves",
    "plot_response",
    "plot_sensitivity",
    "shaper_pngs",
    "simulation_names",
    "simulation_pngs",
]

#: line styles of the four runs of a move comparison, in order
COMPARE = (
    {"color": SLATE, "linestyle": "--", "linewidth": 1.0},
    {"color": AMBER, "linestyle": "-.", "linewidth": 1.1},
    {"color": HARBOUR, "linestyle": "-", "linewidth": 1.4},
    {"color": PINE, "linestyle": "-", "linewidth": 1.2},
)
_PREFIXES = ((1e-9, "n"), (1e-6, "µ"), (1e-3, "m"), (1.0, ""))
_COLOURS = SERIES


def _axes(ax):
    if ax is None:
        from matplotlib.figure import Figure

        figure = Figure(figsize=(7.0, 4.2))
        figure.subplots_adjust(left=0.13, right=0.96, bottom=0.14, top=0.9)
        ax = figure.add_subplot()
    return ax.figure, ax


def _scale(values: np.ndarray, unit: str) -> tuple[float, str]:
    """Scale and prefixed unit so the largest |value| reads between 1 and 1000."""
    finite = np.abs(values[np.isfinite(values)])
    top = float(np.max(finite)) if finite.size else 0.0
    if unit not in ("m", "m/s", "m/s^2", "N") or top <= 0:
        return 1.0, unit
    for scale, prefix in _PREFIXES:
        if top < scale * 1e3:
            return scale, prefix + unit
    return 1.0, unit


def _time_axis(time_s: np.ndarray) -> tuple[float, str]:
    return (1e-3, "ms") if time_s[-1] < 2.0 else (1.0, "s")


def plot_response(simulation, output: str, *, ax=None) -> Drawn:
    """An output against time, open and closed loop, with the static value and settling band.

    Parameters
    ----------
    simulation : Simulation
        The simulation.
    output : str
        Output name.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    shown = simulation.result.output(output)
    opened = simulation.open_loop.output(output)
    scale, unit = _scale(np.concatenate([shown.values, opened.values]), shown.unit)
    t_scale, t_unit = _time_axis(simulation.time_s)
    t = simulation.time_s / t_scale
    artists = []
    closed = simulation.result.loop == "closed"
    if closed:
        artists += ax.plot(t, opened.values / scale, label="open loop", **OPEN)
    artists += ax.plot(t, shown.values / scale, label=f"{simulation.result.loop} loop",
                       **(CLOSED if closed else {**CLOSED, "color": "0.2"}))
    band = simulation.setup.get("settle_band_m")
    if simulation.kind == "move" and band and shown.unit == "m":
        artists.append(ax.axhline(shown.target / scale, color=MARK, linewidth=0.8))
        artists.append(ax.axhspan((shown.target - band) / scale, (shown.target + band) / scale,
                                  color=MARK, alpha=0.12, linewidth=0, label="settling band"))
        if shown.settling_time_s is not None:
            artists.append(ax.axvline(shown.settling_time_s / t_scale, color=MARK,
                                      linestyle=":", linewidth=1.0,
                                      label=f"settled {shown.settling_time_s / t_scale:.4g} "
                                            f"{t_unit}"))
    ax.set_xlabel(f"time ({t_unit})")
    ax.set_ylabel(f"{output} ({unit})")
    if simulation.kind == "move":
        setup = simulation.setup
        shaper = setup.get("shaper")
        extra = f", {shaper['kind'].upper()} shaped" if shaper else ""
        ax.set_title(f"{output}: {setup['profile']} move with {setup['drive']}{extra}")
    else:
        ax.set_title(f"{output}: response to {simulation.setup['disturbance']}")
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False, fontsize="small")
    return Drawn(figure, ax, tuple(artists))


def plot_forces(simulation, *, ax=None) -> Drawn:
    """Actuator forces against time (closed loop solid, open loop dashed) and their limits.

    Parameters
    ----------
    simulation : Simulation
        The simulation.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    t_scale, t_unit = _time_axis(simulation.time_s)
    t = simulation.time_s / t_scale
    every = np.concatenate([a.force for a in simulation.result.actuators]
                           + [a.force for a in simulation.open_loop.actuators])
    scale, unit = _scale(every, "N")
    artists = []
    colours = _COLOURS
    closed = simulation.result.loop == "closed"
    limits = set()
    for k, act in enumerate(simulation.result.actuators):
        colour = colours[k % len(colours)]
        if closed and np.any(simulation.open_loop.actuator(act.name).force):
            artists += ax.plot(t, simulation.open_loop.actuator(act.name).force / scale,
                               color=colour, linestyle="--", linewidth=0.9,
                               label=f"{act.name}, open loop")
        artists += ax.plot(t, act.force / scale, color=colour, linewidth=1.2,
                           label=f"{act.name}{', closed loop' if closed else ''}")
        if act.limit is not None and simulation.setup.get("saturation"):
            limits.add(act.limit)
    top = float(np.nanmax(np.abs(every))) if every.size else 0.0
    drawn = [limit for limit in sorted(limits) if limit <= 3 * top]  # else it flattens the plot
    for limit in drawn:
        artists.append(ax.axhline(limit / scale, color=MARK, linewidth=0.8))
        artists.append(ax.axhline(-limit / scale, color=MARK, linewidth=0.8))
    ax.set_xlabel(f"time ({t_unit})")
    ax.set_ylabel(f"force ({unit})")
    title = "actuator forces" + (" (limits in red)" if drawn else "")
    if limits and not drawn:
        title += f" (limits ±{min(limits):.3g} N and up, far above)"
    ax.set_title(title)
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False, fontsize="small")
    return Drawn(figure, ax, tuple(artists))


def plot_moves(
    time_s: np.ndarray,
    runs: Mapping[str, np.ndarray],
    *,
    output: str,
    unit: str = "m",
    target: float | None = None,
    band: float | None = None,
    until_s: float | None = None,
    ax=None,
) -> Drawn:
    """Several runs of one move side by side (open loop, shaped, damped, damped and shaped).

    Parameters
    ----------
    time_s : ndarray
        Sample times (s).
    runs : mapping of str to ndarray
        Label to the output's samples, drawn in order.
    output : str
        Output name, for the axis.
    unit : str, optional
        Its SI unit.
    target : float, optional
        Static value (drawn with the band).
    band : float, optional
        Settling band ± (output unit).
    until_s : float, optional
        Draw up to this time (s); default the whole record.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    keep = time_s <= (time_s[-1] if until_s is None else until_s)
    scale, shown_unit = _scale(np.concatenate(list(runs.values())), unit)
    t_scale, t_unit = _time_axis(time_s[keep])
    artists = []
    for k, (label, values) in enumerate(runs.items()):
        artists += ax.plot(time_s[keep] / t_scale, values[keep] / scale, label=label,
                           **COMPARE[k % len(COMPARE)])
    if target is not None and band:
        artists.append(ax.axhspan((target - band) / scale, (target + band) / scale,
                                  color=MARK, alpha=0.12, linewidth=0, label="settling band"))
    ax.set_xlabel(f"time ({t_unit})")
    ax.set_ylabel(f"{output} ({shown_unit})")
    ax.set_title(f"{output}: the same move" + ("" if until_s is None else
                                               f", first {until_s / t_scale:.3g} {t_unit}"))
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False, fontsize="small")
    return Drawn(figure, ax, tuple(artists))


def plot_sensitivity(design, *, ax=None) -> Drawn:
    """Residual vibration against frequency error for each shaped mode, with the tolerance.

    Parameters
    ----------
    design : ShaperDesign
        The shaper design (its sensitivity curves).
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    from dampctl.laws.shaping import SENSITIVITY_RATIOS

    figure, ax = _axes(ax)
    error = 100.0 * (SENSITIVITY_RATIOS - 1.0)
    artists = []
    for k, mode in enumerate(design.modes):
        artists += ax.plot(error, 100.0 * mode.sensitivity, color=_COLOURS[k % len(_COLOURS)],
                           linewidth=1.3,
                           label=f"mode {mode.mode} ({mode.freq_hz:.4g} Hz, ζ {mode.damping:.3g})")
    artists.append(ax.axhline(100.0 * design.tolerance, color=MARK, linewidth=0.9,
                              label=f"tolerance {100 * design.tolerance:.3g} %"))
    if design.drift is not None:
        d = 100.0 * design.drift.drift
        artists.append(ax.axvspan(-d, d, color="0.5", alpha=0.12, linewidth=0,
                                  label=f"drift cases ±{d:.3g} %"))
    ax.set_xlabel("frequency error (%)")
    ax.set_ylabel("residual vibration (% of unshaped)")
    ax.set_ylim(0, max(10.0, min(100.0, 2.5 * 100.0 * design.tolerance)))
    ax.set_title(f"{design.shaper.kind.upper()} shaper, {design.loop}-loop modes: sensitivity")
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False, fontsize="small")
    return Drawn(figure, ax, tuple(artists))


def plot_impulses(shaper, *, ax=None) -> Drawn:
    """The shaper's impulses: amplitude against time.

    Parameters
    ----------
    shaper : Shaper
        The shaper.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    t = np.asarray(shaper.times_s) * 1e3
    stems = ax.stem(t, shaper.amplitudes, linefmt="-", markerfmt="o", basefmt="-")
    stems.stemlines.set_color(HARBOUR)
    stems.markerline.set_color(HARBOUR)
    stems.baseline.set_color(SLATE)
    ax.set_xlabel("time (ms)")
    ax.set_ylabel("amplitude")
    ax.set_title(f"{shaper.kind.upper()} shaper: {t.size} impulses over "
                 f"{shaper.duration_s * 1e3:.4g} ms")
    ax.grid(True, alpha=0.3)
    return Drawn(figure, ax, (stems,))


def _png(drawn: Drawn, figure_format: str = "png") -> bytes:
    return render(drawn.figure, figure_format)


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


def simulation_names(simulation, *, figure_format: str = "png") -> list[str]:
    """File names :func:`simulation_pngs` writes.

    Parameters
    ----------
    simulation : Simulation
        The simulation.
    figure_format : str, optional
        png (default), svg or pdf.

    Returns
    -------
    list of str
    """
    stem = "move" if simulation.kind == "move" else "response"
    names = [f"{stem}_{_safe(o.name)}" for o in simulation.result.outputs] + ["force"]
    return [figure_name(n, figure_format) for n in names]


def simulation_pngs(
    simulation, outputs: Sequence[str] | None = None, *, figure_format: str = "png"
) -> dict[str, bytes]:
    """Every figure of a simulation (PNG unless told otherwise).

    Parameters
    ----------
    simulation : Simulation
        The simulation.
    outputs : sequence of str, optional
        Outputs to draw (default all).
    figure_format : str, optional
        png (default), svg or pdf; the names' extension follows it.

    Returns
    -------
    dict of str to bytes
        ``move_<output>.png`` (or ``response_<output>.png``) per output and ``force.png``.
    """
    stem = "move" if simulation.kind == "move" else "response"
    names = [o.name for o in simulation.result.outputs] if outputs is None else list(outputs)
    fmt = figure_format
    files = {figure_name(f"{stem}_{_safe(n)}", fmt): _png(plot_response(simulation, n), fmt)
             for n in names}
    files[figure_name("force", fmt)] = _png(plot_forces(simulation), fmt)
    return files


def shaper_pngs(design, *, figure_format: str = "png") -> dict[str, bytes]:
    """The sensitivity and impulse figures of a shaper design (PNG unless told otherwise).

    Parameters
    ----------
    design : ShaperDesign
        The shaper design.
    figure_format : str, optional
        png (default), svg or pdf; the names' extension follows it.

    Returns
    -------
    dict of str to bytes
        ``sensitivity.png`` and ``impulses.png``.
    """
    fmt = figure_format
    return {figure_name("sensitivity", fmt): _png(plot_sensitivity(design), fmt),
            figure_name("impulses", fmt): _png(plot_impulses(design.shaper), fmt)}
