"""Loop figures of an assessment: Bode of the loop gain, |S| and |T|, Nyquist, root locus.

The curves and marks come from :mod:`dampctl.analysis.loopshape` (computed from the
assessment's loop curves and its margins); these functions only draw. Each takes ``ax=None``
(a new figure) or the axes to draw on — a pair ``(upper, lower)`` for the two-panel figures —
and returns a :class:`~dampctl.report.style.Drawn`.
"""

from __future__ import annotations

import numpy as np

from dampctl.analysis.loopshape import damping_rays, locus_hz, loop_shape, pole_damping
from dampctl.errors import UsageError
from dampctl.report.style import (
    AMBER,
    BRICK,
    CLOSED_LOOP,
    HARBOUR,
    INK,
    MIST,
    PINE,
    SLATE,
    Drawn,
    gain_colormap,
    grid,
    hz_label,
    new_figure,
    plain_ticks,
)

__all__ = ["plot_loop_gain", "plot_loop_sensitivity", "plot_nyquist", "plot_root_locus"]

#: damping ratios drawn as lines on the root locus
DAMPING_LINES = (0.01, 0.02, 0.05, 0.1, 0.2, 0.5)


def _pair(ax, *, height: float = 5.4, ratios=(3, 2)):
    if ax is None:
        return new_figure(7.0, height, rows=2, height_ratios=ratios)
    upper, lower = ax
    return upper.figure, (upper, lower)


def _blank(width: float, height: float):
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), layout="constrained")


def _margin_crossover(shape):
    """(frequency Hz, |L| dB) of the phase crossover that sets the gain margin, or None."""
    if not np.isfinite(shape.gain_margin_db):
        return None
    for fx, level in shape.phase_crossovers:
        if abs(-level - shape.gain_margin_db) < 0.05:
            return fx, level
    return None


def _view(assessment, shape) -> tuple[float, float]:
    """Frequency range (Hz): the modes with a decade and a half around, the gain crossovers
    and the phase crossover that sets the gain margin (a delay makes many more far above)."""
    freqs = [m.open_freq_hz for m in assessment.modes]
    marks = [f for f, _ in shape.gain_crossovers]
    at = _margin_crossover(shape)
    if at is not None:
        marks.append(at[0])
    low = min(freqs + marks) / 30.0
    high = max(freqs + marks) * 5.0
    return max(low, float(shape.freq_hz[0])), min(high, float(shape.freq_hz[-1]))


def _phase_ticks(low: float, high: float) -> np.ndarray:
    """Multiples of 90° (or of 180°, 360°... on a long range), at most about eight."""
    step = 90.0
    while (high - low) / step > 8:
        step *= 2
    return np.arange(step * np.floor(low / step), high + step, step)


