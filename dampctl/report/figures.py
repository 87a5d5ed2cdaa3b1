"""Figures of an assessment (matplotlib is imported here only).

Every function draws on ``ax`` (a new figure when None) and returns a :class:`Drawn` with the
figure, the axes and the artists it created. :func:`assessment_pngs` renders all figures to PNG
bytes and :func:`write_assessment_pngs` writes them into a folder, all or none.

Style: plain lines, open loop thin grey dashed, closed loop solid dark blue, limits and the
critical point in dark red; logarithmic frequency axes in Hz.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = [
    "Drawn",
    "assessment_limit",
    "assessment_pngs",
    "plot_cumulative_rms",
    "plot_damping",
    "plot_frf",
    "plot_nyquist",
    "plot_root_locus",
    "plot_third_octave",
    "write_assessment_pngs",
]

OPEN = {"color": "0.45", "linestyle": "--", "linewidth": 1.0}
CLOSED = {"color": "#1f3a93", "linestyle": "-", "linewidth": 1.4}
MARK = "#9b1c1c"


@dataclass(frozen=True)
class Drawn:
    """What a plot function drew.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
    ax : matplotlib.axes.Axes
    artists : tuple
        The lines, bars and markers created.
    """

    figure: object
    ax: object
    artists: tuple


def _axes(ax, *, right: float = 0.96):
    if ax is None:
        from matplotlib.figure import Figure

        figure = Figure(figsize=(7.0, 4.2))
        figure.subplots_adjust(left=0.12, right=right, bottom=0.15, top=0.91)
        ax = figure.add_subplot()
    return ax.figure, ax


def _hz(freq_hz: float) -> str:
    """A frequency for a tick label: 86.6 Hz, 462 Hz, 1632 Hz, 12.5 kHz (no exponents)."""
    if freq_hz >= 1e4:
        return f"{freq_hz / 1e3:.3g} kHz"
    if freq_hz >= 100:
        return f"{freq_hz:.0f} Hz"
    return f"{freq_hz:.3g} Hz"


def _plain_ticks(*, minor: bool = False):
    """Log-axis tick labels as plain numbers (0.003, 0.05) instead of 3 × 10⁻³."""
    from matplotlib.ticker import FuncFormatter

    def label(value, _pos):
        if value <= 0:
            return ""
        if minor and round(value / 10 ** np.floor(np.log10(value))) not in (2, 3, 5):
            return ""
        return f"{value:g}"

    return FuncFormatter(label)


#: SI prefixes for plot axes (a nm-scale RMS reads as 5.3 nm, not 0.53 × 1e-8 m)
_PREFIXES = ((1e-9, "n"), (1e-6, "µ"), (1e-3, "m"), (1.0, ""))


def _prefixed(value: float, unit: str) -> tuple[float, str]:
    """Scale and prefixed unit so that ``value`` reads between 1 and 1000 (SI units only)."""
    if unit not in ("m", "m/s", "m/s^2", "m/s²", "rad", "N") or not value > 0:
        return 1.0, unit
    for scale, prefix in _PREFIXES:
        if value < scale * 1e3:
            return scale, prefix + unit
    return 1.0, unit


def _band(assessment) -> tuple[float, float]:
    """Frequency range (Hz) shown: a decade and a half around the modes."""
    freqs = [m.open_freq_hz for m in assessment.modes]
    return min(freqs) / 30.0, max(freqs) * 30.0


def _within(f, values, band):
    keep = (f >= band[0] / 1.01) & (f <= band[1] * 1.01)
    return f[keep], values[keep]


def plot_frf(assessment, output: int = 0, *, ax=None) -> Drawn:
    """Open- and closed-loop FRF magnitude at one performance output.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    output : int, optional
        Index of the output in ``assessment.curves.frf_outputs``.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    c = assessment.curves
    f = c.freq_hz
    band = _band(assessment)
    a = ax.loglog(*_within(f, c.frf_open[output], band), label="open loop", **OPEN)
    b = ax.loglog(*_within(f, c.frf_closed[output], band), label="closed loop", **CLOSED)
    ax.set_xlabel("frequency (Hz)")
    per = "N" if all(n in assessment.response.disturbances for n in c.frf_inputs) else "input"
    ax.set_ylabel(f"|response| ({c.frf_units[output]} per {per})")
    ax.set_title(f"{c.frf_outputs[output]}: response to {', '.join(c.frf_inputs)}")
    ax.set_xlim(*_band(assessment))
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False)
    return Drawn(figure, ax, (*a, *b))


