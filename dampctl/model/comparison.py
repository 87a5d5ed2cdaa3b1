"""A plant held against measurement: modes, shapes and FRFs on the channels both have.

A measured channel ``OUTPUT/INPUT`` is shared with a plant when OUTPUT names a sensor (or a
performance output) of the plant and INPUT an actuator (or a disturbance). The measured FRF is
turned into the plant sensor's kind (times (jω)^k between displacement, velocity and
acceleration). On the shared channels :func:`compare_plant` reports

- the FRF error of each channel: the normalized RMS error of the plant's FRF over the band,
  weighted by coherence where given (as :func:`~dampctl.model.modalfit.frf_error`);
- the modes identified from the measurement (:func:`~dampctl.model.modalfit.fit_modes`),
  matched one to one to the plant's modes in the band by assignment on the frequency
  distance: frequency and damping of each, and the MAC (R. J. Allemang & D. L. Brown, Proc.
  IMAC I, 1982) between the plant's and the measurement's modal constants over the shared
  channels where there are at least two (for one input this is the MAC of the shapes at the
  sensors); the sign of each modal constant is compared too;
- warnings, each naming the mode and the channel, for whatever lies beyond
  :class:`ComparisonTolerances`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from dampctl.errors import MeasurementError
from dampctl.model.components import KIND_ORDER
from dampctl.model.measured import MeasuredFRF
from dampctl.model.modalfit import ModalFit, fit_modes, frf_error
from dampctl.model.modalshapes import modal_constants
from dampctl.model.plant import ModalPlant
from dampctl.model.stability import mac

__all__ = ["ComparisonTolerances", "ModeMatch", "PlantComparison", "compare_plant"]

#: a measured mode is matched to a plant mode only within this relative frequency distance
_MATCH_REACH = 0.25
#: modal constants below this share of a mode's largest are too small for a sign comparison
_SIGN_FLOOR = 0.1


@dataclass(frozen=True)
class ComparisonTolerances:
    """How far the plant may be from the measurement before a warning.

    These are dampctl's choices, not a standard's: a damping loop tuned to a mode 2 % off in
    frequency keeps most of its damping; measured damping ratios scatter by tens of percent.

    Parameters
    ----------
    freq : float, optional
        Largest relative frequency difference of a matched mode (fraction), default 0.02.
    damping : float, optional
        Largest relative damping difference (fraction of the measured value), default 0.5.
    mac : float, optional
        Smallest MAC between plant and measured modal constants, default 0.9.
    error : float, optional
        Largest normalized RMS FRF error of a channel, default 0.2.
    """

    freq: float = 0.02
    damping: float = 0.5
    mac: float = 0.9
    error: float = 0.2

    def __post_init__(self) -> None:
        for name in ("freq", "damping", "mac", "error"):
            value = getattr(self, name)
            if not (isinstance(value, int | float) and 0.0 < value <= 10.0):
                raise MeasurementError(f"tolerance {name}: expected a positive fraction, "
                                       f"got {value!r}")


@dataclass(frozen=True)
class ModeMatch:
    """A plant mode and the measured mode matched to it (either may be missing).

    Parameters
    ----------
    mode : int or None
        Plant mode number (1-based); None for a measured mode the plant lacks.
    plant_freq_hz, plant_damping : float or None
        The plant mode's frequency (Hz) and damping ratio.
    measured_freq_hz, measured_damping : float or None
        The measured mode's (None when no measured mode matches).
    mac : float or None
        MAC of the modal constants over the shared channels (None for fewer than two, or no
        match).
    channel : str
        The shared channel where the mode is strongest.
    """

    mode: int | None
    plant_freq_hz: float | None
    plant_damping: float | None
    measured_freq_hz: float | None
    measured_damping: float | None
    mac: float | None
    channel: str

    @property
    def freq_change(self) -> float | None:
        """Measured over plant frequency, minus 1 (None without both)."""
        if self.plant_freq_hz is None or self.measured_freq_hz is None:
            return None
        return self.measured_freq_hz / self.plant_freq_hz - 1.0

    @property
    def damping_change(self) -> float | None:
        """(plant − measured) damping over the measured damping (None without both)."""
        if self.plant_damping is None or self.measured_damping is None:
            return None
        return (self.plant_damping - self.measured_damping) / self.measured_damping


@dataclass(frozen=True)
class PlantComparison:
    """A plant against measured FRFs on their shared channels.

    Parameters
    ----------
    channels : tuple of str
        Shared channels ``OUTPUT/INPUT`` (measured names = plant sensor/actuator names).
    units : tuple of str
        The plant sensor's unit per channel (per N).
    freq_hz : ndarray, shape (n_f,)
        The frequencies compared (Hz).
    measured : ndarray of complex, shape (n_channels, n_f)
        Measured FRFs in the plant sensor's kind.
    model : ndarray of complex, shape (n_channels, n_f)
        The plant's FRFs.
    error : dict of str to float
        Normalized RMS error per channel.
    modes : tuple of ModeMatch
        Plant modes in the band (by number), then measured modes the plant lacks.
    fit : ModalFit or None
        The fit of the measurement (None when no mode could be identified).
    tolerances : ComparisonTolerances
        The tolerances of the warnings.
    warnings : tuple of str
        Mismatches beyond the tolerances, each naming the mode and the channel.
    """

    channels: tuple[str, ...]
    units: tuple[str, ...]
    freq_hz: np.ndarray
    measured: np.ndarray
    model: np.ndarray
    error: dict[str, float]
    modes: tuple[ModeMatch, ...]
    fit: ModalFit | None
    tolerances: ComparisonTolerances = field(default_factory=ComparisonTolerances)
    warnings: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        for name in ("freq_hz", "measured", "model"):
            value = np.array(getattr(self, name), copy=True)
            value.setflags(write=False)
            object.__setattr__(self, name, value)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the ``measured`` key of ``dampctl check --json``).

        Returns
        -------
        dict
            ``band_hz``, ``channels`` (``channel``, ``unit``, ``error``), ``modes`` (``mode``,
            ``plant_freq_hz``, ``measured_freq_hz``, ``freq_change``, ``plant_damping``,
            ``measured_damping``, ``damping_change``, ``mac``, ``channel``), ``tolerances``
            and ``warnings``.
        """
        return {
            "band_hz": [float(self.freq_hz[0]), float(self.freq_hz[-1])],
            "channels": [{"channel": c, "unit": u, "error": self.error[c]}
                         for c, u in zip(self.channels, self.units, strict=True)],
            "modes": [{"mode": m.mode, "plant_freq_hz": m.plant_freq_hz,
                       "measured_freq_hz": m.measured_freq_hz, "freq_change": m.freq_change,
                       "plant_damping": m.plant_damping, "measured_damping": m.measured_damping,
                       "damping_change": m.damping_change, "mac": m.mac, "channel": m.channel}
                      for m in self.modes],
            "tolerances": {"freq": self.tolerances.freq, "damping": self.tolerances.damping,
                           "mac": self.tolerances.mac, "error": self.tolerances.error},
            "warnings": list(self.warnings),
        }