def plot_loop_gain(assessment, loop: int = 0, *, ax=None) -> Drawn:
    """Bode plot of one loop gain L(jω) (broken at the plant input), margins marked.

    Magnitude (dB) above phase (deg). Gain crossovers (|L| = 1) are marked on both panels,
    phase crossovers (L real and negative) too; the gain margin is drawn as an arrow from |L|
    up to 0 dB at the phase crossover that sets it, the phase margin as an arrow from the
    −180° line to the phase at the crossover that sets it. The numbers are those of
    :func:`dampctl.analysis.margins.loop_margins`.

    Parameters
    ----------
    assessment : Assessment
        An active design's assessment.
    loop : int, optional
        Loop index (order of ``assessment.pairs``).
    ax : pair of Axes, optional
        (magnitude, phase) axes; default a new figure.

    Returns
    -------
    Drawn
    """
    shape = loop_shape(assessment, loop)
    figure, (mag, ph) = _pair(ax)
    band = _view(assessment, shape)
    keep = (shape.freq_hz >= band[0]) & (shape.freq_hz <= band[1])
    f = shape.freq_hz[keep]
    artists = list(mag.semilogx(f, shape.magnitude_db[keep], label="|L|", **CLOSED_LOOP))
    artists += ph.semilogx(f, shape.phase_deg[keep], label="arg L", **CLOSED_LOOP)
    artists.append(mag.axhline(0.0, color=SLATE, linewidth=0.8))
    low, high = float(np.min(shape.phase_deg[keep])), float(np.max(shape.phase_deg[keep]))
    for k in range(int(np.ceil((low + 180) / 360)), int(np.floor((high + 180) / 360)) + 1):
        artists.append(ph.axhline(-180.0 + 360.0 * k, color=BRICK, linewidth=0.8, alpha=0.7))
    for fx, phase in shape.gain_crossovers:
        artists += mag.plot([fx], [0.0], "o", color=AMBER, markersize=5)
        artists += ph.plot([fx], [phase], "o", color=AMBER, markersize=5)
    gm_at = None
    for fx, level in shape.phase_crossovers:
        if band[0] <= fx <= band[1]:
            artists += mag.plot([fx], [level], "s", color=BRICK, markersize=4.5)
    gm_at = _margin_crossover(shape)
    texts = []
    if gm_at is not None:
        mag.annotate("", xy=(gm_at[0], 0.0), xytext=gm_at,
                     arrowprops={"arrowstyle": "->", "color": BRICK, "linewidth": 1.2})
        texts.append(f"gain margin {shape.gain_margin_db:.1f} dB at {hz_label(gm_at[0])}")
    elif not np.isfinite(shape.gain_margin_db):
        texts.append("gain margin ∞ (no phase crossover inside |L| = 1)")
    if shape.margin_crossover is not None:
        fx, phase, base = shape.margin_crossover
        ph.annotate("", xy=(fx, phase), xytext=(fx, base),
                    arrowprops={"arrowstyle": "->", "color": AMBER, "linewidth": 1.2})
        texts.append(f"phase margin {shape.phase_margin_deg:.0f}° at {hz_label(fx)} "
                     f"(delay margin {shape.delay_margin_s * 1e3:.3g} ms)")
    else:
        texts.append("phase margin ∞ (|L| never reaches 1)")
    mag.text(0.01, 0.03, "\n".join(texts), transform=mag.transAxes, fontsize=8, color=INK,
             va="bottom", bbox={"facecolor": "white", "edgecolor": MIST, "alpha": 0.9})
    mag.set_ylabel("|L| (dB)")
    ph.set_ylabel("arg L (deg)")
    ph.set_xlabel("frequency (Hz)")
    ph.set_yticks(_phase_ticks(low, high))
    ph.set_ylim(low - 20, high + 20)
    ph.xaxis.set_major_formatter(plain_ticks())
    mag.set_xlim(*band)
    mag.set_title(f"loop gain L(jω) of {shape.loop}, broken at the plant input "
                  "(other loops closed)", fontsize=10)
    for a in (mag, ph):
        grid(a, which="both")
    return Drawn(figure, (mag, ph), tuple(artists))


def plot_loop_sensitivity(assessment, loop: int = 0, *, ax=None) -> Drawn:
    """|S| and |T| of one loop (dB): S = 1/(1 + L), T = L/(1 + L).

    Parameters
    ----------
    assessment : Assessment
        An active design's assessment.
    loop : int, optional
        Loop index (order of ``assessment.pairs``).
    ax : Axes, optional
        Where to draw.

    Returns
    -------
    Drawn
    """
    shape = loop_shape(assessment, loop)
    figure, ax = (new_figure() if ax is None else (ax.figure, ax))
    band = _view(assessment, shape)
    keep = (shape.freq_hz >= band[0]) & (shape.freq_hz <= band[1])
    f = shape.freq_hz[keep]
    s_line = ax.semilogx(f, shape.sensitivity_db[keep], label="|S| = |1/(1 + L)|",
                         **CLOSED_LOOP)
    t_line = ax.semilogx(f, shape.complementary_db[keep], color=PINE, linestyle="-.",
                         linewidth=1.3, label="|T| = |L/(1 + L)|")
    peak = ax.axhline(shape.peak_sensitivity_db, color=BRICK, linewidth=0.8, linestyle=":",
                      label=f"peak |S| = {shape.peak_sensitivity_db:.1f} dB")
    ax.axhline(0.0, color=SLATE, linewidth=0.8)
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("magnitude (dB)")
    ax.xaxis.set_major_formatter(plain_ticks())
    ax.set_xlim(*band)
    bottom = max(float(np.min(shape.complementary_db[keep])), -80.0)
    ax.set_ylim(bottom - 3, max(shape.peak_sensitivity_db, 0.0) + 6)
    ax.set_title(f"sensitivity and complementary sensitivity of {shape.loop}", fontsize=10)
    grid(ax, which="both")
    ax.legend(frameon=False, loc="lower left", fontsize="small")
    return Drawn(figure, ax, (*s_line, *t_line, peak))