def plot_root_locus(assessment, *, ax=None, span: float = 3.0) -> Drawn:
    """Closed-loop poles for the controller scaled 0 to 3×, with the design point marked.

    Parameters
    ----------
    assessment : Assessment
        The assessment (its ``curves.locus``).
    ax : matplotlib Axes, optional
        Where to draw.
    span : float, optional
        Imaginary-axis extent as a multiple of the highest mode plotted (zooms the view).

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    locus = assessment.curves.locus
    poles = locus.poles
    top = 2 * np.pi * max(m.open_freq_hz for m in assessment.modes) * 1.5
    keep = np.abs(poles) <= top * span
    colours = np.broadcast_to(locus.gains[:, None], poles.shape)
    dots = ax.scatter(
        poles.real[keep], poles.imag[keep], c=colours[keep], s=6, cmap="viridis", label="k = 0..3"
    )
    design = int(np.argmin(np.abs(locus.gains - 1.0)))
    at = poles[design][np.abs(poles[design]) <= top * span]
    star = ax.scatter(at.real, at.imag, marker="x", color=MARK, s=40, label="design (k = 1)")
    start = poles[0][np.abs(poles[0]) <= top * span]
    passive = getattr(assessment, "passive", False)  # the parts' dissipation is scaled
    ring = ax.scatter(
        start.real,
        start.imag,
        marker="o",
        facecolors="none",
        edgecolors="0.3",
        s=30,
        label="parts without damping (k = 0.001)" if passive else "open loop (k = 0)",
    )
    ax.axvline(0.0, color="0.6", linewidth=0.8)
    # zoom on the structural modes (upper half plane): far-away roll-off and delay poles
    # would otherwise squash the lightly damped branches against the axis
    w_top = 2 * np.pi * max(m.open_freq_hz for m in assessment.modes)
    ax.set_ylim(0.0, 1.25 * w_top)
    left = _locus_left(poles, w_top)
    ax.set_xlim(left, -0.12 * left)
    ax.set_xlabel("real part (1/s)")
    ax.set_ylabel("imaginary part (rad/s)")
    what = "the parts' damping" if passive else "controller"
    ax.set_title(f"closed-loop poles, {what} scaled 0 to 3x (modes' region)")
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False, loc="upper left")
    figure.colorbar(dots, ax=ax, label="damping factor k" if passive else "gain factor k")
    return Drawn(figure, ax, (dots, star, ring))


def _locus_left(poles: np.ndarray, w_top: float) -> float:
    """Left edge (1/s) of the root-locus view: just past the oscillating branches in view.

    Poles with damping below 0.71 (|Re| < Im), an imaginary part above 2 % of the top mode and
    inside the view's height are the structural branches; the view reaches 15 % beyond the
    leftmost of them (at most 0.6 × the top mode, at least 2 % of it), so real-axis roll-off
    and delay poles far to the left do not squash the lightly damped branches against the
    imaginary axis.
    """
    p = np.asarray(poles).ravel()
    oscillating = (p.imag > 0.02 * w_top) & (p.imag <= 1.25 * w_top) & (-p.real < p.imag)
    branch = p[oscillating & np.isfinite(p)]
    reach = float(-np.min(branch.real)) if branch.size else 0.6 * w_top
    return -min(max(1.15 * reach, 0.02 * w_top), 0.6 * w_top)


def plot_damping(assessment, *, ax=None) -> Drawn:
    """Damping ratio of every mode without and with the loop (bars, log scale).

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    modes = assessment.modes
    x = np.arange(len(modes))
    before = [max(m.open_damping, 1e-6) for m in modes]
    after = [max(m.closed_damping, 1e-6) for m in modes]
    b1 = ax.bar(x - 0.2, before, width=0.4, color="0.7", label="open loop")
    b2 = ax.bar(x + 0.2, after, width=0.4, color=CLOSED["color"], label="closed loop")
    ax.set_yscale("log")
    ax.set_xticks(x, [f"{m.mode}\n{_hz(m.open_freq_hz)}" for m in modes])
    ax.yaxis.set_major_formatter(_plain_ticks())
    ax.yaxis.set_minor_formatter(_plain_ticks(minor=True))
    ax.set_xlabel("mode")
    ax.set_ylabel("damping ratio")
    ax.set_title("damping per mode")
    ax.grid(True, axis="y", which="both", alpha=0.3)
    ax.legend(frameon=False)
    return Drawn(figure, ax, (b1, b2))


