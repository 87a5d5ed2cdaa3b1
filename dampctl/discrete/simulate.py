"""Time simulation of a move or a disturbance, open loop and with a design as it will run.

:func:`simulate_move` drives one actuator so that a displacement output moves by a distance:
the actuator's input is the move profile (:mod:`dampctl.discrete.profiles`) times the static
input that gives that displacement (the distance over the plant's static compliance from the
actuator to the output), optionally convolved with an input shaper (its impulses at their
exact times, inside a sample where they fall between samples). :func:`simulate_disturbance`
drives a disturbance with a seeded random record of its PSD, or with a given record.

Without a design the structure runs open loop. With a design it also runs closed, as it will
run on the target: the plant sampled exactly (zero-order hold at the sample rate, actuator and
sensor roll-offs included), the design's discrete controller as exported (the realisation of
its second-order sections, :func:`dampctl.discrete.export.realisations`), one sample of
computation delay plus the plant's ``loop_delay_s`` (exact, also when it is not a whole number
of samples), and the actuator inputs clipped at ``max_force_n`` (a strut's extension at
``max_stroke_m``); a disturbance run adds each sensor's ``noise_density`` as sampled white
noise. The planned command (move, shaper) reaches the actuator at its own times; only the
feedback goes through the loop delay. The open loop is always simulated beside it.

Memory and time are linear in the duration and in the number of modes
(:mod:`dampctl.discrete.modalzoh`, :mod:`dampctl.discrete.timeloop`).

Per output: peak, final value, overshoot (% of the move) and settling time into ±band about
the output's static value (the plant's, or the closed loop's when the controller changes the
static stiffness), and the residual RMS about it after the command ends; disturbance runs
give the RMS over the record and its statistical error. Per actuator: peak and RMS force, the
time spent saturated and the stroke (peak motion at a force actuator's site, or a strut's peak
extension).
"""

from __future__ import annotations

import math
from typing import Protocol

import numpy as np

from dampctl.design import Design
from dampctl.discrete import _simsetup as setup
from dampctl.discrete._simsetup import MAX_SAMPLES
from dampctl.discrete.profiles import Record, move_profile, random_record
from dampctl.discrete.simresult import Run, Simulation
from dampctl.errors import UsageError
from dampctl.model.plant import ModalPlant

__all__ = [
    "DEFAULT_SETTLE_FRACTION",
    "MAX_SAMPLES",
    "default_move_duration",
    "simulate_disturbance",
    "simulate_move",
]

#: default settling band: 1 % of the move
DEFAULT_SETTLE_FRACTION = 0.01


class _ShaperLike(Protocol):
    """What a simulation needs of an input shaper (:class:`dampctl.laws.shapers.Shaper`).

    Attributes
    ----------
    kind : str
        Shaper kind.
    times_s : ndarray
        Impulse times (s), from 0.
    amplitudes : ndarray
        Impulse amplitudes, summing to 1.
    """

    kind: str
    times_s: np.ndarray
    amplitudes: np.ndarray


def default_move_duration(plant: ModalPlant, command_end_s: float) -> float:
    """Record length of a move by default: the command's end plus six time constants.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    command_end_s : float
        When the command ends (s): the profile's move time plus a shaper's duration.

    Returns
    -------
    float
        ``command_end_s + 6 / min(ζ_i ω_i)`` (s): the slowest mode's ringing down to e⁻⁶
        (0.25 %) of where it started.
    """
    return float(command_end_s) + 6.0 / setup.slowest_decay(plant)


def _loops(design: Design | None) -> list[bool]:
    return [False, True] if design is not None else [False]


def _finish(closed: bool, outs, acts, record, run_in: int, T: float, notes: list) -> Run:
    """The run's result, with a note when it diverged."""
    diverged = None
    if record.diverged_at is not None:
        diverged = max(record.diverged_at - run_in, 0) * T
        loop = "the closed loop as it runs" if closed else "the open loop"
        notes.append(
            f"{loop} is unstable: its response grew without bound and the run was stopped at "
            f"{diverged:.6g} s (figures come from the part before)"
        )
    return Run("closed" if closed else "open", outs, acts, diverged)