def plot_nyquist(assessment, loop: int = 0, *, ax=None) -> Drawn:
    """Nyquist plot of one loop (broken at the plant input), whole and zoomed on −1.

    Left: the whole curve (clipped at |L| = 20), right: a window of ±1.2 around the
    critical point −1, with the unit circle and the disk of radius 1/Ms around −1 (Ms the
    peak of |S|) that the curve touches where it passes closest.

    Parameters
    ----------
    assessment : Assessment
        An active design's assessment.
    loop : int, optional
        Loop index.
    ax : pair of Axes, optional
        (whole, zoomed) axes; default a new figure of two panels side by side.

    Returns
    -------
    Drawn
    """
    shape = loop_shape(assessment, loop)
    if ax is None:
        figure = _blank(10.0, 4.6)
        whole, zoom = figure.subplots(1, 2)
    else:
        whole, zoom = ax
        figure = whole.figure
    L = assessment.curves.loops[loop]
    theta = np.linspace(0, 2 * np.pi, 240)
    artists = []
    largest = float(np.max(np.abs(L)))
    reach = max(2.0, min(largest, 20.0)) * 1.05
    closest = shape.closest_point
    radius = abs(1.0 + closest)
    for a, (centre, half) in ((whole, (0.0, reach)), (zoom, (-1.0, 1.2))):
        artists += a.plot(L.real, L.imag, label="L(jω), ω > 0", **CLOSED_LOOP)
        artists += a.plot(L.real, -L.imag, color=HARBOUR, linewidth=0.6, alpha=0.35,
                          label="ω < 0 (mirror)")
        artists += a.plot(np.cos(theta), np.sin(theta), color=SLATE, linewidth=0.8,
                          linestyle="--", label="|L| = 1")
        artists += a.plot([-1.0], [0.0], marker="+", color=BRICK, markersize=12, mew=2,
                          linestyle="none", label="−1")
        a.set_xlim(centre - half, centre + half)
        a.set_ylim(-half, half)
        a.set_aspect("equal")
        a.set_xlabel("Re L")
        grid(a)
    artists += zoom.plot(-1.0 + radius * np.cos(theta), radius * np.sin(theta), color=BRICK,
                         linewidth=0.8, linestyle=":", label=f"1/Ms = {radius:.2f}")
    artists += zoom.plot([closest.real], [closest.imag], "o", color=AMBER, markersize=5,
                         label="closest to −1")
    whole.set_ylabel("Im L")
    clipped = ", view clipped at |L| = 20" if largest > 20.0 else ""
    whole.set_title(f"Nyquist of {shape.loop}{clipped}", fontsize=10)
    zoom.set_title("around the critical point −1", fontsize=10)
    zoom.legend(loc="upper right", framealpha=0.9, fontsize="x-small")
    return Drawn(figure, (whole, zoom), tuple(artists))


