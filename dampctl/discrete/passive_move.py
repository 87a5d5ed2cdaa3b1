"""A move of a structure with passive parts (absorbers, dampers, shunts): no loop to sample.

A passive design runs continuously: the structure with its parts is the linear system of
:func:`dampctl.analysis.passive.passive_statespace` (plant states plus the parts' own). A
step of one actuator's input, convolved with an input shaper, is computed exactly at the sample
times: the state after a held unit step over τ is x(τ) = ∫₀^τ e^{Aσ} dσ B, evaluated with the
matrix exponential of the block [[A, B], [0, 0]] (C. F. Van Loan, "Computing integrals
involving the matrix exponential", IEEE Trans. Autom. Control 23(3), 1978; from memory) and
then propagated sample by sample with e^{AT}; each impulse of the shaper starts its own step at
its exact time (the part of a sample before the next sample instant is integrated exactly).

The drive's first-order roll-off (``bandwidth_hz``) is in series with its input, as in
:func:`dampctl.discrete.simulate.simulate_move`. The figures — peak, overshoot, settling time
into ±band about the static value, residual RMS after the command — are those of
:mod:`dampctl.discrete.simulate`, so a passive design's move
compares one for one with an active design's (whose loop runs sampled, as it will run). The
open loop (the structure without its parts) is given beside it. Only a step profile: the
shaper shapes it.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import expm

from dampctl.analysis.closedloop import series_matrices
from dampctl.analysis.passive import passive_model, passive_statespace
from dampctl.design import Design
from dampctl.discrete import _simsetup as setup
from dampctl.discrete.simresult import ActuatorResult, Run, Simulation
from dampctl.discrete.simulate import DEFAULT_SETTLE_FRACTION
from dampctl.errors import UsageError
from dampctl.model.plant import ModalPlant

__all__ = ["simulate_passive_move", "step_responses"]


def step_responses(
    system: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray],
    time_s: np.ndarray,
    starts_s: np.ndarray,
    amplitudes: np.ndarray,
) -> np.ndarray:
    """Σ_i a_i · (response to a unit step starting at t_i), exact at the sample times.

    Parameters
    ----------
    system : tuple of ndarray
        (A, B, C, D) with one input.
    time_s : ndarray
        Sample times (s), evenly spaced from 0.
    starts_s : ndarray
        Step start times t_i (s), >= 0.
    amplitudes : ndarray
        Step sizes a_i (input units).

    Returns
    -------
    ndarray, shape (n_times, n_outputs)
    """
    A, B, C, D = (np.asarray(m, dtype=float) for m in system)
    n = A.shape[0]
    T = float(time_s[1] - time_s[0]) if time_s.size > 1 else 1.0
    phi = expm(A * T)
    held = _held(A, B, T)
    out = np.zeros((time_s.size, C.shape[0]))
    for start, amp in zip(np.asarray(starts_s, float), np.asarray(amplitudes, float), strict=True):
        first = math.ceil(start / T - 1e-9)  # first sample at or after the start
        if first >= time_s.size:
            continue
        tau = first * T - start  # the step has acted for tau at that sample
        block = np.zeros((n + 1, n + 1))
        block[:n, :n], block[:n, n] = A, B[:, 0]
        x = expm(block * tau)[:n, n] * amp
        states = np.empty((time_s.size - first, n))
        for k in range(states.shape[0]):
            states[k] = x
            x = phi @ x + held * amp
        out[first:] += states @ C.T + D[:, 0] * amp
    return out


def _held(A: np.ndarray, B: np.ndarray, T: float) -> np.ndarray:
    """∫₀^T e^{Aσ} dσ B (the state a held unit input adds over one sample)."""
    n = A.shape[0]
    block = np.zeros((n + 1, n + 1))
    block[:n, :n], block[:n, n] = A, B[:, 0]
    return expm(block * T)[:n, n]


def simulate_passive_move(
    plant: ModalPlant,
    design: Design,
    *,
    drive: str,
    output: str,
    distance_m: float,
    shaper=None,
    duration_s: float | None = None,
    settle_band_m: float | None = None,
    rate_hz: float | None = None,
) -> Simulation:
    """Move a displacement output by ``distance_m`` with one actuator, the parts in place.

    Parameters
    ----------
    plant : ModalPlant
        The plant (no rigid-body modes).
    design : Design
        A passive design (``design.passive``) of the plant.
    drive : str
        The actuator that makes the move (its input is a step, shaped by ``shaper``).
    output : str
        The displacement output or sensor (m) that must move by ``distance_m``.
    distance_m : float
        Size of the move (m), non-zero.
    shaper : Shaper, optional
        Input shaper (``times_s``, ``amplitudes``, ``kind``) convolved with the step.
    duration_s : float, optional
        Record length (s); default as :func:`dampctl.discrete.simulate.simulate_move`.
    settle_band_m : float, optional
        Settling band ± (m); default 1 % of the move.
    rate_hz : float, optional
        Sample times of the record (Hz); default the plant's ``sample_rate_hz``, else 20
        samples per period of the highest mode.

    Returns
    -------
    Simulation
        ``result`` with the parts (loop ``"closed"``: the structure as built with them),
        ``open_loop`` without; figures of the moved output, the plant's outputs and the drive
        (its force and stroke; no saturation: a passive design has no loop to clip).
    """
    if not design.passive:
        raise UsageError("simulate_passive_move takes a passive design (tmd, viscous, shunt)")
    setup.check_rigid(plant)
    design.check_plant(plant)
    gain = setup.move_gain(plant, drive, output, distance_m)
    rate = setup.sample_rate(plant, None, rate_hz)
    T = 1.0 / rate
    times = np.array([0.0]) if shaper is None else np.asarray(shaper.times_s, dtype=float)
    amps = np.array([1.0]) if shaper is None else np.asarray(shaper.amplitudes, dtype=float)
    end = float(times[-1])
    if duration_s is None:
        duration_s = end + 6.0 / setup.slowest_decay(plant)
    steps = setup.sample_count(duration_s, rate)
    band = abs(distance_m) * DEFAULT_SETTLE_FRACTION if settle_band_m is None else settle_band_m
    if not (math.isfinite(band) and band > 0):
        raise UsageError(f"settling band must be > 0 m, got {band!r}")
    force = distance_m / gain
    reported = [output] + [o.name for o in plant.outputs if o.name != output]
    time = np.arange(steps) * T
    model = passive_model(plant, design.parts)
    corner = plant.actuator(drive).bandwidth_hz
    lag = None
    if corner:
        w = 2.0 * math.pi * corner
        lag = (np.array([[-w]]), np.array([[w]]), np.ones((1, 1)), np.zeros((1, 1)))
    unit_input = (np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.ones((1, 1)))
    applied = step_responses(lag or unit_input, time, times, amps * force)[:, 0]
    act = plant.actuator(drive)
    if act.kind == "strut":
        a, b = act.between
        row = np.asarray(plant.sites[b]) - np.asarray(plant.sites[a])
    else:
        row = np.asarray(plant.sites[act.site])
    runs = []
    for closed in (False, True):
        system = (
            passive_statespace(plant, model, [drive], reported)
            if closed
            else plant.statespace_matrices([drive], reported)
        )
        A, B, C, D = system
        motion = np.zeros((1, A.shape[0]))  # the drive's site motion (or strut elongation)
        motion[0, 0 : 2 * plant.n_modes : 2] = row / plant.omegas
        system = (A, B, np.vstack([C, motion]), np.vstack([D, np.zeros((1, 1))]))
        if lag is not None:  # the drive's own first-order roll-off, as in simulate_move
            system = series_matrices(lag, system)
        everything = step_responses(system, time, times, amps * force)
        values, moved = everything[:, :-1], everything[:, -1]
        A, B, C, D = system
        static = (D - C @ np.linalg.solve(A, B))[:-1, 0] * force
        outs = tuple(
            setup.output_result(
                name, setup.output_unit(plant, name), values[:, k], static[k], time,
                move=distance_m, band=band, end_s=end,
            )
            for k, name in enumerate(reported)
        )
        if act.kind == "strut":
            pushed = act.stiffness_n_per_m * (moved - applied)
            travel = float(np.max(np.abs(applied)))
        else:
            pushed, travel = applied, float(np.max(np.abs(moved)))
        drive_result = ActuatorResult(
            name=drive, force=pushed, peak_force_n=float(np.max(np.abs(pushed))),
            rms_force_n=float(np.sqrt(np.mean(pushed**2))), saturated_s=0.0, stroke_m=travel,
            limit=None,
        )
        runs.append(Run("closed" if closed else "open", outs, (drive_result,)))
    info = {
        "drive": drive,
        "output": output,
        "distance_m": float(distance_m),
        "static_compliance": gain,
        "static_input": force,
        "profile": "step",
        "shaper": None if shaper is None else {
            "kind": shaper.kind, "duration_s": end, "impulses": int(times.size)},
        "command_end_s": end,
        "settle_band_m": band,
        "passive": design.law,
    }
    notes = ("passive design: the structure with its parts runs continuously (no sampling, no "
             "delay); the figures are read at the sample times",)
    return Simulation("move", time, rate, runs[1], runs[0], info, notes)
