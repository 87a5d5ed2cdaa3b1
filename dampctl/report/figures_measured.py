"""Figures of a modal fit and of a plant against measurement (matplotlib only here).

:func:`plot_stability_chart` draws the poles of every model order over frequency, marked by how
stable they are, with the chosen modes; :func:`plot_frf_match` draws a measured FRF and a model
of it, magnitude above phase. :func:`fit_pngs` and :func:`comparison_pngs` render all figures of
a fit or a comparison to PNG bytes (for :func:`dampctl.fileio.write_files` or the report).

Style as the other figures: the measurement wide and light grey (its phase as grey dots), the
model thin dark blue on top, the chosen modes dark red; frequency in Hz.
"""

from __future__ import annotations

import numpy as np

from dampctl.report.style import BRICK as MARK
from dampctl.report.style import CLOSED_LOOP as CLOSED
from dampctl.report.style import MIST, SLATE, Drawn, figure_name, render

__all__ = ["comparison_pngs", "fit_pngs", "plot_frf_match", "plot_stability_chart"]

MEASURED = {"color": MIST, "linestyle": "-", "linewidth": 2.6}
MEASURED_POINTS = {"color": SLATE, "linestyle": "none", "marker": ".", "markersize": 2.5}


def _figure(rows: int = 1, *, height: float = 4.2):
    from matplotlib.figure import Figure

    figure = Figure(figsize=(7.0, height), layout="constrained")
    axes = figure.subplots(rows, 1, sharex=True) if rows > 1 else figure.add_subplot()
    return figure, axes


def plot_stability_chart(fit, *, ax=None) -> Drawn:
    """Stability chart: every model order's poles in the band, and the chosen modes.

    Parameters
    ----------
    fit : ModalFit
        A modal fit (:func:`dampctl.model.modalfit.fit_modes`).
    ax : matplotlib Axes, optional
        Where to draw (the summed magnitude goes on a twin y axis); default a new figure.

    Returns
    -------
    Drawn
        ``artists``: the four pole groups (not stable; frequency stable; frequency and damping
        stable; stable in frequency, damping and shape), the chosen-mode lines and the summed
        magnitude line.
    """
    if ax is None:
        figure, ax = _figure()
    else:
        figure = ax.figure
    chart = fit.chart
    groups = {"new or moving": [], "frequency stable": [], "frequency and damping stable": [],
              "stable (frequency, damping, shape)": []}
    for entry in chart.orders:
        f, o = entry.freq_hz, np.full(entry.poles.size, entry.order)
        full = entry.freq_stable & entry.damping_stable & entry.shape_stable
        fd = entry.freq_stable & entry.damping_stable & ~full
        fo = entry.freq_stable & ~entry.damping_stable & ~full
        none = ~entry.freq_stable
        for key, mask in zip(groups, (none, fo, fd, full), strict=True):
            groups[key].append(np.column_stack([f[mask], o[mask]]))
    styles = {
        "new or moving": {"marker": ".", "color": MIST, "markersize": 4},
        "frequency stable": {"marker": "o", "color": SLATE, "markersize": 5,
                             "markerfacecolor": "none"},
        "frequency and damping stable": {"marker": "o", "color": CLOSED["color"],
                                         "markersize": 5, "markerfacecolor": "none"},
        "stable (frequency, damping, shape)": {"marker": "o", "color": CLOSED["color"],
                                               "markersize": 5},
    }
    artists = []
    for key, parts in groups.items():
        points = np.vstack(parts) if parts else np.zeros((0, 2))
        artists += ax.plot(points[:, 0], points[:, 1], linestyle="none", label=key,
                           **styles[key])
    for k, f in enumerate(fit.freqs_hz):
        artists.append(ax.axvline(f, color=MARK, linewidth=0.9, linestyle=":",
                                  label="chosen mode" if k == 0 else None))
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("model order (pole pairs)")
    ax.set_xlim(*fit.band_hz)
    ax.set_ylim(0, chart.orders[-1].order + 1)
    tol = chart.tolerances
    ax.set_title(f"Stability over model order (frequency {tol.freq:.0%}, damping "
                 f"{tol.damping:.0%}, MAC {tol.mac:g}; modes stable over {tol.run} orders)",
                 fontsize=9)
    twin = ax.twinx()
    artists += twin.semilogy(fit.measured.freq_hz, fit.indicator, color="0.8", linewidth=0.8,
                             zorder=0)
    twin.set_ylabel("summed magnitude (each channel scaled to 1)", color="0.5")
    twin.tick_params(axis="y", colors="0.5")
    ax.set_zorder(twin.get_zorder() + 1)
    ax.patch.set_visible(False)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), ncols=3, fontsize=7,
              frameon=False)
    return Drawn(figure, ax, tuple(artists))