def plot_root_locus(assessment, *, ax=None, span: float = 3.0) -> Drawn:
    """Closed-loop poles as the controller is scaled 0 to 3×, design point marked.

    Left: the s-plane with the imaginary axis in Hz and lines of constant damping ratio.
    Right: the same poles as damping ratio against natural frequency, both logarithmic, which
    spreads low modes that the s-plane squeezes against the axis.

    Parameters
    ----------
    assessment : Assessment
        The assessment (its ``curves.locus``).
    ax : pair of Axes, optional
        (s-plane, damping-frequency) axes; default a new figure.
    span : float, optional
        Poles beyond ``span`` × 1.5 × the highest mode are left out.

    Returns
    -------
    Drawn

    Raises
    ------
    UsageError
        The assessment was made without figure data (``assess(..., figures=False)``).
    """
    if assessment.curves.locus is None:
        raise UsageError(
            "the assessment holds no root-locus data: assess with figures=True to plot it",
            field="figures",
        )
    if ax is None:
        figure = _blank(11.0, 4.8)
        plane, spread = figure.subplots(1, 2, width_ratios=(1.0, 1.15))
    else:
        plane, spread = ax
        figure = plane.figure
    locus = assessment.curves.locus
    poles = locus.poles
    f_top = max(m.open_freq_hz for m in assessment.modes)
    keep = (np.abs(poles) <= 2 * np.pi * f_top * 1.5 * span) & (poles.imag >= 0)
    gains = np.broadcast_to(locus.gains[:, None], poles.shape)[keep]
    real, imag_hz = locus_hz(poles[keep])
    cmap = gain_colormap()
    passive = getattr(assessment, "passive", False)
    dots = plane.scatter(real, imag_hz, c=gains, s=6, cmap=cmap, vmin=0, vmax=locus.gains[-1])
    design = int(np.argmin(np.abs(locus.gains - 1.0)))
    at = poles[design][keep[design]]
    start = poles[0][keep[0]]
    label0 = "parts without damping (k = 0.001)" if passive else "open loop (k = 0)"
    artists = [dots]
    for a, convert in ((plane, locus_hz), (spread, pole_damping)):
        xs, ys = convert(at)
        x0, y0 = convert(start)
        artists.append(a.scatter(x0, y0, marker="o", facecolors="none", edgecolors=INK, s=30,
                                 label=label0, zorder=3))
        artists.append(a.scatter(xs, ys, marker="x", color=BRICK, s=40,
                                 label="design (k = 1)", zorder=4))
    # the s-plane: the modes' region, rays of constant damping ratio
    top_hz = 1.25 * f_top
    left = _locus_left(poles, 2 * np.pi * f_top)
    for zeta, (x, y) in damping_rays(DAMPING_LINES, top_hz).items():
        artists += plane.plot(x, y, color=MIST, linewidth=0.8)
        # the label where the ray leaves the view: its top, or its left edge
        at_edge = (x[-1], y[-1]) if x[-1] > left else (left, y[-1] * left / x[-1])
        plane.annotate(f"ζ = {zeta:g}", at_edge, fontsize=7, color=SLATE,
                       ha="left" if x[-1] <= left else "center",
                       va="bottom", xytext=(2, 1), textcoords="offset points")
    plane.axvline(0.0, color=SLATE, linewidth=0.8)
    plane.set_xlim(left, -0.08 * left)
    plane.set_ylim(0.0, top_hz * 1.06)
    plane.set_xlabel("real part σ (1/s)")
    plane.set_ylabel("imaginary part ω/2π (Hz)")
    what = "the parts' damping" if passive else "the controller"
    plane.set_title(f"closed-loop poles, {what} scaled 0 to 3×", fontsize=10)
    grid(plane)
    # damping against natural frequency, logarithmic: low modes spread out
    zeta, fn = pole_damping(poles[keep])
    show = zeta > 0
    artists.append(spread.scatter(zeta[show], fn[show], c=gains[show], s=6, cmap=cmap, vmin=0,
                                  vmax=locus.gains[-1]))
    spread.set_xscale("log")
    spread.set_yscale("log")
    open_zeta = [m.open_damping for m in assessment.modes if m.open_damping > 0]
    spread.set_xlim(max(min(open_zeta, default=1e-3) / 3, 1e-5), 1.0)
    spread.set_ylim(min(m.open_freq_hz for m in assessment.modes) / 1.6, top_hz * 1.3)
    spread.xaxis.set_major_formatter(plain_ticks())
    spread.yaxis.set_major_formatter(plain_ticks())
    spread.yaxis.set_minor_formatter(plain_ticks(minor=True))
    spread.set_xlabel("damping ratio ζ")
    spread.set_ylabel("natural frequency (Hz)")
    spread.set_title("the same poles: damping against frequency", fontsize=10)
    grid(spread, which="both")
    spread.legend(frameon=True, framealpha=0.9, loc="lower right", fontsize="small")
    figure.colorbar(dots, ax=spread, label="damping factor k" if passive else "gain factor k")
    return Drawn(figure, (plane, spread), tuple(artists))


def _locus_left(poles: np.ndarray, w_top: float) -> float:
    """Left edge (1/s) of the s-plane view: just past the oscillating branches in view.

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
