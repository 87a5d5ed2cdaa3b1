"""Verification in discrete time: the sampled closed loop of plant and discrete controller.

The loop checked is what runs on the target (Franklin, Powell & Workman, *Digital Control of
Dynamic Systems*, 3rd ed. 1998, sampled-data systems): the plant, with the actuator and sensor
roll-offs and the plant file's ``loop_delay_s`` (Padé) folded in, discretized exactly by a
zero-order hold over *all* its modes; one sample of computation delay (the command computed
from y[k] is applied at step k + 1); and the discrete controller as exported (the recommended
form of each loop, with float or quantized coefficients). Signal rounding inside the
controller is not modelled, only coefficient rounding.

Each closed-loop pole z is mapped to s = ln(z)/T and assigned to a plant mode with
:func:`dampctl.analysis.closedloop.match_modes`; modes above the Nyquist frequency are compared on
the alias branch their open-loop pole falls on, then moved back. The continuous design's damping
beside it comes from :func:`dampctl.analysis.closedloop.closed_loop_modes` with the same roll-offs
and ``delay_s`` = the plant's ``loop_delay_s`` only (no sampling), so the difference between the
two columns is the effect of sampling, the computation delay and the discretization.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from dampctl.analysis.closedloop import (
    MatchedModes,
    closed_loop_modes,
    lag_elements,
    match_modes,
    modal_damping,
    open_loop_poles,
    series_matrices,
)
from dampctl.design import Design
from dampctl.model.plant import ModalPlant

__all__ = [
    "RATE_RATIO_ADVISED",
    "DiscreteVerification",
    "SampledReference",
    "phase_lost_deg",
    "sampled_closed_loop",
    "sampled_plant",
    "sampled_reference",
    "verify_discrete",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
#: sample rate advised, as a multiple of the highest controlled mode (common practice: 10–20×)
RATE_RATIO_ADVISED = 20.0


def phase_lost_deg(freq_hz: float, rate_hz: float) -> float:
    """Phase lag (degrees) of a zero-order hold plus one sample of computation delay.

    Parameters
    ----------
    freq_hz : float
        Frequency (Hz), typically the loop crossover.
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    float
        1.5 ω T in degrees (= 540° f / f_s): ωT/2 for the hold, ωT for the delay.
    """
    return math.degrees(1.5 * 2.0 * math.pi * freq_hz / rate_hz)


@dataclass(frozen=True)
class DiscreteVerification:
    """Closed-loop modes of the sampled loop beside the continuous design's.

    Attributes
    ----------
    modes : tuple of int
        Mode numbers (1-based), all plant modes.
    continuous_freq_hz, continuous_damping : ndarray
        Continuous closed loop (Hz, ratio) per mode.
    discrete_freq_hz, discrete_damping : ndarray
        Sampled closed loop (Hz, ratio) per mode.
    stable : bool
        Every sampled closed-loop pole inside the unit circle.
    max_pole_radius : float
        Largest |z| of the sampled closed loop.
    max_pole_freq_hz : float
        Frequency |arg z| f_s / 2π (Hz) of that pole (aliased into 0..f_s/2).
    continuous_stable : bool
        The continuous closed loop is stable.
    highest_mode_hz : float
        Highest controlled (target) mode frequency (Hz); all modes if the design names none.
    rate_ratio : float
        f_s / highest_mode_hz.
    crossover_hz : float or None
        Highest loop-gain crossover (Hz) below Nyquist, loop at a time; None when none.
    phase_lost_deg : float
        1.5 ωT at the crossover (or at the highest controlled mode when no crossover), degrees.
    warnings : tuple of str
        Sample-rate and aliasing warnings.
    """

    modes: tuple[int, ...]
    continuous_freq_hz: np.ndarray
    continuous_damping: np.ndarray
    discrete_freq_hz: np.ndarray
    discrete_damping: np.ndarray
    stable: bool
    max_pole_radius: float
    max_pole_freq_hz: float
    continuous_stable: bool
    highest_mode_hz: float
    rate_ratio: float
    crossover_hz: float | None
    phase_lost_deg: float
    warnings: tuple[str, ...]


def sampled_plant(plant: ModalPlant, design: Design, rate_hz: float) -> Matrices:
    """ZOH equivalent of the plant with roll-offs and the stated loop delay folded in.

    Parameters
    ----------
    plant : ModalPlant
        The plant; all modes are kept.
    design : Design
        Supplies the actuator and sensor order.
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    tuple of ndarray
        Discrete (A, B, C, D), inputs = actuator commands, outputs = sensor samples.
    """
    n_act, n_sen = len(design.actuators), len(design.sensors)
    act_bw = [plant.actuator(a).bandwidth_hz for a in design.actuators]
    sen_bw = [plant.sensor(n).bandwidth_hz for n in design.sensors]
    delay = float(plant.requirements.loop_delay_s or 0.0)
    unit = lambda n: (np.zeros((0, 0)), np.zeros((0, n)), np.zeros((n, 0)), np.eye(n))  # noqa: E731
    actuator_side = lag_elements(unit(n_act), delay_s=delay, actuator_bandwidth_hz=act_bw)
    sensor_side = lag_elements(unit(n_sen), sensor_bandwidth_hz=sen_bw)
    mats = plant.statespace_matrices(design.actuators, design.sensors)
    if actuator_side[0].shape[0] == 0 and sensor_side[0].shape[0] == 0:
        return _modal_zoh(mats, 1.0 / rate_hz)
    system = series_matrices(series_matrices(actuator_side, mats), sensor_side)
    import scipy.signal  # here, not at import: it costs 0.3 s to load

    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete(system, 1.0 / rate_hz, method="zoh")
    return Ad, Bd, Cd, Dd


def _modal_zoh(mats: Matrices, sample_time_s: float) -> Matrices:
    """Exact ZOH of a block-diagonal modal state space, one 2×2 block at a time.

    expm([[A_i, B_i], [0, 0]] T) = [[A_d,i, B_d,i], [0, I]] for each mode (batched), the same
    matrices the full augmented exponential gives, at O(n) instead of O(n³) cost.
    """
    A, B, C, D = mats
    n, m = A.shape[0] // 2, B.shape[1]
    aug = np.zeros((n, 2 + m, 2 + m))
    idx = np.arange(n)
    for r in range(2):
        for c in range(2):
            aug[:, r, c] = A[2 * idx + r, 2 * idx + c]
        aug[:, r, 2:] = B[2 * idx + r, :]
    E = scipy.linalg.expm(aug * sample_time_s)
    Ad = np.zeros_like(A)
    Bd = np.zeros_like(B)
    for r in range(2):
        for c in range(2):
            Ad[2 * idx + r, 2 * idx + c] = E[:, r, c]
        Bd[2 * idx + r, :] = E[:, r, 2:]
    return Ad, Bd, np.array(C), np.array(D)


def sampled_closed_loop(plant_d: Matrices, controller_d: Matrices) -> np.ndarray:
    """State matrix of the sampled loop with one sample of computation delay.

    Parameters
    ----------
    plant_d : tuple of ndarray
        Discrete plant (A, B, C, D).
    controller_d : tuple of ndarray
        Discrete controller (A_c, B_c, C_c, D_c), ``v[k] = −(C_c x_c + D_c y[k])``.

    Returns
    -------
    ndarray
        Over states [x, x_c, w] with w the held command: u[k] = w[k], w[k+1] = v[k].
    """
    A, B, C, D = plant_d
    Ac, Bc, Cc, Dc = controller_d
    n, nc, m = A.shape[0], Ac.shape[0], B.shape[1]
    out = np.zeros((n + nc + m, n + nc + m))
    out[:n, :n] = A
    out[:n, n + nc :] = B
    out[n : n + nc, :n] = Bc @ C
    out[n : n + nc, n : n + nc] = Ac
    out[n : n + nc, n + nc :] = Bc @ D
    out[n + nc :, :n] = -Dc @ C
    out[n + nc :, n : n + nc] = -Cc
    out[n + nc :, n + nc :] = -Dc @ D
    return out


def _match_sampled(plant: ModalPlant, z: np.ndarray, T: float):
    """Matched s-plane poles per mode, on each mode's own alias branch."""
    p_ol = open_loop_poles(plant.omegas, plant.dampings)
    alias = np.log(np.exp(p_ol * T)) / T
    flip = alias.imag < 0
    alias = np.where(flip, alias.conj(), alias)
    keep = np.abs(z) > 1e-12
    s = np.log(z[keep].astype(complex)) / T
    matched = match_modes(alias, s).poles
    matched = np.where(flip, matched.conj(), matched)
    turns = np.round((p_ol.imag - matched.imag) * T / (2.0 * np.pi))
    return matched + 2j * np.pi * turns / T