def simulate_move(
    plant: ModalPlant,
    design: Design | None = None,
    *,
    drive: str,
    output: str,
    distance_m: float,
    profile: str = "step",
    max_velocity: float | None = None,
    max_acceleration: float | None = None,
    record: Record | None = None,
    shaper: _ShaperLike | None = None,
    duration_s: float | None = None,
    settle_band_m: float | None = None,
    rate_hz: float | None = None,
    saturation: bool = True,
    method: str = "tustin",
    engine: str = "auto",
) -> Simulation:
    """Move a displacement output by ``distance_m`` with one actuator; open and closed loop.

    Parameters
    ----------
    plant : ModalPlant
        The plant (no rigid-body modes).
    design : Design, optional
        Close the loop with this design, as it will run (see the module notes).
    drive : str
        The actuator that makes the move.
    output : str
        The displacement-like output or sensor (m) that must move by ``distance_m``.
    distance_m : float
        Size of the move (m), non-zero; its sign gives the direction.
    profile : {"step", "trapezoid", "scurve", "impulse", "record"}, optional
        Move profile (:mod:`dampctl.discrete.profiles`). Default ``"step"``.
    max_velocity, max_acceleration : float, optional
        Limits (m/s, m/s²) of a trapezoid or S-curve.
    record : Record, optional
        The fraction of the move against time, for ``profile="record"``.
    shaper : Shaper, optional
        Input shaper convolved with the command (impulses at their exact times).
    duration_s : float, optional
        Record length (s); default the end of the command plus six time constants 1/(ζω) of
        the slowest-decaying mode.
    settle_band_m : float, optional
        Settling band ± (m); default 1 % of the move.
    rate_hz : float, optional
        Sample rate (Hz); default the plant's ``sample_rate_hz`` (required with a design),
        else 20 samples per period of the highest mode.
    saturation : bool, optional
        Clip actuator inputs at their limits (default True).
    method : {"tustin", "zoh"}, optional
        Discretization of the controller, as ``dampctl export`` (default ``"tustin"``, each
        section prewarped at its own frequency).
    engine : {"auto", "numpy", "compiled"}, optional
        How the loops are stepped (:mod:`dampctl.discrete.timeloop`; ``"compiled"`` needs
        numba, ``"auto"`` uses it when installed). Same numbers either way.

    Returns
    -------
    Simulation

    Raises
    ------
    UsageError
        Unknown actuator or output, an output that is not a displacement, an actuator that
        does not move it statically, bad profile limits, band or duration.
    PlantError
        Rigid-body modes.
    DesignError
        The design does not belong to the plant.
    """
    setup.check_rigid(plant)
    setup.check_design(plant, design)
    gain = setup.move_gain(plant, drive, output, distance_m)
    shape = move_profile(profile, distance_m, max_velocity=max_velocity,
                         max_acceleration=max_acceleration, record=record)
    rate = setup.sample_rate(plant, design, rate_hz)
    T = 1.0 / rate
    times = np.array([0.0]) if shaper is None else np.asarray(shaper.times_s, dtype=float)
    amps = np.array([1.0]) if shaper is None else np.asarray(shaper.amplitudes, dtype=float)
    end = shape.move_time_s + float(times[-1]) + (T if profile == "impulse" else 0.0)
    if duration_s is None:
        duration_s = default_move_duration(plant, end)
    steps = setup.sample_count(duration_s, rate)
    band = abs(distance_m) * DEFAULT_SETTLE_FRACTION if settle_band_m is None else settle_band_m
    if not (math.isfinite(band) and band > 0):
        raise UsageError(f"settling band must be > 0 m, got {band!r}")
    channels = setup.make_channels(plant, design, drive=drive, extra_outputs=[output])
    force = distance_m / gain
    fraction = shape.samples(T, steps)
    command = setup.Command(channels.inputs.index(drive), force * fraction, times, amps)
    final = np.zeros(len(channels.inputs))
    final[command.input_index] = force * float(fraction[-1])
    controller = None if design is None else setup.discrete_controller(design, rate, method)
    time = np.arange(steps) * T
    runs, notes = [], []
    for closed in _loops(design):
        rec, limits = setup.run_case(
            plant, design, channels, rate, steps, [command], None, closed=closed,
            controller=controller, saturation=saturation, noise=None, engine=engine,
        )
        targets, used = setup.static_targets(
            plant, design if closed else None, controller, channels, final
        )
        if not used:
            notes.append("the controller has an integrator: outputs are measured about their "
                         "open-loop static values")
        moved = float(targets[channels.reported.index(output)])
        if closed and profile != "impulse" and abs(moved - distance_m) > 0.01 * abs(distance_m):
            notes.append(
                f"the loop changes the static stiffness: {output} settles at {moved:.4g} m, "
                f"{100 * moved / distance_m:.4g} % of the move (the input is scaled by the "
                "plant's own static compliance); settling is measured about that value"
            )
        outs = tuple(
            setup.output_result(
                name, setup.output_unit(plant, name),
                rec.outputs[:, channels.outputs.index(name)], targets[k], time,
                move=distance_m, band=band, end_s=end,
            )
            for k, name in enumerate(channels.reported)
        )
        acts = setup.actuator_results(plant, channels, rec, limits, slice(None))
        runs.append(_finish(closed, outs, acts, rec, 0, T, notes))
    if end >= time[-1]:
        notes.append(f"the command ends at {end:.6g} s, at or after the end of the record "
                     f"({time[-1]:.6g} s): no settling or residual figures")
    info = {
        "drive": drive,
        "output": output,
        "distance_m": float(distance_m),
        "static_compliance": gain,
        "static_input": force,
        "profile": shape.kind,
        "move_time_s": shape.move_time_s,
        "peak_velocity": shape.peak_velocity,
        "shaper": None if shaper is None else {
            "kind": shaper.kind, "duration_s": float(times[-1]), "impulses": int(times.size)},
        "command_end_s": end,
        "settle_band_m": band,
        "loop_delay_s": None if design is None else float(plant.requirements.loop_delay_s or 0),
        "controller_method": None if design is None else method,
        "saturation": bool(saturation),
    }
    return Simulation("move", time, rate, runs[-1], runs[0], info, tuple(notes))