def compare_plant(
    plant: ModalPlant,
    measured: MeasuredFRF,
    *,
    band_hz: tuple[float, float] | None = None,
    tolerances: ComparisonTolerances | None = None,
) -> PlantComparison:
    """Compare a plant with measured FRFs on the channels they share.

    Parameters
    ----------
    plant : ModalPlant
        Any plant.
    measured : MeasuredFRF
        Measured FRFs whose output and input names are plant sensor and actuator names.
    band_hz : tuple of float, optional
        Band (Hz) to compare over; default every measured frequency above 0.
    tolerances : ComparisonTolerances, optional
        When a difference becomes a warning (default :class:`ComparisonTolerances`).

    Returns
    -------
    PlantComparison

    Raises
    ------
    MeasurementError
        When no channel is shared, or a shared output measures a force where the plant
        sensor measures motion (or the reverse).
    """
    tolerances = tolerances or ComparisonTolerances()
    freq = measured.freq_hz
    low = band_hz[0] if band_hz else float(freq[freq > 0][0]) if np.any(freq > 0) else 0.0
    high = band_hz[1] if band_hz else float(freq[-1])
    measured = measured.band(max(low, float(np.min(freq[freq > 0], initial=low))), high)
    pairs, orders, units = _shared(plant, measured)
    freq = measured.freq_hz
    s = 2j * np.pi * freq
    outputs = [measured.outputs[o] for o, _ in pairs]
    inputs = [measured.inputs[j] for _, j in pairs]
    model = np.array([plant.frf(freq, [i], [o])[0, 0] for o, i in zip(outputs, inputs,
                                                                       strict=True)])
    data = np.array([measured.frf[o, j] * s ** (orders[k] - measured.kind_orders[o])
                     for k, (o, j) in enumerate(pairs)])
    gamma = (None if measured.coherence is None
             else np.array([measured.coherence[o, j] for o, j in pairs]))
    names = tuple(f"{o}/{i}" for o, i in zip(outputs, inputs, strict=True))
    error = {n: float(e) for n, e in zip(names, frf_error(model, data, gamma), strict=True)}
    warnings: list[str] = []
    try:
        fit = fit_modes(measured.freq_hz, measured.frf, output_kinds=measured.output_kinds,
                        outputs=measured.outputs, inputs=measured.inputs,
                        coherence=measured.coherence, source=measured.source)
    except MeasurementError as exc:
        fit = None
        warnings.append(f"no mode could be identified from the measurement ({exc.message})")
    plant_constants = np.array([[plant.output_row(o)[0][i] * plant.input_row(n)[i]
                                 for o, n in zip(outputs, inputs, strict=True)]
                                for i in range(plant.n_modes)])
    modes = _match(plant, fit, pairs, names, plant_constants, (freq[0], freq[-1]), tolerances,
                   warnings)
    for k, name in enumerate(names):
        if np.isfinite(error[name]) and error[name] > tolerances.error:
            worst = freq[int(np.argmax(np.abs(model[k] - data[k])))]
            near = int(np.argmin(np.abs(plant.freqs_hz - worst)))
            warnings.append(f"channel {name}: FRF error {error[name]:.0%} (tolerance "
                            f"{tolerances.error:.0%}), largest at {worst:.4g} Hz near mode "
                            f"{near + 1} ({plant.freqs_hz[near]:.4g} Hz)")
    return PlantComparison(names, tuple(units), freq, data, model, error, tuple(modes), fit,
                           tolerances, tuple(warnings))


