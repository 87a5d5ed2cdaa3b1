"""Actuator effort of a design under the plant's random disturbances (frequency integral)."""

from __future__ import annotations

import numpy as np

from dampctl.analysis.closedloop import plant_loop_delay_s
from dampctl.analysis.margins import default_grid
from dampctl.model.plant import ModalPlant

__all__ = ["actuator_effort"]


def actuator_effort(
    plant: ModalPlant, design, *, freq_hz: np.ndarray | None = None
) -> tuple[tuple[str, float, float | None], ...] | None:
    """RMS actuator command per loop under the plant's disturbances (frequency integral).

    Parameters
    ----------
    plant : ModalPlant
        The plant; its disturbances are independent random forces with one-sided PSDs (N²/Hz).
    design : Design
        The design (u = −K y).
    freq_hz : array_like, optional
        Integration grid (Hz); default :func:`dampctl.analysis.margins.default_grid`.

    Returns
    -------
    tuple of (str, float, float or None) or None
        (actuator, RMS command in N for a force actuator or m for a strut, max_force_n) per
        loop; None when the plant states no disturbance.

    Notes
    -----
    σ_a² = ∫₀^∞ Σ_d |T_ad(j2πf)|² S_d(f) df with T = −(I + K G_yu)⁻¹ K G_yd, the delay exact
    (e^{−jωT}) and first-order hardware roll-offs included, trapezoid rule on the grid.
    """
    if not plant.disturbances:
        return None
    freq = default_grid(plant, design) if freq_hz is None else np.asarray(freq_hz, float)
    dist = [d.name for d in plant.disturbances]
    G_u = plant.frf(freq, design.actuators, design.sensors)  # (n_s, n_a, f)
    G_d = plant.frf(freq, dist, design.sensors)  # (n_s, n_d, f)
    s = 2j * np.pi * freq
    for a, name in enumerate(design.actuators):
        bw = plant.actuator(name).bandwidth_hz
        if bw:
            G_u[:, a, :] /= 1.0 + s / (2 * np.pi * bw)
    for k, name in enumerate(design.sensors):
        bw = plant.sensor(name).bandwidth_hz
        if bw:
            G_u[k] /= 1.0 + s / (2 * np.pi * bw)
            G_d[k] /= 1.0 + s / (2 * np.pi * bw)
    K = design.response(freq) * np.exp(-s * plant_loop_delay_s(plant))[None, None, :]
    KG = np.einsum("asf,sbf->fab", K, G_u)
    KGd = np.einsum("asf,sdf->fad", K, G_d)
    T = -np.linalg.solve(np.eye(KG.shape[1])[None] + KG, KGd)  # (f, n_a, n_d)
    psd = np.array([d.psd_at(freq) for d in plant.disturbances])  # (n_d, f)
    density = np.einsum("fad,df->af", np.abs(T) ** 2, psd)
    variance = np.trapezoid(density, freq, axis=1)
    return tuple(
        (name, float(np.sqrt(v)), plant.actuator(name).max_force_n)
        for name, v in zip(design.actuators, variance, strict=True)
    )