def simulate_disturbance(
    plant: ModalPlant,
    design: Design | None = None,
    *,
    disturbance: str,
    record: Record | None = None,
    duration_s: float | None = None,
    seed: int = 0,
    rate_hz: float | None = None,
    saturation: bool = True,
    sensor_noise: bool = True,
    method: str = "tustin",
    engine: str = "auto",
) -> Simulation:
    """Response to one disturbance, open loop and closed loop as it will run.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design, optional
        Close the loop with this design (see the module notes).
    disturbance : str
        The plant's disturbance to apply.
    record : Record, optional
        A given record of the disturbance (its unit, e.g. N, against s); default a seeded
        random record of its PSD.
    duration_s : float, optional
        Record length (s) kept; default the given record's length, else 50 time constants
        1/(ζω) of the slowest-decaying mode (an RMS within about 10 % on its resonance).
    seed : int, optional
        Seed of the random record and of the sensor noise (default 0).
    rate_hz : float, optional
        Sample rate (Hz); default as :func:`simulate_move`.
    saturation : bool, optional
        Clip actuator inputs at their limits (default True).
    sensor_noise : bool, optional
        Closed loop: add each sensor's ``noise_density`` as sampled white noise (default
        True).
    method : {"tustin", "zoh"}, optional
        Discretization of the controller (default ``"tustin"``).
    engine : {"auto", "numpy", "compiled"}, optional
        How the loops are stepped, as in :func:`simulate_move`.

    Returns
    -------
    Simulation
        A random record is periodic: the run starts with a run-in (the end of the record
        played first: six slowest time constants, at most one record), so the part kept is
        stationary; its outputs carry ``rms_error``.

    Raises
    ------
    UsageError
        Unknown disturbance, bad duration or rate.
    DesignError
        The design does not belong to the plant.

    Notes
    -----
    A rigid-body mode (0 Hz) is simulated as the double integrator it is: a free body drifts
    under the disturbance, so its RMS grows with the record and carries no ``rms_error``.
    """
    setup.check_design(plant, design)
    if disturbance not in [d.name for d in plant.disturbances]:
        known = ", ".join(d.name for d in plant.disturbances) or "none"
        raise UsageError(f"unknown disturbance {disturbance!r} (known: {known})")
    rate = setup.sample_rate(plant, design, rate_hz)
    T = 1.0 / rate
    if duration_s is None:
        duration_s = (float(record.time_s[-1]) if record is not None
                      else 50.0 / setup.slowest_decay(plant))
    steps = setup.sample_count(duration_s, rate)
    time = np.arange(steps) * T
    if record is not None:
        values, run_in = record.at(time), 0
    else:
        values = random_record(plant.disturbance(disturbance).psd_at, rate, steps, seed)
        run_in = min(steps, math.ceil(6.0 / setup.slowest_decay(plant) * rate))
        values = np.concatenate([values[steps - run_in:], values])
    total = steps + run_in
    keep = slice(run_in, total)
    channels = setup.make_channels(plant, design, disturbance=disturbance)
    controller = None if design is None else setup.discrete_controller(design, rate, method)
    noise = None
    if design is not None and sensor_noise:
        densities = np.array([plant.sensor(s).noise_density for s in design.sensors])
        rng = np.random.default_rng([seed, 1])
        noise = rng.standard_normal((total, densities.size)) * densities * math.sqrt(rate / 2)
    runs, notes = [], []
    for closed in _loops(design):
        rec, limits = setup.run_case(
            plant, design, channels, rate, total, [], (channels.inputs.index(disturbance),
                                                       values),
            closed=closed, controller=controller, saturation=saturation,
            noise=noise if closed else None, engine=engine,
        )
        errors = (None if record is not None else setup.statistical_errors(
            plant, design if closed else None, disturbance, channels.reported, rate,
            duration_s))
        outs = tuple(
            setup.output_result(
                name, setup.output_unit(plant, name),
                rec.outputs[keep, channels.outputs.index(name)], 0.0, time, move=None,
                band=math.inf, end_s=0.0,
                rms_error=None if errors is None or not np.isfinite(errors[k])
                else float(errors[k]),
            )
            for k, name in enumerate(channels.reported)
        )
        acts = setup.actuator_results(plant, channels, rec, limits, keep)
        runs.append(_finish(closed, outs, acts, rec, run_in, T, notes))
    info = {
        "disturbance": disturbance,
        "source": "record" if record is not None else "psd",
        "seed": None if record is not None else int(seed),
        "run_in_s": run_in * T,
        "sensor_noise": bool(design is not None and sensor_noise),
        "loop_delay_s": None if design is None else float(plant.requirements.loop_delay_s or 0),
        "controller_method": None if design is None else method,
        "saturation": bool(saturation),
    }
    return Simulation("disturbance", time, rate, runs[-1], runs[0], info, tuple(notes))