def _shared(plant: ModalPlant, measured: MeasuredFRF):
    receivers = {s.name: s.kind for s in plant.sensors}
    receivers.update({o.name: o.kind for o in plant.outputs})
    sources = {a.name for a in plant.actuators} | {d.name for d in plant.disturbances}
    pairs, orders, units = [], [], []
    for o, out in enumerate(measured.outputs):
        if out not in receivers:
            continue
        plant_kind, kind = receivers[out], measured.output_kinds[o]
        if (plant_kind == "force") != (kind == "force"):
            raise MeasurementError(
                f"output {out!r} measures {kind} but the plant's {out!r} measures {plant_kind}",
                source=measured.source or None)
        for j, inp in enumerate(measured.inputs):
            if inp in sources:
                pairs.append((o, j))
                orders.append(KIND_ORDER[plant_kind])
                unit = next(x.unit for x in (*plant.sensors, *plant.outputs) if x.name == out)
                units.append(f"{unit}/N")
    if not pairs:
        raise MeasurementError(
            "no channel is shared with the plant: measured outputs "
            f"{', '.join(measured.outputs)} and inputs {', '.join(measured.inputs)}; plant "
            f"sensors and outputs {', '.join(sorted(receivers)) or 'none'}, actuators and "
            f"disturbances {', '.join(sorted(sources)) or 'none'} (name the measured channels "
            "after the plant's)", source=measured.source or None)
    return pairs, orders, units


