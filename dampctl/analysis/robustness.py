"""Robustness of a closed loop: frequency drift, extra delay, hardware bandwidth, spillover.

Everything here works on closed-loop poles (plain numpy eigenvalues, batched where many cases
are needed; no python-control model is built), with the delay as the Padé cascade of
:mod:`dampctl.analysis.loopmodel`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.analysis.closedloop import closed_loop_matrix, match_modes, open_loop_poles
from dampctl.analysis.loopmodel import delay_sections, loop_controller, max_real_part

__all__ = [
    "BandwidthLimit",
    "DelayLimit",
    "DriftResult",
    "SpilloverMode",
    "drift_cases",
    "drift_robustness",
    "drifted_plant_matrices",
    "extra_delay_to_instability",
    "roll_off_limit",
    "spillover",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: modes up to this count get all 2^n drift corners
ALL_CORNERS_UP_TO = 8


# ---------------------------------------------------------------------- frequency drift
def drifted_plant_matrices(plant, inputs, outputs, factors: np.ndarray) -> Matrices:
    """Plant matrices with every natural frequency scaled, ω_i → f_i ω_i.

    Mode shapes, damping ratios and the static residual term are kept; states stay
    ``[ω_i q_i, q_i']`` with the new ω_i.

    Parameters
    ----------
    plant : ModalPlant
        The nominal plant.
    inputs, outputs : sequence of str
        Input and output names, as for ``plant.statespace_matrices``.
    factors : array_like, shape (n_modes,)
        Frequency factor of each mode (> 0).

    Returns
    -------
    tuple of ndarray
        (A, B, C, D).
    """
    A0, B, C0, D = plant.statespace_matrices(inputs, outputs)
    w = plant.omegas * np.asarray(factors, dtype=float)
    z = plant.dampings
    n = plant.n_modes
    idx = np.arange(n)
    A = np.zeros_like(A0)
    A[2 * idx, 2 * idx + 1] = w
    A[2 * idx + 1, 2 * idx] = -w
    A[2 * idx + 1, 2 * idx + 1] = -2.0 * z * w
    C = np.array(C0, copy=True)
    for o, name in enumerate(outputs):
        row, order = plant.output_row(name)
        if order == 0:
            C[o, 2 * idx] = row / w
        elif order == 2:
            C[o, 2 * idx] = -w * row
            C[o, 2 * idx + 1] = -2.0 * z * w * row
    return A, B, C, D


def drift_cases(
    n_modes: int, drift: float, *, samples: int, seed: int, step_modes: int | None = None
) -> np.ndarray:
    """Frequency factors 1 + δ_i of the drift cases: corners, then seeded random samples.

    With n ≤ ALL_CORNERS_UP_TO modes every one of the 2^n corners δ_i = ±drift is used.
    Beyond that a subset of corners: all up, all down, the two alternating patterns, and for
    every k < ``step_modes`` the two "step" corners (modes 1..k up and the rest down, and the
    reverse), which include every pair of neighbouring modes (up to ``step_modes``) moving
    towards and away from each other. Then ``samples`` points drawn uniformly in the box
    [−drift, drift]^n.

    Parameters
    ----------
    n_modes : int
        Number of modes.
    drift : float
        Largest relative shift (0.05 = ±5 %).
    samples : int
        Number of random samples.
    seed : int
        Seed of the random generator.
    step_modes : int, optional
        Step corners are made up to this mode number (default: every mode).

    Returns
    -------
    ndarray, shape (n_cases, n_modes)
    """
    if n_modes <= ALL_CORNERS_UP_TO:
        signs = ((np.arange(2**n_modes)[:, None] >> np.arange(n_modes)) & 1) * 2 - 1
    else:
        alt = np.where(np.arange(n_modes) % 2 == 0, 1, -1)
        last = n_modes - 1 if step_modes is None else min(max(step_modes, 1), n_modes - 1)
        steps = [np.where(np.arange(n_modes) <= k, 1, -1) for k in range(last)]
        base = np.array([np.ones(n_modes), alt, *steps])
        signs = np.concatenate([base, -base])
    rng = np.random.default_rng(seed)
    random = rng.uniform(-1.0, 1.0, size=(max(int(samples), 0), n_modes))
    return 1.0 + drift * np.concatenate([signs.astype(float), random])


@dataclass(frozen=True)
class DriftResult:
    """Closed loop under independent frequency drift of every mode.

    Attributes
    ----------
    drift : float
        Largest relative shift.
    n_cases, n_corners : int
        Cases evaluated, of which corners.
    all_corners : bool
        True when every 2^n corner was evaluated.
    unstable_cases : int
        Cases with a closed-loop pole in the right half plane.
    max_real_part : float
        Largest real part (1/s) over every case.
    worst_damping : dict of int to float
        Smallest closed-loop damping of each target mode (1-based) over the cases.
    worst_case : ndarray
        Frequency factors of the case giving the smallest damping on a target mode.
    """

    drift: float
    n_cases: int
    n_corners: int
    all_corners: bool
    unstable_cases: int
    max_real_part: float
    worst_damping: dict
    worst_case: np.ndarray


def drift_robustness(
    plant,
    design,
    controller: Matrices,
    target_modes: Sequence[int],
    *,
    drift: float,
    samples: int = 64,
    seed: int = 0,
) -> DriftResult:
    """Worst damping of the target modes, and stability, over frequency-drift cases.

    The cases are those of :func:`drift_cases`, with step corners up to one mode above the
    highest target mode (the band where the loop acts), all closed-loop eigenvalue problems
    solved in one batched call.

    Parameters
    ----------
    plant : ModalPlant
        The nominal plant.
    design : Design
        The design (its controller is not changed: it was tuned on the nominal plant).
    controller : tuple of ndarray
        Effective controller (:func:`loop_controller`).
    target_modes : sequence of int
        Modes (1-based) whose damping is tracked.
    drift : float
        Largest relative shift of each natural frequency.
    samples : int, optional
        Random samples besides the corners.
    seed : int, optional
        Seed of the random samples.

    Returns
    -------
    DriftResult
    """
    cases = drift_cases(
        plant.n_modes, drift, samples=samples, seed=seed, step_modes=max(target_modes) + 1
    )
    n_corners = cases.shape[0] - max(int(samples), 0)
    mats = [
        closed_loop_matrix(
            drifted_plant_matrices(plant, design.actuators, design.sensors, f), controller
        )
        for f in cases
    ]
    poles = np.linalg.eigvals(np.stack(mats))
    targets = [m - 1 for m in target_modes]
    worst = {m: np.inf for m in target_modes}
    worst_case, worst_value = cases[0], np.inf
    for f, p in zip(cases, poles, strict=True):
        matched = match_modes(open_loop_poles(plant.omegas * f, plant.dampings), p)
        for m, k in zip(target_modes, targets, strict=True):
            value = float(matched.damping[k])
            worst[m] = min(worst[m], value)
            if value < worst_value:
                worst_value, worst_case = value, f
    largest = np.max(poles.real, axis=1)
    return DriftResult(
        drift=float(drift),
        n_cases=int(cases.shape[0]),
        n_corners=int(n_corners),
        all_corners=plant.n_modes <= ALL_CORNERS_UP_TO,
        unstable_cases=int(np.sum(largest >= 0.0)),
        max_real_part=float(np.max(largest)),
        worst_damping=worst,
        worst_case=np.array(worst_case),
    )


# ---------------------------------------------------------------------- extra delay
@dataclass(frozen=True)
class DelayLimit:
    """Extra common delay (on every channel) that brings the loop to instability.

    Attributes
    ----------
    delay_margin_s : float
        Extra common delay (s) to instability from the frequency domain, exact
        (:func:`dampctl.analysis.margins.common_delay_margin`; the loop delay margin for one loop).
    extra_delay_s : float
        The same boundary as found on the poles (Padé cascade): equal to ``delay_margin_s``
        when confirmed, else found by bisection on the poles.
    confirmed : bool
        True when the poles are stable just below and unstable just above ``delay_margin_s``
        (±2 %), i.e. the frequency-domain and pole answers agree.
    pade_sections : int
        [2/2] Padé sections used for the total delay at the boundary.
    """

    delay_margin_s: float
    extra_delay_s: float
    confirmed: bool
    pade_sections: int


def extra_delay_to_instability(
    plant,
    design,
    *,
    delay_s: float,
    delay_margin_s: float,
    omega_ref: float,
    roll_off: bool = True,
    tol: float = 0.02,
) -> DelayLimit:
    """Confirm the delay margin on the poles, or find the common-delay boundary by bisection.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    delay_s : float
        Nominal loop delay (s).
    delay_margin_s : float
        Extra common delay (s) to instability from the frequency domain.
    omega_ref : float
        Highest crossover (rad/s), for the Padé accuracy.
    roll_off : bool, optional
        Include stated roll-offs.
    tol : float, optional
        Relative bracket (0.02 = ±2 %) of the confirmation.

    Returns
    -------
    DelayLimit
    """

    def unstable(extra: float) -> bool:
        ctrl = loop_controller(
            plant, design, delay_s=delay_s + extra, omega_ref=omega_ref, roll_off=roll_off
        )
        return max_real_part(plant, design, ctrl) >= 0.0

    sections = delay_sections(delay_s + max(delay_margin_s, 0.0), omega_ref)
    if not np.isfinite(delay_margin_s):
        return DelayLimit(delay_margin_s, np.inf, not unstable(0.0), sections)
    if unstable(0.0):
        return DelayLimit(delay_margin_s, 0.0, delay_margin_s <= 0.0, sections)
    lo_ok = not unstable(delay_margin_s * (1 - tol))
    hi_bad = unstable(delay_margin_s * (1 + tol))
    if lo_ok and hi_bad:
        return DelayLimit(delay_margin_s, delay_margin_s, True, sections)
    lo, hi = (0.0, delay_margin_s * (1 - tol)) if not lo_ok else (delay_margin_s, None)
    if hi is None:  # stable beyond the margin: search upwards
        hi = delay_margin_s * 2
        while not unstable(hi) and hi < 100 * delay_margin_s:
            lo, hi = hi, hi * 2
        if not unstable(hi):
            return DelayLimit(delay_margin_s, np.inf, False, sections)
    for _ in range(30):
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if unstable(mid) else (mid, hi)
        if hi - lo < 1e-3 * hi:
            break
    return DelayLimit(delay_margin_s, 0.5 * (lo + hi), False, sections)


# ---------------------------------------------------------------------- hardware bandwidth
@dataclass(frozen=True)
class BandwidthLimit:
    """Lowest first-order roll-off corner (on every channel) that keeps the loop stable.

    Attributes
    ----------
    which : str
        "actuator" or "sensor".
    min_stable_hz : float or None
        Boundary corner (Hz): stable above it, unstable just below; None when the loop stayed
        stable down to ``searched_down_to_hz``, inf when it is unstable even with ideal hardware.
    searched_down_to_hz : float
        Lowest corner tried (Hz).
    stated_hz : tuple of float or None
        The corners the plant file states.
    """

    which: str
    min_stable_hz: float | None
    searched_down_to_hz: float
    stated_hz: tuple


def roll_off_limit(
    plant, design, which: str, *, delay_s: float, omega_ref: float, roll_off: bool = True
) -> BandwidthLimit:
    """Bisect the first-order corner of every actuator (or sensor) channel down to instability.

    A log scan (13 points) from 100× the highest mode down to 1/100 of the lowest finds the
    first unstable corner; the boundary is then bisected (to 1 %) between it and the last
    stable one. The other channel kind keeps its stated roll-off.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    which : {"actuator", "sensor"}
        Which roll-off to vary.
    delay_s : float
        Loop delay (s).
    omega_ref : float
        Padé accuracy frequency (rad/s).
    roll_off : bool, optional
        Whether the other kind keeps its stated roll-off.

    Returns
    -------
    BandwidthLimit
    """
    if which not in ("actuator", "sensor"):
        raise ValueError(f"which must be 'actuator' or 'sensor', got {which!r}")
    items = (
        [plant.actuator(a) for a in design.actuators]
        if which == "actuator"
        else [plant.sensor(s) for s in design.sensors]
    )
    stated = tuple(i.bandwidth_hz for i in items)

    def unstable(corner: float | None) -> bool:
        key = "actuator_bandwidth_hz" if which == "actuator" else "sensor_bandwidth_hz"
        ctrl = loop_controller(
            plant,
            design,
            delay_s=delay_s,
            omega_ref=omega_ref,
            roll_off=roll_off,
            **{key: corner},
        )
        return max_real_part(plant, design, ctrl) >= 0.0

    f_hi, f_lo = 100.0 * max(plant.freqs_hz), min(plant.freqs_hz) / 100.0
    if unstable(f_hi):
        return BandwidthLimit(which, np.inf, f_lo, stated)
    scan = np.geomspace(f_hi, f_lo, 13)
    previous = scan[0]
    for corner in scan[1:]:
        if unstable(corner):
            lo, hi = corner, previous
            while hi / lo > 1.01:
                mid = np.sqrt(lo * hi)
                lo, hi = (mid, hi) if unstable(mid) else (lo, mid)
            return BandwidthLimit(which, float(hi), f_lo, stated)
        previous = corner
    return BandwidthLimit(which, None, float(f_lo), stated)


# ---------------------------------------------------------------------- spillover
@dataclass(frozen=True)
class SpilloverMode:
    """A mode above the design band and what the loop does to it.

    Attributes
    ----------
    mode : int
        1-based mode number.
    freq_hz : float
        Open-loop natural frequency (Hz).
    open_damping, closed_damping : float
        Damping ratio without and with the loop.
    lost_damping : bool
        Closed-loop damping below the open-loop value (by more than 0.1 % of it).
    unstable : bool
        Closed-loop damping negative.
    """

    mode: int
    freq_hz: float
    open_damping: float
    closed_damping: float
    lost_damping: bool
    unstable: bool


def spillover(plant, matched, target_modes: Sequence[int]) -> tuple[SpilloverMode, ...]:
    """Modes above the highest target mode (the design band) and their closed-loop damping.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    matched : MatchedModes
        Closed-loop poles matched to the plant's modes.
    target_modes : sequence of int
        Target modes (1-based); empty means every mode is in band (no spillover modes).

    Returns
    -------
    tuple of SpilloverMode
    """
    if not target_modes:
        return ()
    top = max(plant.freqs_hz[m - 1] for m in target_modes)
    out = []
    for k in range(plant.n_modes):
        if plant.freqs_hz[k] <= top or (k + 1) in target_modes:
            continue
        zo, zc = float(plant.dampings[k]), float(matched.damping[k])
        out.append(
            SpilloverMode(
                mode=k + 1,
                freq_hz=float(plant.freqs_hz[k]),
                open_damping=zo,
                closed_damping=zc,
                lost_damping=bool(zc < zo - 1e-3 * zo - 1e-12),
                unstable=bool(zc < 0.0),
            )
        )
    return tuple(out)