def plot_frf_match(
    freq_hz,
    measured,
    model,
    *,
    unit: str = "",
    title: str = "",
    model_label: str = "model",
    axes=None,
) -> Drawn:
    """A measured FRF and its model: magnitude (log) above phase (degrees).

    Parameters
    ----------
    freq_hz : array_like, shape (n_f,)
        Frequencies (Hz).
    measured, model : array_like of complex, shape (n_f,)
        The measured FRF and the model's.
    unit : str, optional
        Unit of the FRF (for the axis label), e.g. ``m/s^2/N``.
    title : str, optional
        Figure title (the channel).
    model_label : str, optional
        Legend label of the model line.
    axes : pair of matplotlib Axes, optional
        (magnitude, phase) axes; default a new figure.

    Returns
    -------
    Drawn
        ``ax`` is the pair (magnitude, phase); ``artists`` the four lines.
    """
    if axes is None:
        figure, axes = _figure(2, height=5.0)
    figure = axes[0].figure
    f = np.asarray(freq_hz, dtype=float)
    measured, model = np.asarray(measured), np.asarray(model)
    mag, phase = axes
    a = mag.semilogy(f, np.abs(measured), label="measured", **MEASURED)
    b = mag.semilogy(f, np.abs(model), label=model_label, **CLOSED)
    c = phase.plot(f, np.degrees(np.angle(measured)), **MEASURED_POINTS)
    d = phase.plot(f, np.degrees(np.angle(model)), linestyle="none", marker=".",
                   markersize=1.2, color=CLOSED["color"])
    mag.set_ylabel(f"|FRF| ({unit})" if unit else "|FRF|")
    phase.set_ylabel("phase (deg)")
    phase.set_yticks([-180, -90, 0, 90, 180])
    phase.set_xlabel("frequency (Hz)")
    for ax in axes:
        ax.grid(True, alpha=0.3)
        ax.set_xlim(f[0], f[-1])
    mag.legend(frameon=False)
    if title:
        mag.set_title(title)
    return Drawn(figure, tuple(axes), (*a, *b, *c, *d))


def _png(drawn: Drawn, figure_format: str = "png") -> bytes:
    return render(drawn.figure, figure_format)


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


_UNITS = {"displacement": "m/N", "velocity": "m/s/N", "acceleration": "m/s^2/N", "force": "N/N"}


def fit_pngs(fit, *, figure_format: str = "png") -> dict[str, bytes]:
    """Every figure of a modal fit (PNG unless told otherwise).

    Parameters
    ----------
    fit : ModalFit
        The fit.
    figure_format : str, optional
        png (default), svg or pdf; the names' extension follows it.

    Returns
    -------
    dict of str to bytes
        ``stability_chart.png`` and ``fit_<output>_<input>.png`` per channel (measured and
        fitted magnitude and phase; the fit with its residual terms).
    """
    fmt = figure_format
    files = {figure_name("stability_chart", fmt): _png(plot_stability_chart(fit), fmt)}
    m = fit.measured
    model = fit.model_frf()
    for o, out in enumerate(m.outputs):
        for j, inp in enumerate(m.inputs):
            error = fit.fit_error[f"{out}/{inp}"]
            drawn = plot_frf_match(m.freq_hz, m.frf[o, j], model[o, j],
                                   unit=_UNITS[m.output_kinds[o]], model_label="fit",
                                   title=f"{out}/{inp}: fit error {error:.1%}")
            files[figure_name(f"fit_{_safe(out)}_{_safe(inp)}", fmt)] = _png(drawn, fmt)
    return files


def comparison_pngs(comparison, *, figure_format: str = "png") -> dict[str, bytes]:
    """Every figure of a plant held against measurement (PNG unless told otherwise).

    Parameters
    ----------
    comparison : PlantComparison
        The comparison (:func:`dampctl.model.comparison.compare_plant`).
    figure_format : str, optional
        png (default), svg or pdf; the names' extension follows it.

    Returns
    -------
    dict of str to bytes
        ``measured_<output>_<input>.png`` per shared channel: measured and plant FRF.
    """
    files = {}
    for k, name in enumerate(comparison.channels):
        error = comparison.error[name]
        drawn = plot_frf_match(comparison.freq_hz, comparison.measured[k], comparison.model[k],
                               unit=comparison.units[k], model_label="plant",
                               title=f"{name}: plant against measurement, error {error:.1%}")
        out, _, inp = name.partition("/")
        files[figure_name(f"measured_{_safe(out)}_{_safe(inp)}", figure_format)] = _png(
            drawn, figure_format)
    return files