@dataclass(frozen=True)
class SampledReference:
    """What every check of one design at one rate shares (computed once).

    Attributes
    ----------
    rate_hz : float
        Sample rate (Hz).
    plant_d : tuple of ndarray
        :func:`sampled_plant` of the plant.
    continuous : MatchedModes
        Continuous closed loop (roll-offs and ``loop_delay_s``, no sampling).
    crossover_hz : float or None
        Highest loop-gain crossover below Nyquist.
    """

    rate_hz: float
    plant_d: Matrices
    continuous: MatchedModes
    crossover_hz: float | None


def sampled_reference(plant: ModalPlant, design: Design, rate_hz: float) -> SampledReference:
    """Sampled plant, continuous closed loop and crossover of a design at a rate.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The continuous design.
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    SampledReference
    """
    return SampledReference(
        rate_hz=float(rate_hz),
        plant_d=sampled_plant(plant, design, rate_hz),
        continuous=closed_loop_modes(
            plant, design, delay_s=float(plant.requirements.loop_delay_s or 0.0)
        ),
        crossover_hz=_crossover_hz(plant, design, rate_hz),
    )


def verify_discrete(
    plant: ModalPlant,
    design: Design,
    rate_hz: float,
    controller_d: Matrices,
    *,
    reference: SampledReference | None = None,
) -> DiscreteVerification:
    """Closed-loop damping of every mode in the sampled loop, beside the continuous design's.

    Parameters
    ----------
    plant : ModalPlant
        The plant (all modes).
    design : Design
        The continuous design the discrete controller came from.
    rate_hz : float
        Sample rate (Hz).
    controller_d : tuple of ndarray
        Discrete controller (A, B, C, D), sensors in, actuators out, ``u = −(C x + D y)``
        (:meth:`DiscreteController.realisation_matrices`, or a quantized one).
    reference : SampledReference, optional
        Precomputed :func:`sampled_reference` for the same plant, design and rate (saves the
        plant discretization when several controllers are checked).

    Returns
    -------
    DiscreteVerification
    """
    T = 1.0 / rate_hz
    if reference is None or reference.rate_hz != float(rate_hz):
        reference = sampled_reference(plant, design, rate_hz)
    cont = reference.continuous
    z = np.linalg.eigvals(sampled_closed_loop(reference.plant_d, controller_d))
    poles = _match_sampled(plant, z, T)
    omega, damping = modal_damping(poles)
    targets = [m for m in design.target_modes if 1 <= m <= plant.n_modes]
    freqs = plant.freqs_hz[[m - 1 for m in targets]] if targets else plant.freqs_hz
    highest = float(np.max(freqs))
    crossover = reference.crossover_hz
    ratio = rate_hz / highest
    warnings = []
    if ratio < RATE_RATIO_ADVISED:
        warnings.append(
            f"sample rate is {ratio:.3g}× the highest controlled mode ({highest:.4g} Hz); common "
            "practice is at least 10–20×"
        )
    above = [k + 1 for k, f in enumerate(plant.freqs_hz) if f >= rate_hz / 2]
    if above:
        warnings.append(
            f"modes {', '.join(map(str, above))} lie above the Nyquist frequency "
            f"{rate_hz / 2:.4g} Hz and alias in the sampled loop"
        )
    lost = phase_lost_deg(crossover if crossover else highest, rate_hz)
    return DiscreteVerification(
        modes=tuple(range(1, plant.n_modes + 1)),
        continuous_freq_hz=cont.freq_hz,
        continuous_damping=cont.damping,
        discrete_freq_hz=omega / (2.0 * np.pi),
        discrete_damping=damping,
        stable=bool(np.max(np.abs(z)) < 1.0),
        max_pole_radius=float(np.max(np.abs(z))),
        max_pole_freq_hz=float(abs(np.angle(z[np.argmax(np.abs(z))])) * rate_hz / (2 * np.pi)),
        continuous_stable=cont.stable,
        highest_mode_hz=highest,
        rate_ratio=ratio,
        crossover_hz=crossover,
        phase_lost_deg=lost,
        warnings=tuple(warnings),
    )


def _crossover_hz(plant: ModalPlant, design: Design, rate_hz: float) -> float | None:
    """Highest frequency below Nyquist where the loop gain crosses 1 (loop at a time)."""
    nyquist = rate_hz / 2
    low = 0.01 * float(np.min(plant.freqs_hz))
    grid = np.unique(
        np.concatenate(
            [np.geomspace(low, nyquist * 0.999, 3000), plant.freqs_hz[plant.freqs_hz < nyquist]]
        )
    )
    P = plant.frf(grid, design.actuators, design.sensors)
    K = design.response(grid)
    if design.loops:
        gain = np.abs(np.einsum("kkf,kkf->kf", K, P))
    else:
        L = np.moveaxis(np.einsum("asf,sbf->abf", K, P), -1, 0)
        gain = np.linalg.svd(L, compute_uv=False).T
    above = gain >= 1.0
    cross = np.nonzero(np.any(above[:, 1:] != above[:, :-1], axis=0))[0]
    return float(grid[cross[-1] + 1]) if cross.size else None