def plot_nyquist(assessment, loop: int = 0, *, ax=None) -> Drawn:
    """Nyquist plot of one loop (broken at the plant input) with the critical point −1.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    loop : int, optional
        Loop index.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    L = assessment.curves.loops[loop]
    line = ax.plot(L.real, L.imag, **CLOSED, label="L(jw), w > 0")
    mirror = ax.plot(
        L.real, -L.imag, color=CLOSED["color"], linewidth=0.6, alpha=0.4, label="w < 0 (mirror)"
    )
    crit = ax.plot(
        [-1.0], [0.0], marker="+", color=MARK, markersize=12, mew=2, linestyle="none", label="-1"
    )
    theta = np.linspace(0, 2 * np.pi, 200)
    circle = ax.plot(np.cos(theta), np.sin(theta), color="0.7", linewidth=0.8, label="|L| = 1")
    largest = float(np.max(np.abs(L)))
    reach = max(2.0, min(largest, 20.0))
    ax.set_xlim(-reach, reach)
    ax.set_ylim(-reach, reach)
    ax.set_aspect("equal")
    ax.set_xlabel("real")
    ax.set_ylabel("imaginary")
    clipped = " (view clipped at |L| = 20)" if largest > reach * 1.05 else ""
    ax.set_title(f"Nyquist, loop {assessment.pairs[loop]}{clipped}")
    ax.grid(True, alpha=0.3)
    ax.legend(loc="best", framealpha=0.85, fontsize="small")
    return Drawn(figure, ax, (*line, *mirror, *crit, *circle))


def plot_cumulative_rms(assessment, output: int = 0, *, ax=None) -> Drawn:
    """Cumulative RMS from 0 to f at one performance output, open and closed loop.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    output : int, optional
        Index into ``assessment.response.outputs``.
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    figure, ax = _axes(ax)
    o = assessment.response.outputs[output]
    f = assessment.response.freq_hz
    limit = assessment_limit(assessment, o.output)
    top = max(o.open_rms, o.closed_rms, limit or 0.0)
    scale, unit = _prefixed(top, o.unit)
    a = ax.semilogx(
        f, o.cumulative_open / scale, label=f"open loop ({o.open_rms / scale:.3g} {unit})", **OPEN
    )
    b = ax.semilogx(
        f,
        o.cumulative_closed / scale,
        label=f"closed loop ({o.closed_rms / scale:.3g} {unit})",
        **CLOSED,
    )
    artists = [*a, *b]
    if limit is not None:
        artists.append(
            ax.axhline(
                limit / scale,
                color=MARK,
                linewidth=1.0,
                label=f"required max_rms ({limit / scale:.3g} {unit})",
            )
        )
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel(f"cumulative RMS ({unit})")
    ax.set_title(f"{o.output}: cumulative RMS")
    ax.set_xlim(*_band(assessment))
    ax.grid(True, alpha=0.3)
    ax.legend(frameon=False, loc="upper left")
    return Drawn(figure, ax, tuple(artists))