def _match(plant, fit, pairs, names, plant_constants, band, tol, warnings) -> list[ModeMatch]:
    from scipy.optimize import linear_sum_assignment

    in_band = [i for i in range(plant.n_modes) if band[0] <= plant.freqs_hz[i] <= band[1]]
    fit_constants = np.zeros((0, len(pairs)))
    fit_freqs = np.zeros(0)
    if fit is not None:
        constants, _ = modal_constants(fit.poles, fit.residues)
        fit_constants = np.array([[c[o, j] for o, j in pairs] for c in constants])
        fit_freqs = fit.freqs_hz
    assigned: dict[int, int] = {}
    if in_band and fit_freqs.size:
        cost = np.abs(np.log(plant.freqs_hz[in_band][:, None] / fit_freqs[None, :]))
        rows, cols = linear_sum_assignment(cost)
        for r, c in zip(rows, cols, strict=True):
            if cost[r, c] <= np.log1p(_MATCH_REACH):
                assigned[in_band[r]] = int(c)
    matches = []
    for i in in_band:
        strongest = names[int(np.argmax(np.abs(plant_constants[i])))]
        label = f"mode {i + 1} ({plant.freqs_hz[i]:.4g} Hz)"
        if i not in assigned:
            matches.append(ModeMatch(i + 1, float(plant.freqs_hz[i]), float(plant.dampings[i]),
                                     None, None, None, strongest))
            if fit is not None:
                warnings.append(f"{label}: no measured mode within {_MATCH_REACH:.0%} "
                                f"(strongest in the plant on channel {strongest})")
            continue
        k = assigned[i]
        a, b = plant_constants[i], fit_constants[k]
        strongest = names[int(np.argmax(np.abs(b)))]
        value = mac(a, b) if len(pairs) >= 2 else None
        match = ModeMatch(i + 1, float(plant.freqs_hz[i]), float(plant.dampings[i]),
                          float(fit.freqs_hz[k]), float(fit.dampings[k]), value, strongest)
        matches.append(match)
        if abs(match.freq_change) > tol.freq:
            warnings.append(f"{label}: measured at {match.measured_freq_hz:.4g} Hz "
                            f"({match.freq_change:+.1%}, tolerance {tol.freq:.0%}), strongest "
                            f"on channel {strongest}")
        if abs(match.damping_change) > tol.damping:
            warnings.append(f"{label}: damping {match.plant_damping:.3g} in the plant, "
                            f"{match.measured_damping:.3g} measured (tolerance "
                            f"{tol.damping:.0%}), strongest on channel {strongest}")
        if value is not None and value < tol.mac:
            worst = names[int(np.argmax(np.abs(a / np.linalg.norm(a) * np.sign(a @ b)
                                               - b / np.linalg.norm(b))))]
            warnings.append(f"{label}: MAC {value:.2f} between plant and measured shapes "
                            f"(tolerance {tol.mac:g}), largest difference on channel {worst}")
        floor_a, floor_b = _SIGN_FLOOR * np.max(np.abs(a)), _SIGN_FLOOR * np.max(np.abs(b))
        for c, name in enumerate(names):
            if abs(a[c]) >= floor_a and abs(b[c]) >= floor_b and np.sign(a[c]) != np.sign(b[c]):
                warnings.append(f"{label}: channel {name} has the opposite sign in the plant "
                                "(a sign error in a shape or a sensor?)")
    taken = set(assigned.values())
    for k in range(fit_freqs.size):
        if k in taken:
            continue
        strongest = names[int(np.argmax(np.abs(fit_constants[k])))]
        matches.append(ModeMatch(None, None, None, float(fit.freqs_hz[k]),
                                 float(fit.dampings[k]), None, strongest))
        warnings.append(f"measured mode at {fit.freqs_hz[k]:.4g} Hz (damping "
                        f"{fit.dampings[k]:.3g}) has no plant mode; strongest on channel "
                        f"{strongest}")
    return matches
