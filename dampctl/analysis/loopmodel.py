"""Closed-loop state models with delay and hardware roll-off, for pole computations.

Loop delays need poles here, so they enter as a cascade of m second-order Padé sections of
T/m each, with m chosen so that ω_ref·T/m ≤ 1 at the highest frequency where the loop gain
matters (phase error of one [2/2] section at ωT = 1 is 1.3e-3 rad; all-pass, so magnitudes are
exact). Plain numpy: no python-control model is built, so this is cheap inside searches.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import block_diag

from dampctl.analysis.closedloop import (
    MAX_DELAY_SECTIONS,
    closed_loop_matrix,
    delay_matrices,
    delay_sections,
    lag_elements,
    series_matrices,
)

__all__ = [
    "MAX_SECTIONS",
    "GainLocus",
    "delay_sections",
    "gain_locus",
    "loop_controller",
    "loop_poles",
    "max_real_part",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: largest number of [2/2] Padé sections per channel
MAX_SECTIONS = MAX_DELAY_SECTIONS


def loop_controller(
    plant,
    design,
    *,
    delay_s: float,
    omega_ref: float,
    roll_off: bool = True,
    gain_scale: float = 1.0,
    actuator_bandwidth_hz: float | None = None,
    sensor_bandwidth_hz: float | None = None,
) -> Matrices:
    """The design's controller with delay (Padé cascade) and first-order roll-offs folded in.

    Parameters
    ----------
    plant : ModalPlant
        Supplies the stated roll-offs.
    design : Design
        The design.
    delay_s : float
        Loop delay (s) on every channel.
    omega_ref : float
        Frequency (rad/s) up to which the delay's phase is accurate (:func:`delay_sections`).
    roll_off : bool, optional
        Include the roll-offs stated in the plant file.
    gain_scale : float, optional
        Factor on the whole controller (u = −k K y).
    actuator_bandwidth_hz, sensor_bandwidth_hz : float, optional
        Corner (Hz) replacing the stated one on every actuator / sensor channel.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D), ``u = −(C x_c + D y)``.
    """
    A, B, C, D = design.statespace_matrices()
    base = (A, B, gain_scale * C, gain_scale * D)
    act = [plant.actuator(a).bandwidth_hz for a in design.actuators] if roll_off else []
    sen = [plant.sensor(s).bandwidth_hz for s in design.sensors] if roll_off else []
    if actuator_bandwidth_hz is not None:
        act = [actuator_bandwidth_hz] * len(design.actuators)
    if sensor_bandwidth_hz is not None:
        sen = [sensor_bandwidth_hz] * len(design.sensors)
    ctrl = lag_elements(base, actuator_bandwidth_hz=act, sensor_bandwidth_hz=sen)
    if delay_sections(delay_s, omega_ref):
        chain = delay_matrices(delay_s, omega_ref)
        n_out = D.shape[0]
        blocks = [block_diag(*[chain[k]] * n_out) for k in range(4)]
        ctrl = series_matrices(ctrl, tuple(blocks))
    return ctrl


def loop_poles(plant, design, controller: Matrices) -> np.ndarray:
    """All closed-loop poles (rad/s) of the plant with an effective controller.

    Parameters
    ----------
    plant : ModalPlant
        The plant (every mode in the loop).
    design : Design
        Supplies the actuator and sensor names.
    controller : tuple of ndarray
        Effective controller (A_c, B_c, C_c, D_c), ``u = −(C_c x_c + D_c y)``.

    Returns
    -------
    ndarray of complex
        Eigenvalues of the closed-loop state matrix (1/s).
    """
    mats = plant.statespace_matrices(design.actuators, design.sensors)
    return np.linalg.eigvals(closed_loop_matrix(mats, controller))


def max_real_part(plant, design, controller: Matrices) -> float:
    """Largest real part (1/s) of the closed-loop poles.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        Supplies the actuator and sensor names.
    controller : tuple of ndarray
        Effective controller, as for :func:`loop_poles`.

    Returns
    -------
    float
    """
    return float(np.max(loop_poles(plant, design, controller).real))


# ---------------------------------------------------------------------- gain locus
@dataclass(frozen=True)
class GainLocus:
    """Closed-loop poles along a scaling of the whole controller.

    Attributes
    ----------
    gains : ndarray, shape (n_gains,)
        Scale factors (1 is the design).
    poles : ndarray of complex, shape (n_gains, n_poles)
        All closed-loop poles (rad/s) at each factor.
    """

    gains: np.ndarray
    poles: np.ndarray


def gain_locus(
    plant,
    design,
    *,
    delay_s: float,
    omega_ref: float,
    roll_off: bool = True,
    gains: np.ndarray | None = None,
) -> GainLocus:
    """Closed-loop poles for the whole controller scaled by k (root locus of a gain scaling).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    delay_s : float
        Loop delay (s).
    omega_ref : float
        Padé accuracy frequency (rad/s).
    roll_off : bool, optional
        Include stated roll-offs.
    gains : array_like, optional
        Scale factors; default 0 to 3 in steps of 0.1 (1 is the design).

    Returns
    -------
    GainLocus
    """
    gains = np.linspace(0.0, 3.0, 31) if gains is None else np.asarray(gains, dtype=float)
    mats = plant.statespace_matrices(design.actuators, design.sensors)
    stack = [
        closed_loop_matrix(
            mats,
            loop_controller(
                plant,
                design,
                delay_s=delay_s,
                omega_ref=omega_ref,
                roll_off=roll_off,
                gain_scale=float(k),
            ),
        )
        for k in gains
    ]
    return GainLocus(gains=gains, poles=np.linalg.eigvals(np.stack(stack)))