def plot_third_octave(assessment, output: int = 0, *, ax=None) -> Drawn:
    """One-third-octave rms velocity 1–80 Hz of a velocity output, with the VC curves.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    output : int, optional
        Index into ``assessment.response.outputs`` (a velocity output).
    ax : matplotlib Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    from dampctl.analysis.vc import NOMINAL_CENTRES_HZ, VC_CURVES

    figure, ax = _axes(ax, right=0.8)
    o = assessment.response.outputs[output]
    if o.band_rms_closed is None:
        raise ValueError(f"output {o.output!r} is not a velocity output")
    x = np.arange(len(NOMINAL_CENTRES_HZ))
    a = ax.bar(x - 0.2, o.band_rms_open * 1e6, width=0.4, color="0.7", label="open loop")
    b = ax.bar(
        x + 0.2, o.band_rms_closed * 1e6, width=0.4, color=CLOSED["color"], label="closed loop"
    )
    top = max(float(np.max(o.band_rms_open)), float(np.max(o.band_rms_closed))) * 1e6
    low = min(float(np.min(o.band_rms_closed)), float(np.min(o.band_rms_open))) * 1e6
    lines = []
    for name, level in VC_CURVES:
        if low / 3 <= level * 1e6 <= top * 3:
            lines.append(ax.axhline(level * 1e6, color=MARK, linewidth=0.7, alpha=0.6))
            ax.annotate(
                name,
                (x[-1] + 0.6, level * 1e6),
                fontsize=7,
                va="center",
                color=MARK,
                annotation_clip=False,
            )
    ax.set_yscale("log")
    ax.set_xticks(x, [f"{c:g}" for c in NOMINAL_CENTRES_HZ], rotation=60, fontsize=8)
    ax.set_xlabel("one-third-octave band centre (Hz)")
    ax.set_ylabel("rms velocity (um/s)")
    met = o.vc_closed.curve or "none"
    ax.set_title(f"{o.output}: velocity spectrum, closed loop meets {met}")
    ax.legend(frameon=False, loc="upper left")
    return Drawn(figure, ax, (a, b, *lines))


def assessment_limit(assessment, output: str) -> float | None:
    """The max_rms requirement (SI unit of the output) on an output, if any.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    output : str
        Performance-output name.

    Returns
    -------
    float or None
    """
    for r in assessment.requirements:
        if r.name == f"max_rms.{output}":
            return float(r.required)
    return None


def _png(drawn: Drawn) -> bytes:
    buffer = io.BytesIO()
    drawn.figure.savefig(buffer, format="png", dpi=110)
    return buffer.getvalue()


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


def assessment_pngs(assessment) -> dict[str, bytes]:
    """Render every figure of an assessment to PNG bytes.

    Parameters
    ----------
    assessment : Assessment
        The assessment.

    Returns
    -------
    dict of str to bytes
        File name to PNG content: ``frf_<output>.png``, ``root_locus.png``, ``damping.png``,
        ``nyquist_<loop>.png``, ``cumulative_rms_<output>.png`` and, for velocity outputs,
        ``third_octave_<output>.png``.
    """
    files = {}
    for k, name in enumerate(assessment.curves.frf_outputs):
        files[f"frf_{_safe(name)}.png"] = _png(plot_frf(assessment, k))
    files["root_locus.png"] = _png(plot_root_locus(assessment))
    files["damping.png"] = _png(plot_damping(assessment))
    for k, name in enumerate(assessment.pairs):
        files[f"nyquist_{_safe(name)}.png"] = _png(plot_nyquist(assessment, k))
    for k, o in enumerate(assessment.response.outputs):
        files[f"cumulative_rms_{_safe(o.output)}.png"] = _png(plot_cumulative_rms(assessment, k))
        if o.band_rms_closed is not None:
            files[f"third_octave_{_safe(o.output)}.png"] = _png(plot_third_octave(assessment, k))
    return files


def write_assessment_pngs(
    assessment, folder: str | Path, *, inputs=(), replace: bool = False
) -> list[Path]:
    """Write every figure of an assessment as PNG into ``folder``, all or none.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
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
    from dampctl.fileio import check_output_folder, write_files

    # refuse before spending time on rendering
    check_output_folder(folder, _names(assessment), inputs=inputs, replace=replace)
    return write_files(folder, assessment_pngs(assessment), inputs=inputs, replace=replace)


def _names(assessment) -> list[str]:
    names = [f"frf_{_safe(n)}.png" for n in assessment.curves.frf_outputs]
    names += ["root_locus.png", "damping.png"]
    names += [f"nyquist_{_safe(n)}.png" for n in assessment.pairs]
    for o in assessment.response.outputs:
        names.append(f"cumulative_rms_{_safe(o.output)}.png")
        if o.band_rms_closed is not None:
            names.append(f"third_octave_{_safe(o.output)}.png")
    return names
