"""Disturbance response, sensor-noise response and actuator effort of a closed loop.

Random inputs: every disturbance of the plant is a force with a one-sided PSD W(f) (N²/Hz),
independent of the others; every sensor of the design adds white noise with its one-sided
amplitude density n (unit/√Hz), entering at the controller input. For a one-sided PSD the
variance of an output with frequency response H is σ² = ∫₀^∞ |H(j2πf)|² W(f) df.

Two independent routes give the same number and are both reported:

* **H2 / Lyapunov** for flat PSDs: with ẋ = A x + B w, E[w(t)w(τ)ᵀ] = Q δ(t−τ), the state
  covariance solves A P + P Aᵀ + B Q Bᵀ = 0 (scipy ``solve_continuous_lyapunov``) and a
  one-sided PSD W₀ corresponds to Q = W₀/2. Delays enter here as Padé approximants.
* **Frequency integral** on a grid that resolves every open- and closed-loop resonance
  (trapezoid in f), with the delay exact (e^{−jωT}); tabulated PSDs are only done this way.

The closed loop is ``u = −K_eff(s)(y + n)`` with K_eff the design's controller with the loop
delay and the first-order actuator/sensor roll-offs; u is the physical actuator input (force in
N, or strut free extension in m).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import matrix_balance, solve_continuous_lyapunov

from dampctl.analysis.margins import default_grid
from dampctl.analysis.vc import (
    VcRating,
    band_edges_hz,
    band_rms,
    third_octave_centres_hz,
    vc_rating,
)

__all__ = [
    "ClosedLoopFrf",
    "LoopEffort",
    "OutputRms",
    "ResponseResult",
    "closed_loop_frf",
    "closed_loop_statespace",
    "controller_frf",
    "h2_variances",
    "integration_grid",
    "random_response",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: peak factor applied to an RMS for a limit check (common practice: 3σ for Gaussian signals)
PEAK_FACTOR = 3.0


def controller_frf(
    plant, design, freq_hz: np.ndarray, *, delay_s: float, roll_off: bool = True
) -> np.ndarray:
    """K_eff(j2πf) = R_a(s) e^{−sT} K(s) R_s(s), exact delay, shape (n_act, n_sens, n_freq).

    Parameters
    ----------
    plant : ModalPlant
        Supplies the actuator and sensor ``bandwidth_hz``.
    design : Design
        The controller (u = −K y).
    freq_hz : array_like
        Frequencies (Hz).
    delay_s : float
        Loop delay (s), applied exactly.
    roll_off : bool, optional
        Include the first-order roll-offs stated in the plant file.

    Returns
    -------
    ndarray of complex
    """
    freq = np.asarray(freq_hz, dtype=float).ravel()
    s = 2j * np.pi * freq
    K = design.response(freq) * np.exp(-s * delay_s)[None, None, :]
    if roll_off:
        for a, name in enumerate(design.actuators):
            bw = plant.actuator(name).bandwidth_hz
            if bw:
                K[a] /= 1.0 + s / (2 * np.pi * bw)
        for k, name in enumerate(design.sensors):
            bw = plant.sensor(name).bandwidth_hz
            if bw:
                K[:, k] /= 1.0 + s / (2 * np.pi * bw)
    return K


@dataclass(frozen=True)
class ClosedLoopFrf:
    """Open- and closed-loop frequency responses from external inputs to outputs.

    Attributes
    ----------
    freq_hz : ndarray
        Frequencies (Hz).
    inputs, outputs : tuple of str
        External inputs (disturbances or actuators, as added forces) and outputs.
    open : ndarray, shape (n_out, n_in, n_freq)
        Plant response without the controller.
    closed : ndarray, shape (n_out, n_in, n_freq)
        Closed-loop response z/w.
    noise : ndarray, shape (n_out, n_sens, n_freq)
        Closed-loop response z/n to sensor noise.
    effort : ndarray, shape (n_act, n_in, n_freq)
        Actuator input u/w.
    effort_noise : ndarray, shape (n_act, n_sens, n_freq)
        Actuator input u/n.
    """

    freq_hz: np.ndarray
    inputs: tuple[str, ...]
    outputs: tuple[str, ...]
    open: np.ndarray
    closed: np.ndarray
    noise: np.ndarray
    effort: np.ndarray
    effort_noise: np.ndarray


def closed_loop_frf(
    plant,
    design,
    freq_hz: np.ndarray,
    inputs: Sequence[str],
    outputs: Sequence[str],
    *,
    delay_s: float,
    roll_off: bool = True,
) -> ClosedLoopFrf:
    """Closed-loop responses from the modal sum and the exact controller response.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    freq_hz : array_like
        Frequencies (Hz).
    inputs : sequence of str
        Disturbance names, or actuator names (a force added to that actuator's input).
    outputs : sequence of str
        Performance-output or sensor names.
    delay_s : float
        Loop delay (s), exact.
    roll_off : bool, optional
        Include the roll-offs stated in the plant file.

    Returns
    -------
    ClosedLoopFrf
    """
    freq = np.asarray(freq_hz, dtype=float).ravel()
    acts, sens = list(design.actuators), list(design.sensors)
    ins, outs = list(inputs), list(outputs)
    na, ns = len(acts), len(sens)
    G = plant.frf(freq, acts + ins, sens + outs)  # (ns + nz, na + nw, f)
    Gyu, Gyw = G[:ns, :na], G[:ns, na:]
    Gzu, Gzw = G[ns:, :na], G[ns:, na:]
    K = controller_frf(plant, design, freq, delay_s=delay_s, roll_off=roll_off)
    Kf = np.moveaxis(K, -1, 0)  # (f, na, ns)
    ret = np.eye(na)[None] + Kf @ np.moveaxis(Gyu, -1, 0)
    Sx = np.linalg.solve(ret, Kf)  # (f, na, ns): (I + K G)^{-1} K
    Huw = -Sx @ np.moveaxis(Gyw, -1, 0)
    Hzw = np.moveaxis(Gzw, -1, 0) + np.moveaxis(Gzu, -1, 0) @ Huw
    Hzn = -np.moveaxis(Gzu, -1, 0) @ Sx
    return ClosedLoopFrf(
        freq_hz=freq,
        inputs=tuple(ins),
        outputs=tuple(outs),
        open=Gzw,
        closed=np.moveaxis(Hzw, 0, -1),
        noise=np.moveaxis(Hzn, 0, -1),
        effort=np.moveaxis(Huw, 0, -1),
        effort_noise=np.moveaxis(-Sx, 0, -1),
    )


def closed_loop_statespace(
    plant, design, controller: Matrices, inputs: Sequence[str], outputs: Sequence[str]
) -> Matrices:
    """Closed loop with external inputs ``[w, n]`` and outputs ``[z, u]``.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        Supplies the actuator and sensor names.
    controller : tuple of ndarray
        Effective controller (A_c, B_c, C_c, D_c), ``u = −(C_c x_c + D_c (y + n))``.
    inputs : sequence of str
        Disturbance (or actuator) names w.
    outputs : sequence of str
        Performance-output names z.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D) over states ``[x, x_c]``; inputs w then sensor noise n (one per sensor);
        outputs z then u (one per actuator).
    """
    acts, sens = list(design.actuators), list(design.sensors)
    na, ns = len(acts), len(sens)
    A, B, C, D = plant.statespace_matrices(acts + list(inputs), sens + list(outputs))
    Bu, Bw = B[:, :na], B[:, na:]
    Cy, Cz = C[:ns], C[ns:]
    Dyu, Dyw, Dzu, Dzw = D[:ns, :na], D[:ns, na:], D[ns:, :na], D[ns:, na:]
    Ac, Bc, Cc, Dc = controller
    E = np.linalg.inv(np.eye(na) + Dc @ Dyu)
    Ux, Uc, Uw, Un = -E @ Dc @ Cy, -E @ Cc, -E @ Dc @ Dyw, -E @ Dc
    Yx, Yc, Yw, Yn = Cy + Dyu @ Ux, Dyu @ Uc, Dyw + Dyu @ Uw, np.eye(ns) + Dyu @ Un
    Acl = np.block([[A + Bu @ Ux, Bu @ Uc], [Bc @ Yx, Ac + Bc @ Yc]])
    Bcl = np.block([[Bw + Bu @ Uw, Bu @ Un], [Bc @ Yw, Bc @ Yn]])
    Ccl = np.block([[Cz + Dzu @ Ux, Dzu @ Uc], [Ux, Uc]])
    Dcl = np.block([[Dzw + Dzu @ Uw, Dzu @ Un], [Uw, Un]])
    return Acl, Bcl, Ccl, Dcl


def h2_variances(system: Matrices, intensities: np.ndarray) -> np.ndarray:
    """Output variances under independent white inputs of one-sided PSDs ``intensities``.

    Parameters
    ----------
    system : tuple of ndarray
        (A, B, C, D); A must be Hurwitz.
    intensities : array_like, shape (n_inputs,)
        One-sided PSD of each input (unit²/Hz); Q = W₀/2 in the Lyapunov equation.

    Returns
    -------
    ndarray, shape (n_outputs,)
        σ² of each output; inf where A is not Hurwitz or a white input feeds straight through.
    """
    A, B, C, D = system
    w = np.asarray(intensities, dtype=float)
    out = np.zeros(C.shape[0])
    if not np.any(w > 0):
        return out
    if A.size and np.max(np.linalg.eigvals(A).real) >= 0.0:
        return np.full(C.shape[0], np.inf)
    if A.size:
        # diagonal similarity balancing first (T⁻¹ A T, T⁻¹ B, C T): a loop with a delay
        # cascade and roll-offs can have entries from 1 to 1e10, where the unbalanced solve
        # loses every digit (residual > 1) and scipy only warns
        A, (scale, _perm) = matrix_balance(A, permute=False, separate=True)
        B = B / scale[:, None]
        C = C * scale[None, :]
        Q = (B * (w / 2.0)) @ B.T
        P = solve_continuous_lyapunov(A, -Q)
        P = 0.5 * (P + P.T)
        out = np.einsum("ij,jk,ik->i", C, P, C)
    direct = (D**2) @ w
    return np.where(direct > 1e-300 * (1 + np.abs(out)), np.inf, np.maximum(out, 0.0))


def integration_grid(plant, design, closed_poles: np.ndarray = ()) -> np.ndarray:
    """Grid (Hz) for RMS integrals: :func:`default_grid`, closed-loop poles and 0.5–100 Hz.

    Parameters
    ----------
    plant : ModalPlant
        The plant (its modes and tabulated disturbance frequencies are included).
    design : Design
        The design (its controller poles are resolved).
    closed_poles : array_like of complex, optional
        Closed-loop poles (rad/s) whose peaks must be resolved.

    Returns
    -------
    ndarray
        Sorted unique frequencies (Hz) > 0, including the one-third-octave edges 1–80 Hz.
    """
    parts = [default_grid(plant, design)]
    offsets = np.linspace(-8.0, 8.0, 81)
    # 0.05 ζ steps over each mode's half-power band ±2 ζ, where the loop's resonance circle
    # turns: the Nyquist curve drawn from this grid reads as a circle, not a polygon
    fine = np.linspace(-2.0, 2.0, 81)
    for f, z in zip(plant.freqs_hz, plant.dampings, strict=True):
        if z > 0:  # an undamped mode's own frequency stays out of the grid (infinite response)
            parts.append(f * np.exp(z * fine))
    for p in np.asarray(closed_poles, dtype=complex):
        if abs(p) > 0 and p.imag >= 0:
            zeta = min(max(-p.real / abs(p), 1e-4), 1.0)
            parts.append(abs(p) / (2 * np.pi) * np.exp(zeta * offsets))
    parts.append(np.geomspace(0.5, 100.0, 400))
    parts.append(band_edges_hz(third_octave_centres_hz()).ravel())
    for d in plant.disturbances:
        if np.ndim(d.psd):
            parts.append(np.asarray(d.psd)[:, 0])
    grid = np.unique(np.concatenate(parts))
    return grid[grid > 0]


@dataclass(frozen=True)
class OutputRms:
    """RMS of one performance output under the plant's disturbances and the sensor noise.

    Attributes
    ----------
    output : str
        Output name; ``unit`` its SI unit.
    unit : str
        SI unit of the output.
    open_rms, closed_rms : float
        Open- and closed-loop RMS (unit), disturbances plus (closed loop) sensor noise;
        Lyapunov for flat PSDs plus frequency integral for tabulated ones.
    noise_rms : float
        Closed-loop RMS due to sensor noise alone (unit).
    open_rms_integral, closed_rms_integral : float
        The same totals from the frequency integral on the grid (exact delay), as a check.
    method : str
        "lyapunov", "integral" or "lyapunov+integral": how ``closed_rms`` was obtained.
    cumulative_open, cumulative_closed : ndarray
        Cumulative RMS from 0 to each grid frequency (unit).
    psd_open, psd_closed : ndarray
        One-sided PSD on the grid (unit²/Hz).
    vc_open, vc_closed : VcRating or None
        Vibration criterion met, for velocity outputs.
    band_rms_open, band_rms_closed : ndarray or None
        One-third-octave rms velocity 1–80 Hz (m/s), for velocity outputs.
    """

    output: str
    unit: str
    open_rms: float
    closed_rms: float
    noise_rms: float
    open_rms_integral: float
    closed_rms_integral: float
    method: str
    cumulative_open: np.ndarray
    cumulative_closed: np.ndarray
    psd_open: np.ndarray
    psd_closed: np.ndarray
    vc_open: VcRating | None = None
    vc_closed: VcRating | None = None
    band_rms_open: np.ndarray | None = None
    band_rms_closed: np.ndarray | None = None


@dataclass(frozen=True)
class LoopEffort:
    """Actuator effort of one loop under the disturbances and the sensor noise.

    Attributes
    ----------
    actuator : str
        Actuator name.
    quantity : str
        "force" (N) for a force actuator, "extension" (m) for a strut.
    rms : float
        RMS actuator input (N or m).
    peak_asd : float
        Largest amplitude spectral density of the input (N/√Hz or m/√Hz).
    peak_asd_hz : float or None
        Where it occurs (Hz).
    peak_estimate : float
        PEAK_FACTOR × rms (3σ, common practice for Gaussian signals).
    limit : float or None
        ``max_force_n`` (force) or ``max_stroke_m`` (strut) of the actuator.
    within_limit : bool or None
        peak_estimate ≤ limit; None without a limit.
    strut_force_rms_n : float or None
        For a strut, k_s × extension RMS (N): the force it would exert against a rigid
        structure, compared with ``max_force_n``.
    force_limit_n : float or None
        ``max_force_n`` of a strut.
    force_within_limit : bool or None
        For a strut with ``max_force_n``: PEAK_FACTOR × strut_force_rms_n ≤ max_force_n.
    """

    actuator: str
    quantity: str
    rms: float
    peak_asd: float
    peak_asd_hz: float | None
    peak_estimate: float
    limit: float | None
    within_limit: bool | None
    strut_force_rms_n: float | None = None
    force_limit_n: float | None = None
    force_within_limit: bool | None = None


@dataclass(frozen=True)
class ResponseResult:
    """Random response of a closed loop: per output RMS, per loop effort, and the grid.

    Attributes
    ----------
    freq_hz : ndarray
        Integration grid (Hz).
    outputs : tuple of OutputRms
        One per performance output of the plant.
    effort : tuple of LoopEffort
        One per actuator of the design.
    disturbances : tuple of str
        Disturbances included.
    """

    freq_hz: np.ndarray
    outputs: tuple[OutputRms, ...]
    effort: tuple[LoopEffort, ...]
    disturbances: tuple[str, ...]


def _trapezoid_cumulative(freq: np.ndarray, values: np.ndarray) -> np.ndarray:
    steps = 0.5 * (values[..., 1:] + values[..., :-1]) * np.diff(freq)
    zero = np.zeros((*values.shape[:-1], 1))
    return np.concatenate([zero, np.cumsum(steps, axis=-1)], axis=-1)


def random_response(
    plant,
    design,
    controller: Matrices,
    *,
    delay_s: float,
    roll_off: bool = True,
    freq_hz: np.ndarray | None = None,
) -> ResponseResult:
    """RMS at each performance output (open and closed loop), noise part, and effort.

    Parameters
    ----------
    plant : ModalPlant
        The plant with its disturbances, outputs and sensor noise densities.
    design : Design
        The design.
    controller : tuple of ndarray
        Effective controller (delay as Padé, roll-offs) for the Lyapunov route.
    delay_s : float
        Loop delay (s), exact in the frequency integral.
    roll_off : bool, optional
        Include the roll-offs stated in the plant file.
    freq_hz : array_like, optional
        Integration grid (Hz); default :func:`integration_grid`.

    Returns
    -------
    ResponseResult
    """
    freq = integration_grid(plant, design) if freq_hz is None else np.asarray(freq_hz, float)
    dist = [d.name for d in plant.disturbances]
    outs = [o.name for o in plant.outputs]
    flat = np.array([0.0 if np.ndim(d.psd) else float(d.psd) for d in plant.disturbances])
    table = [d for d in plant.disturbances if np.ndim(d.psd)]
    noise = np.array([plant.sensor(s).noise_density ** 2 for s in design.sensors])
    nz, nw = len(outs), len(dist)
    frf = closed_loop_frf(plant, design, freq, dist, outs, delay_s=delay_s, roll_off=roll_off)
    w_psd = np.array([d.psd_at(freq) for d in plant.disturbances]).reshape(nw, freq.size)
    tab_psd = np.array([d.psd_at(freq) if np.ndim(d.psd) else 0 * freq for d in plant.disturbances])
    tab_psd = tab_psd.reshape(nw, freq.size)

    def spectra(H, psd):  # Σ_j |H_oj|² W_j(f)
        return np.einsum("ojf,jf->of", np.abs(H) ** 2, psd)

    psd_open = spectra(frf.open, w_psd)
    psd_closed_w = spectra(frf.closed, w_psd)
    psd_noise = spectra(frf.noise, np.broadcast_to(noise[:, None], (noise.size, freq.size)))
    psd_u = spectra(frf.effort, w_psd) + spectra(
        frf.effort_noise, np.broadcast_to(noise[:, None], (noise.size, freq.size))
    )
    tab_open = _trapezoid_cumulative(freq, spectra(frf.open, tab_psd))[:, -1]
    tab_closed = _trapezoid_cumulative(freq, spectra(frf.closed, tab_psd))[:, -1]
    tab_u = _trapezoid_cumulative(freq, spectra(frf.effort, tab_psd))[:, -1]

    system = closed_loop_statespace(plant, design, controller, dist, outs)
    var_dist = h2_variances(system, np.concatenate([flat, 0 * noise]))
    var_noise = h2_variances(system, np.concatenate([0 * flat, noise]))
    A, B, C, D = plant.statespace_matrices(dist, outs)
    var_open = h2_variances((A, B, C, D), flat)
    method = (
        "lyapunov+integral" if table and np.any(flat > 0) else ("integral" if table else "lyapunov")
    )
    cum_open = np.sqrt(_trapezoid_cumulative(freq, psd_open))
    cum_closed = np.sqrt(_trapezoid_cumulative(freq, psd_closed_w + psd_noise))
    centres = third_octave_centres_hz()
    edges = band_edges_hz(centres)
    results = []
    for o, name in enumerate(outs):
        output = plant.output(name)
        extra = {}
        if output.kind == "velocity":
            b_open = band_rms(freq, psd_open[o], edges)
            b_closed = band_rms(freq, psd_closed_w[o] + psd_noise[o], edges)
            extra = {
                "band_rms_open": b_open,
                "band_rms_closed": b_closed,
                "vc_open": vc_rating(b_open, centres),
                "vc_closed": vc_rating(b_closed, centres),
            }
        results.append(
            OutputRms(
                output=name,
                unit=output.unit,
                open_rms=float(np.sqrt(var_open[o] + tab_open[o])),
                closed_rms=float(np.sqrt(var_dist[o] + var_noise[o] + tab_closed[o])),
                noise_rms=float(np.sqrt(var_noise[o])),
                open_rms_integral=float(cum_open[o, -1]),
                closed_rms_integral=float(cum_closed[o, -1]),
                method=method,
                cumulative_open=cum_open[o],
                cumulative_closed=cum_closed[o],
                psd_open=psd_open[o],
                psd_closed=psd_closed_w[o] + psd_noise[o],
                **extra,
            )
        )
    efforts = []
    var_u = var_dist[nz:] + var_noise[nz:]
    for a, name in enumerate(design.actuators):
        act = plant.actuator(name)
        rms = float(np.sqrt(var_u[a] + tab_u[a]))
        asd = np.sqrt(psd_u[a])
        k = int(np.argmax(asd)) if asd.size else 0
        strut = act.kind == "strut"
        limit = act.max_stroke_m if strut else act.max_force_n
        peak = PEAK_FACTOR * rms
        efforts.append(
            LoopEffort(
                actuator=name,
                quantity="extension" if strut else "force",
                rms=rms,
                peak_asd=float(asd[k]) if asd.size else 0.0,
                peak_asd_hz=float(freq[k]) if asd.size and asd[k] > 0 else None,
                peak_estimate=peak,
                limit=limit,
                within_limit=None if limit is None else bool(peak <= limit),
                strut_force_rms_n=act.stiffness_n_per_m * rms if strut else None,
                force_limit_n=act.max_force_n if strut else None,
                force_within_limit=(
                    bool(PEAK_FACTOR * act.stiffness_n_per_m * rms <= act.max_force_n)
                    if strut and act.max_force_n is not None
                    else None
                ),
            )
        )
    return ResponseResult(
        freq_hz=freq, outputs=tuple(results), effort=tuple(efforts), disturbances=tuple(dist)
    )
