"""Modes from measured FRFs: :func:`fit_modes` and its result, :class:`ModalFit`.

The steps, each in its own module:

1. the measurement (:class:`~dampctl.model.measured.MeasuredFRF`) is cut to the band and every
   channel turned into a receptance (divided by (jω)^d for velocity d = 1 and acceleration
   d = 2), weighted so that the fit minimizes the error in the measured unit, each channel's
   error relative to its own size, and, where coherence is given, each value by its coherence;
2. a stability chart (:mod:`~dampctl.model.stability`) fits models of increasing order by
   vector fitting (:mod:`~dampctl.model.vectorfit`, Gustavsen & Semlyen 1999) and the poles
   stable over several orders are taken as the modes (or those nearest the frequencies the
   user names);
3. one more vector fit at exactly those poles polishes them, with the lower and upper
   residuals L/(jω)² and U of every channel standing for the modes outside the band;
4. residues become real modal constants and mode shapes, scaled at a driving point
   (:mod:`~dampctl.model.modalshapes`).

The fit error of a channel is the normalized RMS error over the band,
e = √(Σ_k γ_k |Ĥ_k − H_k|² / Σ_k γ_k |H_k|²), with γ the coherence (1 where none is given).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Literal

import numpy as np

from dampctl.errors import MeasurementError, UsageError
from dampctl.model.components import Actuator, Mode, Pair, Sensor
from dampctl.model.measured import MeasuredFRF
from dampctl.model.modalshapes import ShapeSet, modal_constants, split_shapes
from dampctl.model.plant import ModalPlant
from dampctl.model.stability import (
    StabilityChart,
    StabilityTolerances,
    choose_poles,
    stability_chart,
)
from dampctl.model.vectorfit import RationalFit, fit_residues, vector_fit

__all__ = ["ModalFit", "fit_modes", "frf_error"]

#: the automatic order search: at least this many orders past the peaks, and this many orders
#: without a new physical pole before it stops; never beyond _MAX_AUTO_ORDER
_AUTO_MARGIN = 4
_AUTO_PLATEAU = 5
_MAX_AUTO_ORDER = 60


@dataclass(frozen=True)
class ModalFit:
    """Modes identified from measured FRFs, with the fit's residual terms and quality.

    Parameters
    ----------
    measured : MeasuredFRF
        The measurement, cut to the fitted band.
    poles : ndarray of complex, shape (n_modes,)
        Poles λ_i = −ζ_iω_i + jω_i√(1 − ζ_i²) (rad/s), by increasing frequency.
    residues : ndarray of complex, shape (n_modes, n_out, n_in)
        Receptance residues of 1/(jω − λ_i) (m/(N·s); for a force output N/(N·s)).
    lower_residual : ndarray, shape (n_out, n_in)
        L of each channel: the receptance term L/(jω)² (1/kg) standing for the modes below
        the band (a residual mass 1/L).
    upper_residual : ndarray, shape (n_out, n_in)
        U of each channel: the receptance constant (m/N) standing for the modes above the band
        (a residual flexibility).
    shapes : ShapeSet
        Mode shapes at the measured sites and their scaling.
    chart : StabilityChart
        The fits over model order the poles were chosen from.
    order : int
        The model order the poles were read at.
    named : bool
        True when the modes were named by frequency (``modes_hz``), False when chosen
        automatically.
    polished : bool
        True when the final vector fit at exactly the chosen poles was kept; False when it
        moved a pole beyond the stability tolerances and the chart's poles were kept.
    fit_error : mapping of str to float
        Per channel ``OUTPUT/INPUT``: normalized RMS error of this fit (modes and residual
        terms) over the band, coherence-weighted.
    plant_error : mapping of str to float
        Per channel with a motion output: the same error of the plant :meth:`to_plant`
        writes (real modes, no lower residual; the upper residual only as the static gain of
        a displacement driving point).
    driving_points : tuple of tuple of str
        The (output, input) driving points.
    warnings : tuple of str
        What the fit could not do as hoped, in plain words.
    """

    measured: MeasuredFRF
    poles: np.ndarray
    residues: np.ndarray
    lower_residual: np.ndarray
    upper_residual: np.ndarray
    shapes: ShapeSet
    chart: StabilityChart
    order: int
    named: bool = False
    polished: bool = True
    fit_error: Mapping[str, float] = field(default_factory=dict)
    plant_error: Mapping[str, float] = field(default_factory=dict)
    driving_points: tuple[tuple[str, str], ...] = ()
    warnings: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        poles = np.array(self.poles, dtype=complex).ravel()
        n_out, n_in = len(self.measured.outputs), len(self.measured.inputs)
        arrays = {
            "poles": (poles, (poles.size,)),
            "residues": (np.array(self.residues, dtype=complex), (poles.size, n_out, n_in)),
            "lower_residual": (np.array(self.lower_residual, dtype=float), (n_out, n_in)),
            "upper_residual": (np.array(self.upper_residual, dtype=float), (n_out, n_in)),
        }
        for name, (value, shape) in arrays.items():
            if value.shape != shape:
                raise MeasurementError(f"{name}: expected shape {shape}, got {value.shape}")
            value.setflags(write=False)
            object.__setattr__(self, name, value)
        if np.any(poles.imag <= 0) or np.any(poles.real >= 0):
            raise MeasurementError("poles must be damped and oscillating (Re < 0 < Im)")
        object.__setattr__(self, "fit_error", MappingProxyType(dict(self.fit_error)))
        object.__setattr__(self, "plant_error", MappingProxyType(dict(self.plant_error)))
        object.__setattr__(self, "warnings", tuple(self.warnings))

    @property
    def n_modes(self) -> int:
        """Number of modes identified."""
        return int(self.poles.size)

    @property
    def freqs_hz(self) -> np.ndarray:
        """Natural frequencies |λ|/2π (Hz)."""
        return np.abs(self.poles) / (2.0 * np.pi)

    @property
    def dampings(self) -> np.ndarray:
        """Damping ratios −Re λ/|λ|."""
        return -self.poles.real / np.abs(self.poles)

    @property
    def modal_masses(self) -> np.ndarray:
        """Modal mass (kg) of each mode with its shape 1 at the driving point; NaN if unscaled."""
        return self.shapes.modal_mass_kg

    @property
    def band_hz(self) -> tuple[float, float]:
        """The fitted band (Hz): the first and last frequency used."""
        return float(self.measured.freq_hz[0]), float(self.measured.freq_hz[-1])

    @property
    def indicator(self) -> np.ndarray:
        """Sum over channels of the measured magnitude, each channel scaled to a peak of 1."""
        h = np.abs(self.measured.frf).reshape(-1, self.measured.freq_hz.size)
        peak = np.max(h, axis=1, keepdims=True)
        return np.sum(h / np.where(peak > 0, peak, 1.0), axis=0)

    def model_frf(self, freq_hz: np.ndarray | None = None, *, residuals: bool = True) -> np.ndarray:
        """The fitted model's FRF in the measured units.

        Parameters
        ----------
        freq_hz : array_like, optional
            Frequencies (Hz), > 0; default the measured ones in the band.
        residuals : bool, optional
            Include the lower and upper residual terms (default True).

        Returns
        -------
        ndarray of complex, shape (n_out, n_in, n_f)
        """
        freq = self.measured.freq_hz if freq_hz is None else np.asarray(freq_hz, float).ravel()
        if np.any(freq <= 0) or not np.all(np.isfinite(freq)):
            raise UsageError("model_frf: frequencies must be finite and > 0")
        s = 2j * np.pi * freq
        r = self.residues[:, :, :, None]
        lam = self.poles[:, None, None, None]
        h = np.sum(r / (s - lam) + np.conj(r) / (s - np.conj(lam)), axis=0)
        if residuals:
            h = h + self.lower_residual[:, :, None] / (s * s) + self.upper_residual[:, :, None]
        return h * (s[None, None, :] ** self.measured.kind_orders[:, None, None])

    def to_plant(
        self,
        *,
        actuators: Mapping[str, str] | None = None,
        sensors: Mapping[str, str] | None = None,
        title: str = "",
    ) -> ModalPlant:
        """The plant of the fitted modes: real mass-normalized shapes at the measured sites.

        Parameters
        ----------
        actuators : mapping of str to str, optional
            Actuator name to measured input: a force actuator at the input's site. Default:
            one per input, named as the input.
        sensors : mapping of str to str, optional
            Sensor name to measured output (not a force output): a sensor of the output's kind
            at its site. Default: one per motion output, named as the output.
        title : str, optional
            The plant's title; default says where the modes came from, and that the shapes
            are unscaled when they are.

        Returns
        -------
        ModalPlant
            Modes with modal mass 1 kg (scaled shapes are mass-normalized), a site per measured
            point, the actuators and sensors, and a pair for every actuator and sensor at one
            site (a displacement pair's static gain holds the upper residual).
        """
        m = self.measured
        sh = self.shapes
        if actuators is None:
            actuators = {name: name for name in m.inputs}
        if sensors is None:
            sensors = {o: o for o, site in zip(m.outputs, sh.output_sites, strict=True) if site}
        acts, sens = [], []
        for name, source in actuators.items():
            if source not in m.inputs:
                raise UsageError(f"actuator {name!r}: {source!r} is not a measured input "
                                 f"(inputs: {', '.join(m.inputs)})")
            acts.append(Actuator(name=name, kind="force", site=sh.input_sites[
                m.inputs.index(source)]))
        for name, source in sensors.items():
            if source not in m.outputs:
                raise UsageError(f"sensor {name!r}: {source!r} is not a measured output "
                                 f"(outputs: {', '.join(m.outputs)})")
            o = m.outputs.index(source)
            if sh.output_sites[o] is None:
                raise UsageError(f"sensor {name!r}: output {source!r} is a force, which a plant "
                                 "sensor can only measure in a strut")
            sens.append(Sensor(name=name, kind=m.output_kinds[o], site=sh.output_sites[o]))
        modes = [Mode(freq_hz=f, damping=z) for f, z in zip(self.freqs_hz, self.dampings,
                                                            strict=True)]
        omega2 = np.abs(self.poles) ** 2
        pairs = []
        for a in acts:
            for s in sens:
                if a.site != s.site:
                    continue
                gain = None
                if s.kind == "displacement":
                    o, j = m.outputs.index(sensors[s.name]), m.inputs.index(actuators[a.name])
                    phi = sh.shapes[:, sh.sites.index(a.site)]
                    gain = float(np.sum(phi * phi / omega2) + self.upper_residual[o, j])
                pairs.append(Pair(name=f"{a.name}_{s.name}", actuator=a.name, sensor=s.name,
                                  static_gain=gain))
        if not title:
            title = f"modes fitted to {m.source or 'measured FRFs'}"
            unscaled = [str(i + 1) for i in range(self.n_modes) if not sh.scaled[i]]
            if unscaled:
                title += f" (shapes of modes {', '.join(unscaled)} UNSCALED: no driving point)"
        sites = {site: sh.shapes[:, k] for k, site in enumerate(sh.sites)}
        return ModalPlant(modes=modes, sites=sites, actuators=acts, sensors=sens, pairs=pairs,
                          title=title)


def frf_error(model: np.ndarray, measured: np.ndarray,
              coherence: np.ndarray | None = None) -> np.ndarray:
    """Normalized RMS error of each channel, weighted by coherence.

    Parameters
    ----------
    model, measured : ndarray of complex, shape (..., n_f)
        Model and measured FRFs (one unit per channel).
    coherence : ndarray, shape (..., n_f), optional
        Coherence weights γ (default 1).

    Returns
    -------
    ndarray, shape (...)
        √(Σ_k γ_k |model_k − measured_k|² / Σ_k γ_k |measured_k|²) per channel; NaN for a
        channel whose measurement is zero.
    """
    weight = np.ones(measured.shape) if coherence is None else coherence
    top = np.sum(weight * np.abs(model - measured) ** 2, axis=-1)
    bottom = np.sum(weight * np.abs(measured) ** 2, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(bottom > 0, np.sqrt(top / np.where(bottom > 0, bottom, 1.0)), np.nan)


def fit_modes(
    freq_hz: np.ndarray,
    frf: np.ndarray,
    *,
    output_kinds: str | Sequence[str] = "displacement",
    outputs: Sequence[str] | None = None,
    inputs: Sequence[str] | None = None,
    coherence: np.ndarray | None = None,
    band_hz: tuple[float, float] | None = None,
    order: Literal["auto"] | int = "auto",
    driving_points: Sequence[str | tuple[str, str]] = (),
    modes_hz: Sequence[float] | None = None,
    tolerances: StabilityTolerances | None = None,
    source: str = "",
) -> ModalFit:
    """Identify modes from measured FRFs (vector fitting with a stability chart).

    Parameters
    ----------
    freq_hz : array_like, shape (n_f,)
        Frequencies (Hz), increasing.
    frf : array_like of complex, shape (n_out, n_in, n_f)
        Output per newton of input force (output unit per N).
    output_kinds : str or sequence of str, optional
        ``displacement`` (default), ``velocity``, ``acceleration`` or ``force``: one for all
        outputs or one per output.
    outputs, inputs : sequence of str, optional
        Names (default ``out1``, ``out2``, ... and ``in1``, ...).
    coherence : array_like, shape (n_out, n_in, n_f), optional
        Ordinary coherence in [0, 1]: each value's weight in the fit and in the errors.
    band_hz : tuple of float, optional
        (low, high) band to fit (Hz); default all frequencies above 0.
    order : "auto" or int, optional
        Highest model order of the stability chart (complex pole pairs). ``"auto"``
        (default) counts the resonance peaks and stops once no new stable pole turns up.
    driving_points : sequence of str or tuple, optional
        Channels ``"OUT/IN"`` (or (out, in)) whose output is at the input's point and
        direction; they scale the shapes (mass-normalized). Without one the shapes are
        unscaled.
    modes_hz : sequence of float, optional
        Keep the stable poles nearest these frequencies (Hz) instead of choosing automatically.
    tolerances : StabilityTolerances, optional
        Stability tolerances (default 1 % frequency, 5 % damping, MAC 0.98, 3 orders).
    source : str, optional
        Name of the data (a file), used in messages and in the plant's title.

    Returns
    -------
    ModalFit

    Raises
    ------
    MeasurementError
        Invalid data, or no stable pole in the band.
    UsageError
        Invalid options (band, order, driving point, named modes).

    Notes
    -----
    Vector fitting: B. Gustavsen & A. Semlyen, "Rational approximation of frequency domain
    responses by vector fitting", IEEE Trans. Power Delivery 14(3), 1999. Residual terms and
    modal constants: D. J. Ewins, *Modal Testing: Theory, Practice and Application*, 2nd ed.,
    2000 (from memory).
    """
    data_all = np.asarray(frf)
    if data_all.ndim != 3:
        raise MeasurementError(f"frf: expected shape (n_out, n_in, n_f), got {data_all.shape}")
    n_out, n_in = data_all.shape[:2]
    kinds = (output_kinds,) * n_out if isinstance(output_kinds, str) else tuple(output_kinds)
    measured_all = MeasuredFRF(
        freq_hz, data_all,
        tuple(outputs) if outputs is not None else tuple(f"out{k + 1}" for k in range(n_out)),
        tuple(inputs) if inputs is not None else tuple(f"in{k + 1}" for k in range(n_in)),
        kinds, coherence, source)
    tolerances = tolerances or StabilityTolerances()
    measured = _band(measured_all, band_hz)
    driving = _driving_points(measured, driving_points)
    freq = measured.freq_hz
    s = 2j * np.pi * freq
    orders = measured.kind_orders
    h = measured.frf.reshape(n_out * n_in, freq.size)
    receptance = h / s[None, :] ** np.repeat(orders, n_in)[:, None]
    gamma = (np.ones(h.shape) if measured.coherence is None
             else measured.coherence.reshape(h.shape))
    size = np.sqrt(np.sum(gamma * np.abs(h) ** 2, axis=1))
    if np.any(size == 0):
        name = measured.channels[int(np.flatnonzero(size == 0)[0])]
        raise MeasurementError(f"channel {name} is zero over the band (or its coherence is)",
                               source=source or None)
    weights = (np.sqrt(gamma) / size[:, None]) * np.abs(s)[None, :] ** np.repeat(orders,
                                                                                  n_in)[:, None]
    scale = 2.0 * np.pi * freq[-1]
    s_scaled = s / scale
    chart = _chart(s_scaled, receptance, weights, scale, measured, order, tolerances)
    choice = choose_poles(chart, modes_hz)
    fit, polished = _polish(s_scaled, receptance, weights, choice.poles / scale, tolerances)
    poles = fit.poles * scale
    keep = np.argsort(np.abs(poles))
    poles = poles[keep]
    residues = (fit.residues[:, keep] * scale).T.reshape(poles.size, n_out, n_in)
    lower = (fit.inverse_square * scale**2).reshape(n_out, n_in)
    upper = fit.constant.reshape(n_out, n_in)
    constants, turn = modal_constants(poles, residues)
    shapes = split_shapes(constants, np.abs(poles) / (2 * np.pi), outputs=measured.outputs,
                          inputs=measured.inputs, output_kinds=measured.output_kinds,
                          driving_points=driving, turn_deg=turn)
    draft = ModalFit(measured, poles, residues, lower, upper, shapes, chart, choice.order,
                     choice.named, polished,
                     driving_points=tuple((measured.outputs[o], measured.inputs[j])
                                          for o, j in driving))
    errors = frf_error(draft.model_frf(), measured.frf, measured.coherence)
    fit_error = {name: float(e) for name, e in zip(measured.channels, errors.ravel(),
                                                    strict=True)}
    plant = draft.to_plant()
    motion = [o for o, site in enumerate(shapes.output_sites) if site is not None]
    sensor_names = [measured.outputs[o] for o in motion]
    plant_h = plant.frf(freq, list(measured.inputs), sensor_names)
    plant_errors = frf_error(plant_h, measured.frf[motion],
                             None if measured.coherence is None else measured.coherence[motion])
    plant_error = {f"{measured.outputs[o]}/{j}": float(plant_errors[k, jj])
                   for k, o in enumerate(motion) for jj, j in enumerate(measured.inputs)}
    warnings = list(shapes.warnings)
    if not polished:
        warnings.append("the final fit at exactly the chosen poles moved a pole beyond the "
                        "stability tolerances; the chart's poles were kept")
    return ModalFit(measured, poles, residues, lower, upper, shapes, chart, choice.order,
                    choice.named, polished, fit_error, plant_error, draft.driving_points,
                    tuple(warnings))


def _band(measured: MeasuredFRF, band_hz) -> MeasuredFRF:
    freq = measured.freq_hz
    if band_hz is None:
        low, high = float(freq[freq > 0][0]) if np.any(freq > 0) else 0.0, float(freq[-1])
    else:
        try:
            low, high = (float(x) for x in band_hz)
        except (TypeError, ValueError):
            raise UsageError(f"band: expected (low, high) in Hz, got {band_hz!r}") from None
        if not (np.isfinite(low) and np.isfinite(high)) or not 0 <= low < high:
            raise UsageError(f"band: expected 0 <= low < high (Hz), got {low:g}-{high:g}")
    low = max(low, float(np.min(freq[freq > 0])) if np.any(freq > 0) else low)
    return measured.band(low, high)


def _driving_points(measured: MeasuredFRF, items) -> list[tuple[int, int]]:
    found: list[tuple[int, int]] = []
    for item in items:
        name = item if isinstance(item, str) else "/".join(item)
        o, j = measured.channel(name)
        if measured.output_kinds[o] == "force":
            raise UsageError(f"driving point {name}: output {measured.outputs[o]!r} is a force, "
                             "not a motion at the input's point")
        for oo, jj in found:
            if oo == o or jj == j:
                raise UsageError(f"driving point {name}: output or input already in driving "
                                 f"point {measured.outputs[oo]}/{measured.inputs[jj]}")
        found.append((o, j))
    return found


def _chart(s, receptance, weights, scale, measured, order, tolerances) -> StabilityChart:
    band = (float(measured.freq_hz[0]), float(measured.freq_hz[-1]))
    limit = max(1, (s.size - 4) // 2)
    if order == "auto":
        peaks = _count_peaks(receptance, weights)
        top = min(_MAX_AUTO_ORDER, limit, max(3 * peaks + 10, 16))
        return stability_chart(s, receptance, weights, omega_scale=scale, band_hz=band,
                               max_order=top, stop_after=_AUTO_PLATEAU,
                               min_order=peaks + tolerances.run + _AUTO_MARGIN,
                               tolerances=tolerances)
    if isinstance(order, bool) or not isinstance(order, int | np.integer) or order < 1:
        raise UsageError(f"order: expected 'auto' or an integer >= 1, got {order!r}")
    if order > limit:
        raise UsageError(f"order {order}: {s.size} frequencies in the band hold at most order "
                         f"{limit}")
    return stability_chart(s, receptance, weights, omega_scale=scale, band_hz=band,
                           max_order=int(order), tolerances=tolerances)


def _count_peaks(receptance: np.ndarray, weights: np.ndarray) -> int:
    """Resonance peaks of the summed, normalized magnitudes (at least 3 dB prominent)."""
    from scipy.signal import find_peaks

    indicator = np.sum((weights * np.abs(receptance)) ** 2, axis=0)
    peaks, _ = find_peaks(np.log(np.maximum(indicator, 1e-300)), prominence=np.log(2.0))
    return max(1, int(peaks.size))


def _polish(s, receptance, weights, poles, tolerances) -> tuple[RationalFit, bool]:
    """Vector fitting started at the chosen poles; kept unless a pole moves beyond tolerance."""
    try:
        fit = vector_fit(s, receptance, weights, poles)
    except MeasurementError:
        fit = None
    if fit is not None and fit.poles.size == poles.size and np.all(fit.poles.imag > 0):
        new = fit.poles[np.argsort(np.abs(fit.poles))]
        old = poles[np.argsort(np.abs(poles))]
        freq_ok = np.abs(np.abs(new) - np.abs(old)) <= tolerances.freq * np.abs(old)
        z_new, z_old = -new.real / np.abs(new), -old.real / np.abs(old)
        damping_ok = np.abs(z_new - z_old) <= tolerances.damping * z_old
        if np.all(freq_ok & damping_ok):
            return fit, True
    return fit_residues(s, receptance, weights, poles), False
