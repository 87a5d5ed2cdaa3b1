"""Figures of an assessment (matplotlib is imported in the report stage only).

Every function draws on ``ax`` (a new figure when None) and returns a
:class:`~dampctl.report.style.Drawn` with the figure, the axes and the artists it created.
:func:`assessment_pngs` renders all figures (PNG by default, or SVG/PDF) and
:func:`write_assessment_pngs` writes them into a folder, all or none. The loop figures (Bode of
the loop gain, |S| and |T|, Nyquist, root locus) live in :mod:`dampctl.report.figures_loop`.

Colours and line kinds: :mod:`dampctl.report.style` (open loop slate dashed, closed loop
harbour blue, limits brick red); logarithmic frequency axes in Hz.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from dampctl.report.figures_loop import (
    _phase_ticks,
    plot_loop_gain,
    plot_loop_sensitivity,
    plot_nyquist,
    plot_root_locus,
)
from dampctl.report.style import (
    BRICK,
    CLOSED_LOOP,
    HARBOUR,
    MIST,
    OPEN_LOOP,
    Drawn,
    figure_name,
    grid,
    hz_label,
    new_figure,
    plain_ticks,
    render,
    safe_name,
)

__all__ = [
    "Drawn",
    "assessment_limit",
    "assessment_pngs",
    "plot_cumulative_rms",
    "plot_damping",
    "plot_frf",
    "plot_loop_gain",
    "plot_loop_sensitivity",
    "plot_nyquist",
    "plot_root_locus",
    "plot_third_octave",
    "write_assessment_pngs",
]

# names kept for the other figure modules
OPEN = OPEN_LOOP
CLOSED = CLOSED_LOOP
MARK = BRICK
_hz = hz_label
_plain_ticks = plain_ticks
_safe = safe_name


def _axes(ax):
    if ax is None:
        return new_figure()
    return ax.figure, ax


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


def plot_frf(assessment, output: int = 0, disturbance: int = 0, *, ax=None) -> Drawn:
    """Open- and closed-loop FRF from one disturbance to one output: magnitude above phase.

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    output : int, optional
        Index of the output in ``assessment.curves.frf_outputs``.
    disturbance : int, optional
        Index of the input in ``assessment.curves.frf_inputs`` (the named disturbances, or
        the actuators of a plant that names none).
    ax : Axes or pair of Axes, optional
        (magnitude, phase) axes; one Axes draws the magnitude only; default a new figure.

    Returns
    -------
    Drawn
        ``ax`` is the (magnitude, phase) pair, or the one Axes given.
    """
    c = assessment.curves
    if ax is None:
        figure, (mag, ph) = new_figure(7.0, 5.4, rows=2, height_ratios=(3, 2))
    elif isinstance(ax, tuple | list):
        mag, ph = ax
        figure = mag.figure
    else:
        figure, mag, ph = ax.figure, ax, None
    f = c.freq_hz
    band = _band(assessment)
    keep = (f >= band[0] / 1.01) & (f <= band[1] * 1.01)
    if c.frf_open_h is not None:
        h_open = c.frf_open_h[output, disturbance]
        h_closed = c.frf_closed_h[output, disturbance]
    else:  # an assessment made before the complex FRFs were kept: magnitude only
        h_open, h_closed, ph = c.frf_open[output], c.frf_closed[output], None
    no_path = not np.any(np.abs(h_open[keep]) > 0)  # the loop alone couples them
    a = [] if no_path else mag.loglog(f[keep], np.abs(h_open[keep]), label="open loop",
                                      **OPEN_LOOP)
    b = mag.loglog(f[keep], np.abs(h_closed[keep]), label="closed loop", **CLOSED_LOOP)
    artists = [*a, *b]
    peak = float(np.max(np.abs(h_closed[keep])))
    if not no_path:
        peak = max(peak, float(np.max(np.abs(h_open[keep]))))
    if peak > 0:
        mag.set_ylim(bottom=max(float(np.min(np.abs(h_closed[keep]))), peak * 1e-9) / 2)
    source = c.frf_inputs[disturbance]
    per = "N" if source in assessment.response.disturbances else "input unit"
    mag.set_ylabel(f"|H| ({c.frf_units[output]}/{per})")
    mag.set_title(f"FRF from disturbance {source} to output {c.frf_outputs[output]}",
                  fontsize=10)
    mag.set_xlim(*band)
    grid(mag, which="both")
    if no_path:
        mag.plot([], [], label="open loop: zero (no path without the loop)", **OPEN_LOOP)
    mag.legend(frameon=False)
    if ph is not None:
        for h, style in ([(h_closed, CLOSED_LOOP)] if no_path
                         else [(h_open, OPEN_LOOP), (h_closed, CLOSED_LOOP)]):
            phase = np.degrees(np.unwrap(np.angle(h[keep])))
            phase -= 360.0 * np.round(phase[0] / 360.0)
            artists += ph.semilogx(f[keep], phase, **style)
        ph.set_ylabel("phase (deg)")
        ph.set_xlabel("frequency (Hz)")
        ph.xaxis.set_major_formatter(plain_ticks())
        low, high = ph.get_ylim()
        ph.set_yticks(_phase_ticks(low, high))
        ph.set_ylim(low, high)
        grid(ph, which="both")
    else:
        mag.set_xlabel("frequency (Hz)")
    return Drawn(figure, mag if ph is None else (mag, ph), tuple(artists))


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
    b1 = ax.bar(x - 0.2, before, width=0.4, color=MIST, label="open loop")
    b2 = ax.bar(x + 0.2, after, width=0.4, color=HARBOUR, label="closed loop")
    ax.set_yscale("log")
    ax.set_xticks(x, [f"{m.mode}\n{_hz(m.open_freq_hz)}" for m in modes])
    ax.yaxis.set_major_formatter(_plain_ticks())
    ax.yaxis.set_minor_formatter(_plain_ticks(minor=True))
    ax.set_xlabel("mode")
    ax.set_ylabel("damping ratio")
    ax.set_title("damping per mode")
    grid(ax, axis="y", which="both")
    ax.legend(frameon=False)
    return Drawn(figure, ax, (b1, b2))


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
    ax.xaxis.set_major_formatter(plain_ticks())
    ax.set_title(f"{o.output}: cumulative RMS")
    ax.set_xlim(*_band(assessment))
    grid(ax)
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

    figure, ax = _axes(ax)
    o = assessment.response.outputs[output]
    if o.band_rms_closed is None:
        raise ValueError(f"output {o.output!r} is not a velocity output")
    x = np.arange(len(NOMINAL_CENTRES_HZ))
    a = ax.bar(x - 0.2, o.band_rms_open * 1e6, width=0.4, color=MIST, label="open loop")
    b = ax.bar(x + 0.2, o.band_rms_closed * 1e6, width=0.4, color=HARBOUR, label="closed loop")
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
    ax.set_ylabel("rms velocity (µm/s)")
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


def _plans(assessment):
    """(file stem, drawing) of every figure of an assessment, in report order."""
    c = assessment.curves
    several = len(c.frf_inputs) > 1
    for k, name in enumerate(c.frf_outputs):
        for d, source in enumerate(c.frf_inputs):
            stem = f"frf_{safe_name(name)}" + (f"_{safe_name(source)}" if several else "")
            yield stem, (lambda k=k, d=d: plot_frf(assessment, k, d))
    for k in range(c.loops.shape[0]):
        pair = safe_name(assessment.pairs[k])
        yield f"loop_gain_{pair}", (lambda k=k: plot_loop_gain(assessment, k))
        yield f"sensitivity_{pair}", (lambda k=k: plot_loop_sensitivity(assessment, k))
        yield f"nyquist_{pair}", (lambda k=k: plot_nyquist(assessment, k))
    yield "root_locus", (lambda: plot_root_locus(assessment))
    yield "damping", (lambda: plot_damping(assessment))
    for k, o in enumerate(assessment.response.outputs):
        name = safe_name(o.output)
        yield f"cumulative_rms_{name}", (lambda k=k: plot_cumulative_rms(assessment, k))
        if o.band_rms_closed is not None:
            yield f"third_octave_{name}", (lambda k=k: plot_third_octave(assessment, k))


def assessment_pngs(assessment, *, figure_format: str = "png") -> dict[str, bytes]:
    """Render every figure of an assessment (PNG unless told otherwise).

    Parameters
    ----------
    assessment : Assessment
        The assessment.
    figure_format : str, optional
        png (default), svg or pdf.

    Returns
    -------
    dict of str to bytes
        File name to content: ``frf_<output>`` (``frf_<output>_<disturbance>`` when there are
        several disturbances), per loop ``loop_gain_<pair>``, ``sensitivity_<pair>`` and
        ``nyquist_<pair>``, then ``root_locus``, ``damping``, ``cumulative_rms_<output>``
        and, for velocity outputs, ``third_octave_<output>``; each with the format's extension.
    """
    files = {}
    for stem, draw in _plans(assessment):
        drawn = draw()
        files[figure_name(stem, figure_format)] = render(drawn.figure, figure_format)
    return files


def write_assessment_pngs(
    assessment,
    folder: str | Path,
    *,
    inputs=(),
    replace: bool = False,
    figure_format: str = "png",
) -> list[Path]:
    """Write every figure of an assessment into ``folder``, all or none.

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
    figure_format : str, optional
        png (default), svg or pdf.

    Returns
    -------
    list of Path
        The files written.
    """
    from dampctl.fileio import check_output_folder, write_files

    # refuse before spending time on rendering
    names = _names(assessment, figure_format)
    check_output_folder(folder, names, inputs=inputs, replace=replace)
    files = assessment_pngs(assessment, figure_format=figure_format)
    return write_files(folder, files, inputs=inputs, replace=replace)


def _names(assessment, figure_format: str = "png") -> list[str]:
    return [figure_name(stem, figure_format) for stem, _ in _plans(assessment)]
